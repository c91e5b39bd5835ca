"""The inner optimiser: restarts of a settled population, and the polish's guarantees."""

from __future__ import annotations

import numpy as np

import optmatch.domain.optimise as opt


def test_settled_population_restarts_elsewhere(monkeypatch):
    # Our own two-basin function on the unit square: a narrow global peak at (0.8, 0.8) and a broad
    # local one at (0.25, 0.25).  With budget to spare, the first population settles, and the next
    # (larger) one, kept away from the first's best, lands elsewhere; both basins are found and the
    # result is ranked by the plain score.
    def score(u: np.ndarray) -> np.ndarray:
        broad = 1.0 - 4.0 * np.sum((u - 0.25) ** 2, axis=1)
        narrow = 1.5 - 60.0 * np.sum((u - 0.8) ** 2, axis=1)
        return np.maximum(broad, narrow)

    calls = []
    original = opt.population_search

    def counting(*args, **kwargs):
        res = original(*args, **kwargs)
        calls.append((args[4] if len(args) > 4 else kwargs["population"], res.u[0]))
        return res

    monkeypatch.setattr(opt, "population_search", counting)
    seeds = np.array([[0.25, 0.26]])  # start the first population in the broad basin
    res = opt._restarted_search(score, 2, np.random.default_rng(3), seeds, 16, 200, None, 0.08, 20.0)
    assert len(calls) >= 2
    assert calls[1][0] == int(16 * opt.RESTART_GROWTH)  # the restart is larger
    assert np.max(np.abs(calls[0][1] - calls[1][1])) > 0.08  # and settles elsewhere
    bests = np.array([b for _, b in calls])
    assert np.any(np.max(np.abs(bests - 0.8), axis=1) < 0.02)  # both basins were found
    assert np.any(np.max(np.abs(bests - 0.25), axis=1) < 0.02)
    assert res.score[0] == np.max(score(res.u)) and np.isclose(res.score[0], 1.5, atol=1e-3)
