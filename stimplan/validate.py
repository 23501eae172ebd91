"""Small validators shared by the configuration dataclasses.

Each validator raises :class:`stimplan.errors.ConfigError` naming the field,
the value and the allowed range, and returns the value converted to the
expected Python type.
"""

from __future__ import annotations

import math
from typing import Any

import numba as nb
import numpy as np

from .errors import ConfigError
from .ranges import RANGES

__all__ = [
    "number",
    "physical",
    "integer",
    "choice",
    "finite_array",
    "boolean",
]


def _is_real(value: Any) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
        value, (bool, np.bool_)
    )


def number(
    field: str,
    value: Any,
    *,
    lo: float | None = None,
    hi: float | None = None,
    lo_open: bool = False,
    hi_open: bool = False,
) -> float:
    """Check that ``value`` is a finite real number in the given interval.

    Parameters
    ----------
    field : str
        Field path used in the error message.
    value : object
        Value to check.
    lo, hi : float, optional
        Interval bounds; ``None`` means unbounded.
    lo_open, hi_open : bool
        Whether the bound itself is excluded.

    Returns
    -------
    float
    """
    allowed = _interval_text(lo, hi, lo_open, hi_open)
    if not _is_real(value):
        raise ConfigError(field, value, f"a real number {allowed}".strip())
    try:
        x = float(value)
    except OverflowError:  # an integer beyond the float range
        x = math.inf
    if not math.isfinite(x):
        raise ConfigError(field, value, f"a finite number {allowed}".strip())
    if lo is not None and (x < lo or (lo_open and x == lo)):
        raise ConfigError(field, value, allowed)
    if hi is not None and (x > hi or (hi_open and x == hi)):
        raise ConfigError(field, value, allowed)
    return x


def physical(field: str, value: Any, quantity: str, *, signed: bool = False) -> float:
    """Check a physical input against its plausibility range in :data:`stimplan.ranges.RANGES`.

    Parameters
    ----------
    field : str
        Field path used in the error message, e.g. ``"illumination.power_mw"``.
    value : object
        Value to check.
    quantity : str
        Key of :data:`~stimplan.ranges.RANGES`; its reason is quoted in the error.
    signed : bool
        Check ``abs(value)`` against the range and keep the sign (a focal length);
        zero is then refused.

    Returns
    -------
    float
    """
    rng = RANGES[quantity]
    x = number(field, value)
    size = abs(x) if signed else x
    if size < rng.lo or (rng.lo_open and size == rng.lo) or size > rng.hi:
        allowed = f"in {'(' if rng.lo_open else '['}{rng.lo:g}, {rng.hi:g}]"
        raise ConfigError(field, value, f"|value| {allowed}" if signed else allowed, rng.reason)
    return x


def integer(field: str, value: Any, *, lo: int | None = None, hi: int | None = None) -> int:
    """Check that ``value`` is an integer in ``[lo, hi]``."""
    allowed = _interval_text(lo, hi, False, False)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)):
        if isinstance(value, (float, np.floating)) and float(value).is_integer():
            value = int(value)
        else:
            raise ConfigError(field, value, f"an integer {allowed}".strip())
    x = int(value)
    if (lo is not None and x < lo) or (hi is not None and x > hi):
        raise ConfigError(field, value, f"an integer {allowed}".strip())
    return x


def boolean(field: str, value: Any) -> bool:
    """Check that ``value`` is a boolean."""
    if not isinstance(value, (bool, np.bool_)):
        raise ConfigError(field, value, "true or false")
    return bool(value)


def choice(field: str, value: Any, options: tuple[str, ...] | list[str]) -> str:
    """Check that ``value`` is one of ``options``."""
    if not isinstance(value, str) or value not in options:
        raise ConfigError(field, value, "one of " + ", ".join(repr(o) for o in options))
    return value


def finite_array(
    field: str,
    value: Any,
    *,
    shape: tuple[int, ...] | None = None,
    ndim: int | None = None,
    lo: float | None = None,
    hi: float | None = None,
    dtype: Any = np.float32,
) -> np.ndarray:
    """Check that ``value`` is a real array of finite numbers.

    Parameters
    ----------
    field : str
        Field path used in the error message.
    value : array_like
        The array.
    shape : tuple of int, optional
        Required shape.
    ndim : int, optional
        Required number of dimensions.
    lo, hi : float, optional
        Inclusive bounds on every element.
    dtype : numpy dtype
        Type of the returned array (no copy when it already matches).

    Returns
    -------
    ndarray
    """
    try:
        arr = np.asarray(value)
    except Exception as exc:
        raise ConfigError(field, type(value).__name__, "a numeric array", str(exc)) from None
    if arr.dtype.kind not in "biuf":
        raise ConfigError(field, arr, "a real numeric array")
    if ndim is not None and arr.ndim != ndim:
        raise ConfigError(field, arr, f"an array with {ndim} dimensions")
    if shape is not None and tuple(arr.shape) != tuple(shape):
        raise ConfigError(field, arr, f"an array of shape {tuple(shape)}")
    arr = arr.astype(dtype, copy=False)
    if not arr.size:
        return arr
    if arr.size >= _ONE_PASS_SIZE and arr.dtype.kind == "f" and arr.flags.c_contiguous:
        finite, a_min, a_max = _finite_min_max(arr.reshape(-1))
    else:
        finite = bool(np.all(np.isfinite(arr)))
        a_min = float(arr.min()) if finite else 0.0
        a_max = float(arr.max()) if finite else 0.0
    if not finite:
        bad = int(np.count_nonzero(~np.isfinite(arr)))
        raise ConfigError(field, arr, "finite values only", f"{bad} NaN or infinite values")
    if lo is not None and a_min < lo:
        raise ConfigError(field, arr, f"values >= {lo}", f"minimum is {a_min:g}")
    if hi is not None and a_max > hi:
        raise ConfigError(field, arr, f"values <= {hi}", f"maximum is {a_max:g}")
    return arr


#: Arrays from this size on are checked in one compiled pass.
_ONE_PASS_SIZE = 1 << 16


@nb.njit(cache=True, nogil=True)
def _finite_min_max(flat):  # pragma: no cover - compiled
    """``(all finite, min, max)`` of a 1-D float array in one pass (single-threaded:
    a check must not wake a thread pool that the FFTs then share)."""
    lo = np.inf
    hi = -np.inf
    for k in range(flat.size):
        x = np.float64(flat[k])
        if not np.isfinite(x):
            return False, 0.0, 0.0
        if x < lo:
            lo = x
        if x > hi:
            hi = x
    return True, lo, hi


def _interval_text(lo: Any, hi: Any, lo_open: bool, hi_open: bool) -> str:
    if lo is None and hi is None:
        return ""
    if hi is None:
        return f"{'>' if lo_open else '>='} {lo}"
    if lo is None:
        return f"{'<' if hi_open else '<='} {hi}"
    return f"in {'(' if lo_open else '['}{lo}, {hi}{')' if hi_open else ']'}"
