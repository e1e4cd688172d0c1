"""Plain JSON values from results: the one JSON cleaner of the package (a leaf module).

Every path that writes JSON (``to_dict`` of results, folder-run logs, the command line,
exported records) goes through :func:`to_jsonable`, so NaN and infinities never reach a
JSON file as the non-standard tokens ``NaN``/``Infinity``.
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from pathlib import PurePath

import numpy as np

__all__ = ["to_jsonable"]


def to_jsonable(value):
    """Convert numpy types, tuples, dataclasses and non-finite floats to plain JSON values.

    Parameters
    ----------
    value : object
        A mapping, sequence, numpy array or scalar, dataclass (through its ``to_dict`` when
        it has one), path, string or None.

    Returns
    -------
    object
        Dicts with string keys, lists, int, float, bool, str or None. NaN and infinities
        become None (JSON has no such numbers).

    Raises
    ------
    ValueError
        For a value of a type with no JSON form; the message names the type.
    """
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        if hasattr(value, "to_dict"):
            return to_jsonable(value.to_dict())
        return to_jsonable(dataclasses.asdict(value))
    if isinstance(value, Mapping):
        return {str(k): to_jsonable(v) for k, v in value.items()}
    if isinstance(value, np.ndarray):
        return to_jsonable(value.tolist())
    if isinstance(value, (list, tuple)):
        return [to_jsonable(v) for v in value]
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        x = float(value)
        return x if math.isfinite(x) else None
    if value is None or isinstance(value, str):
        return value
    if isinstance(value, PurePath):
        return str(value)
    raise ValueError(f"cannot export a value of type {type(value).__name__}: {value!r}")
