"""Voltage, current and heat along every line and stub of one design when driven at a given power.

Pure numpy, and the engine's own physics: the network is walked from the load outwards with the
engine's line update, branch impedance pair and series/shunt update (a homogeneous state ``(V, I)``
per frequency, scaled by a running factor ``k``), one design at a time.  Each section is also cut
into ``SAMPLES`` sub-sections, one engine row each, which gives the standing wave along it.  Stubs
are walked from their far end (open: I = 0; short: V = 0), so the voltage at an open end and the
current at a shorted end come out directly.  Finally everything is scaled to the source: EMF of a
source with internal impedance ``z_sys`` whose available power is ``power_w``.

Units: Hz, Ω, s, V and A as peak phasor magnitudes (peak RF values), W (average).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np

from optmatch.domain.cables import Cable
from optmatch.engine import Grid, Stage, add_branch, branch_pair, line_terms, through_line

SAMPLES = 513  # points along each section (a 1-λ section is sampled every 0.7°)


@dataclass(frozen=True)
class SectionStress:
    """Worst figures of one line or stub over the band (index = element, load outwards).

    ``voltage_v``/``current_a``: peak RF voltage and current along the section, shape (F,);
    ``dissipated_w``: power turned to heat in it, (F,); ``heating_w``: the largest local heating along
    it expressed as the power of a matched line that heats as much, (F,); ``open_end_v``: voltage at
    an open stub end (F,) or None.
    """

    index: int
    voltage_v: np.ndarray
    current_a: np.ndarray
    dissipated_w: np.ndarray
    heating_w: np.ndarray
    open_end_v: np.ndarray | None


@dataclass(frozen=True)
class DriveResult:
    """All sections of one design, and the input figures: delivered and accepted power (W), (F,)."""

    freq: np.ndarray
    sections: list[SectionStress]
    accepted_w: np.ndarray
    delivered_w: np.ndarray


def _along(p: Mapping, s: np.ndarray) -> dict:
    """Engine parameters of the first ``s`` fractions (S,) of a section: S sub-sections, one per row."""
    scale = {key: float(np.asarray(p[key]).reshape(-1)[0]) * s for key in ("delay", "loss_c", "loss_d") if key in p}
    return {"z0": float(np.asarray(p["z0"]).reshape(-1)[0]), **scale}


def _profile(v0: np.ndarray, i0: np.ndarray, p: Mapping, s: np.ndarray, grid: Grid):
    """State along a section from its end (v0, i0) (F,): arrays (S, F) at fractions ``s`` of its length,
    carried by the engine's line update."""
    return through_line(v0[None, :], i0[None, :], *line_terms(_along(p, s), s.size, grid))


def _conductor_share(p: Mapping, freq: np.ndarray) -> np.ndarray:
    c = float(p.get("loss_c", 0.0)) * np.sqrt(freq)
    d = float(p.get("loss_d", 0.0)) * freq
    total = c + d
    return np.where(total > 0, c / np.where(total > 0, total, 1.0), 1.0)


