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
from dataclasses import dataclass
from typing import Annotated, Any, ClassVar, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    ConfigDict,
    Discriminator,
    Field,
    PlainValidator,
    StrictFloat,
    StrictInt,
    StrictStr,
    Tag,
    TypeAdapter,
    ValidationInfo,
    WithJsonSchema,
    field_validator,
    model_validator,
)

from optmatch.domain.mask import DEFAULT_POINTS
from optmatch.domain.network import ElementKind
from optmatch.domain.templates import TEMPLATES
from optmatch.errors import OptmatchError, did_you_mean
from optmatch.studyfile import limits
from optmatch.units import (
    CAPACITANCE,
    DECIBELS,
    DURATION,
    FREQUENCY,
    IMPEDANCE,
    INDUCTANCE,
    LENGTH_UNITS,
    LOSS,
    NUMBER,
    PERCENT,
    POWER,
    RESISTANCE,
    RETURN_LOSS,
    Length,
    QuantityKind,
    format_hz,
    parse_complex,
    parse_length,
    parse_percent,
    parse_quantity,
    parse_velocity_factor,
    parse_vswr,
    quantity_pattern,
    vswr_to_return_loss_db,
)

# Location parts that name a union branch, not a key; the loader drops them from key paths.
BRANCH_MARK = "<"
fmt_hz = format_hz


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


def _json_quantity(kind: QuantityKind) -> dict:
    """JSON Schema of a quantity of ``kind``: a string with one of its units (or a bare number where
    the kind accepts one), generated from the same unit table the parser uses."""
    text = {"type": "string", "pattern": quantity_pattern(kind.units, kind.bare is not None)}
    body: dict = {"anyOf": [{"type": "number"}, text]} if kind.bare is not None else text
    bare = f"; a bare number is {kind.bare}" if kind.bare is not None else "; a unit is required"
    body["description"] = f"{kind.name} ({kind.listed()}{bare})"
    return body


def _parser(kind: QuantityKind) -> PlainValidator:
    """The validator of a quantity of ``kind``: text with a unit (or a bare number where the kind
    takes one) to its SI number."""
    return PlainValidator(_wrap(lambda v, what: parse_quantity(v, kind, what)))


_NUMBER_JSON = {"anyOf": [{"type": "number"}, {"type": "string", "pattern": rf"^\s*{NUMBER}\s*$"}]}
Frequency = Annotated[float, _parser(FREQUENCY), WithJsonSchema(_json_quantity(FREQUENCY))]  # Hz
Ohms = Annotated[float, _parser(IMPEDANCE), WithJsonSchema(_json_quantity(IMPEDANCE))]  # Ω, real, > 0
Resistance = Annotated[float, _parser(RESISTANCE), WithJsonSchema(_json_quantity(RESISTANCE))]  # Ω
Henry = Annotated[float, _parser(INDUCTANCE), WithJsonSchema(_json_quantity(INDUCTANCE))]
Farad = Annotated[float, _parser(CAPACITANCE), WithJsonSchema(_json_quantity(CAPACITANCE))]
Decibels = Annotated[float, _parser(DECIBELS), WithJsonSchema(_json_quantity(DECIBELS))]
ReturnLossDb = Annotated[float, _parser(RETURN_LOSS), WithJsonSchema(_json_quantity(RETURN_LOSS))]
LossDb = Annotated[float, _parser(LOSS), WithJsonSchema(_json_quantity(LOSS))]
Seconds = Annotated[float, _parser(DURATION), WithJsonSchema(_json_quantity(DURATION))]
Watts = Annotated[float, _parser(POWER), WithJsonSchema(_json_quantity(POWER))]
Percent = Annotated[float, PlainValidator(_wrap(parse_percent)), WithJsonSchema(_json_quantity(PERCENT))]  # fraction
VelocityFactor = Annotated[float, PlainValidator(_wrap(parse_velocity_factor)),
                           WithJsonSchema({**_NUMBER_JSON, "description": "velocity factor, 0 to 1"})]
Vswr = Annotated[float, PlainValidator(_wrap(parse_vswr)),
                 WithJsonSchema({"anyOf": [{"type": "number", "exclusiveMinimum": 1},
                                           {"type": "string", "pattern": rf"^\s*{NUMBER}\s*(?::1)?\s*$"}],
                                 "description": "VSWR, more than 1 (e.g. 1.5 or '1.5:1')"})]
