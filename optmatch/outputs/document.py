"""The summary document of one study: one typed record of everything its readers show.

Built once per study by ``running/results.py`` (one ``performance()`` call per design), written as
``summary.json``, and read back with :func:`read_summary` by every reader: the terminal tables,
``summary.md``, ``designs.csv``, the cut list, the batch report and study pages, and the explorer.
``batch.json`` (the state of a batch) has its reader here too, :func:`read_batch_state`.

Plain frozen dataclasses; pydantic checks the shape when a file is read back, so a file of the
wrong shape gives one line naming the file and the key, never a traceback.

Units are in the field names (``_hz``, ``_db``, ``_ohm``, ``_mm``, ``_deg`` at ``reference_hz``,
``_wl``, ``_v`` peak, ``_a`` peak, ``_w``).  JSON has no infinity: a return loss, VSWR or margin
that is infinite (a perfect match, or a total reflection for VSWR) is written as ``null`` and reads
back as ``inf`` (the :data:`Db` fields).
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Annotated, Any

from pydantic import BeforeValidator, TypeAdapter, ValidationError

from optmatch.domain.design import ElementReport
from optmatch.domain.tolerance import Robustness, Spread
from optmatch.errors import OptmatchError

FORMAT = 2  # summary.json layout; a file of another format is refused with a one-line message

PASS = "PASS"
FAIL = "FAIL"  # misses the mask
FAIL_RATING = "FAIL rating"  # meets the mask but is over a cable's or connector's rating at the drive power
VERDICTS = (PASS, FAIL, FAIL_RATING)


def _null_is_inf(value: object) -> object:
    return math.inf if value is None else value


Db = Annotated[float, BeforeValidator(_null_is_inf)]
"""A float that may be +inf (written as JSON null)."""


class ResultsFileError(OptmatchError):
    """A results file (summary.json, batch.json) that cannot be read or has the wrong shape."""


def vswr_of_rl(rl_db: float) -> float:
    """VSWR of a return loss in dB (``inf`` at 0 dB, 1 for an infinite return loss)."""
    if rl_db == math.inf:
        return 1.0
    rho = 10.0 ** (-rl_db / 20.0)
    return (1.0 + rho) / (1.0 - rho) if rho < 1.0 else math.inf


def passes(verdict: str | None) -> bool:
    """Whether a verdict is a pass (anything else sets exit code 1)."""
    return verdict == PASS


# ---------------------------------------------------------------- parts


@dataclass(frozen=True)
class MaskSegment:
    """One segment of the mask as resolved: Hz and dB (the VSWR is the same requirement)."""

    f_lo_hz: float
    f_hi_hz: float
    min_rl_db: float
    max_vswr: Db
    max_loss_db: float | None = None
    points: int = 0


@dataclass(frozen=True)
class LoadPoint:
    """The bare load at one frequency: impedance (Ω), return loss (dB) and VSWR against the system."""

    label: str
    freq_hz: float
    r_ohm: float
    x_ohm: float
    return_loss_db: Db
    vswr: Db


@dataclass(frozen=True)
class LoadView:
    """The load alone, with no network: at the band edges and centre, and against the mask."""

    source: str
    points: tuple[LoadPoint, ...]
    unmatched_margin_db: Db
    worst_return_loss_db: Db
    worst_freq_hz: float
    meets_mask: bool


@dataclass(frozen=True)
class LoadCase:
    """One of a study's several loads: its name, weight, where it came from, and the load alone."""

    name: str
    weight: float
    source: str
    alone: LoadView


@dataclass(frozen=True)
class LoadMargin:
    """One design on one of several loads: the margin (dB), the worst return loss and where, and
    the share of simulated builds that meet the mask on that load (None without a Monte Carlo)."""

    load: str
    margin_db: Db
    worst_return_loss_db: Db
    worst_freq_hz: float
    meets_mask: bool
    yield_frac: float | None = None


@dataclass(frozen=True)
class SectionRating:
    """One line or stub at the drive power against its cable's (and connectors') ratings.

    Peak RF voltage and current anywhere along the section and over the band; ``heating_w`` is the
    hottest point stated as the power of a matched line that heats as much, against the cable's
    power rating derated to that frequency.  ``*_ok`` is None where there is no rating to check.
    """

    element: int
    part: str
    cable: str | None
    peak_voltage_v: float
    voltage_freq_hz: float
    peak_current_a: float
    dissipated_w: float
    open_end_voltage_v: float | None = None
    max_voltage_v: float | None = None
    heating_w: float | None = None
    heating_freq_hz: float | None = None
    power_rating_w: float | None = None
    connector_max_voltage_v: float | None = None
    voltage_ok: bool | None = None
    power_ok: bool | None = None
    connector_ok: bool | None = None


