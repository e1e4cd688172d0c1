"""Command-line options of the capture readers, shared by ``capture`` and ``folder``.

``add_reader_arguments(parser)`` adds one group "reading the file";
``reader_options_from_args(args)`` turns the parsed values into the keyword arguments of
:func:`workbench.capture.read_capture`. Every guess of the reader (delimiter, decimal mark,
what a column holds, the time unit) can be overridden here; a malformed option is a
``ValueError`` naming the flag and the value (exit status 2 at the command line).
"""
from __future__ import annotations

import argparse

__all__ = ["add_reader_arguments", "parse_channel_map", "reader_options_from_args"]

_DELIMITERS = {"comma": ",", "semicolon": ";", "tab": "\t", "space": " "}
_DECIMALS = {"point": ".", "comma": ","}


def add_reader_arguments(parser: argparse.ArgumentParser) -> None:
    """Add the "reading the file" options to `parser`.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        Parser (or sub-command parser) to extend.
    """
    r = parser.add_argument_group("reading the file (every guess of the reader can be set here)")
    r.add_argument("--delimiter", choices=tuple(_DELIMITERS),
                   help="column delimiter (default: detected)")
    r.add_argument("--decimal", choices=tuple(_DECIMALS),
                   help="decimal mark of the numbers: point (1.5) or comma (1,5) (default: detected)")
    r.add_argument("--time-column", help="time column: header name or 0-based index")
    r.add_argument("--time-unit", help="unit of the time column, e.g. us (default: from the header, else s)")
    r.add_argument("--channel", action="append", metavar="NAME=MEANING",
                   help="what column NAME (header name or 0-based index) holds: voltage, sense voltage, "
                        "current, flux density, flux, time or ignore; repeatable")
    r.add_argument("--column", action="append", metavar="CHANNEL=COLUMN",
                   help="read only the channels given, channel b, flux, v, v_sense or i from a header "
                        "name or 0-based index; repeatable")
    r.add_argument("--unit", action="append", metavar="CHANNEL=UNIT",
                   help="unit of a channel, e.g. v_sense=mV; repeatable")


def _pairs(values, flag: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for text in values or ():
        key, sep, value = str(text).partition("=")
        if not sep or not key.strip() or not value.strip():
            example = f"{flag} CH2=current" if flag.startswith("--") else "CH2=current"
            raise ValueError(f"{flag} {text!r}: expected NAME=VALUE, e.g. {example}")
        key = key.strip()
        if key in out:
            raise ValueError(f"{flag}: {key!r} given twice")
        out[key] = value.strip()
    return out


def _index_or_name(text: str):
    return int(text) if text.isdigit() else text


def parse_channel_map(items, name: str = "--channel") -> dict:
    """What each column holds, from ``NAME=MEANING`` texts (the ``--channel`` values).

    Parameters
    ----------
    items : iterable of str
        One ``NAME=MEANING`` pair each: NAME a header name or a 0-based column index,
        MEANING a reader meaning (``voltage``, ``sense voltage``, ``current``,
        ``flux density``, ``flux``, ``time``, ``ignore``); the reader checks the meanings.
    name : str
        What the pairs were given as, for messages (``"--channel"``, a panel's box name).

    Returns
    -------
    dict
        Column (int for an index, else the name) -> meaning, the ``channels`` argument
        of :func:`workbench.capture.read_capture`.

    Raises
    ------
    ValueError
        For a pair without ``=``, an empty side, or a column given twice (naming ``name``
        and the text).
    """
    return {_index_or_name(k): v for k, v in _pairs(items, name).items()}


def reader_options_from_args(args: argparse.Namespace) -> dict:
    """Keyword arguments of :func:`workbench.capture.read_capture` from parsed options.

    Parameters
    ----------
    args : argparse.Namespace
        Result of a parser extended with :func:`add_reader_arguments`.

    Returns
    -------
    dict
        Only the options the user gave: ``delimiter``, ``decimal``, ``time_column``,
        ``time_unit``, ``channels`` (column -> meaning), ``columns`` (channel -> column),
        ``units`` (channel -> unit).

    Raises
    ------
    ValueError
        For a malformed ``NAME=VALUE`` pair, naming the flag and the text.
    """
    out: dict = {}
    if getattr(args, "delimiter", None):
        out["delimiter"] = _DELIMITERS[args.delimiter]
    if getattr(args, "decimal", None):
        out["decimal"] = _DECIMALS[args.decimal]
    if getattr(args, "time_column", None) is not None:
        out["time_column"] = _index_or_name(args.time_column.strip())
    if getattr(args, "time_unit", None):
        out["time_unit"] = args.time_unit
    channels = parse_channel_map(getattr(args, "channel", None) or ())
    if channels:
        out["channels"] = channels
    columns = _pairs(getattr(args, "column", None), "--column")
    if columns:
        out["columns"] = {k: _index_or_name(v) for k, v in columns.items()}
    units = _pairs(getattr(args, "unit", None), "--unit")
    if units:
        out["units"] = units
    return out
