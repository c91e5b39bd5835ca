"""Parsing of quantities typed by people: one strict, dimension-checked parser for the command line,
the study file, its JSON Schema and the cable catalog.

Every quantity has a *kind* (:class:`QuantityKind`): the exact unit spellings it accepts, what a
bare number means (or that a bare number is refused), and a plausible range.  The rules:

- Units are spelt exactly as SI writes them (``MHz``, ``nH``, ``pF``, ``dB``); a spelling that
  differs only in case (``mhz``, ``MHZ``, ``nh``) is refused with "did you mean 146 MHz?", because
  ``m`` is milli and ``M`` mega.  ``mHz`` (millihertz) is refused in a frequency: no RF study is in
  millihertz, so it can only be a slip for ``MHz``.
- A bare number is refused where it is ambiguous (frequency, inductance, capacitance, power,
  duration, percentage): ``146 what? write 146MHz``.  It is accepted where the trade's habit is
  clear: ohms for an impedance, dB for a return loss or loss.
- A value of one kind given in another's unit names both (``'5pF' is a capacitance, not an
  inductance``).
- Values outside a plausible range are refused (frequencies 1 kHz to 1 THz, return loss 0 to
  100 dB, physical lengths up to 1 km, ...).

Pure functions; every failure raises :class:`InputError` with a one-line message that starts with
the ``what`` label given by the caller.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace
from typing import Literal

from optmatch.errors import OptmatchError, did_you_mean

C0 = 299_792_458.0  # speed of light in vacuum, m/s


class InputError(OptmatchError, ValueError):
    """A value typed by the user (or read from a study file) that cannot be used."""


NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_QTY = re.compile(rf"^\s*({NUMBER})\s*(.*?)\s*$", re.DOTALL)

Conversion = float | Callable[[float], float]


@dataclass(frozen=True)
class QuantityKind:
    """What one kind of quantity accepts.

    ``units`` maps each exact spelling to its factor to the SI unit ``si`` (or to a conversion
    function, for logarithmic units such as dBm).  ``bare`` is the unit a bare number means, or
    None when a bare number is refused.  ``lo``..``hi`` is the plausible range in SI units
    (``lo_open``: the lower end itself is refused).  ``example`` is the unit used in hints and
    ``refused`` maps spellings that are refused with their own reason.
    """

    name: str
    si: str
    units: Mapping[str, Conversion]
    example: str
    bare: str | None = None
    lo: float = 0.0
    hi: float = math.inf
    lo_open: bool = True
    refused: Mapping[str, str] = field(default_factory=dict)
    shown: tuple[str, ...] = ()

    def listed(self) -> str:
        """The units to name in a message."""
        return ", ".join(self.shown or tuple(self.units))

    def within(self, lo: float | None = None, hi: float | None = None, lo_open: bool | None = None) -> QuantityKind:
        """The same kind with another plausible range."""
        return replace(self, lo=self.lo if lo is None else lo, hi=self.hi if hi is None else hi,
                       lo_open=self.lo_open if lo_open is None else lo_open)


def _prefixed(base: str, prefixes: str) -> dict[str, float]:
    """``base`` alone and with each SI prefix in ``prefixes`` (one character each)."""
    scale = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3,
             "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12}
    return {base: 1.0, **{f"{p}{base}": scale[p] for p in prefixes}}


def _dbm_to_w(x: float) -> float:
    return 10.0 ** ((x - 30.0) / 10.0)


FREQUENCY = QuantityKind(
    "frequency", "Hz", _prefixed("Hz", "kMGT"), "MHz", lo=1e3, hi=1e12, lo_open=False,
    refused={"mHz": "mHz is millihertz; no RF study is in millihertz"},
    shown=("Hz", "kHz", "MHz", "GHz", "THz"))
IMPEDANCE = QuantityKind(
    "impedance", "Ω", {**_prefixed("Ω", "kM"), **_prefixed("ohm", "kM"), **_prefixed("ohms", "kM"),
                       "k": 1e3},
    "Ω", bare="Ω", lo=0.0, hi=1e4, shown=("Ω", "ohm", "kΩ"))
RESISTANCE = replace(IMPEDANCE, name="resistance", hi=1e9, shown=("Ω", "ohm", "kΩ", "MΩ"),
                     units={**IMPEDANCE.units, "M": 1e6})
INDUCTANCE = QuantityKind("inductance", "H", _prefixed("H", "fpnuµm"), "nH", hi=1.0,
                          shown=("pH", "nH", "uH", "mH", "H"))
CAPACITANCE = QuantityKind("capacitance", "F", _prefixed("F", "fpnuµm"), "pF", hi=1.0,
                           shown=("fF", "pF", "nF", "uF", "F"))
POWER = QuantityKind("power", "W", {**_prefixed("W", "mkM"), "dBm": _dbm_to_w}, "W",
                     hi=1e7, shown=("mW", "W", "kW", "dBm"))
DURATION = QuantityKind("duration", "s", {"s": 1.0, "min": 60.0, "h": 3600.0}, "s", hi=30 * 86400.0)
DECIBELS = QuantityKind("level", "dB", {"dB": 1.0}, "dB", bare="dB", lo=-100.0, hi=100.0, lo_open=False)
RETURN_LOSS = replace(DECIBELS, name="return loss", lo=0.0, lo_open=True)
LOSS = replace(DECIBELS, name="loss", lo=0.0, lo_open=True)
PERCENT = QuantityKind("percentage", "%", {"%": 1.0}, "%", lo=0.0, hi=100.0, lo_open=False)

KINDS: tuple[QuantityKind, ...] = (FREQUENCY, RESISTANCE, INDUCTANCE, CAPACITANCE, POWER, DURATION,
                                   DECIBELS, PERCENT)
_ARTICLE = {"inductance": "an", "impedance": "an"}


def parse_number(text: str | float | int, what: str = "value") -> float:
    """A plain finite real number (numeric types pass unchanged)."""
    if isinstance(text, bool):
        raise InputError(f"{what}: expected a number, got {text!r}")
    if isinstance(text, (int, float)):
        x = float(text)
    else:
        try:
            x = float(str(text).strip())
        except ValueError:
            raise InputError(f"{what}: {_show(text)} is not a number") from None
    if not math.isfinite(x):
        raise InputError(f"{what}: {_show(text)} is not a finite number")
    return x


def _show(text: object, limit: int = 40) -> str:
    s = repr(text) if isinstance(text, str) else str(text)
    s = " ".join(s.split())
    return s if len(s) <= limit else s[: limit - 3] + "..."


def _split(text: str | float | int, what: str, kind_name: str) -> tuple[float, str, str]:
    """(value, unit, number as typed) of a quantity."""
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise InputError(f"{what}: expected {_a(kind_name)} {kind_name}, got {_show(text)}")
    if isinstance(text, (int, float)):
        if not math.isfinite(float(text)):
            raise InputError(f"{what}: {_show(text)} is not a finite number")
        return float(text), "", f"{text:g}" if isinstance(text, float) else str(text)
    m = _QTY.match(text)
    if not m:
        example = _EXAMPLES.get(kind_name)
        raise InputError(f"{what}: {_show(text)} is not {_a(kind_name)} {kind_name}"
                         + (f" (write e.g. {example})" if example else ""))
    value = float(m.group(1))
    if not math.isfinite(value):
        raise InputError(f"{what}: {_show(text)} is not a finite number")
    return value, m.group(2), m.group(1)


def _a(noun: str) -> str:
    return _ARTICLE.get(noun, "an" if noun[:1] in "aeiou" else "a")


_EXAMPLES = {"frequency": "146MHz", "inductance": "15nH", "capacitance": "2.2pF", "power": "100W",
             "duration": "90s, 5min or 1h", "length": "45deg, 0.125wl, 120mm or 2.5ns", "percentage": "2%",
             "impedance": "50", "resistance": "47", "return loss": "15", "loss": "0.5", "level": "3"}


def _bare_hint(number: str, kind: QuantityKind) -> str:
    if kind is FREQUENCY or kind.name == "frequency":
        return f"{number}Hz" if abs(float(number)) >= 1e3 else f"{number}MHz"
    return f"{number}{kind.example}"


def _other_kind(unit: str, kind: QuantityKind) -> QuantityKind | None:
    for other in KINDS:
        if other.name != kind.name and unit in other.units and other.bare != unit:
            return other
    return None


def parse_quantity(text: str | float | int, kind: QuantityKind, what: str = "value") -> float:
    """A value of ``kind`` in SI units from e.g. ``146MHz``, ``2.2 pF``, ``15`` (where bare is allowed)."""
    value, unit, number = _split(text, what, kind.name)
    if unit == "":
        if kind.bare is None:
            raise InputError(f"{what}: {number} what? write {_bare_hint(number, kind)} "
                             f"({kind.name} units: {kind.listed()})")
        unit = kind.bare
    if unit in kind.refused:
        same = [u for u in kind.units if u.lower() == unit.lower()]
        hint = f"; did you mean {number} {same[0]}?" if same else ""
        raise InputError(f"{what}: {_show(text)}: {kind.refused[unit]}{hint}")
    conv = kind.units.get(unit)
    if conv is None:
        same = [u for u in kind.units if u.lower() == unit.lower()]
        if same:
            note = " (m is milli, M is mega)" if unit[:1] == "m" and same[0][:1] == "M" else ""
            raise InputError(f"{what}: {_show(text)}: did you mean {number} {same[0]}?{note}")
        other = _other_kind(unit, kind)
        if other is not None:
            raise InputError(f"{what}: {_show(text)} is {_a(other.name)} {other.name}, not {_a(kind.name)} "
                             f"{kind.name} (write e.g. {_EXAMPLES.get(kind.name, kind.example)})")
        hint = did_you_mean(unit, kind.units, f"{number} ")
        raise InputError(f"{what}: unit {_show(unit)} in {_show(text)} is not {_a(kind.name)} {kind.name} unit"
                         f"{hint or f' (use {kind.listed()})'}")
    x = conv(value) if callable(conv) else value * conv
    _check_range(x, kind, what, text)
    return x


def _fmt_si(x: float, kind: QuantityKind) -> str:
    if kind.si in ("dB", "%", "s") or x == 0.0:
        return f"{x:g} {kind.si}"
    return format_si(x, kind.si)


def format_si(x: float, unit: str) -> str:
    """``x`` with an engineering SI prefix: ``format_si(1e4, "Ω")`` is ``10 kΩ``."""
    for scale, prefix in ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
                          (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f")):
        if abs(x) >= scale:
            return f"{x / scale:.6g} {prefix}{unit}"
    return f"{x:.6g} {unit}"


def _check_range(x: float, kind: QuantityKind, what: str, text: object) -> None:
    if not math.isfinite(x):
        raise InputError(f"{what}: {_show(text)} is not a finite {kind.name}")
    low = x <= kind.lo if kind.lo_open else x < kind.lo
    if low or x > kind.hi:
        if kind.lo >= 0.0 and x <= 0.0 and not (x == 0.0 and not kind.lo_open):
            raise InputError(f"{what}: must be more than 0 {kind.si}, got {_show(text)}")
        lo = _fmt_si(kind.lo, kind)
        raise InputError(f"{what}: {_show(text)} is outside the plausible range of {_a(kind.name)} {kind.name} "
                         f"({'above ' if kind.lo_open else ''}{lo} to {_fmt_si(kind.hi, kind)})")


def format_hz(f: float) -> str:
    """A frequency for messages: ``433.92 MHz``."""
    return format_si(f, "Hz") if abs(f) >= 1.0 else f"{f:.6g} Hz"


def parse_frequency(text: str | float | int, what: str = "frequency") -> float:
    """Frequency in Hz from e.g. ``2GHz`` or ``433.92 MHz``; a unit is required; 1 kHz to 1 THz."""
    return parse_quantity(text, FREQUENCY, what)


def parse_impedance_real(text: str | float | int, what: str = "impedance") -> float:
    """A positive real impedance in Ω from ``50``, ``75 ohm``, ``75Ω`` or ``1k``; at most 10 kΩ."""
    return parse_quantity(text, IMPEDANCE, what)


def parse_resistance(text: str | float | int, what: str = "resistance") -> float:
    """A positive resistance in Ω (a part or a load); bare numbers are ohms; at most 1 GΩ."""
    return parse_quantity(text, RESISTANCE, what)


def parse_inductance(text: str | float | int, what: str = "inductance") -> float:
    """Inductance in H from ``15nH``; a unit is required."""
    return parse_quantity(text, INDUCTANCE, what)


def parse_capacitance(text: str | float | int, what: str = "capacitance") -> float:
    """Capacitance in F from ``2.2pF``; a unit is required."""
    return parse_quantity(text, CAPACITANCE, what)


def parse_power(text: str | float | int, what: str = "power") -> float:
    """Power in W from ``100W``, ``1.5kW`` or ``50dBm``; a unit is required."""
    return parse_quantity(text, POWER, what)


def parse_duration(text: str | float | int, what: str = "duration") -> float:
    """Seconds from ``90s``, ``5min`` or ``1h``; a unit is required."""
    return parse_quantity(text, DURATION, what)


def parse_percent(text: str | float | int, what: str = "percentage") -> float:
    """A fraction from ``2%`` (0.02); the ``%`` is required (a bare 2 could mean 2 % or 200 %)."""
    return parse_quantity(text, PERCENT, what) / 100.0


def parse_db(text: str | float | int, what: str = "level", kind: QuantityKind = DECIBELS) -> float:
    """dB from ``15`` or ``15dB`` (a bare number is dB, the trade's habit)."""
    return parse_quantity(text, kind, what)


def vswr_to_return_loss_db(vswr: float) -> float:
    """Return loss (dB) of a VSWR: RL = −20·log10((s − 1)/(s + 1))."""
    return -20.0 * math.log10((vswr - 1.0) / (vswr + 1.0))


def parse_vswr(text: str | float | int, what: str = "vswr") -> float:
    """A VSWR (a bare number above 1, or ``1.5:1``); its return loss must lie in (0, 100] dB."""
    if isinstance(text, str) and text.strip().endswith(":1"):
        text = text.strip()[:-2]
    s = parse_number(text, what)
    if not s > 1.0:
        raise InputError(f"{what}: must be more than 1 (1 is a perfect match), got {_show(text)}")
    rl = vswr_to_return_loss_db(s)
    if not (0.0 < rl <= 100.0):
        raise InputError(f"{what}: {_show(text)} is outside the plausible range (its return loss, "
                         f"{rl:.3g} dB, must lie in 0 to 100 dB)")
    return s


def parse_velocity_factor(text: str | float | int, what: str = "velocity factor") -> float:
    """Velocity factor in (0, 1], a bare number."""
    vf = parse_number(text, what)
    if not (0.0 < vf <= 1.0):
        raise InputError(f"{what}: must lie in (0, 1], got {_show(text)}")
    return vf


MAX_LOAD_OHM = 1e9  # |Z| of a load: beyond this the arithmetic, not the load, decides the answer


_IM = r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_COMPLEX_FORMS = [
    # 60-80j, 60+80j, 60 - 80j, 60-80i
    re.compile(rf"^(?P<re>{NUMBER})\s*(?P<sign>[+-])\s*(?P<im>{_IM})\s*[jJiI]$"),
    # 60-j80, 60 - j80, 60+j 80
    re.compile(rf"^(?P<re>{NUMBER})\s*(?P<sign>[+-])\s*[jJiI]\s*(?P<im>{_IM})$"),
    # -80j or j80 alone
    re.compile(rf"^(?P<sign>[+-]?)\s*(?P<im>{_IM})\s*[jJiI]$"),
    re.compile(rf"^(?P<sign>[+-]?)\s*[jJiI]\s*(?P<im>{_IM})$"),
    # real only
    re.compile(rf"^(?P<re>{NUMBER})$"),
]


def parse_complex(text: str | complex | float | int, what: str = "load") -> complex:
    """A complex impedance (Ω) from ``60-80j``, ``60-j80``, ``60 - j80``, ``-j80`` or ``75``.

    An ``ohm`` or ``Ω`` suffix is accepted.  |Z| must not exceed 1 GΩ.
    """
    if isinstance(text, bool) or not isinstance(text, (str, int, float, complex)):
        raise InputError(f"{what}: expected a complex number, got {_show(text)}")
    z: complex | None = None
    if isinstance(text, (int, float, complex)):
        z = complex(text)
    else:
        s = re.sub(r"\s*(ohms?|Ω)$", "", str(text).strip())
        for pat in _COMPLEX_FORMS:
            m = pat.match(s)
            if not m:
                continue
            gd = m.groupdict()
            im_part = float(gd["im"]) if gd.get("im") is not None else 0.0
            z = complex(float(gd.get("re") or 0.0), -im_part if gd.get("sign") == "-" else im_part)
            break
        if z is None:
            raise InputError(f"{what}: {_show(text)} is not a complex number (write e.g. 60-80j, 60-j80 or 60 - j80)")
    if not (math.isfinite(z.real) and math.isfinite(z.imag)):
        raise InputError(f"{what}: {_show(text)} is not a finite impedance")
    if abs(z) > MAX_LOAD_OHM:
        raise InputError(f"{what}: {_show(text)} is outside the plausible range (|Z| at most 1 GΩ)")
    return z


LengthKind = Literal["electrical", "physical", "delay"]

_ELECTRICAL = {"deg": math.pi / 180.0, "°": math.pi / 180.0, "rad": 1.0,
               "wl": 2.0 * math.pi, "λ": 2.0 * math.pi}
_PHYSICAL = {"m": 1.0, "cm": 1e-2, "mm": 1e-3, "um": 1e-6, "µm": 1e-6, "km": 1e3,
             "in": 0.0254, "ft": 0.3048, "mil": 25.4e-6}
_DELAY = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "ns": 1e-9, "ps": 1e-12}
LENGTH_UNITS: dict[str, tuple[LengthKind, float]] = {
    **{u: ("electrical", f) for u, f in _ELECTRICAL.items()},
    **{u: ("physical", f) for u, f in _PHYSICAL.items()},
    **{u: ("delay", f) for u, f in _DELAY.items()},
}
MAX_LENGTH_M = 1000.0  # plausibility: no line or stub is longer than 1 km
MAX_DELAY_S = MAX_LENGTH_M / C0  # the delay of 1 km in free space (3.34 µs)
MAX_ELECTRICAL_RAD = 2.0 * math.pi * 1e6  # a million wavelengths; the loader checks the delay it makes
_LENGTH_LIST = "deg, wl, rad, mm, cm, m, in, ns, ps"


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
    """``45deg``, ``0.125wl``, ``0.3 rad``, ``120mm``, ``1.5 m``, ``2.5ns``; zero or positive.

    A bare number is an error: a length must say what it is measured in.  Physical lengths are at
    most 1 km and delays at most 3.34 µs (1 km in free space).
    """
    value, unit, number = _split(text, what, "length")
    if value < 0:
        raise InputError(f"{what}: must be zero or positive, got {_show(text)}")
    if unit == "":
        raise InputError(f"{what}: {number} what? write e.g. {number}deg or {number}mm (units: {_LENGTH_LIST})")
    got = LENGTH_UNITS.get(unit)
    if got is None:
        same = [u for u in LENGTH_UNITS if u.lower() == unit.lower()]
        if same:
            raise InputError(f"{what}: {_show(text)}: did you mean {number} {same[0]}?")
        hint = did_you_mean(unit, LENGTH_UNITS, f"{number} ")
        raise InputError(f"{what}: unit {_show(unit)} in {_show(text)} is not a length unit"
                         f"{hint or f' ({_LENGTH_LIST})'}")
    kind, factor = got
    x = value * factor
    limit = {"physical": MAX_LENGTH_M, "delay": MAX_DELAY_S, "electrical": MAX_ELECTRICAL_RAD}[kind]
    if not math.isfinite(x) or x > limit:
        limit_text = {"physical": "1 km", "delay": "3.34 µs, 1 km in free space",
                      "electrical": "a million wavelengths"}[kind]
        raise InputError(f"{what}: {_show(text)} is longer than the plausible limit ({limit_text})")
    return Length(kind, x)


def quantity_pattern(units: Mapping[str, object] | tuple[str, ...], bare: bool) -> str:
    """A JSON Schema (ECMA 262) pattern for a number followed by one of ``units`` (or nothing)."""
    alts = "|".join(re.escape(u).replace("\\ ", " ") for u in sorted(units, key=len, reverse=True) if u)
    unit = f"(?:{alts})" + ("?" if bare else "")
    return rf"^\s*{NUMBER}\s*{unit}\s*$"


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
