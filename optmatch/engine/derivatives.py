"""Exact first derivatives of a batched cascade: forward-mode tangents carried through the walk.

The walk of :mod:`optmatch.engine.cascade` is linear in the wave state ``(V, I)``, so the
derivative of the input state along a parameter direction is a second state carried beside the
first: each stage acts on the tangent as it acts on the state, plus the stage's own derivative
applied to the state where the direction touches that stage.  Complex-step differentiation does
not apply here (the walk is already complex-valued), so the stage derivatives are written out:

- a line, cosh(γl) and sinh(γl) with γl = jωτ + loss_c·√f + loss_d·f:
  d cosh = sinh·d(γl), d sinh = cosh·d(γl), d(γl) = jω dτ + √f d loss_c + f d loss_d;
- a stub, its branch pair (P, Q) = (cosh, sinh/Z0) open or (Z0·sinh, cosh) short;
- lumped parts, (R, 1), (jωL, 1) or (1, jωC).

The per-point rescaling of the state is applied to the tangents with the same factor held
constant; Γ and the delivered power do not depend on a common scale of (V, I, k), so their
derivatives are exact.  Units as in :mod:`optmatch.engine.cascade`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from optmatch.engine.cascade import FULL_RESCALE_EVERY, Params, Stage, _column

TANGENT_KEYS = ("z0", "delay", "loss_c", "loss_d", "value")


@dataclass(frozen=True)
class TangentResponse:
    """Input state and its derivatives along ``d`` directions, for ``n`` candidates on ``F`` points.

    ``v, i, k``: (n, F) as in the walk; ``dv, di, dk``: (d, n, F).
    """

    v: np.ndarray
    i: np.ndarray
    k: np.ndarray
    dv: np.ndarray
    di: np.ndarray
    dk: np.ndarray
    p_load: np.ndarray
    z_sys: float

    @property
    def gamma(self) -> np.ndarray:
        """Γ = (V − Zs I)/(V + Zs I), (n, F)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return (self.v - self.z_sys * self.i) / (self.v + self.z_sys * self.i)

    @property
    def dgamma(self) -> np.ndarray:
        """dΓ = 2 Zs (I dV − V dI)/(V + Zs I)², (d, n, F)."""
        den = self.v + self.z_sys * self.i
        with np.errstate(divide="ignore", invalid="ignore"):
            return 2.0 * self.z_sys * (self.i * self.dv - self.v * self.di) / (den * den)

    def gamma_sq_and_grad(self) -> tuple[np.ndarray, np.ndarray]:
        """|Γ|² (n, F) and its derivatives 2·Re(conj Γ · dΓ) (d, n, F)."""
        g = self.gamma
        return g.real**2 + g.imag**2, 2.0 * (g.real * self.dgamma.real + g.imag * self.dgamma.imag)

    def loss_ratio_and_grad(self) -> tuple[np.ndarray, np.ndarray]:
        """Accepted over delivered power, Re(V I*)/(P_L |k|²) (n, F), and its derivatives (d, n, F).

        (1 − |Γ|²) = 4 Zs Re(V I*)/|V + Zs I|² and delivered = 4 Zs P_L |k|²/|V + Zs I|², so the
        ratio is free of the system impedance; 1 for a lossless network.
        """
        pr = (self.v * np.conj(self.i)).real
        kk = self.k.real**2 + self.k.imag**2
        dpr = (self.dv * np.conj(self.i) + self.v * np.conj(self.di)).real
        dkk = 2.0 * (self.k.real * self.dk.real + self.k.imag * self.dk.imag)
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = pr / (self.p_load * kk)
            dratio = (dpr * kk - pr * dkk) / (self.p_load * kk * kk)
        return ratio, dratio


def _tangent(p: Params, key: str, n: int) -> tuple[np.ndarray, np.ndarray] | None:
    """Directions along which parameter ``key`` moves, and its derivatives along them as
    (k, n, 1); None when it does not move."""
    val = p.get(f"d_{key}")
    if val is None:
        return None
    arr = np.asarray(val, dtype=float)
    arr = arr.reshape(arr.shape[0], -1)
    dirs = np.flatnonzero(np.any(arr != 0.0, axis=1))
    if dirs.size == 0:
        return None
    return dirs, np.broadcast_to(arr[dirs].reshape(dirs.size, -1, 1), (dirs.size, n, 1))


def _source(parts: Sequence[tuple[np.ndarray, np.ndarray] | None], d: int, n: int,
            nf: int) -> tuple[np.ndarray, np.ndarray] | None:
    """Sum derivative terms given on direction subsets into (directions, values (k, n, F))."""
    given = [q for q in parts if q is not None]
    if not given:
        return None
    if len(given) == 1:
        return given[0]
    dirs = np.unique(np.concatenate([q[0] for q in given]))
    out = np.zeros((dirs.size, n, nf), dtype=complex)
    for q_dirs, q_val in given:
        out[np.searchsorted(dirs, q_dirs)] += q_val
    return dirs, out


