"""Load models: pure functions of a frequency array (Hz) returning complex impedance arrays (Ω).

Every model takes ``freq_hz`` (1-D, positive, finite) and returns an array of the same shape.
A tabulated (measured) load interpolates its data onto the grid and refuses to extrapolate.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from optmatch.errors import OptmatchError
from optmatch.units import format_hz

LoadModel = Callable[[np.ndarray], np.ndarray]
"""Any callable ``freq_hz -> z_ohm`` (complex, same shape)."""


class LoadError(OptmatchError, ValueError):
    """A load description or its frequency grid is unusable (one-line message)."""


def check_freq(freq_hz: np.ndarray | float, what: str = "frequency") -> np.ndarray:
    """Frequencies as a 1-D float array, or LoadError if any is non-positive or not finite."""
    f = np.atleast_1d(np.asarray(freq_hz, dtype=float))
    if f.ndim != 1 or f.size == 0:
        raise LoadError(f"{what} must be a non-empty list of values in Hz")
    bad = f[~np.isfinite(f) | (f <= 0.0)]
    if bad.size:
        raise LoadError(f"{what} must be positive and finite (got {bad[0]:g} Hz)")
    return f


def _check_part(name: str, value: float | None, allow_zero: bool = True) -> float | None:
    if value is None:
        return None
    v = float(value)
    if not np.isfinite(v) or v < 0.0 or (v == 0.0 and not allow_zero):
        need = "non-negative" if allow_zero else "positive"
        raise LoadError(f"{name} must be {need} and finite (got {value!r})")
    return v


def fixed_impedance(freq_hz: np.ndarray, z_ohm: complex) -> np.ndarray:
    """The same impedance ``z_ohm`` (Ω, Re ≥ 0) at every frequency."""
    f = check_freq(freq_hz)
    z = complex(z_ohm)
    if not (np.isfinite(z.real) and np.isfinite(z.imag)) or z.real < 0.0:
        raise LoadError(f"load impedance must be finite with a non-negative real part (got {z_ohm!r} Ω)")
    return np.full(f.shape, z, dtype=complex)


def series_rlc(
    freq_hz: np.ndarray, r_ohm: float | None = None, l_h: float | None = None, c_f: float | None = None
) -> np.ndarray:
    """R, L and C in series: Z = R + jωL + 1/(jωC) (Ω).

    Any subset may be given; a missing part is simply absent (no resistance, no inductance,
    no series capacitor).  At least one part is required; C, when given, must be positive.
    """
    f = check_freq(freq_hz)
    r = _check_part("series R", r_ohm)
    ind = _check_part("series L", l_h)
    cap = _check_part("series C", c_f, allow_zero=False)
    if r is None and ind is None and cap is None:
        raise LoadError("a series RLC load needs at least one of R, L, C")
    w = 2.0 * np.pi * f
    z = np.zeros(f.shape, dtype=complex)
    if r is not None:
        z += r
    if ind is not None:
        z += 1j * w * ind
    if cap is not None:
        z += 1.0 / (1j * w * cap)
    return z


def parallel_rlc(
    freq_hz: np.ndarray, r_ohm: float | None = None, l_h: float | None = None, c_f: float | None = None
) -> np.ndarray:
    """R, L and C in parallel: Z = 1 / (1/R + 1/(jωL) + jωC) (Ω).

    Any subset may be given; a missing part is absent (an open branch).  R and L, when given,
    must be positive.  A lossless L–C pair is an open circuit at resonance (``inf`` there).
    """
    f = check_freq(freq_hz)
    r = _check_part("parallel R", r_ohm, allow_zero=False)
    ind = _check_part("parallel L", l_h, allow_zero=False)
    cap = _check_part("parallel C", c_f)
    if r is None and ind is None and cap is None:
        raise LoadError("a parallel RLC load needs at least one of R, L, C")
    w = 2.0 * np.pi * f
    y = np.zeros(f.shape, dtype=complex)
    if r is not None:
        y += 1.0 / r
    if ind is not None:
        y += 1.0 / (1j * w * ind)
    if cap is not None:
        y += 1j * w * cap
    if np.any(y == 0.0):
        raise LoadError("a parallel load with only a capacitor of 0 F is an open circuit")
    return 1.0 / y


def _fmt_hz(f: float) -> str:
    return format_hz(f)


@dataclass(frozen=True, eq=False)
class TabulatedLoad:
    """A measured load: reflection ``gamma`` against the real ``z_ref_ohm`` at ``freq_hz``.

    Calling it with a grid returns the impedance (Ω) on that grid, interpolated linearly in the
    real and imaginary parts of Γ.  Γ rather than Z, because Γ is bounded and smooth where Z is
    not (near an open circuit Z runs off to infinity and a straight line between two large Z
    values is meaningless), and because a straight line between two points inside the unit disc
    stays inside it, so interpolating a passive load never yields an active one.
    Grid points outside the measured range raise :class:`LoadError`; nothing is extrapolated.

    ``source`` names where the data came from (a file name), for messages.
    """

    freq_hz: np.ndarray
    gamma: np.ndarray
    z_ref_ohm: float = 50.0
    source: str = "measured data"

    def __post_init__(self) -> None:
        f = check_freq(self.freq_hz, f"{self.source}: measured frequency")
        g = np.atleast_1d(np.asarray(self.gamma, dtype=complex))
        if g.shape != f.shape:
            raise LoadError(f"{self.source}: {f.size} frequencies but {g.size} reflection values")
        if not np.all(np.isfinite(g)):
            raise LoadError(f"{self.source}: reflection data contains non-finite values")
        if np.any(np.diff(f) <= 0.0):
            raise LoadError(f"{self.source}: measured frequencies must be strictly increasing")
        z_ref = float(self.z_ref_ohm)
        if not np.isfinite(z_ref) or z_ref <= 0.0:
            raise LoadError(f"{self.source}: reference impedance must be positive (got {self.z_ref_ohm!r} Ω)")
        f.setflags(write=False)
        g.setflags(write=False)
        object.__setattr__(self, "freq_hz", f)
        object.__setattr__(self, "gamma", g)
        object.__setattr__(self, "z_ref_ohm", z_ref)

    @classmethod
    def from_impedance(
        cls, freq_hz: np.ndarray, z_ohm: np.ndarray, z_ref_ohm: float = 50.0, source: str = "measured data"
    ) -> TabulatedLoad:
        """Build from measured impedances (Ω); stored as Γ against ``z_ref_ohm``."""
        z = np.atleast_1d(np.asarray(z_ohm, dtype=complex))
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.where(np.isinf(z), 1.0 + 0j, (z - z_ref_ohm) / (z + z_ref_ohm))
        return cls(freq_hz, g, z_ref_ohm, source)

    @property
    def range_hz(self) -> tuple[float, float]:
        """Lowest and highest measured frequency (Hz)."""
        return float(self.freq_hz[0]), float(self.freq_hz[-1])

    def gamma_on(self, freq_hz: np.ndarray) -> np.ndarray:
        """Γ against ``z_ref_ohm`` interpolated onto ``freq_hz``; LoadError outside the data."""
        f = check_freq(freq_hz)
        lo, hi = self.range_hz
        slack = 1e-12 * hi  # tolerate rounding of grid end points written to files
        if f.min() < lo - slack or f.max() > hi + slack:
            raise LoadError(
                f"{self.source}: grid {_fmt_hz(f.min())} to {_fmt_hz(f.max())} reaches outside the "
                f"measured range {_fmt_hz(lo)} to {_fmt_hz(hi)}"
            )
        fc = np.clip(f, lo, hi)
        return np.interp(fc, self.freq_hz, self.gamma.real) + 1j * np.interp(fc, self.freq_hz, self.gamma.imag)

    def __call__(self, freq_hz: np.ndarray) -> np.ndarray:
        """Impedance (Ω) on ``freq_hz``; ``inf`` where Γ = 1 exactly (an open circuit)."""
        g = self.gamma_on(freq_hz)
        with np.errstate(divide="ignore", invalid="ignore"):
            z = self.z_ref_ohm * (1.0 + g) / (1.0 - g)
        return np.where(g == 1.0, np.inf + 0j, z)
