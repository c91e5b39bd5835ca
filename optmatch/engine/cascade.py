"""Batched cascade evaluation: many candidate networks over one frequency grid at once.

The network is walked from the load outwards carrying the wave state as a homogeneous pair
``(V, I)`` per candidate and frequency (impedance ``Z = V / I``).  Lines act on the pair as their
ABCD matrix does; a two-terminal branch (stub or lumped part) of impedance ``P / Q`` is applied
without dividing, so open and short circuits, quarter-wave stubs and ``tan`` singularities at 90°
stay finite.  A running factor ``k`` records how far the state has been scaled away from the
physical voltage and current, which the delivered-power figure needs.

Everything here is pure numpy on arrays; nothing knows about files, units or search.
Units: frequency in Hz, delay in s, impedance in Ω, inductance in H, capacitance in F,
line loss in nepers (whole line) per √Hz (conductor) and per Hz (dielectric).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

Kind = Literal["line", "stub", "lumped"]
Connection = Literal["series", "shunt"]
Part = Literal["r", "l", "c"]

DEFAULT_CHUNK = 256
CHUNK_POINTS = 256 * 4096  # candidates × points per chunk on long grids (several loads): a bounded working set
MIN_CHUNK = 16
DIRECT_PHASOR_MAX = 64  # up to this many candidates, phasors come from one exponential per point
CACHE_GRIDS = True  # keep each frequency grid's run detection between calls
FULL_RESCALE_EVERY = 6  # branches between per-point rescales of the wave state


@dataclass(frozen=True)
class Stage:
    """One element of a network, in order from the load outwards.

    kind: ``line`` (series transmission line), ``stub`` (a line ended open or short, placed as
    a branch) or ``lumped`` (an ideal R, L or C branch).
    connection: ``series`` or ``shunt`` for stubs and lumped parts (ignored for lines).
    part: ``r``, ``l`` or ``c`` for lumped parts.

    Parameters per candidate (arrays broadcastable to ``(N,)``) are passed separately, by name:
    lines and stubs: ``z0`` (Ω), ``delay`` (s, one-way), optional ``loss_c`` (Np/√Hz) and
    ``loss_d`` (Np/Hz); stubs: ``short`` (bool, True = short-circuited far end);
    lumped: ``value`` (Ω, H or F).
    """

    kind: Kind
    connection: Connection = "series"
    part: Part | None = None

    def __post_init__(self) -> None:
        if self.kind not in ("line", "stub", "lumped"):
            raise ValueError(f"unknown element kind {self.kind!r}")
        if self.connection not in ("series", "shunt"):
            raise ValueError(f"unknown connection {self.connection!r}")
        if self.kind == "lumped" and self.part not in ("r", "l", "c"):
            raise ValueError("a lumped element needs part 'r', 'l' or 'c'")


Params = Mapping[str, "np.ndarray | float | bool"]


class Response:
    """Input-side results of a batch, arrays shaped (candidates, frequencies), computed on demand.

    gamma: input reflection coefficient against the (real) system impedance.
    zin: input impedance (Ω; ``inf`` where the input is an open circuit).
    delivered: share of the source's available power that reaches the load (0..1).
    """

    def __init__(self, v: np.ndarray, i: np.ndarray, k: np.ndarray, p_load: np.ndarray, z_sys: float):
        self._v, self._i, self._k, self._p_load, self.z_sys = v, i, k, p_load, float(z_sys)
        self._gamma: np.ndarray | None = None

    @classmethod
    def concat(cls, parts: Sequence[Response]) -> Response:
        """Join chunk responses along the candidate axis."""
        def cat(name: str) -> np.ndarray:
            return np.concatenate([getattr(p, name) for p in parts])

        return cls(cat("_v"), cat("_i"), cat("_k"), cat("_p_load"), parts[0].z_sys)

    @property
    def gamma(self) -> np.ndarray:
        if self._gamma is None:
            with np.errstate(divide="ignore", invalid="ignore"):
                self._gamma = (self._v - self.z_sys * self._i) / (self._v + self.z_sys * self._i)
        return self._gamma

    @property
    def gamma_sq(self) -> np.ndarray:
        """|Γ|², the reflected share of the available power."""
        g = self.gamma
        return g.real**2 + g.imag**2

    @property
    def zin(self) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            safe = np.where(self._i == 0, 1.0, self._i)
            return np.where(self._i == 0, np.inf, self._v / safe)

    @property
    def delivered(self) -> np.ndarray:
        denom = self._v + self.z_sys * self._i
        with np.errstate(divide="ignore", invalid="ignore"):
            return 4.0 * self.z_sys * self._p_load * np.abs(self._k) ** 2 / np.abs(denom) ** 2

    @property
    def return_loss_db(self) -> np.ndarray:
        """Return loss in dB (positive; ``inf`` for a perfect match)."""
        with np.errstate(divide="ignore"):
            return -10.0 * np.log10(self.gamma_sq)

    @property
    def network_loss_db(self) -> np.ndarray:
        """Power lost inside the network, dB (accepted vs. delivered power; 0 if lossless)."""
        accepted = 1.0 - self.gamma_sq
        with np.errstate(divide="ignore", invalid="ignore"):
            return 10.0 * np.log10(accepted / self.delivered)


def _column(value: np.ndarray | float | bool, n: int, dtype: type = float) -> np.ndarray:
    """Per-candidate parameter as an (n, 1) column for broadcasting over frequency."""
    arr: np.ndarray = np.asarray(value, dtype=dtype)
    if arr.ndim == 0:
        return arr.reshape(1, 1)
    if arr.shape != (n,):
        raise ValueError(f"parameter has shape {arr.shape}, expected ({n},) or scalar")
    return arr.reshape(n, 1)


class Grid:
    """Frequency grid with its uniform runs found once, for fast phasors exp(jωτ).

    On a uniform run the phasors are built by repeated doubling from one exponential per
    candidate (error ~1e-13), which is several times cheaper than sin and cos per point.
    A run is accepted as uniform only if every point lies within a few ulps of the straight
    line through the run's ends, and its step is taken from those ends, so the phase error
    stays at rounding level even for long lines on long grids.
    """

    def __init__(self, freq: np.ndarray, direct: bool = False):
        self.direct = direct  # phasors by one exponential per point instead of doubling
        self.freq = np.asarray(freq, dtype=float)
        self.omega = 2.0 * np.pi * self.freq
        self.sqrt_f = np.sqrt(self.freq)
        self.runs: list[tuple[int, int, float]] = []  # (start, stop, step of ω in rad/s)
        f = self.freq
        start = 0
        while start < f.size:
            stop = start + 1
            if stop < f.size:
                step = f[stop] - f[start]
                tol = 1e-9 * max(abs(step), 1.0)
                while stop + 1 < f.size and abs((f[stop + 1] - f[stop]) - step) <= tol:
                    stop += 1
                stop += 1
            stop = self._straight_run(f, start, stop)
            length = stop - start
            d_omega = (self.omega[stop - 1] - self.omega[start]) / (length - 1) if length > 1 else 0.0
            self.runs.append((start, stop, d_omega))
            start = stop

    @staticmethod
    def _straight_run(f: np.ndarray, start: int, stop: int) -> int:
        """Shorten ``[start, stop)`` until its points sit on one straight line to a few ulps."""
        while stop - start > 2:
            seg = f[start:stop]
            step = (seg[-1] - seg[0]) / (seg.size - 1)
            dev = np.max(np.abs(seg - (seg[0] + step * np.arange(seg.size))))
            if dev <= 8.0 * np.spacing(np.max(np.abs(seg))):
                break
            stop = start + max(2, (stop - start) // 2)
        return stop

    def phasor(self, tau: np.ndarray) -> np.ndarray:
        """exp(jωτ) for a column of delays ``tau`` (n, 1), shaped (n, F)."""
        n = tau.shape[0]
        if self.direct:  # small batches (a local polish): the doubling's loop costs more
            return np.exp(1j * (tau * self.omega))
        out = np.empty((n, self.freq.size), dtype=complex)
        t = tau[:, 0]
        for start, stop, d_omega in self.runs:
            length = stop - start
            w0 = self.omega[start]
            out[:, start] = np.exp(1j * w0 * t)
            if length == 1:
                continue
            step = np.exp(1j * d_omega * t)
            done = 1
            while done < length:
                m = min(done, length - done)
                np.multiply(out[:, start : start + m], step[:, None], out=out[:, start + done : start + done + m])
                step = step * step
                done += m
        return out


_GRIDS: dict[tuple[bytes, bool], Grid] = {}


def chunk_for(points: int) -> int:
    """Candidates per chunk on a grid of ``points`` frequencies: :data:`DEFAULT_CHUNK`, fewer on
    grids so long that a chunk would hold more than :data:`CHUNK_POINTS` points (at least
    :data:`MIN_CHUNK`)."""
    return int(max(MIN_CHUNK, min(DEFAULT_CHUNK, CHUNK_POINTS // max(int(points), 1))))


def cached_grid(freq: np.ndarray, n: int) -> Grid:
    """The :class:`Grid` of ``freq`` for a batch of ``n`` candidates, kept for the few grids a
    process uses (saves the run detection on every call of a small batch).  Batches of at most
    :data:`DIRECT_PHASOR_MAX` take direct phasors; the choice depends on the whole batch, never
    on the chunk, so chunking cannot change a result."""
    f = np.ascontiguousarray(freq, dtype=float)
    key = (f.tobytes(), n <= DIRECT_PHASOR_MAX)
    grid = _GRIDS.get(key) if CACHE_GRIDS else None
    if grid is None:
        if len(_GRIDS) >= 16:
            _GRIDS.clear()
        grid = _GRIDS[key] = Grid(f, direct=key[1])
    return grid


def line_terms(p: Params, n: int, grid: Grid):
    """Z0, cosh(γl) and sinh(γl) of a line section (``z0``, ``delay``, optional loss) for ``n``
    candidates, shaped (n, 1), (n, F) and (n, F)."""
    z0 = _column(p["z0"], n)
    tau = np.broadcast_to(_column(p["delay"], n), (n, 1))
    e = grid.phasor(tau)
    loss_c = p.get("loss_c", 0.0)
    loss_d = p.get("loss_d", 0.0)
    lossless = np.ndim(loss_c) == 0 and np.ndim(loss_d) == 0 and loss_c == 0.0 and loss_d == 0.0
    if lossless:
        return z0, e.real, 1j * e.imag
    alpha = _column(loss_c, n) * grid.sqrt_f + _column(loss_d, n) * grid.freq
    grow = np.exp(alpha)
    ep = e * grow
    em = 1.0 / ep
    return z0, 0.5 * (ep + em), 0.5 * (ep - em)


def through_line(v: np.ndarray, i: np.ndarray, z0: np.ndarray, ch: np.ndarray, sh: np.ndarray):
    """The state ``(V, I)`` carried through a line section of :func:`line_terms` (its ABCD matrix)."""
    return ch * v + (z0 * sh) * i, (sh / z0) * v + ch * i


def add_branch(v: np.ndarray, i: np.ndarray, k: np.ndarray, connection: Connection, bp: np.ndarray, bq: np.ndarray):
    """The state ``(V, I, k)`` after a branch of impedance ``bp / bq`` placed in ``series`` or ``shunt``.

    Multiplied through by the denominator, so open and short circuits stay finite; ``k`` records
    that factor (state = k × physical).
    """
    if connection == "series":  # V' = V + Z I
        return v * bq + i * bp, i * bq, k * bq
    return v * bp, i * bp + v * bq, k * bp  # shunt: I' = I + V / Z


def branch_pair(stage: Stage, p: Params, n: int, grid: Grid):
    """Impedance of a two-terminal branch (stub or lumped part) as a pair (P, Q) with Z = P / Q,
    shaped (n, F) or broadcastable to it."""
    if stage.kind == "stub":
        z0, ch, sh = line_terms(p, n, grid)
        short = np.asarray(p.get("short", False))
        if short.ndim == 1 and (np.all(short) or not np.any(short)):
            short = np.asarray(bool(short[0]) if len(short) else False)
        if short.ndim == 0:
            if bool(short):
                return z0 * sh, ch  # short end: Z = Z0 tanh(γl)
            return ch, sh / z0  # open end: Z = Z0 coth(γl)
        s = _column(short, n, bool)
        return np.where(s, z0 * sh, ch), np.where(s, ch, sh / z0)
    value = _column(p["value"], n)
    omega = grid.omega
    one = np.ones_like(value, dtype=complex)
    if stage.part == "r":
        return value.astype(complex), one
    if stage.part == "l":
        return 1j * omega * value, one
    return one, 1j * omega * value  # capacitor: Z = 1 / (jωC)


def walk(
    stages: Sequence[Stage],
    params: Sequence[Params],
    freq: np.ndarray | Grid,
    zload: np.ndarray | complex,
    n: int,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Walk the state from the load to the input for ``n`` candidates.

    Returns ``(V, I, k, p_load)`` each shaped (n, F): the input state, the accumulated scale
    factor (state = k × physical) and Re(V_L I_L*) at the load for the load state (Z_L, 1).
    """
    grid = freq if isinstance(freq, Grid) else Grid(freq)
    f = grid.freq
    zl = np.broadcast_to(np.asarray(zload, dtype=complex), f.shape)
    v = np.broadcast_to(zl, (n, f.size)).astype(complex)
    i = np.ones((n, f.size), dtype=complex)
    k = np.ones((n, f.size), dtype=complex)
    branches = 0
    for stage, p in zip(stages, params, strict=True):
        if stage.kind == "line":
            v, i = through_line(v, i, *line_terms(p, n, grid))
            continue
        v, i, k = add_branch(v, i, k, stage.connection, *branch_pair(stage, p, n, grid))
        # Keep magnitudes near one so long chains neither overflow nor underflow.  Usually one
        # real factor per candidate, taken at the first frequency (O(n)); every few branches a
        # factor per point, since a branch's spread over the band (e.g. jωL) multiplies up.
        branches += 1
        sl = slice(None) if branches % FULL_RESCALE_EVERY == 0 else slice(0, 1)
        scale = np.abs(v[:, sl]) + np.abs(i[:, sl])
        inv = 1.0 / np.where(scale > 0.0, scale, 1.0)
        v, i, k = v * inv, i * inv, k * inv
    p_load = np.broadcast_to(zl.real, (n, f.size))
    return v, i, k, p_load


