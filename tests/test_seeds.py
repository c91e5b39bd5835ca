"""Closed-form seeds mapped onto study networks."""

from __future__ import annotations

import numpy as np
import pytest

from optmatch.domain.mask import Segment, build_grid
from optmatch.domain.network import Bound, ElementSpec, NetworkSpec
from optmatch.domain.problem import Problem
from optmatch.domain.seeds import binomial_impedances, closed_form_seeds

F0 = 1e9
T = 1.0 / F0


def _free(kind: str, end: str | None = None, extra: float = 0.0) -> ElementSpec:
    return ElementSpec(kind, Bound(0.0, 0.5 * T), end=end, extra_delay=extra)


def _fixed_line(wl: float) -> ElementSpec:
    return ElementSpec("line", Bound(wl * T, wl * T))


NETWORKS = {
    "single shunt": (_free("line"), _free("shunt_stub", "either")),
    "single series": (_free("line"), _free("series_stub", "either")),
    "double stub": (_free("line"), _free("shunt_stub", "open"), _fixed_line(0.125), _free("shunt_stub", "open")),
    "triple stub": (_free("line"), _free("shunt_stub", "either"), _fixed_line(0.125), _free("shunt_stub", "either"),
                    _fixed_line(0.125), _free("shunt_stub", "either")),
    "with allowances": (_free("line", extra=0.02 * T), _free("shunt_stub", "short", extra=0.03 * T)),
}


@pytest.mark.parametrize("name", sorted(NETWORKS))
@pytest.mark.parametrize("zl", [60 - 80j, 100 + 80j, 20 + 35j, 150 - 10j])
def test_every_seed_matches_at_the_reference_frequency(name, zl):
    # Identity: a closed-form solution gives Γ = 0 at its design frequency, whatever network it
    # is embedded in (unused elements are set neutral; allowances are subtracted from the cut).
    net = NetworkSpec(NETWORKS[name])
    problem = Problem("t", 50.0, build_grid([Segment(F0, F0, 20.0)]), np.array([zl]), net, F0)
    seeds = closed_form_seeds(net, zl, 50.0, F0)
    assert seeds, f"no seed for {name}"
    for seed in seeds:
        gamma = problem.response(seed.u[None, :], seed.choice).gamma[0, 0]
        assert abs(gamma) < 1e-6, seed.origin


def test_binomial_transformer_impedances():
    # Pozar, Microwave Engineering, 4th ed., Example 5.6 (recalled from memory): a three-section
    # binomial transformer between a 50 Ω load and a 100 Ω line: 91.7, 70.7 and 54.5 Ω
    # (line side to load side).  Our list runs from the load outwards.
    z = binomial_impedances(50.0, 100.0, 3)
    np.testing.assert_allclose(z, [54.5, 70.7, 91.7], atol=0.1)
