"""Typed models of a study file (pydantic v2): structure, key names and units.

Every model forbids unknown keys.  Quantities typed with units are parsed here into SI numbers
(Hz, Ω, H, F, s, dB) or :class:`~optmatch.units.Length`; anything that needs the frequency grid,
the reference frequency or other files is left to :mod:`optmatch.studyfile.loader`.

One model per element kind (``line``, ``shunt_stub``, ``series_stub``, ``lumped``) so that later
keys (a per-element ``cable:``, a top-level ``shelf:``) slot in as new optional fields.
"""

from __future__ import annotations

import math
import re
from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    PlainValidator,
    Tag,
    ValidationInfo,
    field_validator,
    model_validator,
)

from optmatch.domain.mask import DEFAULT_POINTS
from optmatch.domain.templates import TEMPLATES
from optmatch.errors import OptmatchError
from optmatch.units import (
    Length,
    parse_complex,
    parse_frequency,
    parse_impedance_real,
    parse_length,
    parse_velocity_factor,
)

# Location parts that name a union branch, not a key; the loader drops them from key paths.
BRANCH_MARK = "<"


def fmt_hz(f: float) -> str:
    """A frequency for messages: ``433.92 MHz``."""
    for scale, unit in ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz")):
        if abs(f) >= scale:
            return f"{f / scale:.6g} {unit}"
    return f"{f:.6g} Hz"


def _plain(exc: OptmatchError) -> str:
    """Message of a units error without its leading ``value: `` label."""
    return str(exc).removeprefix("value: ")


def _wrap(fn):  # noqa: ANN001, ANN202 - small adapter
    def run(v: Any) -> Any:
        try:
            return fn(v, "value")
        except OptmatchError as exc:
            raise ValueError(_plain(exc)) from None

    return run


_NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_DB = re.compile(rf"^\s*({_NUM})\s*(?:dB)?\s*$", re.IGNORECASE)
_DURATION = re.compile(rf"^\s*({_NUM})\s*(s|sec|min|h)?\s*$")
_SI = re.compile(rf"^\s*({_NUM})\s*([TGMkKmunpfµ]?)\s*(ohms?|Ω|H|F)?\s*$")
_SI_PREFIX = {"T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3, "K": 1e3, "": 1.0,
              "m": 1e-3, "u": 1e-6, "µ": 1e-6, "n": 1e-9, "p": 1e-12, "f": 1e-15}
_SECONDS = {None: 1.0, "s": 1.0, "sec": 1.0, "min": 60.0, "h": 3600.0}


def _decibels(v: Any) -> float:
    """A number of dB from ``15``, ``15dB`` or ``15 dB``."""
    if isinstance(v, bool):
        raise ValueError(f"expected a number of dB, got {v!r}")
    if isinstance(v, (int, float)):
        x = float(v)
    else:
        m = _DB.match(str(v))
        if not m:
            raise ValueError(f"{v!r} is not a number of dB (write e.g. 15 or '15 dB')")
        x = float(m.group(1))
    if not math.isfinite(x):
        raise ValueError(f"{v!r} is not a finite number of dB")
    return x


def _positive_db(v: Any) -> float:
    x = _decibels(v)
    if x <= 0:
        raise ValueError(f"must be more than 0 dB, got {v!r}")
    return x


def _duration(v: Any) -> float:
    """Seconds from ``90``, ``90s``, ``5min``, ``1h``; positive."""
    if isinstance(v, bool):
        raise ValueError(f"expected a duration, got {v!r}")
    if isinstance(v, (int, float)):
        x = float(v)
    else:
        m = _DURATION.match(str(v))
        if not m:
            raise ValueError(f"{v!r} is not a duration (write e.g. 90s, 5min or 1h)")
        x = float(m.group(1)) * _SECONDS[m.group(2)]
    if not math.isfinite(x) or x <= 0:
        raise ValueError(f"must be a positive duration, got {v!r}")
    return x


class SIValue(BaseModel):
    """A positive value with an optional unit: ``ohm`` (Ω), ``H``, ``F`` or none (``unit`` = '')."""

    model_config = ConfigDict(frozen=True)
    value: float
    unit: Literal["ohm", "H", "F", ""]