@dataclass(frozen=True)
class PowerCheck:
    """A design driven at ``drive_w`` available: every section's stress and the ratings it exceeds."""

    drive_w: float
    accepted_w_min: float
    delivered_w_min: float
    delivered_w_max: float
    sections: tuple[SectionRating, ...]
    over_rating: tuple[str, ...]  # one line per rating exceeded (empty: within every rating)
    note: str = ""

    @property
    def within(self) -> bool:
        return not self.over_rating


@dataclass(frozen=True)
class Choice:
    """The discrete choices of a design: medium option and stub end (True = short) per element."""

    medium: tuple[int, ...]
    short: tuple[bool, ...]


@dataclass(frozen=True)
class DesignDoc:
    """One ranked design: verdict, band figures, the exact parameters, elements, robustness, power."""

    rank: int
    verdict: str
    margin_db: Db
    worst_return_loss_db: Db
    worst_freq_hz: float
    max_network_loss_db: float
    total_length_wl: float
    trial: int
    choice: Choice
    u: tuple[float, ...]
    elements: tuple[ElementReport, ...]
    robustness: Robustness | None = None
    power: PowerCheck | None = None
    alternative: str = ""  # the named network it belongs to, in a study with alternatives ("" otherwise)
    load_margins: tuple[LoadMargin, ...] = ()  # several loads: the design on each (the study's order)
    share: float | None = None  # several loads: weighted share of the loads whose mask it meets
    loads_met: int | None = None  # several loads: how many it meets
    worst_load: str | None = None  # several loads: the load with the lowest margin (margin_db is that margin)

    @property
    def passes(self) -> bool:
        return passes(self.verdict)


@dataclass(frozen=True)
class AlternativeDoc:
    """One named network of a study with alternatives, by its best design (None: it found none).

    ``pieces``: lines and stubs with a cable section to cut; ``junctions``: the points where pieces meet one
    another, the load or the source (a stub's tee and the line joint at the same point count once);
    ``total_mm``: the cable of all pieces, after allowances; ``trials``: complete trials of its search.
    """

    name: str
    network: str
    trials: int
    best_rank: int | None = None
    verdict: str | None = None
    best_margin_db: Db | None = None
    best_yield: float | None = None
    total_length_wl: float | None = None
    total_mm: float | None = None
    pieces: int | None = None
    junctions: int | None = None


@dataclass(frozen=True)
class VariantDoc:
    """A design kept from the explorer's tuning: ``design`` (its figures, ``choice`` and ``u``, ranked as the
    design it was tuned from), its ``name``, the rank it ``based_on`` and the ``files`` written for it
    (Touchstone exports, relative to the results folder)."""

    name: str
    based_on: int
    design: DesignDoc
    files: tuple[str, ...] = ()


@dataclass(frozen=True)
class Piece:
    """One line or stub to build (element number load outwards), in mm of its cable.

    ``cut_mm`` is the cable alone, connector to connector, after the allowances; ``electrical_deg``
    includes the allowances (``allowance_deg`` of it) at the reference frequency.  Without a named
    cable, ``cable`` says the Z0 and velocity factor the mm are computed at.
    """

    element: int
    part: str
    kind: str
    end: str | None
    label: str
    cable: str
    named_cable: bool
    source: str
    z0_ohm: float
    vf: float
    cut_mm: float
    electrical_deg: float
    allowance_deg: float
    cable_delay_ns: float
    allowance_ns: float
    cut_long_mm: float | None = None
    width_mm: float | None = None
    advice: str = ""


@dataclass(frozen=True)
class CableTotal:
    cable: str
    pieces: int
    total_mm: float


@dataclass(frozen=True)
class StockUse:
    cable: str
    length_mm: float
    used: int
    on_shelf: int


@dataclass(frozen=True)
class Band:
    """Network loss (dB) and the share of the available power reaching the load, over the band."""

    network_loss_db_min: float
    network_loss_db_max: float
    delivered_share_min: float
    delivered_share_max: float
    delivered_w_min: float | None = None
    delivered_w_max: float | None = None