ComplexOhms = Annotated[complex, PlainValidator(_wrap(parse_complex)),
                        WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string"}],
                                        "description": "complex impedance in Ω, e.g. 60-j80 or 60-80j"})]
LengthValue = Annotated[Length, PlainValidator(_wrap(parse_length)),
                        WithJsonSchema({"type": "string", "pattern": quantity_pattern(LENGTH_UNITS, False),
                                        "description": "length: electrical (deg, wl, rad), physical (mm, cm, "
                                                       "m, in) or a delay (ns, ps); a unit is required"})]
Count = Annotated[int, Field(strict=True, ge=1)]
Points = Annotated[int, Field(strict=True, ge=2, le=limits.MAX_POINTS_PER_SEGMENT)]
EndName = Literal["open", "short", "either"]
Name = Annotated[str, Field(strict=True, min_length=1, max_length=limits.MAX_NAME)]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class _OneOf(_Model):
    """A mapping that names exactly one of ``KINDS`` (an element kind, a load kind): more than one is
    refused before the fields are read (``MANY``), none after (:meth:`_need_a_kind`)."""

    KINDS: ClassVar[tuple[str, ...]] = ()
    MANY: ClassVar[str] = "give exactly one of {kinds}, found {found}"

    @model_validator(mode="before")
    @classmethod
    def _one_kind(cls, data: Any) -> Any:
        if isinstance(data, dict):
            known = [k for k in data if k in cls.KINDS]
            if len(known) > 1:
                raise ValueError(cls.MANY.format(kinds=", ".join(cls.KINDS), found=", ".join(known)))
        return data

    def _need_a_kind(self) -> None:
        if all(getattr(self, k) is None for k in self.KINDS):
            raise ValueError(f"give one of {', '.join(self.KINDS)}")

    @property
    def kind(self) -> str:
        return next(k for k in self.KINDS if getattr(self, k) is not None)


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
    Annotated[Z0Range, Tag("<range>")]
    | Annotated[Annotated[list[Ohms], Field(min_length=1, max_length=64)], Tag("<choice>")]
    | Annotated[Ohms, Tag("<fixed>")],
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

# A lumped value as typed; its unit is checked against the part (r, l or c) by LumpedModel.
RawValue = Annotated[
    StrictStr | StrictInt | StrictFloat,
    WithJsonSchema({"anyOf": [{"type": "number"}, {"type": "string", "pattern": quantity_pattern(
        {**RESISTANCE.units, **INDUCTANCE.units, **CAPACITANCE.units}, True)}],
        "description": "r in Ω (a bare number is Ω), l in H (e.g. 15nH), c in F (e.g. 2.2pF)"}),
]


class RawRange(_Model):
    """A free lumped value between ``min`` and ``max`` (units as the part needs)."""

    min: RawValue
    max: RawValue


LumpedRaw = Annotated[
    Annotated[RawRange, Tag("<range>")] | Annotated[RawValue, Tag("<fixed>")],
    Discriminator(lambda v: "<range>" if isinstance(v, dict) else "<fixed>"),
]


@dataclass(frozen=True)
class PartValue:
    """A lumped value in SI units (Ω, H or F): fixed when ``lo == hi``."""

    lo: float
    hi: float


_PART_KIND = {"r": RESISTANCE, "l": INDUCTANCE, "c": CAPACITANCE}


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


