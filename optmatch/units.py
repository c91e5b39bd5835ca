"""Parsing of quantities typed by people: complex impedances, SI-prefixed values and lengths.

Pure functions; every failure raises :class:`InputError` with a one-line message.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Literal

from optmatch.errors import OptmatchError

C0 = 299_792_458.0  # speed of light in vacuum, m/s

_PREFIX = {
    "T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3, "K": 1e3, "": 1.0,
    "m": 1e-3, "u": 1e-6, "µ": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15,
}


class InputError(OptmatchError, ValueError):
    """A value typed by the user (or read from a study file) that cannot be used."""


_NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_QTY = re.compile(rf"^\s*({_NUM})\s*([A-Za-zµΩλ°]*)\s*$")


def parse_number(text: str | float | int, what: str = "value") -> float:
    """A plain real number (accepts numeric types unchanged)."""
    if isinstance(text, bool):
        raise InputError(f"{what}: expected a number, got {text!r}")
    if isinstance(text, (int, float)):
        return float(text)
    try:
        return float(str(text).strip())
    except ValueError:
        raise InputError(f"{what}: {text!r} is not a number") from None


def _split(text: str | float | int, what: str) -> tuple[float, str]:
    if isinstance(text, bool):
        raise InputError(f"{what}: expected a quantity, got {text!r}")
    if isinstance(text, (int, float)):
        return float(text), ""
    m = _QTY.match(str(text))
    if not m:
        raise InputError(f"{what}: {text!r} is not a number with an optional unit")
    return float(m.group(1)), m.group(2)


def _with_unit(value: float, unit: str, base: str, what: str, original: object) -> float:
    """Apply an SI prefix to ``value`` when ``unit`` is ``<prefix><base>`` (or just a prefix)."""
    for cand_base in (base, base.lower(), ""):
        if cand_base and not unit.endswith(cand_base):
            continue
        prefix = unit[: len(unit) - len(cand_base)] if cand_base else unit
        if prefix in _PREFIX:
            return value * _PREFIX[prefix]
    raise InputError(f"{what}: unit {unit!r} in {original!r} is not understood (expected {base} with an SI prefix)")


def parse_frequency(text: str | float | int, what: str = "frequency") -> float:
    """Frequency in Hz from e.g. ``2GHz``, ``433.92 MHz``, ``2e9``; must be positive and finite."""
    value, unit = _split(text, what)
    hz = _with_unit(value, unit, "Hz", what, text)
    if not math.isfinite(hz) or hz <= 0:
        raise InputError(f"{what}: must be positive, got {text!r}")
    return hz


def parse_impedance_real(text: str | float | int, what: str = "impedance") -> float:
    """A positive real impedance in Ω from e.g. ``50``, ``75 ohm``, ``1k``."""
    value, unit = _split(text, what)
    unit = unit.replace("Ω", "ohm").replace("Ohm", "ohm").replace("ohms", "ohm")
    ohm = _with_unit(value, unit, "ohm", what, text)
    if not math.isfinite(ohm) or ohm <= 0:
        raise InputError(f"{what}: must be a positive number of ohms, got {text!r}")
    return ohm


def parse_velocity_factor(text: str | float | int, what: str = "velocity factor") -> float:
    """Velocity factor in (0, 1]."""
    vf = parse_number(text, what)
    if not (0.0 < vf <= 1.0):
        raise InputError(f"{what}: must lie in (0, 1], got {text!r}")
    return vf


_COMPLEX_FORMS = [
    # 60-80j, 60+80j, 60 - 80j, 60-80i
    re.compile(rf"^(?P<re>{_NUM})\s*(?P<sign>[+-])\s*(?P<im>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*[jJiI]$"),
    # 60-j80, 60 - j80, 60+j 80
    re.compile(rf"^(?P<re>{_NUM})\s*(?P<sign>[+-])\s*[jJiI]\s*(?P<im>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)$"),
    # -80j or j80 alone
    re.compile(r"^(?P<sign>[+-]?)\s*(?P<im>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*[jJiI]$"),
    re.compile(r"^(?P<sign>[+-]?)\s*[jJiI]\s*(?P<im>(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)$"),
    # real only
    re.compile(rf"^(?P<re>{_NUM})$"),
]


def parse_complex(text: str | complex | float | int, what: str = "load") -> complex:
    """A complex impedance from ``60-80j``, ``60-j80``, ``60 - j80``, ``-j80`` or ``75``.

    An ``ohm`` or ``Ω`` suffix is accepted and ignored.
    """
    if isinstance(text, bool):
        raise InputError(f"{what}: expected a complex number, got {text!r}")
    if isinstance(text, (int, float, complex)):
        return complex(text)
    s = str(text).strip()
    s = re.sub(r"\s*(ohms?|Ω)$", "", s, flags=re.IGNORECASE)
    for pat in _COMPLEX_FORMS:
        m = pat.match(s)
        if not m:
            continue
        gd = m.groupdict()
        re_part = float(gd.get("re") or 0.0)
        im_part = float(gd["im"]) if gd.get("im") is not None else 0.0
        if gd.get("sign") == "-":
            im_part = -im_part
        z = complex(re_part, im_part)
        if not (math.isfinite(z.real) and math.isfinite(z.imag)):
            break
        return z
    raise InputError(f"{what}: {text!r} is not a complex number (write e.g. 60-80j, 60-j80 or 60 - j80)")


LengthKind = Literal["electrical", "physical", "delay"]

_ELECTRICAL = {"deg": math.pi / 180.0, "°": math.pi / 180.0, "rad": 1.0,
               "wl": 2.0 * math.pi, "λ": 2.0 * math.pi, "lambda": 2.0 * math.pi}
_PHYSICAL = {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "µm": 1e-6, "km": 1e3,
             "in": 0.0254, "ft": 0.3048, "mil": 25.4e-6}


@dataclass(frozen=True)
class Length:
    """A length as typed: electrical (radians at a reference frequency), physical (m) or delay (s)."""

    kind: LengthKind
    value: float

    def delay_s(self, f_ref_hz: float, vf: float = 1.0) -> float:
        """One-way delay in s (electrical lengths refer to ``f_ref_hz``; physical use ``vf``)."""
        if self.kind == "delay":
            return self.value
        if self.kind == "electrical":
            return self.value / (2.0 * math.pi * f_ref_hz)
        return self.value / (vf * C0)


def parse_length(text: str | float | int, what: str = "length") -> Length:
    """``45deg``, ``0.125wl``, ``0.3 rad``, ``120mm``, ``1.5 m``, ``2.5ns``; non-negative.

    A bare number is an error: a length must say what it is measured in.
    """
    value, unit = _split(text, what)
    if not math.isfinite(value) or value < 0:
        raise InputError(f"{what}: must be zero or positive, got {text!r}")
    if unit == "":
        raise InputError(f"{what}: {text!r} needs a unit (deg, wl, rad, mm, cm, m, in, ns, ps)")
    if unit in _ELECTRICAL:
        return Length("electrical", value * _ELECTRICAL[unit])
    if unit in _PHYSICAL:
        return Length("physical", value * _PHYSICAL[unit])
    if unit.endswith("s") and unit[:-1] in _PREFIX:
        return Length("delay", value * _PREFIX[unit[:-1]])
    raise InputError(f"{what}: unit {unit!r} in {text!r} is not a length unit (deg, wl, rad, mm, cm, m, in, ns, ps)")


@dataclass(frozen=True)
class LengthViews:
    """One length expressed four ways, for a given frequency and velocity factor."""

    deg: float
    wavelengths: float
    ns: float
    m: float


def length_views(wavelengths: float, f_hz: float, vf: float) -> LengthViews:
    """Views of an electrical length given in guided wavelengths at ``f_hz``."""
    return LengthViews(
        deg=360.0 * wavelengths,
        wavelengths=wavelengths,
        ns=wavelengths / f_hz * 1e9,
        m=wavelengths * vf * C0 / f_hz,
    )
