"""Cables as the shelf knows them: ratings and the √f + f loss model, and the line medium they make.

Pure: no files.  Units: Ω, Hz, dB/100 m, V (peak), W, m.  A catalog is a ``dict`` from a cable's
name to its :class:`Cable`; a user's catalog extends the shipped one and replaces entries of the
same name (:func:`merge_catalogs`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from optmatch.domain.line_loss import NEPER_PER_DB, attenuation_db_per_100m, fit_loss_two_point
from optmatch.domain.network import Medium


@dataclass(frozen=True)
class Cable:
    """One cable type of the catalog.

    ``loss_points``: two (frequency Hz, attenuation dB/100 m) data-sheet figures;
    ``max_voltage_v``: peak RF voltage rating; ``max_power_w`` at ``power_ref_hz``: average power
    rating in a matched line.
    """

    name: str
    z0_ohm: float
    vf: float
    loss_points: tuple[tuple[float, float], tuple[float, float]]
    z0_tolerance_ohm: float
    vf_tolerance: float
    max_voltage_v: float
    max_power_w: float
    power_ref_hz: float
    description: str = ""
    source: str = ""

    @property
    def loss_coefficients(self) -> tuple[float, float]:
        """(kc, kd) of a(f) = kc·√f + kd·f in dB/100 m (f in Hz)."""
        (f1, a1), (f2, a2) = self.loss_points
        return fit_loss_two_point(f1, a1, f2, a2)

    def attenuation_db_per_100m(self, freq_hz: np.ndarray | float) -> np.ndarray:
        """Matched-line attenuation (dB/100 m) at ``freq_hz``."""
        kc, kd = self.loss_coefficients
        return attenuation_db_per_100m(np.asarray(freq_hz, dtype=float), kc, kd)

    def power_rating_w(self, freq_hz: np.ndarray | float) -> np.ndarray:
        """Average power rating (W) at ``freq_hz``, derated as 1 / attenuation from the reference.

        The heating of a matched line at the rated power is held constant: P·α(f) = P_ref·α(f_ref).
        """
        a_ref = float(self.attenuation_db_per_100m(self.power_ref_hz))
        return self.max_power_w * a_ref / self.attenuation_db_per_100m(freq_hz)

    def medium(self) -> Medium:
        """The line medium: Z0, velocity factor and loss in Np/m (kc per √Hz, kd per Hz)."""
        kc, kd = self.loss_coefficients
        scale = NEPER_PER_DB / 100.0
        return Medium(self.z0_ohm, self.vf, kc * scale, kd * scale, self.name,
                      z0_tol_rel=self.z0_tolerance_ohm / self.z0_ohm, vf_tol_rel=self.vf_tolerance / self.vf)


def merge_catalogs(base: Mapping[str, Cable], extra: Mapping[str, Cable]) -> dict[str, Cable]:
    """``base`` extended by ``extra``; an entry of ``extra`` replaces one of the same name."""
    out = dict(base)
    out.update(extra)
    return out