def _relative_permittivity(v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or not 1.0 <= v <= 100.0:
        raise ValueError(f"relative permittivity must be a number from 1 to 100, got {v!r}")
    return float(v)


class CutModel(_Model):
    """``cut``: cut to length from a reel, in whole ``step``s, never shorter than ``min`` (cable only)."""

    step: PositivePhysicalLength
    min: PhysicalLength = Field(default="0mm", validate_default=True)


class StockPieceModel(_Model):
    """A stock piece: ``length`` (physical, the cable itself) and how many are on the shelf."""

    length: PositivePhysicalLength
    count: Annotated[int, Field(strict=True, ge=1, le=limits.MAX_STOCK_COUNT)]
    cable: Name | None = None


class AllowanceModel(_Model):
    """Electrical length a connector pair, adapter or tee adds: ``length`` with its ``vf``, or ``delay``;
    optionally its peak RF voltage rating ``max_voltage`` (V peak, as in the cable catalog)."""

    length: PhysicalLength | None = None
    vf: VelocityFactor = 1.0
    delay: LengthValue | None = None
    max_voltage: Annotated[float, Field(gt=0, allow_inf_nan=False)] | None = None

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

    er: Annotated[float, PlainValidator(_relative_permittivity),
                  WithJsonSchema({"type": "number", "minimum": 1, "maximum": 100})]
    h: PositivePhysicalLength
    t: PhysicalLength = Field(default="0mm", validate_default=True)


AllowanceRef = Annotated[
    Annotated[AllowanceModel, Tag("<range>")] | Annotated[Name, Tag("<fixed>")],
    Discriminator(lambda v: "<range>" if isinstance(v, dict) else "<fixed>"),
]
AllowanceList = Annotated[list[AllowanceRef], Field(max_length=64)]
CableNames = Annotated[
    Annotated[Annotated[list[Name], Field(min_length=1, max_length=64)], Tag("<choice>")]
    | Annotated[Name, Tag("<fixed>")],
    Discriminator(lambda v: "<choice>" if isinstance(v, list) else "<fixed>"),
]
StockSpec = Annotated[
    Annotated[Annotated[list[StockPieceModel], Field(min_length=1, max_length=1000)], Tag("<choice>")]
    | Annotated[bool, Field(strict=True), Tag("<fixed>")],
    Discriminator(lambda v: "<choice>" if isinstance(v, list) else "<fixed>"),
]


class ShelfModel(_Model):
    """``shelf``: cables beyond the shipped catalog, stock pieces per cable, and named allowances."""

    catalog: Name | None = None
    cables: dict[str, Any] | None = None
    stock: dict[str, Annotated[list[StockPieceModel], Field(min_length=1, max_length=1000)]] | None = None
    allowances: dict[str, AllowanceModel] | None = None

    @model_validator(mode="after")
    def _stock_names_cable_once(self) -> ShelfModel:
        for name, pieces in (self.stock or {}).items():
            if any(p.cable is not None for p in pieces):
                raise ValueError(f"stock.{name}: the cable is the key; drop 'cable' from its pieces")
        return self


class ToleranceModel(_Model):
    """``tolerance``: build spreads for the yield Monte Carlo.  ``cut`` ± on every cable section;
    ``z0`` and ``vf`` ± (default: each cable's catalog tolerance); ``parts`` ± on lumped values."""

    cut: PhysicalLength = Field(default="1mm", validate_default=True)
    z0: Percent | None = None
    vf: Percent | None = None
    parts: Percent = Field(default="0%", validate_default=True)
    samples: Annotated[int, Field(strict=True, ge=1, json_schema_extra={"maximum": limits.MAX_SAMPLES})] = 500


class DriveModel(_Model):
    """``drive``: the power the source makes available (W) into the system impedance."""

    power: Watts


# ---------------------------------------------------------------- elements

SHELF_KEYS = ("cable", "cut", "stock", "allowances")


def shelf_consistency(given: set[str], cable: Any, cut: Any, stock: Any) -> str | None:
    """What is wrong with a set of line keys (None when nothing): cable vs z0/vf, cut vs stock."""
    if cable is not None and ({"z0", "vf"} & given):
        return "cable sets z0 and vf; drop z0/vf or drop cable"
    if (cut is not None or stock not in (None, False)) and cable is None:
        return "cut and stock need a cable (cable: NAME or a list of names)"
    if cut is not None and stock not in (None, False):
        return "give either cut (cut to length) or stock (fixed pieces), not both"
    return None


class _LineLike(_Model):
    """Keys shared by lines and stubs: length, Z0 and VF, or a shelf cable / printed line."""

    length: LengthSpec | None = None
    z0: Z0Value | None = None
    vf: VelocityFactor = 1.0
    cable: CableNames | None = None
    cut: CutModel | None = None
    stock: StockSpec | None = None
    allowances: AllowanceList | None = None
    microstrip: MicrostripModel | None = None

    @model_validator(mode="after")
    def _consistent(self) -> _LineLike:
        given = self.model_fields_set
        wrong = shelf_consistency(set(given), self.cable, self.cut, self.stock)
        if wrong:
            raise ValueError(wrong)
        if self.microstrip is not None and ({"vf", "cable"} & given):
            raise ValueError("microstrip sets its own velocity factor; drop vf/cable")
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
    """``lumped``: an ideal R (Ω), L (H) or C (F), series or shunt; ``value`` fixed or {min, max}.

    After validation ``value`` holds a :class:`PartValue` in SI units."""

    connection: Literal["series", "shunt"]
    part: Literal["r", "l", "c"]
    value: LumpedRaw

    @field_validator("value", mode="after")
    @classmethod
    def _units_suit_part(cls, v: Any, info: ValidationInfo) -> Any:
        part = info.data.get("part")
        if part is None:
            return v
        kind = _PART_KIND[part]
        try:
            if isinstance(v, RawRange):
                lo = parse_quantity(v.min, kind, "min")
                hi = parse_quantity(v.max, kind, "max")
                if lo > hi:
                    raise ValueError(f"min ({lo:g}) must not exceed max ({hi:g})")
                return PartValue(lo, hi)
            x = parse_quantity(v, kind, "value")
        except OptmatchError as exc:
            raise ValueError(f"{_plain(exc)} (part {part!r} takes {kind.name})") from None
        return PartValue(x, x)

    @property
    def part_value(self) -> PartValue:
        """``value`` as validation left it, in SI units."""
        assert isinstance(self.value, PartValue)
        return self.value


ELEMENT_KINDS: tuple[ElementKind, ...] = ("line", "shunt_stub", "series_stub", "lumped")


class ElementEntry(_OneOf):
    """One list entry of ``network.elements``: exactly one key naming the element kind."""

    model_config = ConfigDict(json_schema_extra={"minProperties": 1, "maxProperties": 1})

    line: LineModel | None = None
    shunt_stub: StubModel | None = None
    series_stub: StubModel | None = None
    lumped: LumpedModel | None = None

    KINDS: ClassVar[tuple[str, ...]] = ELEMENT_KINDS
    MANY: ClassVar[str] = "give one element kind per entry, found {found}"

    @model_validator(mode="after")
    def _some_kind(self) -> ElementEntry:
        self._need_a_kind()
        return self

    @property
    def element_kind(self) -> ElementKind:
        """The kind as the network model names it."""
        return next(k for k in ELEMENT_KINDS if getattr(self, k) is not None)

    @property
    def spec(self) -> LineModel | StubModel | LumpedModel:
        return getattr(self, self.kind)


# ---------------------------------------------------------------- sections


class RLCModel(_Model):
    """Series or parallel R (Ω), L (H), C (F): any subset, at least one."""

    r: Resistance | None = None
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


class LoadModel(_OneOf):
    """``load``: exactly one of the four kinds."""

    model_config = ConfigDict(json_schema_extra={"minProperties": 1, "maxProperties": 1})

    impedance: Annotated[ComplexOhms, AfterValidator(_nonnegative_real)] | None = None
    series_rlc: RLCModel | None = None
    parallel_rlc: RLCModel | None = None
    touchstone: Annotated[str, Field(strict=True, max_length=4096), AfterValidator(_touchstone_name)] | None = None

    KINDS: ClassVar[tuple[str, ...]] = LOAD_KINDS

    @model_validator(mode="after")
    def _some_kind(self) -> LoadModel:
        self._need_a_kind()
        return self


LOAD_NAME_PATTERN = r"^[A-Za-z0-9_.-]+$"
LOAD_NAME_JSON_PATTERN = r"^(?!\.+$)[A-Za-z0-9_.-]{1,64}$"
MAX_LOAD_NAME = 64


def load_name_problem(v: str) -> str | None:
    """Why ``v`` cannot name a load (it names files and table rows), or None when it can."""
    if not v:
        return "is empty"
    if len(v) > MAX_LOAD_NAME:
        return f"is {len(v)} characters long; at most {MAX_LOAD_NAME}"
    if not re.match(LOAD_NAME_PATTERN, v):
        return f"{_short_text(v)} may hold only letters, digits, '_', '.' and '-'"
    if set(v) == {"."}:
        return f"{v!r} is not a name; give letters or digits"
    return None


def _load_name(v: str) -> str:
    wrong = load_name_problem(v)
    if wrong:
        raise ValueError(wrong)
    return v


def _file_pattern(v: str) -> str:
    text = v.strip()
    if not text:
        raise ValueError("give a file pattern relative to the study file, e.g. measured/unit_*.s1p")
    if text.startswith(("/", "\\")) or re.match(r"^[A-Za-z]:", text):
        raise ValueError("give a pattern relative to the study file's folder, not an absolute path")
    parts = re.split(r"[/\\]", text)
    if ".." in parts:
        raise ValueError("a pattern may not climb out of the study file's folder ('..')")
    if any("**" in part for part in parts):
        raise ValueError("a pattern may not search folders recursively ('**'); name the folder")
    return text


LoadName = Annotated[str, Field(strict=True), AfterValidator(_load_name),
                     WithJsonSchema({"type": "string", "pattern": LOAD_NAME_JSON_PATTERN,
                                     "description": "the load's name (letters, digits, _ . -)"})]
Weight = Annotated[float, Field(gt=0, le=1e6, allow_inf_nan=False,
                                description="the load's weight in the share objective (more than 0)")]
FilePattern = Annotated[str, Field(strict=True, max_length=4096), AfterValidator(_file_pattern),
                        WithJsonSchema({"type": "string", "description": "Touchstone files matching this pattern "
                                        "(* ? [..]), relative to the study file's folder and inside it; each "
                                        "file is a load named by its file name"})]
ENTRY_KINDS = (*LOAD_KINDS, "files")


class LoadEntryModel(_OneOf):
    """One entry of ``loads``: a named load (one of the four kinds, as ``load`` takes them) or a
    file pattern (``files``, every matching Touchstone file a load named by its file name); an
    optional ``weight`` (> 0) counts in the share objective."""

    model_config = ConfigDict(json_schema_extra={"oneOf": [
        {"required": ["files"], "not": {"required": ["name"]}},
        {"required": ["name"], "not": {"required": ["files"]}}]})

    name: LoadName | None = None
    weight: Weight = 1.0
    impedance: Annotated[ComplexOhms, AfterValidator(_nonnegative_real)] | None = None
    series_rlc: RLCModel | None = None
    parallel_rlc: RLCModel | None = None
    touchstone: Annotated[str, Field(strict=True, max_length=4096), AfterValidator(_touchstone_name)] | None = None
    files: FilePattern | None = None

    KINDS: ClassVar[tuple[str, ...]] = ENTRY_KINDS

    @model_validator(mode="after")
    def _some_kind(self) -> LoadEntryModel:
        self._need_a_kind()
        if self.files is not None and self.name is not None:
            raise ValueError("files: each matching file is named by its file name; drop name")
        if self.files is None and self.name is None:
            raise ValueError("name: required key is missing (every load needs a name)")
        return self

    def as_load(self) -> LoadModel:
        """The entry's load as ``load:`` would take it (not for ``files``)."""
        return LoadModel.model_construct(**{k: getattr(self, k) for k in LOAD_KINDS})


class SegmentModel(_Model):
    """One mask segment: ``from``..``to`` (Hz) needs ``return_loss`` (dB) or ``vswr`` (exactly one);
    ``max_loss`` (dB) is optional."""

    model_config = ConfigDict(json_schema_extra={"oneOf": [{"required": ["return_loss"]}, {"required": ["vswr"]}]})

    from_: Frequency = Field(alias="from")
    to: Frequency
    return_loss: ReturnLossDb | None = None
    vswr: Vswr | None = None
    max_loss: LossDb | None = None
    points: Points | None = None

    @model_validator(mode="after")
    def _ascending(self) -> SegmentModel:
        if self.from_ > self.to:
            raise ValueError(f"from ({fmt_hz(self.from_)}) must not exceed to ({fmt_hz(self.to)})")
        if (self.return_loss is None) == (self.vswr is None):
            raise ValueError("give return_loss (dB) or vswr, exactly one of the two")
        return self

    @property
    def min_rl_db(self) -> float:
        """The requirement as return loss (dB), from whichever form was given."""
        if self.return_loss is not None:
            return self.return_loss
        assert self.vswr is not None
        return vswr_to_return_loss_db(self.vswr)


class MaskModel(_Model):
    """``mask``: default ``points`` per segment and at least one segment."""

    points: Points = DEFAULT_POINTS
    segments: Annotated[list[SegmentModel], Field(min_length=1, max_length=limits.MAX_SEGMENTS)]


def _known_template(v: str) -> str:
    if v not in TEMPLATES:
        raise ValueError(f"unknown template {v!r}{did_you_mean(v, TEMPLATES, quote=True)} "
                         f"(choose from {', '.join(TEMPLATES)})")
    return v


class RoleModel(_Model):
    """Shelf keys for one role of a template's elements (``lines`` or ``stubs``); they replace the
    template-level keys of the same name for that role."""

    cable: CableNames | None = None
    cut: CutModel | None = None
    stock: StockSpec | None = None
    allowances: AllowanceList | None = None


TEMPLATE_OPTIONS = ("z0", "vf", "end", "spacing", "sections", "max_length", *SHELF_KEYS, "lines", "stubs")
SPECIFIC_OPTIONS = ("end", "spacing", "sections", "max_length", "stubs")  # taken as each template's registry entry says


def _positive_length(v: Length) -> Length:
    if v.value <= 0:
        raise ValueError("must be more than zero")
    return v


class NetworkModel(_Model):
    """``network``: a named ``template`` with options, or an explicit ``elements`` list.

    A template takes the shelf keys ``cable``, ``cut``, ``stock`` and ``allowances`` for every
    element it makes, and ``lines:`` / ``stubs:`` hold per-role replacements of them."""

    model_config = ConfigDict(json_schema_extra={"oneOf": [{"required": ["template"]}, {"required": ["elements"]}]})

    template: Annotated[str, Field(strict=True), AfterValidator(_known_template)] | None = None
    z0: Z0Value | None = None
    vf: VelocityFactor | None = None
    end: EndName | None = None
    spacing: Annotated[LengthValue, AfterValidator(_positive_length)] | None = None
    sections: Annotated[int, Field(strict=True, ge=1, le=limits.MAX_SECTIONS)] | None = None
    max_length: Annotated[LengthValue, AfterValidator(_positive_length)] | None = None
    cable: CableNames | None = None
    cut: CutModel | None = None
    stock: StockSpec | None = None
    allowances: AllowanceList | None = None
    lines: RoleModel | None = None
    stubs: RoleModel | None = None
    elements: Annotated[list[ElementEntry], Field(min_length=1, max_length=limits.MAX_ELEMENTS)] | None = None

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
            wrong = [k for k in SPECIFIC_OPTIONS if k in data and k not in TEMPLATES[tpl].options]
            if wrong:
                raise ValueError(f"{', '.join(wrong)}: not an option of template {tpl}")
        return data

    @model_validator(mode="after")
    def _some_network(self) -> NetworkModel:
        if self.template is None and self.elements is None:
            raise ValueError("give a template or a list of elements")
        if self.template is not None:
            for role in ("lines", "stubs"):
                keys = self.role_keys(role)
                given = set(self.model_fields_set)
                wrong = shelf_consistency(given, keys["cable"], keys["cut"], keys["stock"])
                if wrong:
                    raise ValueError(f"{role} of template {self.template}: {wrong}")
        return self

    def role_keys(self, role: str) -> dict[str, Any]:
        """The shelf keys in force for ``role`` (``lines`` or ``stubs``): the role's own, else the template's."""
        own: RoleModel | None = getattr(self, role)
        out = {k: getattr(self, k) for k in SHELF_KEYS}
        if own is not None:
            out.update({k: getattr(own, k) for k in own.model_fields_set})
        return out


class SearchModel(_Model):
    """``search``: effort, budget and what to optimise."""

    trials: Annotated[int, Field(strict=True, ge=1, le=limits.MAX_TRIALS)] = 24
    time: Seconds | None = None
    seed: Annotated[int, Field(strict=True, ge=0, le=limits.MAX_SEED)] = 0
    target_margin: Decibels | None = None
    keep: Annotated[int, Field(strict=True, ge=1, le=limits.MAX_KEEP)] = 5
    # The upper bounds of population and samples are checked by the loader against a memory estimate.
    population: Annotated[int, Field(strict=True, ge=2, json_schema_extra={"maximum": limits.MAX_POPULATION})] = 64
    generations: Annotated[int, Field(strict=True, ge=1, le=limits.MAX_GENERATIONS)] = 60
    objective: Literal["margin", "yield", "pareto"] = "margin"
    loads: Annotated[Literal["worst", "share"], Field(
        description="with several loads: rank by the worst margin over every load (worst), or by the "
                    "weighted share of loads that meet the mask, ties broken by the worst margin (share)")] = "worst"

    @model_validator(mode="after")
    def _share_with_margin(self) -> SearchModel:
        if self.loads == "share" and self.objective != "margin":
            raise ValueError(f"loads: share ranks by the share of loads that meet the mask, which applies to "
                             f"objective: margin; objective: {self.objective} "
                             + ("counts every build on every load already" if self.objective == "yield"
                                else "trades the worst margin against length"))
        return self


NAME_PATTERN = r"^[A-Za-z0-9_.-]+$"
NAME_JSON_PATTERN = r"^(?!\.+$)[A-Za-z0-9_.-]{1,100}$"


def study_name_problem(v: str) -> str | None:
    """Why ``v`` cannot name a study (and so its results folder), or None when it can."""
    if not v:
        return "is empty"
    if len(v) > limits.MAX_NAME:
        return f"is {len(v)} characters long; at most {limits.MAX_NAME}"
    if not re.match(NAME_PATTERN, v):
        return f"{_short_text(v)} may hold only letters, digits, '_', '.' and '-'"
    if set(v) == {"."}:
        return f"{v!r} names a folder above or at the results folder; give a name of letters or digits"
    return None


def _short_text(v: str, limit: int = 40) -> str:
    text = repr(v)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _study_name(v: str) -> str:
    wrong = study_name_problem(v)
    if wrong:
        raise ValueError(wrong)
    return v


ALTERNATIVE_PATTERN = r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,39}$"
Alternatives = Annotated[
    dict[Annotated[str, Field(strict=True, pattern=ALTERNATIVE_PATTERN)], NetworkModel],
    Field(min_length=1, max_length=limits.MAX_ALTERNATIVES,
          description="several named networks for the same load and mask, each searched and ranked side by "
                      "side (instead of network:); a name is letters, digits, '_', '.' and '-', at most 40")]