def drive(stages: Sequence[Stage], params: Sequence[Mapping], freq: np.ndarray, zload: np.ndarray | complex,
          z_sys: float, power_w: float, samples: int = SAMPLES) -> DriveResult:
    """Stress of every line and stub of ONE design (scalar parameters) driven with ``power_w`` available.

    The walk uses the engine's own line update, branch impedance and series/shunt update, one
    design at a time (n = 1), so the physics here is the engine's.
    """
    grid = Grid(np.asarray(freq, dtype=float))
    freq = grid.freq
    zl = np.broadcast_to(np.asarray(zload, dtype=complex), freq.shape)
    v, i, k = zl.copy(), np.ones_like(zl), np.ones_like(zl)
    s = np.linspace(0.0, 1.0, samples)
    recorded: list[tuple[int, np.ndarray, np.ndarray, np.ndarray, float, Mapping, bool]] = []
    for idx, (stage, p) in enumerate(zip(stages, params, strict=True)):
        if stage.kind == "line":
            pv, pi = _profile(v, i, p, s, grid)
            recorded.append((idx, pv, pi, k, float(np.asarray(p["z0"]).reshape(-1)[0]), p, False))
            v, i = pv[-1], pi[-1]
            continue
        bp, bq = (np.broadcast_to(x, (1, freq.size))[0] for x in branch_pair(stage, p, 1, grid))
        if stage.kind == "stub":
            short = bool(np.asarray(p.get("short", False)).reshape(-1)[0])
            # the stub walked from its far end: open (V, I) = (1, 0), short (0, 1); at the junction
            # this state is the branch pair (P, Q) itself
            far_v, far_i = (np.zeros_like(v), np.ones_like(v)) if short else (np.ones_like(v), np.zeros_like(v))
            pv, pi = _profile(far_v, far_i, p, s, grid)
            mult = v if stage.connection == "shunt" else i  # the junction state scales the stub's
        v, i, k = add_branch(v, i, k, stage.connection, bp, bq)
        if stage.kind == "stub":
            recorded.append((idx, pv * mult, pi * mult, k, float(np.asarray(p["z0"]).reshape(-1)[0]), p, not short))
    v_in, i_in = v / k, i / k  # physical, for 1 A into the load
    emf = np.sqrt(8.0 * z_sys * power_w)
    c = emf / (v_in + z_sys * i_in)  # scale of every physical quantity to the real drive
    accepted = 0.5 * np.real(c * v_in * np.conj(c * i_in))
    delivered = 0.5 * np.abs(c) ** 2 * np.real(zl)
    sections = []
    for idx, pv, pi, kk, z0, p, open_end in recorded:
        scale = c / kk
        vv, ii = pv * scale, pi * scale
        flow = 0.5 * np.real(vv * np.conj(ii))  # power flowing towards the load end (line) / far end (stub)
        dissipated = flow[-1] - (0.0 if stages[idx].kind == "stub" else flow[0])
        w_c = _conductor_share(p, freq)
        heat = w_c * np.abs(ii) ** 2 * z0 / 2.0 + (1.0 - w_c) * np.abs(vv) ** 2 / (2.0 * z0)
        sections.append(SectionStress(
            index=idx, voltage_v=np.max(np.abs(vv), axis=0), current_a=np.max(np.abs(ii), axis=0),
            dissipated_w=dissipated, heating_w=np.max(heat, axis=0),
            open_end_v=np.abs(vv[0]) if open_end else None,
        ))
    return DriveResult(freq=freq, sections=sections, accepted_w=accepted, delivered_w=delivered)


@dataclass(frozen=True)
class RatingCheck:
    """One section against its cable's ratings and its connectors' voltage rating, at the worst
    frequency of each figure.  Cable figures are None without a catalog cable; the connector
    rating is None where no allowance at the element gives one."""

    index: int
    cable: str | None
    peak_voltage_v: float
    voltage_freq_hz: float
    peak_current_a: float
    dissipated_w: float
    open_end_v: float | None
    max_voltage_v: float | None = None
    heating_w: float | None = None
    heating_freq_hz: float | None = None
    power_rating_w: float | None = None
    connector_max_voltage_v: float | None = None

    @property
    def voltage_ok(self) -> bool | None:
        return None if self.max_voltage_v is None else self.peak_voltage_v <= self.max_voltage_v

    @property
    def power_ok(self) -> bool | None:
        return None if self.heating_w is None or self.power_rating_w is None else self.heating_w <= self.power_rating_w

    @property
    def connector_ok(self) -> bool | None:
        if self.connector_max_voltage_v is None:
            return None
        return self.peak_voltage_v <= self.connector_max_voltage_v


def check_ratings(result: DriveResult, cables: Mapping[int, Cable],
                  connectors: Mapping[int, float] | None = None) -> list[RatingCheck]:
    """Compare every section that has a catalog cable (``cables``: element index → Cable) or a connector
    voltage rating (``connectors``: element index → peak V) with those ratings.

    Power: the largest local heating along the section against the cable's power rating derated to
    that frequency (1 / attenuation); voltage: the peak RF voltage anywhere along the section and over
    the band, against the cable's rating and against its connectors' (a connector sits at an end of
    the section, so this is on the safe side).
    """
    connectors = connectors or {}
    out = []
    for sec in result.sections:
        cable = cables.get(sec.index)
        connector_v = connectors.get(sec.index)
        if cable is None and connector_v is None:
            continue
        jv = int(np.argmax(sec.voltage_v))
        check = RatingCheck(index=sec.index, cable=None, peak_voltage_v=float(sec.voltage_v[jv]),
                            voltage_freq_hz=float(result.freq[jv]), peak_current_a=float(np.max(sec.current_a)),
                            dissipated_w=float(np.max(sec.dissipated_w)),
                            open_end_v=None if sec.open_end_v is None else float(np.max(sec.open_end_v)),
                            connector_max_voltage_v=connector_v)
        if cable is not None:
            rating = np.asarray(cable.power_rating_w(result.freq), dtype=float)
            jh = int(np.argmax(sec.heating_w / rating))
            check = replace(check, cable=cable.name, max_voltage_v=float(cable.max_voltage_v),
                            heating_w=float(sec.heating_w[jh]), heating_freq_hz=float(result.freq[jh]),
                            power_rating_w=float(rating[jh]))
        out.append(check)
    return out
