"""A value printed with the digits its uncertainty supports.

Rule (the Particle Data Group's rounding rule, Review of Particle Physics, Introduction, section
"Rounding"): take the three highest-order digits of the uncertainty; from 100 to 354 the
uncertainty keeps two significant digits, from 355 to 949 one, and from 950 to 999 it is rounded
up to 1000 and keeps two. The value is rounded to the same decimal place as the uncertainty's last
kept digit. Both are returned as text in the same units as given.
"""
from __future__ import annotations

import math
from decimal import ROUND_DOWN, ROUND_HALF_EVEN, ROUND_HALF_UP, Decimal

#: significant digits of a value printed without a usable uncertainty
PLAIN_DIGITS = 6


def last_place(err: float) -> int | None:
    """Decimal exponent of the last digit kept of the uncertainty ``err`` (None when ``err`` is not
    a finite positive number): -9 for 7e-9, -9 for 1.2e-8, -8 for 9.6e-9 (rounded up to 1.0e-8)."""
    if not (isinstance(err, (int, float)) and math.isfinite(err) and err > 0):
        return None
    d = Decimal(repr(float(err)))
    e = d.adjusted()  # exponent of the leading digit, exact
    three = int(d.scaleb(2 - e).to_integral_value(rounding=ROUND_DOWN))  # 100..999
    if three <= 354:
        return e - 1
    if three <= 949:
        return e
    return e  # rounded up to 10^(e+1) with two significant digits: last digit at 10^e


def _fixed_or_sci(d: Decimal, place: int) -> str:
    """Text of ``d`` (already rounded to 10^place): plain decimals unless that would be long."""
    mag = d.copy_abs()
    if mag != 0 and (mag < Decimal("1e-4") or mag >= Decimal("1e7")):
        exp = mag.adjusted()
        return f"{float(d):.{max(exp - place, 0)}e}"
    return format(d, "f")


def with_uncertainty(x, err) -> tuple[str, str]:
    """``(value text, uncertainty text)`` by the rule of the module docstring; without a usable
    uncertainty, the value with PLAIN_DIGITS significant digits and the uncertainty as ``n/a``."""
    if x is None or not isinstance(x, (int, float)) or not math.isfinite(x):
        return ("n/a" if x is None else repr(x)), ("n/a" if err is None else f"{err:.2g}")
    place = last_place(err)
    if place is None:
        return f"{x:.{PLAIN_DIGITS}g}", ("n/a" if err is None else repr(err))
    q = Decimal(1).scaleb(place)
    xd = Decimal(repr(float(x))).quantize(q, rounding=ROUND_HALF_EVEN)
    ed = Decimal(repr(float(err))).quantize(q, rounding=ROUND_HALF_UP)
    return _fixed_or_sci(xd, place), _fixed_or_sci(ed, place)
