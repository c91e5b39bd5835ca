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

    def margins(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Margin (dB) per design: worst case over the grid, negative when the mask is failed."""
        u = np.atleast_2d(u)
        params = self.network.engine_params(u, choice)
        need_power = self.grid.has_loss_limit

        def red(r: Response) -> np.ndarray:
            return margin_db(r.gamma_sq, r.delivered if need_power else None, self.grid)

        return evaluate_reduced(self.network.stages, params, self.grid.freq, self.zload, self.z_sys, reducer=red)

    def shortfalls_db(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Per grid point, requirement minus achievement in dB (n, F); margin = −max over F."""
        u = np.atleast_2d(u)
        params = self.network.engine_params(u, choice)
        need_power = self.grid.has_loss_limit

        def red(r: Response) -> np.ndarray:
            terms = margin_terms(r.gamma_sq, r.delivered if need_power else None, self.grid)
            with np.errstate(divide="ignore"):
                return 10.0 * np.log10(np.maximum(terms, 1e-300))

        return evaluate_reduced(self.network.stages, params, self.grid.freq, self.zload, self.z_sys, reducer=red)

    def length_wl(self, u: np.ndarray, choice: Choice) -> np.ndarray:
        """Total line and stub length in wavelengths at ``f_ref`` per design."""
        return self.network.total_delay(np.atleast_2d(u), choice) * self.f_ref