@dataclass(frozen=True)
class BuildSheet:
    """How to build the best design: pieces, the assembly from load to source, cable and stock."""

    design_rank: int
    pieces: tuple[Piece, ...]
    assembly: tuple[str, ...]  # one step per junction, from the load to the source
    allowances: str  # whether the lengths include connector allowances, in one sentence
    trim_rule: str
    band: Band
    cable_totals: tuple[CableTotal, ...] = ()
    stock_used: tuple[StockUse, ...] = ()


@dataclass(frozen=True)
class ParetoPoint:
    margin_db: Db
    total_length_wl: float
    trial: int


@dataclass(frozen=True)
class SearchDoc:
    """How the search went: complete trials (all runs), evaluations, this run's time, all trials' time."""

    trials_complete: int
    evaluations: int
    elapsed_s: float
    trial_time_s: float
    stopped_early: bool
    seeds: tuple[str, ...]
    settings: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class FeasibilityDoc:
    """The Bode–Fano ceiling said before the search (see :mod:`optmatch.domain.feasibility`).

    ``model``: the load model the bound comes from; ``values``: its ``r_ohm`` and ``c_f`` or ``l_h``;
    ``ceiling_return_loss_db``: the best flat in-band return loss any lossless network can hold (None:
    no limit, a resistive load); ``basis``: ``exact`` or ``estimated``; ``fit_error``: largest
    |Γ_model − Γ_load|; ``demand_share``: the mask's use of the bound (above 1 it cannot be met).
    """

    model: str
    values: dict[str, float]
    ceiling_return_loss_db: float | None
    basis: str
    fit_error: float
    demand_share: float
    mask_return_loss_db: float
    limit: str
    feasible: bool
    statement: str
    load: str = ""  # several loads: the load whose ceiling is the lowest
    loads: int = 1


@dataclass(frozen=True)
class SummaryDoc:
    """Everything about one study's results; ``summary.json`` is this record as JSON.

    ``verdict`` is the best design's (PASS, FAIL, FAIL rating) unless the bare load already meets
    the mask (then PASS with ``no_network_needed``); ``verdict_line`` says it in one line.
    ``invented``: the study says its data is invented (its description, or a comment line of its
    Touchstone load file, contains the word), so plots and exports say so.
    """

    study: str
    description: str
    file: str
    inputs_digest: str
    optmatch_version: str
    invented: bool
    inputs: dict[str, Any]
    system_ohm: float
    reference_hz: float
    mask: tuple[MaskSegment, ...]
    load: LoadView
    verdict: str
    verdict_line: str
    no_network_needed: bool
    ranked_by: str
    best_margin_db: float | None
    designs: tuple[DesignDoc, ...]
    pareto: tuple[ParetoPoint, ...]
    search: SearchDoc
    tolerance: Spread
    drive_w: float | None
    warnings: tuple[str, ...]
    build: BuildSheet | None
    feasibility: FeasibilityDoc | None = None
    files: dict[str, str] = field(default_factory=dict)
    format: int = FORMAT
    alternatives: tuple[AlternativeDoc, ...] = ()  # one row per named network (studies with alternatives)
    variants: tuple[VariantDoc, ...] = ()  # designs kept from the explorer (variants.json), never ranked
    loads: tuple[LoadCase, ...] = ()  # several loads (``load`` is then the one that is worst alone)
    load_rule: str = "worst"  # several loads: ranked by the worst margin over them, or by the share met

    @property
    def best(self) -> DesignDoc | None:
        return self.designs[0] if self.designs else None

    @property
    def several_loads(self) -> bool:
        """The study gave ``loads:`` (its designs carry ``load_margins``)."""
        return bool(self.loads)


@dataclass(frozen=True)
class BatchStudy:
    """One study of a batch as ``batch.json`` records it (other keys are ignored here)."""

    name: str
    status: str
    file: str = ""
    message: str = ""


@dataclass(frozen=True)
class BatchState:
    """``batch.json``: the studies of the last batch, in order."""

    studies: tuple[BatchStudy, ...]


# ---------------------------------------------------------------- JSON


def to_json(doc: SummaryDoc) -> dict:
    """The document as JSON-ready data (non-finite floats are left for the writer to make null)."""
    return asdict(doc)


