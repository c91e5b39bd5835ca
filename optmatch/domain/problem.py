"""A matching problem in numbers: what the network must do, for whom, and with what it may be built.

Also the objective: margin against the mask for a batch of candidate designs, and the build size
(total line delay) that breaks ties.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optmatch.domain.feasibility import Feasibility, ceiling
from optmatch.domain.mask import Grid, margin_db, margin_terms
from optmatch.domain.network import Choice, NetworkSpec
from optmatch.engine import Response, evaluate, evaluate_reduced
from optmatch.engine.derivatives import TANGENT_KEYS, walk_tangents

DB_PER_LN = 10.0 / np.log(10.0)
COMPLEX_STEP = 1e-30  # the parameter map u -> engine parameters is real-analytic
GRAD_CHUNK = 64


@dataclass(frozen=True)
class Problem:
    """Everything the search needs, resolved to numbers.

    z_sys: system impedance (Ω, real); grid: frequencies (Hz) and mask; zload: load impedance on
    the grid (Ω); network: the elements to design; f_ref: reference frequency (Hz) for electrical
    lengths and closed-form seeds.
    """

    name: str
    z_sys: float
    grid: Grid
    zload: np.ndarray
    network: NetworkSpec
    f_ref: float

    def response(self, u: np.ndarray, choice: Choice) -> Response:
        """Full response of designs ``u`` (n, dim) on the grid."""
        params = self.network.engine_params(np.atleast_2d(u), choice)
        return evaluate(self.network.stages, params, self.grid.freq, self.zload, self.z_sys)

    def _reduce(self, params: list[dict], per_chunk) -> np.ndarray:
        """Evaluate engine ``params`` on the grid, reducing each chunk with ``per_chunk(gamma_sq, delivered)``
        (``delivered`` is None unless the mask limits network loss)."""
        need_power = self.grid.has_loss_limit
        return evaluate_reduced(self.network.stages, params, self.grid.freq, self.zload, self.z_sys,
                                reducer=lambda r: per_chunk(r.gamma_sq, r.delivered if need_power else None))

    def margins_of(self, params: list[dict]) -> np.ndarray:
        """Margin (dB) per candidate of engine parameter dicts (e.g. perturbed builds)."""
        return self._reduce(params, lambda g2, dlv: margin_db(g2, dlv, self.grid))

    def margins(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Margin (dB) per design: worst case over the grid, negative when the mask is failed."""
        return self.margins_of(self.network.engine_params(np.atleast_2d(u), choice))

    def shortfalls_db(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Per grid point, requirement minus achievement in dB (n, F); margin = −max over F."""

        def per_point(g2: np.ndarray, dlv: np.ndarray | None) -> np.ndarray:
            with np.errstate(divide="ignore"):
                return 10.0 * np.log10(np.maximum(margin_terms(g2, dlv, self.grid), 1e-300))

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
        vals, grads = [], []
        for start in range(0, n, GRAD_CHUNK):
            sub = u[start:start + GRAD_CHUNK]
            params = self.params_with_tangents(sub, choice)
            tr = walk_tangents(self.network.stages, params, self.grid.freq, self.zload, sub.shape[0], d,
                               self.z_sys)
            if length_db_per_wl:
                total = sum(np.asarray(p["delay"]) for p in params if "delay" in p)
                dtotal = sum(p["d_delay"] for p in params if "d_delay" in p)
                ld = length_db_per_wl * self.f_ref
                vals_len = ld * np.broadcast_to(total, (sub.shape[0],))[:, None]
                grad_len = ld * np.broadcast_to(dtotal, (d, sub.shape[0])).T[:, None, :]
            g2, dg2 = tr.gamma_sq_and_grad()
            r, dr = g2 * self.grid.rl_weight, dg2 * self.grid.rl_weight
            if self.grid.has_loss_limit:
                ratio, dratio = tr.loss_ratio_and_grad()
                ratio = np.where(np.isfinite(ratio), ratio, np.inf)
                lw = ratio * self.grid.loss_weight
                use = lw > r
                r = np.where(use, lw, r)
                dr = np.where(use, np.nan_to_num(dratio * self.grid.loss_weight), dr)
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
        """The Bode–Fano ceiling of this load against this mask (see :mod:`optmatch.domain.feasibility`)."""
        return ceiling(self.zload, self.grid, self.z_sys)

    def length_wl(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Total line and stub length in wavelengths at ``f_ref`` per design."""
        return self.network.total_delay(np.atleast_2d(u), choice) * self.f_ref