def _si_value(v: Any) -> SIValue:
    if isinstance(v, SIValue):
        return v
    if isinstance(v, bool):
        raise ValueError(f"expected a value, got {v!r}")
    if isinstance(v, (int, float)):
        x, unit = float(v), ""
    else:
        m = _SI.match(str(v))
        if not m:
            raise ValueError(f"{v!r} is not a value with an SI prefix and unit (e.g. 2.2pF, 15nH, 1k)")
        x = float(m.group(1)) * _SI_PREFIX[m.group(2)]
        u = m.group(3) or ""
        unit = "ohm" if u.startswith("ohm") or u == "Ω" else u
    if not math.isfinite(x) or x <= 0:
        raise ValueError(f"must be positive, got {v!r}")
    return SIValue(value=x, unit=unit)  # type: ignore[arg-type]


def _unit_value(unit: str, name: str):  # noqa: ANN202 - validator factory
    def run(v: Any) -> float:
        q = _si_value(v)
        if q.unit not in ("", unit):
            raise ValueError(f"{v!r}: {name} is given in {unit} (e.g. {'15nH' if unit == 'H' else '2.2pF'})")
        return q.value

    return run


Frequency = Annotated[float, PlainValidator(_wrap(parse_frequency))]  # Hz
Ohms = Annotated[float, PlainValidator(_wrap(parse_impedance_real))]  # Ω, real, > 0
VelocityFactor = Annotated[float, PlainValidator(_wrap(parse_velocity_factor))]  # (0, 1]
ComplexOhms = Annotated[complex, PlainValidator(_wrap(parse_complex))]  # Ω
LengthValue = Annotated[Length, PlainValidator(_wrap(parse_length))]
Decibels = Annotated[float, PlainValidator(_decibels)]
PositiveDecibels = Annotated[float, PlainValidator(_positive_db)]
Seconds = Annotated[float, PlainValidator(_duration)]
Henry = Annotated[float, PlainValidator(_unit_value("H", "inductance"))]
Farad = Annotated[float, PlainValidator(_unit_value("F", "capacitance"))]
Count = Annotated[int, Field(strict=True, ge=1)]
Points = Annotated[int, Field(strict=True, ge=2)]
EndName = Literal["open", "short", "either"]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


def _branch(v: Any) -> str:
    if isinstance(v, dict):
        return "<range>"
    if isinstance(v, list):
        return "<choice>"
    return "<fixed>"


class Z0Range(_Model):
    """A free characteristic impedance between ``min`` and ``max`` (Ω)."""

    min: Ohms
    max: Ohms

    @model_validator(mode="after")
    def _ordered(self) -> Z0Range:
        if self.min > self.max:
            raise ValueError(f"min ({self.min:g} Ω) must not exceed max ({self.max:g} Ω)")
        return self


# Z0: fixed (Ω), a list (a discrete choice) or {min, max} (free).
Z0Value = Annotated[
    Annotated[Z0Range, Tag("<range>")] | Annotated[Annotated[list[Ohms], Field(min_length=1)], Tag("<choice>")] | Annotated[Ohms, Tag("<fixed>")],
    Discriminator(_branch),
]


class LengthRange(_Model):
    """A free length between ``min`` and ``max``, both electrical/delay or both physical."""

    min: LengthValue
    max: LengthValue

    @model_validator(mode="after")
    def _one_basis(self) -> LengthRange:
        physical = {self.min.kind == "physical", self.max.kind == "physical"}
        if len(physical) > 1:
            raise ValueError("min and max must both be electrical/delay lengths (deg, wl, rad, ns) "
                             "or both physical lengths (mm, m, in)")
        if self.min.kind == self.max.kind and self.min.value > self.max.value:
            raise ValueError("min must not exceed max")
        return self


LengthSpec = Annotated[
    Annotated[LengthRange, Tag("<range>")] | Annotated[LengthValue, Tag("<fixed>")],
    Discriminator(lambda v: "<range>" if isinstance(v, dict) else "<fixed>"),
]


class SIRange(_Model):
    """A free lumped value between ``min`` and ``max``."""

    min: Annotated[SIValue, PlainValidator(_si_value)]
    max: Annotated[SIValue, PlainValidator(_si_value)]


