"""Ready-made network layouts: the usual stub and stepped-line matches as element lists.

Pure functions returning ``tuple[ElementSpec, ...]`` ordered from the load outwards.
Lengths come as :class:`LengthBound` (a :class:`Bound` in s for basis ``delay`` or in m for basis
``physical``); impedances in Ω; frequencies in Hz.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

from optmatch.domain.network import Bound, ElementSpec, End, LengthBasis, Medium
from optmatch.errors import OptmatchError

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


@dataclass(frozen=True)
class TemplateArgs:
    """What a template builder gets: the reference frequency (Hz), the line ``media`` (one = fixed,
    several = a discrete choice), a free Z0 range instead (Ω), the stub ``end``, the stub ``spacing``,
    the ``free`` length range of every free line and stub, and the stepped-line ``sections``."""

    f_ref_hz: float
    media: tuple[Medium, ...]
    z0_free: Bound | None
    end: End
    spacing: LengthBound
    free: LengthBound
    sections: int

    def line(self, length: LengthBound, label: str) -> ElementSpec:
        return _line(length, self.media, self.z0_free, label)

    def stub(self, kind: Literal["shunt_stub", "series_stub"], label: str) -> ElementSpec:
        return _stub(kind, self.free, self.media, self.z0_free, self.end, label)


Builder = Callable[[TemplateArgs], tuple[ElementSpec, ...]]


@dataclass(frozen=True)
class Template:
    """A registered layout: its ``build`` function and the template options it takes beyond
    ``z0``, ``vf`` and the shelf keys (``end``, ``spacing``, ``sections``, ``max_length``, ``stubs``)."""

    build: Builder
    options: frozenset[str]


def _single(kind: Literal["shunt_stub", "series_stub"]) -> Builder:
    return lambda a: (a.line(a.free, "line"), a.stub(kind, "stub"))


def _stubs(count: int) -> Builder:
    def build(a: TemplateArgs) -> tuple[ElementSpec, ...]:
        out = [a.line(a.free, "load line"), a.stub("shunt_stub", "stub 1")]
        for k in range(2, count + 1):
            out += [a.line(a.spacing, f"spacing {k - 1}"), a.stub("shunt_stub", f"stub {k}")]
        return tuple(out)

    return build


def _stepped(a: TemplateArgs) -> tuple[ElementSpec, ...]:
    if a.sections < 1:
        raise TemplateError(f"a stepped line needs at least one section, got {a.sections}")
    quarter = wavelengths(0.25, a.f_ref_hz)
    return tuple(a.line(quarter, f"section {k + 1}") for k in range(a.sections))


_STUB_OPTIONS = frozenset({"end", "max_length", "stubs"})

TEMPLATES: dict[str, Template] = {
    "single_shunt_stub": Template(_single("shunt_stub"), _STUB_OPTIONS),
    "single_series_stub": Template(_single("series_stub"), _STUB_OPTIONS),
    "double_stub": Template(_stubs(2), _STUB_OPTIONS | {"spacing"}),
    "triple_stub": Template(_stubs(3), _STUB_OPTIONS | {"spacing"}),
    "stepped_line": Template(_stepped, frozenset({"sections"})),
}
"""Every template by name: its builder and the options it takes.  The study-file schema reads this
registry, so a new entry is all a new template needs (then regenerate the editor schema)."""


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
    template = TEMPLATES.get(name)
    if template is None:
        raise TemplateError(f"unknown template {name!r} (choose from {', '.join(TEMPLATES)})")
    args = TemplateArgs(f_ref_hz=f_ref_hz, media=media, z0_free=z0_free, end=end,
                        spacing=spacing or wavelengths(DEFAULT_SPACING_WL, f_ref_hz),
                        free=free_up_to(max_length or wavelengths(DEFAULT_MAX_LENGTH_WL, f_ref_hz)),
                        sections=sections)
    return template.build(args)
