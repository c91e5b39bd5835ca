"""A matching problem in numbers: what the network must do, for whom, and with what it may be built.

Also the objective: margin against the mask for a batch of candidate designs, and the build size
(total line delay) that breaks ties.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from optmatch.domain.mask import Grid, margin_db, margin_terms
from optmatch.domain.network import Choice, NetworkSpec
from optmatch.engine import Response, evaluate, evaluate_reduced


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

    def length_wl(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Total line and stub length in wavelengths at ``f_ref`` per design."""
        return self.network.total_delay(np.atleast_2d(u), choice) * self.f_ref
