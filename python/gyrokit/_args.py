"""Checks of scalar arguments shared by the public modules: one place for the
integer and real-number rules, so that out-of-range values are a ValueError
naming the argument (never an OverflowError from the conversion to C types)."""

from __future__ import annotations

import operator
from typing import Any, Optional

import numpy as np

#: Largest integer the native layer takes (int64).
INT_MAX = 2**63 - 1


def count(name: str, value: Any, low: Optional[int] = None) -> int:
    """``value`` as a Python int in ``[low, 2**63 - 1]`` (``low`` None: any
    int64, the core checks the domain): ``TypeError`` naming ``name`` for
    bools and non-integers, ``ValueError`` out of range."""
    if isinstance(value, (bool, np.bool_)):
        raise TypeError(f"{name} must be an integer, got a bool")
    try:
        v = operator.index(value)
    except TypeError:
        raise TypeError(f"{name} must be an integer, got {type(value).__name__}") from None
    if low is not None and v < low:
        raise ValueError(f"{name} must be >= {low}, got {v}")
    if not -INT_MAX - 1 <= v <= INT_MAX:
        raise ValueError(f"{name} = {v} is out of range (a 64-bit integer)")
    return v


def real(name: str, value: Any) -> float:
    """``value`` as a Python float: ``TypeError`` naming ``name`` for bools,
    strings and non-numbers, ``ValueError`` when it does not fit a float."""
    if isinstance(value, (bool, np.bool_, str, bytes)):
        raise TypeError(f"{name} must be a real number, got {type(value).__name__}")
    try:
        return float(value)
    except OverflowError:
        raise ValueError(f"{name} is too large for a float64 (an integer of {int(value).bit_length()} bits)") from None
    except (TypeError, ValueError):
        raise TypeError(f"{name} must be a real number, got {type(value).__name__}") from None
