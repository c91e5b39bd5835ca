"""A matching problem in numbers: what the network must do, for whom, and with what it may be built.

Also the objective: margin against the mask for a batch of candidate designs, and the build size
(total line delay) that breaks ties.

Several loads (the same antenna parked, moving, beside a building; or many production units) are
one problem: ``zload`` holds one row per load, and the engine sees them as one longer grid, the
mask grid repeated once per load (so one engine call evaluates every load, and the worst margin
over the loads is the margin over that longer grid, with exact gradients for the polish).  The
objective over the loads is ``worst`` (the worst margin over every load) or ``share`` (the
weighted share of loads that meet the mask, ties broken by the worst margin).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Literal

import numpy as np

from optmatch.domain.feasibility import Feasibility, lowest_ceiling
from optmatch.domain.mask import Grid, margin_db, margin_terms
from optmatch.domain.network import Choice, NetworkSpec
from optmatch.engine import Response, evaluate, evaluate_reduced
from optmatch.engine.cascade import DEFAULT_CHUNK, chunk_for
from optmatch.engine.derivatives import TANGENT_KEYS, walk_tangents

DB_PER_LN = 10.0 / np.log(10.0)
COMPLEX_STEP = 1e-30  # the parameter map u -> engine parameters is real-analytic
GRAD_CHUNK = 64
MARGIN_CLIP_DB = 200.0  # the share objective's tie-break (worst margin) is held within ± this

LoadRule = Literal["worst", "share"]
SINGLE_LOAD_NAME = "load"


def _tiled_grid(grid: Grid, copies: int) -> Grid:
    """``grid`` repeated ``copies`` times along frequency (one block per load), requirements with it."""
    return Grid(freq=np.tile(grid.freq, copies), min_rl_db=np.tile(grid.min_rl_db, copies),
                max_loss_db=np.tile(grid.max_loss_db, copies), rl_weight=np.tile(grid.rl_weight, copies),
                loss_weight=np.tile(grid.loss_weight, copies), segments=grid.segments)


@dataclass(frozen=True)
class Problem:
    """Everything the search needs, resolved to numbers.

    z_sys: system impedance (Ω, real); grid: frequencies (Hz) and mask; zload: load impedance on
    the grid (Ω); network: the elements to design; f_ref: reference frequency (Hz) for electrical
    lengths and closed-form seeds.

    Several loads: ``zload`` is (L, F), one row per load, with ``load_names`` (L,) and
    ``load_weights`` (L,, each > 0); ``load_rule`` says what the objective makes of them
    (``worst`` or ``share``).  One load: ``zload`` is (F,) and the names and weights are empty.
    """

    name: str
    z_sys: float
    grid: Grid
    zload: np.ndarray
    network: NetworkSpec
    f_ref: float
    load_names: tuple[str, ...] = ()
    load_weights: tuple[float, ...] = ()
    load_rule: LoadRule = "worst"
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        z = np.asarray(self.zload)
        if z.ndim == 2:
            if len(self.load_names) != z.shape[0]:
                raise ValueError(f"{z.shape[0]} loads but {len(self.load_names)} names")
            if self.load_weights and len(self.load_weights) != z.shape[0]:
                raise ValueError(f"{z.shape[0]} loads but {len(self.load_weights)} weights")
        elif self.load_names:
            raise ValueError("load names are for several loads (zload shaped (L, F))")
        if self.load_rule not in ("worst", "share"):
            raise ValueError(f"unknown load rule {self.load_rule!r}")

    # ---------------------------------------------------------------- the loads

    @property
    def several(self) -> bool:
        """True when the problem holds several loads (``zload`` shaped (L, F))."""
        return np.ndim(self.zload) == 2

    @property
    def n_loads(self) -> int:
        return int(np.shape(self.zload)[0]) if self.several else 1

    @property
    def names(self) -> tuple[str, ...]:
        """The loads' names (one load: ``("load",)``)."""
        return self.load_names if self.several else (SINGLE_LOAD_NAME,)

    @property
    def zloads(self) -> np.ndarray:
        """Every load's impedance on the grid (Ω), shaped (L, F) (a view for one load)."""
        return np.asarray(self.zload) if self.several else np.asarray(self.zload)[None, :]

    @cached_property
    def weights(self) -> np.ndarray:
        """Each load's share of the total weight (L,), summing to 1."""
        w = np.asarray(self.load_weights or (1.0,) * self.n_loads, dtype=float)
        return w / np.sum(w)

    def load_index(self, load: int | str | None) -> int:
        """The row of a load given by name or index; None only when there is one load."""
        if load is None:
            if self.several:
                raise ValueError(f"{self.n_loads} loads: name one of {', '.join(self.names[:8])}"
                                 + (" ..." if self.n_loads > 8 else ""))
            return 0
        if isinstance(load, str):
            if load not in self.names:
                raise ValueError(f"no load named {load!r} (the loads: {', '.join(self.names[:8])}"
                                 + (" ..." if self.n_loads > 8 else "") + ")")
            return self.names.index(load)
        k = int(load)
        if not 0 <= k < self.n_loads:
            raise ValueError(f"load {k}: there are {self.n_loads}")
        return k

    def single(self, load: int | str | None = None) -> Problem:
        """The same problem with only one of its loads (by name or index)."""
        if not self.several:
            self.load_index(load)
            return self
        k = self.load_index(load)
        return Problem(self.name, self.z_sys, self.grid, np.asarray(self.zload)[k].copy(), self.network, self.f_ref)

    @property
    def _eval(self) -> tuple[np.ndarray, np.ndarray, Grid, int]:
        """What the engine sees: frequencies, load impedance and mask grid, every load's block one
        after the other (for one load, the problem's own arrays), and the engine's chunk."""
        if not self.several:
            return self.grid.freq, self.zload, self.grid, DEFAULT_CHUNK
        got = self._cache.get("eval")
        if got is None:
            tiled = _tiled_grid(self.grid, self.n_loads)
            got = self._cache["eval"] = (tiled.freq, np.ascontiguousarray(self.zload).reshape(-1), tiled,
                                         chunk_for(tiled.freq.size))
        return got

    def stacked(self) -> tuple[np.ndarray, np.ndarray]:
        """Frequencies (Hz) and load impedances (Ω) of every load's grid one after the other, (L·F,)
        each: what a figure taken over the band and over every load (a peak, a minimum) needs."""
        freq, zl, _, _ = self._eval
        return freq, zl

    # ---------------------------------------------------------------- responses and margins

    def response(self, u: np.ndarray, choice: Choice, load: int | str | None = None) -> Response:
        """Full response of designs ``u`` (n, dim) on the grid, with the ``load`` given by name or
        index (None when there is one load)."""
        k = self.load_index(load)
        params = self.network.engine_params(np.atleast_2d(u), choice)
        return evaluate(self.network.stages, params, self.grid.freq, self.zloads[k], self.z_sys)

    def _reduce(self, params: list[dict], per_chunk) -> np.ndarray:
        """Evaluate engine ``params`` on every load's grid, reducing each chunk with
        ``per_chunk(gamma_sq, delivered, grid)`` (``delivered`` is None unless the mask limits
        network loss; ``grid`` is the mask grid the engine saw, every load's block in turn)."""
        freq, zl, grid, chunk = self._eval
        need_power = grid.has_loss_limit
        return evaluate_reduced(self.network.stages, params, freq, zl, self.z_sys, chunk=chunk,
                                reducer=lambda r: per_chunk(r.gamma_sq, r.delivered if need_power else None, grid))

    def margins_of(self, params: list[dict]) -> np.ndarray:
        """Margin (dB) per candidate of engine parameter dicts (e.g. perturbed builds): the worst
        over the grid and over every load."""
        return self._reduce(params, margin_db)

    def load_margins_of(self, params: list[dict]) -> np.ndarray:
        """Margin (dB) of every candidate on every load, shaped (n, L)."""
        nl, nf = self.n_loads, self.grid.freq.size

        def per_load(g2: np.ndarray, dlv: np.ndarray | None, grid: Grid) -> np.ndarray:
            worst = np.max(margin_terms(g2, dlv, grid).reshape(g2.shape[0], nl, nf), axis=-1)
            with np.errstate(divide="ignore"):
                return -10.0 * np.log10(worst)

        return self._reduce(params, per_load)

    def margins(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Margin (dB) per design: worst case over the grid (and the loads), negative when the mask is failed."""
        return self.margins_of(self.network.engine_params(np.atleast_2d(u), choice))

    def load_margins(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Margin (dB) of every design on every load, shaped (n, L)."""
        return self.load_margins_of(self.network.engine_params(np.atleast_2d(u), choice))

    def share_of(self, load_margins: np.ndarray) -> np.ndarray:
        """Weighted share of the loads whose margin is ≥ 0, per row of ``load_margins`` (n, L)."""
        return (np.asarray(load_margins) >= 0.0) @ self.weights

    @cached_property
    def share_step(self) -> float:
        """The smallest change of the share: the lightest load's share of the weight."""
        return float(np.min(self.weights))

    def share_score(self, load_margins: np.ndarray) -> np.ndarray:
        """The ``share`` objective as one number per row of ``load_margins`` (n, L): the share in
        steps larger than any change of the worst margin (held within ± :data:`MARGIN_CLIP_DB`),
        so a larger share always wins and the worst margin breaks ties (dB)."""
        lm = np.asarray(load_margins)
        scale = 2.0 * MARGIN_CLIP_DB / self.share_step * (1.0 + 1e-9) + 1.0
        worst = np.clip(np.min(lm, axis=1), -MARGIN_CLIP_DB, MARGIN_CLIP_DB)
        return scale * self.share_of(lm) + worst

    def objective(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """What the search maximises per design over the loads: the worst margin (dB), or with
        ``load_rule`` ``share`` the :meth:`share_score`."""
        if self.load_rule == "share":
            return self.share_score(self.load_margins(u, choice))
        return self.margins(u, choice)

    def shortfalls_db(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Per grid point, requirement minus achievement in dB (n, L·F: every load's block in
        turn); margin = −max over them."""

        def per_point(g2: np.ndarray, dlv: np.ndarray | None, grid: Grid) -> np.ndarray:
            with np.errstate(divide="ignore"):
                return 10.0 * np.log10(np.maximum(margin_terms(g2, dlv, grid), 1e-300))

        return self._reduce(self.network.engine_params(np.atleast_2d(u), choice), per_point)

    def params_with_tangents(self, u: np.ndarray, choice: Choice) -> list[dict]:
        """Engine parameters of designs ``u`` (n, d) with their derivatives along every coordinate
        of ``u`` (``d_<key>`` arrays shaped (d, n)), by complex-step differentiation of the map from
        the unit cube to the engine's parameters (bounds, log spacing, velocity factor, loss per
        length: all real-analytic), which is exact to rounding."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        n, d = u.shape
        stacked = np.tile(u.astype(complex), (d + 1, 1))  # block 0: u itself; block j+1: step along j
        for j in range(d):
            stacked[(j + 1) * n:(j + 2) * n, j] += 1j * COMPLEX_STEP
        out: list[dict] = []
        for pc in self.network.engine_params(stacked, choice):
            q: dict = {}
            for key, val in pc.items():
                arr = np.asarray(val)
                if arr.ndim == 1 and arr.shape[0] == (d + 1) * n:
                    q[key] = arr[:n].real if np.iscomplexobj(arr) else arr[:n]
                    if key in TANGENT_KEYS and np.iscomplexobj(arr):
                        der = arr[n:].imag.reshape(d, n) / COMPLEX_STEP
                        if np.any(der):
                            q[f"d_{key}"] = der
                else:
                    q[key] = val.real if np.iscomplexobj(val) else val
            out.append(q)
        return out

    def shortfalls_and_grad(self, u: np.ndarray, choice: Choice,
                            length_db_per_wl: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
        """Per-point shortfalls (dB, (n, F), as :meth:`shortfalls_db`) and their exact derivatives
        with respect to the unit-cube coordinates, shaped (n, F, d).

        ``length_db_per_wl`` adds that many dB per wavelength of total length (:meth:`length_wl`)
        to every point, the search's tie-break or Pareto weight."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        n, d = u.shape
        freq, zl, grid, _ = self._eval
        vals, grads = [], []
        for start in range(0, n, GRAD_CHUNK):
            sub = u[start:start + GRAD_CHUNK]
            params = self.params_with_tangents(sub, choice)
            tr = walk_tangents(self.network.stages, params, freq, zl, sub.shape[0], d, self.z_sys)
            if length_db_per_wl:
                total = sum(np.asarray(p["delay"]) for p in params if "delay" in p)
                dtotal = sum(p["d_delay"] for p in params if "d_delay" in p)
                ld = length_db_per_wl * self.f_ref
                vals_len = ld * np.broadcast_to(total, (sub.shape[0],))[:, None]
                grad_len = ld * np.broadcast_to(dtotal, (d, sub.shape[0])).T[:, None, :]
            g2, dg2 = tr.gamma_sq_and_grad()
            r, dr = g2 * grid.rl_weight, dg2 * grid.rl_weight
            if grid.has_loss_limit:
                ratio, dratio = tr.loss_ratio_and_grad()
                ratio = np.where(np.isfinite(ratio), ratio, np.inf)
                lw = ratio * grid.loss_weight
                use = lw > r
                r = np.where(use, lw, r)
                dr = np.where(use, np.nan_to_num(dratio * grid.loss_weight), dr)
            r = np.maximum(r, 1e-300)
            with np.errstate(divide="ignore", invalid="ignore"):
                sv = DB_PER_LN * np.log(r)
                sg = np.moveaxis(np.nan_to_num(DB_PER_LN * dr / r), 0, -1)
            if length_db_per_wl:
                sv, sg = sv + vals_len, sg + grad_len
            vals.append(sv)
            grads.append(sg)
        return np.concatenate(vals), np.concatenate(grads)

    def length_wl_and_grad(self, u: np.ndarray, choice: Choice) -> tuple[np.ndarray, np.ndarray]:
        """Total length in wavelengths (n,) and its derivatives (n, d), by complex step."""
        u = np.atleast_2d(np.asarray(u, dtype=float))
        n, d = u.shape
        stacked = np.tile(u.astype(complex), (d + 1, 1))
        for j in range(d):
            stacked[(j + 1) * n:(j + 2) * n, j] += 1j * COMPLEX_STEP
        total = self.network.total_delay(stacked, choice) * self.f_ref
        return total[:n].real, (total[n:].imag / COMPLEX_STEP).reshape(d, n).T

    def feasibility(self) -> Feasibility:
        """The Bode–Fano ceiling of this load against this mask (see :mod:`optmatch.domain.feasibility`);
        with several loads, the lowest of their ceilings, naming the load that sets it."""
        got = self._cache.get("feasibility")
        if got is None:
            got = self._cache["feasibility"] = lowest_ceiling(self.zloads, self.names if self.several else (),
                                                              self.grid, self.z_sys)
        return got

    def length_wl(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Total line and stub length in wavelengths at ``f_ref`` per design."""
        return self.network.total_delay(np.atleast_2d(u), choice) * self.f_ref