def _take(params: Sequence[Params], sl: slice, n: int) -> list[dict]:
    out = []
    for p in params:
        q = {}
        for key, val in p.items():
            arr = np.asarray(val)
            q[key] = arr[sl] if arr.ndim == 1 and arr.shape[0] == n else val
        out.append(q)
    return out


def batch_size(params: Sequence[Params]) -> int:
    """Number of candidates implied by the parameter arrays (1 when all are scalars)."""
    n = 1
    for p in params:
        for val in p.values():
            if np.ndim(val) == 1:
                size = np.shape(val)[0]
                if n not in (1, size):
                    raise ValueError(f"parameter arrays disagree on the batch size ({n} vs {size})")
                n = size
    return n


def evaluate(
    stages: Sequence[Stage],
    params: Sequence[Params],
    freq: np.ndarray,
    zload: np.ndarray | complex,
    z_sys: float = 50.0,
    chunk: int = DEFAULT_CHUNK,
) -> Response:
    """Full response of every candidate, arrays shaped (N, F).

    Use :func:`evaluate_reduced` when only a per-candidate figure is needed: it never holds
    the (N, F) arrays for all candidates at once.
    """
    parts = evaluate_reduced(stages, params, freq, zload, z_sys, reducer=lambda r: r, chunk=chunk)
    if len(parts) == 1:
        return parts[0]
    return Response.concat(parts)