def walk_tangents(
    stages: Sequence[Stage],
    params: Sequence[Params],
    freq: np.ndarray,
    zload: np.ndarray | complex,
    n: int,
    d: int,
    z_sys: float = 50.0,
) -> TangentResponse:
    """Walk the state and its ``d`` tangents from the load to the input for ``n`` candidates.

    ``params`` are engine parameter dicts as for :func:`optmatch.engine.cascade.walk`, each with
    optional derivative arrays ``d_<key>`` shaped (d, n) (or (d, 1)) for ``key`` in
    :data:`TANGENT_KEYS`: the derivative of that parameter along each direction.  The state and
    its tangents travel as one stack (1 + d, n, F), so a stage costs a few array operations
    whatever d is; phasors are taken directly (one exponential per point), which suits the small
    batches of a local polish.
    """
    f = np.asarray(freq, dtype=float)
    omega = 2.0 * np.pi * f
    sqrt_f = np.sqrt(f)
    nf = f.size
    zl = np.broadcast_to(np.asarray(zload, dtype=complex), f.shape)
    # row 0: the state; row 1 + j: its derivative along direction j
    vs = np.zeros((1 + d, n, nf), dtype=complex)
    vs[0] = zl
    is_ = np.zeros((1 + d, n, nf), dtype=complex)
    is_[0] = 1.0
    ks = np.zeros((1 + d, n, nf), dtype=complex)
    ks[0] = 1.0
    branches = 0
    for stage, p in zip(stages, params, strict=True):
        v, i, k = vs[0], is_[0], ks[0]
        if stage.kind in ("line", "stub"):
            z0 = _column(p["z0"], n)
            gl = 1j * omega * _column(p["delay"], n)
            loss_c, loss_d = p.get("loss_c", 0.0), p.get("loss_d", 0.0)
            if np.any(loss_c) or np.any(loss_d):
                ep = np.exp(gl + _column(loss_c, n) * sqrt_f + _column(loss_d, n) * f)
                em = 1.0 / ep
                ch, sh = 0.5 * (ep + em), 0.5 * (ep - em)
            else:
                e = np.exp(gl)
                ch, sh = e.real + 0j, 1j * e.imag
            parts = []
            for key, scale in (("delay", 1j * omega), ("loss_c", sqrt_f), ("loss_d", f)):
                t = _tangent(p, key, n)
                if t is not None:
                    parts.append((t[0], t[1] * scale))
            dgl = _source(parts, d, n, nf)
            dz0 = _tangent(p, "z0", n)
            if stage.kind == "line":
                zsh, shz = z0 * sh, sh / z0
                vs, is_ = ch * vs + zsh * is_, shz * vs + ch * is_
                if dgl is not None:  # d cosh = sinh·dγl, d sinh = cosh·dγl
                    rows = 1 + dgl[0]
                    vs[rows] += dgl[1] * (sh * v + z0 * ch * i)
                    is_[rows] += dgl[1] * (ch / z0 * v + sh * i)
                if dz0 is not None:
                    rows = 1 + dz0[0]
                    vs[rows] += dz0[1] * (sh * i)
                    is_[rows] -= dz0[1] * (sh / (z0 * z0) * v)
                continue
            s = _column(p.get("short", False), n, bool)
            bp = np.where(s, z0 * sh, ch)
            bq = np.where(s, ch, sh / z0)
            src_p, src_q = [], []
            if dgl is not None:
                src_p.append((dgl[0], dgl[1] * np.where(s, z0 * ch, sh)))
                src_q.append((dgl[0], dgl[1] * np.where(s, sh, ch / z0)))
            if dz0 is not None:
                src_p.append((dz0[0], dz0[1] * np.where(s, sh, 0.0)))
                src_q.append((dz0[0], dz0[1] * np.where(s, 0.0, -sh / (z0 * z0))))
            dbp, dbq = _source(src_p, d, n, nf), _source(src_q, d, n, nf)
        else:
            value = _column(p["value"], n)
            dval = _tangent(p, "value", n)
            one = np.ones((n, 1), dtype=complex)
            dbp = dbq = None
            if stage.part == "r":
                bp, bq = value * np.ones((1, nf), dtype=complex), one
                dbp = None if dval is None else (dval[0], dval[1] * np.ones((1, nf), dtype=complex))
            elif stage.part == "l":
                bp, bq = 1j * omega * value, one
                dbp = None if dval is None else (dval[0], dval[1] * (1j * omega))
            else:
                bp, bq = one, 1j * omega * value
                dbq = None if dval is None else (dval[0], dval[1] * (1j * omega))
        if stage.connection == "series":  # V' = V Q + I P, I' = I Q, k' = k Q
            vs, is_, ks = vs * bq + is_ * bp, is_ * bq, ks * bq
            if dbq is not None:
                rows = 1 + dbq[0]
                vs[rows] += dbq[1] * v
                is_[rows] += dbq[1] * i
                ks[rows] += dbq[1] * k
            if dbp is not None:
                vs[1 + dbp[0]] += dbp[1] * i
        else:  # V' = V P, I' = I P + V Q, k' = k P
            vs, is_, ks = vs * bp, is_ * bp + vs * bq, ks * bp
            if dbp is not None:
                rows = 1 + dbp[0]
                vs[rows] += dbp[1] * v
                is_[rows] += dbp[1] * i
                ks[rows] += dbp[1] * k
            if dbq is not None:
                is_[1 + dbq[0]] += dbq[1] * v
        # Keep magnitudes near one (a common factor, held constant for the tangents: Γ and the
        # delivered power do not depend on it).
        branches += 1
        sl = slice(None) if branches % FULL_RESCALE_EVERY == 0 else slice(0, 1)
        scale = np.abs(vs[0, :, sl]) + np.abs(is_[0, :, sl])
        inv = 1.0 / np.where(scale > 0.0, scale, 1.0)
        vs, is_, ks = vs * inv, is_ * inv, ks * inv
    p_load = np.broadcast_to(zl.real, (n, nf))
    return TangentResponse(vs[0], is_[0], ks[0], vs[1:], is_[1:], ks[1:], p_load, float(z_sys))