LumpedValue = Annotated[
    Annotated[SIRange, Tag("<range>")] | Annotated[SIValue, PlainValidator(_si_value), Tag("<fixed>")],
    Discriminator(lambda v: "<range>" if isinstance(v, dict) else "<fixed>"),
]

_PART_UNIT = {"r": "ohm", "l": "H", "c": "F"}
_PART_EXAMPLE = {"r": "47 or 1k", "l": "15nH", "c": "2.2pF"}


# ---------------------------------------------------------------- shelf


def _physical(v: Length) -> Length:
    if v.kind != "physical":
        raise ValueError("give a physical length (mm, cm, m, in)")
    return v


def _physical_positive(v: Length) -> Length:
    _physical(v)
    if v.value <= 0:
        raise ValueError("must be more than zero")
    return v


PhysicalLength = Annotated[LengthValue, AfterValidator(_physical)]
PositivePhysicalLength = Annotated[LengthValue, AfterValidator(_physical_positive)]
_WATTS = re.compile(rf"^\s*({_NUM})\s*([kmM]?)\s*W?\s*$")


def _watts(v: Any) -> float:
    """Watts from ``100``, ``100W``, ``1.5kW``; positive."""
    if isinstance(v, bool):
        raise ValueError(f"expected a power, got {v!r}")
    if isinstance(v, (int, float)):
        x = float(v)
    else:
        m = _WATTS.match(str(v))
        if not m:
            raise ValueError(f"{v!r} is not a power (write e.g. 100W or 1.5kW)")
        x = float(m.group(1)) * {"": 1.0, "k": 1e3, "m": 1e-3, "M": 1e6}[m.group(2)]
    if not math.isfinite(x) or x <= 0:
        raise ValueError(f"must be a positive power, got {v!r}")
    return x


Watts = Annotated[float, PlainValidator(_watts)]


