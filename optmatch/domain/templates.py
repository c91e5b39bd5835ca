"""Ready-made network layouts: the usual stub and stepped-line matches as element lists.

Pure functions returning ``tuple[ElementSpec, ...]`` ordered from the load outwards.
Lengths come as :class:`LengthBound` (a :class:`Bound` in s for basis ``delay`` or in m for basis
``physical``); impedances in Ω; frequencies in Hz.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from optmatch.domain.network import Bound, ElementSpec, End, LengthBasis, Medium
from optmatch.errors import OptmatchError

TemplateName = Literal["single_shunt_stub", "single_series_stub", "double_stub", "triple_stub", "stepped_line"]
TEMPLATES: tuple[str, ...] = (
    "single_shunt_stub", "single_series_stub", "double_stub", "triple_stub", "stepped_line",
)

DEFAULT_SPACING_WL = 0.125  # stub spacing of double and triple stubs, wavelengths at the reference
DEFAULT_MAX_LENGTH_WL = 0.5  # free lengths run from 0 to this, wavelengths at the reference
DEFAULT_SECTIONS = 3  # stepped line
STEPPED_Z0_OHM = (10.0, 250.0)  # free Z0 range of stepped-line sections unless given


class TemplateError(OptmatchError, ValueError):
    """A template that cannot be built as asked (unknown name, no sections, ...)."""


ROLES = ("lines", "stubs")  # the two roles of a template's elements, for per-role shelf keys


def role_of(element: ElementSpec) -> str:
    """``lines`` for a series line a template makes (load line, spacing, section), else ``stubs``."""
    return "lines" if element.kind == "line" else "stubs"


@dataclass(frozen=True)
class LengthBound:
    """A length range on one basis: ``delay`` (bound in s) or ``physical`` (bound in m)."""

    bound: Bound
    basis: LengthBasis = "delay"


def wavelengths(wl: float, f_ref_hz: float) -> LengthBound:
    """A fixed electrical length of ``wl`` wavelengths at ``f_ref_hz`` as a delay bound (s)."""
    tau = wl / f_ref_hz
    return LengthBound(Bound(tau, tau), "delay")


def free_up_to(limit: LengthBound) -> LengthBound:
    """A free length from zero to the upper end of ``limit``."""
    return LengthBound(Bound(0.0, limit.bound.hi), limit.basis)


def _line(length: LengthBound, media: tuple[Medium, ...], z0_free: Bound | None, label: str) -> ElementSpec:
    return ElementSpec("line", length=length.bound, length_basis=length.basis, media=media,
                       z0_free=z0_free, label=label)


def _stub(kind: Literal["shunt_stub", "series_stub"], length: LengthBound, media: tuple[Medium, ...],
          z0_free: Bound | None, end: End, label: str) -> ElementSpec:
    return ElementSpec(kind, length=length.bound, length_basis=length.basis, media=media,
                       z0_free=z0_free, end=end, label=label)


def build_template(
    name: str,
    f_ref_hz: float,
    media: tuple[Medium, ...],
    z0_free: Bound | None = None,
    end: End = "either",
    spacing: LengthBound | None = None,
    max_length: LengthBound | None = None,
    sections: int = DEFAULT_SECTIONS,
) -> tuple[ElementSpec, ...]:
    """Elements of template ``name`` from the load outwards.

    ``media``: the line media (one = fixed, several = a discrete choice); ``z0_free``: a free Z0
    range instead (Ω); ``end``: stub termination; ``spacing``: fixed stub spacing of double and
    triple stubs (default 0.125 λ); ``max_length``: upper end of every free length (default
    0.5 λ); ``sections``: stepped-line sections, each fixed at a quarter wave at ``f_ref_hz``.
    Raises :class:`TemplateError` for an unknown name or a non-positive count.
    """
    if f_ref_hz <= 0:
        raise TemplateError(f"reference frequency must be positive, got {f_ref_hz} Hz")
    spacing = spacing or wavelengths(DEFAULT_SPACING_WL, f_ref_hz)
    free = free_up_to(max_length or wavelengths(DEFAULT_MAX_LENGTH_WL, f_ref_hz))

    def stub(kind: Literal["shunt_stub", "series_stub"], label: str) -> ElementSpec:
        return _stub(kind, free, media, z0_free, end, label)

    if name == "single_shunt_stub":
        return (_line(free, media, z0_free, "line"), stub("shunt_stub", "stub"))
    if name == "single_series_stub":
        return (_line(free, media, z0_free, "line"), stub("series_stub", "stub"))
    if name in ("double_stub", "triple_stub"):
        n_stubs = 2 if name == "double_stub" else 3
        out = [_line(free, media, z0_free, "load line"), stub("shunt_stub", "stub 1")]
        for k in range(2, n_stubs + 1):
            out.append(_line(spacing, media, z0_free, f"spacing {k - 1}"))
            out.append(stub("shunt_stub", f"stub {k}"))
        return tuple(out)
    if name == "stepped_line":
        if sections < 1:
            raise TemplateError(f"a stepped line needs at least one section, got {sections}")
        quarter = wavelengths(0.25, f_ref_hz)
        return tuple(_line(quarter, media, z0_free, f"section {k + 1}") for k in range(sections))
    raise TemplateError(f"unknown template {name!r} (choose from {', '.join(TEMPLATES)})")