def evaluate_reduced(
    stages: Sequence[Stage],
    params: Sequence[Params],
    freq: np.ndarray,
    zload: np.ndarray | complex,
    z_sys: float = 50.0,
    reducer: Callable[[Response], object] | None = None,
    chunk: int = DEFAULT_CHUNK,
):
    """Evaluate in chunks of ``chunk`` candidates and apply ``reducer`` to each chunk.

    With ``reducer`` returning an array per chunk, the results are concatenated; with the
    identity reducer a list of chunk responses is returned.  Memory is O(chunk × F).
    """
    if z_sys <= 0:
        raise ValueError("system impedance must be positive")
    n = batch_size(params)
    grid = cached_grid(freq, n)
    outs: list[Any] = []
    for start in range(0, n, chunk):
        sl = slice(start, min(start + chunk, n))
        m = sl.stop - sl.start
        sub = _take(params, sl, n) if n > 1 else list(params)
        res = Response(*walk(stages, sub, grid, zload, m), z_sys)
        outs.append(reducer(res) if reducer is not None else res)
    if outs and isinstance(outs[0], np.ndarray):
        return np.concatenate(outs)
    return outs


def worst_gamma_sq(stages, params, freq, zload, z_sys=50.0, chunk=DEFAULT_CHUNK) -> np.ndarray:
    """max over frequency of |Γ|² per candidate (a fast path for searches), shape (N,)."""

    def red(r: Response) -> np.ndarray:
        return np.max(r.gamma_sq, axis=1)

    return evaluate_reduced(stages, params, freq, zload, z_sys, reducer=red, chunk=chunk)
