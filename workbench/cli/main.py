"""Entry point of the ``workbench`` command line.

Each sub-command lives in its own module exposing ``register(subparsers)``; the
module adds its parser and sets ``func=run`` where ``run(args) -> int``.
User errors (``ValueError``, ``OSError`` on input files) end with exit status 2
and one line on stderr, never a traceback.
"""
from __future__ import annotations

import argparse
import importlib
import json
import math
import re
import sys

from workbench import __version__

#: Sub-command modules, in the order ``--help`` lists them.
SUBCOMMAND_MODULES = (
    "workbench.cli.capture",
    "workbench.cli.folder",
    "workbench.cli.materials",
    "workbench.cli.shape",
    "workbench.cli.sweep",
    "workbench.cli.compare",
    "workbench.cli.crossover",
    "workbench.cli.fit",
    "workbench.cli.thermal",
)

#: API keyword -> command-line option, for messages of the library shown by a command
_CLI_WORDS = {
    "time_column": "--time-column", "columns": "--column CHANNEL=COLUMN", "channels": "--column CHANNEL=COLUMN",
    "delimiter": "--delimiter", "decimal": "--decimal", "time_unit": "--time-unit", "units": "--unit CHANNEL=UNIT",
    "sense_turns": "--sense-turns", "path_length": "--path-length", "winding_resistance": "--winding-resistance",
}
_API_WORD_RE = re.compile(r"\b(?:pass |give it with |argument |the keyword )?(" + "|".join(_CLI_WORDS) + r")=(?:'[^']*'|\S*)?")


def cli_wording(message: str) -> str:
    """A library message in command-line words: ``pass time_column=`` -> ``use --time-column``."""
    return _API_WORD_RE.sub(lambda m: "use " + _CLI_WORDS[m.group(1)], message)


EXIT_OK = 0
EXIT_BAD_INPUT = 2


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="workbench",
        description=(
            "Core-loss workbench: loss of magnetic cores under converter flux. "
            "Results are estimates; verify temperature rise by test."
        ),
    )
    parser.add_argument("--version", action="version", version=f"%(prog)s {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in SUBCOMMAND_MODULES:
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:  # a sub-command not built yet
            if exc.name == name:
                continue
            raise
        module.register(sub)
    return parser


def _non_finite(value, where: str = ""):
    """Path of the first NaN or infinity in a JSON payload, or None."""
    if isinstance(value, float):
        return None if math.isfinite(value) else (where or "value", value)
    if isinstance(value, dict):
        items = value.items()
    elif isinstance(value, (list, tuple)):
        items = enumerate(value)
    else:
        return None
    for key, item in items:
        found = _non_finite(item, f"{where}.{key}" if where else str(key))
        if found:
            return found
    return None


def emit_json(payload) -> None:
    """Print one JSON document (SI units) on stdout; a NaN or infinity is refused, naming its field."""
    found = _non_finite(payload)
    if found:
        raise ValueError(f"the result field {found[0]} is not finite ({found[1]}): an input is out of range")
    sys.stdout.write(json.dumps(payload, indent=2, sort_keys=True, allow_nan=False) + "\n")


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        return int(args.func(args) or 0)
    except BrokenPipeError:
        # the reader went away (e.g. `| head`): not an error of ours; silence the
        # flush at interpreter exit too
        import os

        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return EXIT_OK
    except (ValueError, OSError) as exc:
        message = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        if isinstance(exc, OSError) and getattr(exc, "filename", None) and str(exc.filename) not in message:
            message = f"{exc.filename}: {message}"
        sys.stderr.write(f"workbench {args.command}: error: {cli_wording(message)}\n")
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        sys.stderr.write("interrupted\n")
        return 130
