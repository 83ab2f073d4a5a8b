"""Validators for user input, in one place. Each raises :class:`~holoscan.errors.InputError`,
except :func:`finite_or`, the lenient reader of values that were validated when they were stored."""
from __future__ import annotations

import math
import re
from numbers import Integral, Real

from .errors import InputError


def number(value, key: str, *, positive: bool = False, nonneg: bool = False) -> float:
    """A finite real number (bools rejected); optionally > 0 or >= 0."""
    if isinstance(value, bool) or not isinstance(value, Real):
        if isinstance(value, str):
            try:
                value = float(value)
            except ValueError:
                raise InputError(key, value, "must be a number") from None
        else:
            raise InputError(key, value, "must be a number")
    try:
        x = float(value)
    except OverflowError:
        raise InputError(key, value, "is too large for a floating-point number") from None
    if not math.isfinite(x):
        raise InputError(key, value, "must be finite (not NaN or infinite)")
    if positive and not x > 0:
        raise InputError(key, value, "must be > 0")
    if nonneg and not x >= 0:
        raise InputError(key, value, "must be >= 0")
    return x


def finite_or(value, default=None):
    """``value`` as a finite float, else ``default`` (never raises for a value that ``float`` does
    not take, NaN or an infinity): for reading values back from stored config blocks."""
    try:
        x = float(value)
    except (TypeError, ValueError):
        return default
    return x if math.isfinite(x) else default


def integer(value, key: str, *, minimum: int | None = None, maximum: int | None = None) -> int:
    """An integer (bools and non-integral floats rejected) within optional bounds."""
    if isinstance(value, bool):
        raise InputError(key, value, "must be an integer")
    if isinstance(value, Real) and not isinstance(value, Integral):
        if not (math.isfinite(value) and float(value).is_integer()):
            raise InputError(key, value, "must be an integer")
        value = int(value)
    if not isinstance(value, Integral):
        raise InputError(key, value, "must be an integer")
    if minimum is not None and value < minimum:
        raise InputError(key, value, f"must be >= {minimum}")
    if maximum is not None and value > maximum:
        raise InputError(key, value, f"must be <= {maximum}")
    return int(value)


def text(value, key: str) -> str:
    """A non-empty string."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(key, value, "must be a non-empty string")
    return value


_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]{0,63}")


def name(value, key: str) -> str:
    """A name used in file paths: letters, digits, '_', '.', '-', at most 64, no whitespace."""
    if not isinstance(value, str) or not _NAME.fullmatch(value):
        raise InputError(key, value, "must be 1-64 letters, digits, '_', '.' or '-', starting with a letter or digit")
    return value


def mapping(value, key: str) -> dict:
    if not isinstance(value, dict):
        raise InputError(key, value, "must be a mapping of keys to values")
    return value


def only_keys(block: dict, allowed, key: str) -> None:
    """Reject keys not in ``allowed`` (catches typos such as ``kapa_sq``)."""
    for k in block:
        if k not in allowed:
            raise InputError(f"{key}.{k}", block[k], f"unknown key; allowed keys: {', '.join(sorted(allowed))}")


def required(block: dict, name: str, key: str):
    if name not in block:
        raise InputError(f"{key}.{name}", None, "required key is missing")
    return block[name]