def _relative_permittivity(v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v < 1.0:
        raise ValueError(f"relative permittivity must be a number >= 1, got {v!r}")
    return float(v)


class CutModel(_Model):
    """``cut``: cut to length from a reel, in whole ``step``s, never shorter than ``min`` (cable only)."""

    step: PositivePhysicalLength
    min: PhysicalLength = Length("physical", 0.0)


class StockPieceModel(_Model):
    """A stock piece: ``length`` (physical, the cable itself) and how many are on the shelf."""

    length: PositivePhysicalLength
    count: Count
    cable: Annotated[str, Field(strict=True)] | None = None


class AllowanceModel(_Model):
    """Electrical length a connector pair, adapter or tee adds: ``length`` with its ``vf``, or ``delay``."""

    length: PhysicalLength | None = None
    vf: VelocityFactor = 1.0
    delay: LengthValue | None = None

    @model_validator(mode="after")
    def _one_way(self) -> AllowanceModel:
        if (self.length is None) == (self.delay is None):
            raise ValueError("give either length (with vf) or delay")
        if self.delay is not None and self.delay.kind != "delay":
            raise ValueError("delay: give a time (e.g. 0.15ns)")
        if self.delay is not None and "vf" in self.model_fields_set:
            raise ValueError("vf applies to a physical length, not to a delay")
        return self

    @property
    def delay_s(self) -> float:
        if self.delay is not None:
            return self.delay.value
        assert self.length is not None
        return self.length.delay_s(1.0, self.vf)


class MicrostripModel(_Model):
    """``microstrip``: a printed line on a substrate of permittivity ``er``, height ``h``, copper ``t``."""

    er: Annotated[float, PlainValidator(_relative_permittivity)]
    h: PositivePhysicalLength
    t: PhysicalLength = Length("physical", 0.0)


AllowanceRef = Annotated[
    Annotated[AllowanceModel, Tag("<range>")] | Annotated[str, Field(strict=True), Tag("<fixed>")],
    Discriminator(lambda v: "<range>" if isinstance(v, dict) else "<fixed>"),
]
CableNames = Annotated[
    Annotated[Annotated[list[Annotated[str, Field(strict=True)]], Field(min_length=1)], Tag("<choice>")]
    | Annotated[str, Field(strict=True), Tag("<fixed>")],
    Discriminator(lambda v: "<choice>" if isinstance(v, list) else "<fixed>"),
]
StockSpec = Annotated[
    Annotated[Annotated[list[StockPieceModel], Field(min_length=1)], Tag("<choice>")]
    | Annotated[bool, Field(strict=True), Tag("<fixed>")],
    Discriminator(lambda v: "<choice>" if isinstance(v, list) else "<fixed>"),
]


class ShelfModel(_Model):
    """``shelf``: cables beyond the shipped catalog, stock pieces per cable, and named allowances."""

    catalog: Annotated[str, Field(strict=True)] | None = None
    cables: dict[str, Any] | None = None
    stock: dict[str, Annotated[list[StockPieceModel], Field(min_length=1)]] | None = None
    allowances: dict[str, AllowanceModel] | None = None

    @model_validator(mode="after")
    def _stock_names_cable_once(self) -> ShelfModel:
        for name, pieces in (self.stock or {}).items():
            if any(p.cable is not None for p in pieces):
                raise ValueError(f"stock.{name}: the cable is the key; drop 'cable' from its pieces")
        return self


def _percent(v: Any) -> float:
    """A tolerance as a fraction from ``2%``, ``2 %`` or a plain number of percent (``2``)."""
    if isinstance(v, bool):
        raise ValueError(f"expected a percentage, got {v!r}")
    text = str(v).strip()
    if text.endswith("%"):
        text = text[:-1].strip()
    try:
        x = float(text)
    except ValueError:
        raise ValueError(f"{v!r} is not a percentage (write e.g. 2%)") from None
    if not (0.0 <= x < 100.0):
        raise ValueError(f"must lie in [0, 100) %, got {v!r}")
    return x / 100.0


Percent = Annotated[float, PlainValidator(_percent)]  # fraction


class ToleranceModel(_Model):
    """``tolerance``: build spreads for the yield Monte Carlo.  ``cut`` ± on every cable section;
    ``z0`` and ``vf`` ± (default: each cable's catalog tolerance); ``parts`` ± on lumped values."""

    cut: PhysicalLength = Length("physical", 1e-3)
    z0: Percent | None = None
    vf: Percent | None = None
    parts: Percent = 0.0
    samples: Count = 500


class DriveModel(_Model):
    """``drive``: the power the source makes available (W) into the system impedance."""

    power: Watts


# ---------------------------------------------------------------- elements


class _LineLike(_Model):
    """Keys shared by lines and stubs: length, Z0 and VF, or a shelf cable / printed line."""

    length: LengthSpec | None = None
    z0: Z0Value | None = None
    vf: VelocityFactor = 1.0
    cable: CableNames | None = None
    cut: CutModel | None = None
    stock: StockSpec | None = None
    allowances: list[AllowanceRef] | None = None
    microstrip: MicrostripModel | None = None

    @model_validator(mode="after")
    def _consistent(self) -> _LineLike:
        given = self.model_fields_set
        if self.cable is not None and ({"z0", "vf"} & given):
            raise ValueError("cable sets z0 and vf; drop z0/vf or drop cable")
        if self.microstrip is not None and ({"vf", "cable"} & given):
            raise ValueError("microstrip sets its own velocity factor; drop vf/cable")
        if (self.cut is not None or self.stock not in (None, False)) and self.cable is None:
            raise ValueError("cut and stock need a cable (cable: NAME or a list of names)")
        if self.cut is not None and self.stock not in (None, False):
            raise ValueError("give either cut (cut to length) or stock (fixed pieces), not both")
        if self.stock not in (None, False) and self.length is not None:
            raise ValueError("stock pieces fix the length; drop length")
        if self.length is None and self.stock in (None, False):
            raise ValueError("length: required key is missing")
        return self


class LineModel(_LineLike):
    """``line``: a series transmission line.  ``z0`` defaults to the system impedance."""


class StubModel(_LineLike):
    """``shunt_stub`` / ``series_stub``: a line ended open or short, placed as a branch."""

    end: EndName = "either"


class LumpedModel(_Model):
    """``lumped``: an ideal R (Ω), L (H) or C (F), series or shunt; ``value`` fixed or {min, max}."""

    connection: Literal["series", "shunt"]
    part: Literal["r", "l", "c"]
    value: LumpedValue

    @field_validator("value", mode="after")
    @classmethod
    def _units_suit_part(cls, v: SIValue | SIRange, info: ValidationInfo) -> SIValue | SIRange:
        part = info.data.get("part")
        if part is None:
            return v
        want = _PART_UNIT[part]
        ends = [("", v)] if isinstance(v, SIValue) else [("min: ", v.min), ("max: ", v.max)]
        for label, q in ends:
            if q.unit not in ("", want):
                raise ValueError(f"{label}a value in {q.unit} does not suit part {part!r} "
                                 f"(give {want}, e.g. {_PART_EXAMPLE[part]})")
        if isinstance(v, SIRange) and v.min.value > v.max.value:
            raise ValueError(f"min ({v.min.value:g}) must not exceed max ({v.max.value:g})")
        return v


ELEMENT_KINDS = ("line", "shunt_stub", "series_stub", "lumped")


class ElementEntry(_Model):
    """One list entry of ``network.elements``: exactly one key naming the element kind."""

    line: LineModel | None = None
    shunt_stub: StubModel | None = None
    series_stub: StubModel | None = None
    lumped: LumpedModel | None = None

    @model_validator(mode="before")
    @classmethod
    def _one_kind(cls, data: Any) -> Any:
        if isinstance(data, dict):
            known = [k for k in data if k in ELEMENT_KINDS]
            if len(known) > 1:
                raise ValueError(f"give one element kind per entry, found {', '.join(known)}")
        return data

    @model_validator(mode="after")
    def _some_kind(self) -> ElementEntry:
        if all(getattr(self, k) is None for k in ELEMENT_KINDS):
            raise ValueError(f"give one of {', '.join(ELEMENT_KINDS)}")
        return self

    @property
    def kind(self) -> str:
        return next(k for k in ELEMENT_KINDS if getattr(self, k) is not None)

    @property
    def spec(self) -> LineModel | StubModel | LumpedModel:
        return getattr(self, self.kind)


# ---------------------------------------------------------------- sections


class RLCModel(_Model):
    """Series or parallel R (Ω), L (H), C (F): any subset, at least one."""

    r: Ohms | None = None
    l: Henry | None = None  # noqa: E741 - the trade's letter for inductance
    c: Farad | None = None

    @model_validator(mode="after")
    def _some(self) -> RLCModel:
        if self.r is None and self.l is None and self.c is None:
            raise ValueError("give at least one of r, l, c")
        return self


LOAD_KINDS = ("impedance", "series_rlc", "parallel_rlc", "touchstone")


def _nonnegative_real(z: complex) -> complex:
    if z.real < 0:
        raise ValueError(f"a passive load has no negative resistance, got {z}")
    return z


def _touchstone_name(v: str) -> str:
    if not v.strip():
        raise ValueError("give the path of a 1-port Touchstone file")
    return v


class LoadModel(_Model):
    """``load``: exactly one of the four kinds."""

    impedance: Annotated[ComplexOhms, AfterValidator(_nonnegative_real)] | None = None
    series_rlc: RLCModel | None = None
    parallel_rlc: RLCModel | None = None
    touchstone: Annotated[str, Field(strict=True), AfterValidator(_touchstone_name)] | None = None

    @model_validator(mode="before")
    @classmethod
    def _one_kind(cls, data: Any) -> Any:
        if isinstance(data, dict):
            known = [k for k in data if k in LOAD_KINDS]
            if len(known) > 1:
                raise ValueError(f"give exactly one of {', '.join(LOAD_KINDS)}, found {', '.join(known)}")
        return data

    @model_validator(mode="after")
    def _some_kind(self) -> LoadModel:
        if all(getattr(self, k) is None for k in LOAD_KINDS):
            raise ValueError(f"give one of {', '.join(LOAD_KINDS)}")
        return self

    @property
    def kind(self) -> str:
        return next(k for k in LOAD_KINDS if getattr(self, k) is not None)


class SegmentModel(_Model):
    """One mask segment: ``from``..``to`` (Hz) needs ``return_loss`` (dB); ``max_loss`` (dB) optional."""

    from_: Frequency = Field(alias="from")
    to: Frequency
    return_loss: PositiveDecibels
    max_loss: PositiveDecibels | None = None
    points: Points | None = None

    @model_validator(mode="after")
    def _ascending(self) -> SegmentModel:
        if self.from_ > self.to:
            raise ValueError(f"from ({fmt_hz(self.from_)}) must not exceed to ({fmt_hz(self.to)})")
        return self


class MaskModel(_Model):
    """``mask``: default ``points`` per segment and at least one segment."""

    points: Points = DEFAULT_POINTS
    segments: Annotated[list[SegmentModel], Field(min_length=1)]


def _known_template(v: str) -> str:
    if v not in TEMPLATES:
        raise ValueError(f"unknown template {v!r} (choose from {', '.join(TEMPLATES)})")
    return v


TEMPLATE_OPTIONS = ("z0", "vf", "end", "spacing", "sections", "max_length")
_OPTION_TEMPLATES = {
    "end": ("single_shunt_stub", "single_series_stub", "double_stub", "triple_stub"),
    "spacing": ("double_stub", "triple_stub"),
    "sections": ("stepped_line",),
    "max_length": ("single_shunt_stub", "single_series_stub", "double_stub", "triple_stub"),
}


def _positive_length(v: Length) -> Length:
    if v.value <= 0:
        raise ValueError("must be more than zero")
    return v


class NetworkModel(_Model):
    """``network``: a named ``template`` with options, or an explicit ``elements`` list."""

    template: Annotated[str, Field(strict=True), AfterValidator(_known_template)] | None = None
    z0: Z0Value | None = None
    vf: VelocityFactor | None = None
    end: EndName | None = None
    spacing: Annotated[LengthValue, AfterValidator(_positive_length)] | None = None
    sections: Count | None = None
    max_length: Annotated[LengthValue, AfterValidator(_positive_length)] | None = None
    elements: Annotated[list[ElementEntry], Field(min_length=1)] | None = None

    @model_validator(mode="before")
    @classmethod
    def _template_or_elements(cls, data: Any) -> Any:
        if not isinstance(data, dict):
            return data
        if "template" in data and "elements" in data:
            raise ValueError("give either template or elements, not both")
        if "elements" in data:
            opts = [k for k in TEMPLATE_OPTIONS if k in data]
            if opts:
                raise ValueError(f"{', '.join(opts)}: template options do not apply to an elements list "
                                 "(set them on each element)")
        tpl = data.get("template")
        if isinstance(tpl, str) and tpl in TEMPLATES:
            wrong = [k for k, allowed in _OPTION_TEMPLATES.items() if k in data and tpl not in allowed]
            if wrong:
                raise ValueError(f"{', '.join(wrong)}: not an option of template {tpl}")
        return data

    @model_validator(mode="after")
    def _some_network(self) -> NetworkModel:
        if self.template is None and self.elements is None:
            raise ValueError("give a template or a list of elements")
        return self


class SearchModel(_Model):
    """``search``: effort, budget and what to optimise."""

    trials: Count = 24
    time: Seconds | None = None
    seed: Annotated[int, Field(strict=True, ge=0)] = 0
    target_margin: Decibels | None = None
    keep: Count = 5
    population: Annotated[int, Field(strict=True, ge=2)] = 64
    generations: Count = 60
    objective: Literal["margin", "yield", "pareto"] = "margin"


NAME_PATTERN = r"^[A-Za-z0-9_.-]+$"


def _study_name(v: str) -> str:
    if not re.match(NAME_PATTERN, v):
        raise ValueError(f"{v!r} may hold only letters, digits, '_', '.' and '-'")
    return v


class StudyModel(_Model):
    """A whole study file."""

    name: Annotated[str, Field(strict=True), AfterValidator(_study_name)] | None = None
    description: Annotated[str, Field(strict=True)] = ""
    system: Ohms = 50.0
    reference: Frequency | None = None
    load: LoadModel
    mask: MaskModel
    network: NetworkModel
    search: SearchModel = SearchModel()
    shelf: ShelfModel | None = None
    drive: DriveModel | None = None
    tolerance: ToleranceModel = ToleranceModel()


SECTION_MODELS: dict[str, type[BaseModel]] = {
    "load": LoadModel, "mask": MaskModel, "network": NetworkModel, "search": SearchModel,
    "shelf": ShelfModel, "drive": DriveModel, "tolerance": ToleranceModel,
}
