"""Numbers and units as HTML text for tables (formatting only, no arithmetic on results)."""

from __future__ import annotations

import math
import re

from markupsafe import Markup, escape

SIGNIFICANT = 4


def number(value: float | None, significant: int = SIGNIFICANT) -> Markup:
    """`value` to `significant` figures: plain from 0.001 to 10⁶, else m×10<sup>n</sup>.

    None gives "—"."""
    if value is None:
        return Markup("—")
    if math.isnan(value):
        return Markup("NaN")
    if math.isinf(value):
        return Markup("∞" if value > 0 else "−∞")
    if value == 0:
        return Markup("0")
    if 1e-3 <= abs(value) < 1e6:
        decimals = max(significant - 1 - math.floor(math.log10(abs(value))), 0)
        text = f"{round(value, decimals):.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return Markup(text.replace("-", "−"))
    mantissa, exponent = f"{value:.{significant - 1}e}".split("e")
    if "." in mantissa:
        mantissa = mantissa.rstrip("0").rstrip(".")
    power = str(int(exponent)).replace("-", "−")
    return Markup(f"{mantissa.replace('-', '−')}×10<sup>{power}</sup>")


def ratio(value: float | None) -> Markup:
    """A demand/capacity ratio to three decimals."""
    return Markup("—") if value is None else Markup(f"{value:.3f}")


def scientific(value: float | None, digits: int = 2) -> Markup:
    """A small quantity (relative error, tolerance) as m.mm×10<sup>n</sup>."""
    if value is None:
        return Markup("—")
    if value == 0 or not math.isfinite(value):
        return number(value)
    mantissa, exponent = f"{value:.{digits}e}".split("e")
    power = str(int(exponent)).replace("-", "−")
    return Markup(f"{mantissa.replace('-', '−')}×10<sup>{power}</sup>")


_POWER = re.compile(r"\s*(\*\*|\^)\s*(-?\d+(?:\.\d+)?)")
_PRODUCT = re.compile(r"\s*\*\s*")


def unit(text: str) -> Markup:
    """A unit text such as "kg*m^2/s**2" as kg·m<sup>2</sup>/s<sup>2</sup>."""
    if not text or text in ("1", "dimensionless"):
        return Markup("—") if not text else Markup("1")
    escaped = str(escape(text))
    escaped = _POWER.sub(lambda m: "<sup>" + m[2].replace("-", "−") + "</sup>", escaped)
    escaped = _PRODUCT.sub("·", escaped)
    return Markup(escaped.replace(" / ", "/"))


def verdict(passed: bool) -> Markup:
    """PASS / FAIL marker with a class for styling."""
    return Markup('<span class="pass">PASS</span>' if passed else '<span class="fail">FAIL</span>')