def _where(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += f".{part}" if out else str(part)
    return out or "(top level)"


_KIND_TEXT = {
    "missing": "required key is missing",
    "float_type": "expected a number", "float_parsing": "expected a number",
    "int_type": "expected a whole number", "int_parsing": "expected a whole number",
    "int_from_float": "expected a whole number",
    "string_type": "expected text", "bool_type": "expected true or false", "bool_parsing": "expected true or false",
    "list_type": "expected a list", "tuple_type": "expected a list",
    "dataclass_type": "expected keys and values", "dict_type": "expected keys and values",
}


def _short(value: object, limit: int = 40) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def _first_problem(shown: str, exc: ValidationError) -> str:
    errors = exc.errors(include_url=False)
    err = errors[0]
    what = _KIND_TEXT.get(err["type"], err["msg"])
    if err["type"] != "missing":
        what += f", got {_short(err.get('input'))}"
    more = f" (and {len(errors) - 1} more)" if len(errors) > 1 else ""
    return f"{shown}: {_where(tuple(err['loc']))}: {what}{more}"


def _read(path: str | os.PathLike) -> tuple[str, Any]:
    shown = str(path)
    try:
        text = Path(path).read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ResultsFileError(f"{shown}: file not found") from None
    except UnicodeDecodeError:
        raise ResultsFileError(f"{shown}: not a text file (expected UTF-8 JSON)") from None
    except OSError as exc:
        raise ResultsFileError(f"{shown}: cannot read ({exc.strerror or exc})") from None
    try:
        data = json.loads(text)
    except ValueError as exc:
        raise ResultsFileError(f"{shown}: not JSON ({' '.join(str(exc).split())})") from None
    except RecursionError:
        raise ResultsFileError(f"{shown}: not JSON (nested too deeply)") from None
    if not isinstance(data, dict):
        raise ResultsFileError(f"{shown}: (top level): expected keys and values, got a {type(data).__name__}")
    return shown, data


_SUMMARY = TypeAdapter(SummaryDoc)
_BATCH = TypeAdapter(BatchState)


def from_json(data: Any, shown: str = "summary.json") -> SummaryDoc:
    """The document from parsed JSON, shape checked; :class:`ResultsFileError` names ``shown`` and the key."""
    if not isinstance(data, dict):
        raise ResultsFileError(f"{shown}: (top level): expected keys and values, got a {type(data).__name__}")
    if data.get("format") != FORMAT:
        raise ResultsFileError(f"{shown}: format: {_short(data.get('format'))} is not the layout this optmatch "
                               f"reads ({FORMAT}); run the study again to rewrite its results")
    try:
        return _SUMMARY.validate_python(data)
    except ValidationError as exc:
        raise ResultsFileError(_first_problem(shown, exc)) from None
    except RecursionError:
        raise ResultsFileError(f"{shown}: nested too deeply") from None


def read_summary(path: str | os.PathLike) -> SummaryDoc:
    """Read and check a ``summary.json``."""
    shown, data = _read(path)
    return from_json(data, shown)


def _plain_name(name: str) -> bool:
    """A study name that is one folder inside the results root (no path, no control character)."""
    return bool(name) and name not in (".", "..") and not any(c in name for c in "/\\") and name.isprintable()


def read_batch_state(path: str | os.PathLike) -> BatchState:
    """Read and check a ``batch.json``; a study name that is not a plain folder name is refused."""
    shown, data = _read(path)
    try:
        state = _BATCH.validate_python(data)
    except ValidationError as exc:
        raise ResultsFileError(_first_problem(shown, exc)) from None
    for k, s in enumerate(state.studies):
        if not _plain_name(s.name):
            raise ResultsFileError(f"{shown}: studies[{k}].name: {_short(s.name)} is not a study folder name")
    return state


__all__ = ["FAIL", "FAIL_RATING", "FORMAT", "PASS", "VERDICTS", "AlternativeDoc", "Band", "BatchState", "BatchStudy",
           "BuildSheet", "CableTotal", "Choice", "DesignDoc", "LoadCase", "LoadMargin", "LoadPoint", "LoadView",
           "MaskSegment", "ParetoPoint", "Piece", "VariantDoc", "PowerCheck", "ResultsFileError", "SearchDoc",
           "SectionRating", "StockUse", "SummaryDoc", "from_json", "passes", "read_batch_state", "read_summary",
           "to_json", "vswr_of_rl"]
