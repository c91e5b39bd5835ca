"""The independent reference the tests compare against: a network of lossless lines and shunt stubs
cascaded by scikit-rf (its ``DefinedGammaZ0`` media), not by our engine."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import skrf

from optmatch.units import C0


def skrf_input_gamma(freq_hz: np.ndarray, zload: np.ndarray, z_sys: float,
                     parts: Sequence[tuple[str, str | None, float, float, float]]) -> np.ndarray:
    """Input reflection (on ``z_sys``) of lossless lines and shunt stubs cascaded by scikit-rf from the load outwards.

    ``parts``: per element (kind ``line`` or ``shunt_stub``, end ``open``/``short``/None, length m, Z0 Ω, VF).
    """
    f = skrf.Frequency.from_f(freq_hz, unit="Hz")
    net = skrf.Network(frequency=f, s=((zload - z_sys) / (zload + z_sys)).reshape(-1, 1, 1), z0=z_sys)
    for kind, end, length_m, z0, vf in parts:
        media = skrf.media.DefinedGammaZ0(f, z0_port=z_sys, z0=z0, gamma=1j * 2 * np.pi * freq_hz / (vf * C0))
        if kind == "line":
            el = media.line(length_m, unit="m")
        elif end == "open":
            el = media.shunt_delay_open(length_m, unit="m")
        else:
            el = media.shunt_delay_short(length_m, unit="m")
        net = el ** net
    return net.s[:, 0, 0]
