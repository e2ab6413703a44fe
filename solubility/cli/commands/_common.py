"""Small helpers shared by the subcommands: JSON output and argument types. Imports nothing heavy."""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any


def _clean(obj: Any) -> Any:
    """Make `obj` JSON-safe: NaN and infinities become null, numpy scalars and arrays become Python values."""
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_clean(v) for v in obj]
    if hasattr(obj, "tolist") and not isinstance(obj, str | bytes):
        return _clean(obj.tolist())
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj


def emit_json(obj: Any) -> None:
    """Print one JSON object on standard output and nothing else."""
    sys.stdout.write(json.dumps(_clean(obj), allow_nan=False) + "\n")


def finite_float(text: str) -> float:
    """argparse type: a finite number."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
    return value


def positive_float(text: str) -> float:
    """argparse type: a finite number > 0."""
    value = finite_float(text)
    if value <= 0:
        raise argparse.ArgumentTypeError(f"{text!r} must be greater than zero")
    return value