class StudyModel(_Model):
    """A whole study file: exactly one of ``load`` (one load) and ``loads`` (several), and exactly one of
    ``network`` (one network) and ``alternatives`` (several named networks)."""

    model_config = ConfigDict(title="optmatch study file",
                              json_schema_extra={"allOf": [
                                  {"oneOf": [{"required": ["load"]}, {"required": ["loads"]}]},
                                  {"oneOf": [{"required": ["network"]}, {"required": ["alternatives"]}]}]})

    name: Annotated[str, Field(strict=True), AfterValidator(_study_name),
                    WithJsonSchema({"type": "string", "pattern": NAME_JSON_PATTERN,
                                    "description": "study name: names results/<name>/"})] | None = None
    description: Annotated[str, Field(strict=True, max_length=limits.MAX_DESCRIPTION)] = ""
    system: Ohms = 50.0
    reference: Frequency | None = None
    load: LoadModel | None = None
    loads: Annotated[list[LoadEntryModel], Field(min_length=1, max_length=limits.MAX_LOADS)] | None = None
    mask: MaskModel
    network: NetworkModel | None = None
    alternatives: Alternatives | None = None
    search: SearchModel = Field(default_factory=SearchModel)
    shelf: ShelfModel | None = None
    drive: DriveModel | None = None
    tolerance: ToleranceModel = Field(default_factory=ToleranceModel)

    def load_key_problem(self) -> tuple[str, str] | None:
        """(key, problem) when the file gives both ``load`` and ``loads``, or neither (checked by the
        loader, so that the rest of the file is still checked)."""
        if self.load is not None and self.loads is not None:
            return "loads", "give either load (one load) or loads (several), not both"
        if self.load is None and self.loads is None:
            return "load", "required key is missing (or give loads: for several loads)"
        return None


SECTION_MODELS: dict[str, Any] = {
    "load": LoadModel,
    "loads": TypeAdapter(Annotated[list[LoadEntryModel], Field(min_length=1, max_length=limits.MAX_LOADS)]),
    "mask": MaskModel, "network": NetworkModel, "search": SearchModel,
    "shelf": ShelfModel, "drive": DriveModel, "tolerance": ToleranceModel,
}


def json_schema() -> dict:
    """The study file's JSON Schema (draft 2020-12), generated from these models so it cannot drift."""
    body = StudyModel.model_json_schema(by_alias=True, mode="validation")
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": "optmatch study file",
        "description": "A study for optmatch (optmatch check FILE validates it fully: units, names, files "
                       "and bounds). Generated by `optmatch schema`; do not edit by hand.",
        **{k: v for k, v in body.items() if k not in ("title", "description")},
    }
