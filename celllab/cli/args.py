"""Argument types with bounds: a number out of range is an argparse error (exit 2) naming the
option and the allowed range, never an overflow or a hang further in."""

from __future__ import annotations

import argparse
import math
from collections.abc import Callable

#: Largest row count or offset a query takes (SQLite integers are 64-bit; no catalog is larger).
MAX_ROWS = 10**9


def whole_number(low: int, high: int) -> Callable[[str], int]:
    """argparse type: an integer from ``low`` to ``high``."""

    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if not low <= value <= high:
            raise argparse.ArgumentTypeError(f"{text} is out of range; allowed: {low} to {high}")
        return value

    parse.__name__ = "whole number"
    return parse


def positive_number(high: float = math.inf) -> Callable[[str], float]:
    """argparse type: a finite number > 0 (and <= ``high``)."""

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
        if not (math.isfinite(value) and 0 < value <= high):
            allowed = "a finite number > 0" + (f" and <= {high:g}" if math.isfinite(high) else "")
            raise argparse.ArgumentTypeError(f"{text} is out of range; allowed: {allowed}")
        return value

    parse.__name__ = "number"
    return parse
