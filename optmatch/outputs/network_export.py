"""S-parameters of a design's matching network and of the matched input, and their Touchstone export.

Port 1 of the 2-port faces the source (the input), port 2 faces the load; both ports are referenced
to the problem's system impedance.  Units: Hz, Ω.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from optmatch.domain.design import Design
from optmatch.domain.problem import Problem
from optmatch.engine import Grid, Stage, add_branch, branch_pair, line_terms, through_line
from optmatch.io.touchstone import write_touchstone

NETWORK_FILE = "best_network.s2p"
INPUT_FILE = "matched_input.s1p"


def _element_matrix(stage: Stage, p: dict, grid: Grid) -> tuple[np.ndarray, np.ndarray]:
    """Homogeneous ABCD matrix ``k·T`` of one element (F, 2, 2) and its scale ``k`` (F,).

    The engine's own update (line, or branch pair P / Q in series or shunt) applied to the two unit
    states (V, I) = (1, 0) and (0, 1) gives the matrix's columns, so open and short circuits stay
    finite and the physics is the engine's.
    """
    n = grid.freq.size
    one, zero = np.ones(n, dtype=complex), np.zeros(n, dtype=complex)
    m = np.empty((n, 2, 2), dtype=complex)
    if stage.kind == "line":
        terms = [x[0] for x in np.broadcast_arrays(*line_terms(p, 1, grid))]
        cols = [through_line(one, zero, *terms), through_line(zero, one, *terms)]
        k = one
    else:
        bp, bq = (np.broadcast_to(x, (1, n))[0] for x in branch_pair(stage, p, 1, grid))
        (v1, i1, k), (v2, i2, _) = (add_branch(v, i, one, stage.connection, bp, bq)
                                    for v, i in ((one, zero), (zero, one)))
        cols = [(v1, i1), (v2, i2)]
    for c, (v, i) in enumerate(cols):
        m[:, 0, c], m[:, 1, c] = v, i
    return m, k


def network_sparams(problem: Problem, design: Design) -> np.ndarray:
    """S-parameters (F, 2, 2) of the matching network alone on the problem's grid.

    Built as the ABCD cascade of the elements (input side first) and converted to S against
    the system impedance on both ports.  Every element is reciprocal, so S12 = S21.
    """
    net = problem.network
    params = net.engine_params(design.vector(), design.choice)
    grid = Grid(problem.grid.freq)
    freq = grid.freq
    z = problem.z_sys
    total = np.broadcast_to(np.eye(2, dtype=complex), (freq.size, 2, 2)).copy()
    k = np.ones(freq.size, dtype=complex)
    # elements are listed from the load outwards; the input-side matrix multiplies on the left
    for stage, p in zip(reversed(net.stages), reversed(params), strict=True):
        m, km = _element_matrix(stage, p, grid)
        total = total @ m
        k = k * km
        scale = np.max(np.abs(total), axis=(1, 2))
        scale[scale == 0.0] = 1.0
        total = total / scale[:, None, None]
        k = k / scale
    a, b, c, d = total[:, 0, 0], total[:, 0, 1], total[:, 1, 0], total[:, 1, 1]
    den = a + b / z + c * z + d
    s = np.empty((freq.size, 2, 2), dtype=complex)
    s[:, 0, 0] = (a + b / z - c * z - d) / den
    s[:, 1, 1] = (-a + b / z - c * z + d) / den
    s[:, 1, 0] = 2.0 * k / den
    s[:, 0, 1] = s[:, 1, 0]
    return s


def matched_input(problem: Problem, design: Design, load: int | str | None = None) -> np.ndarray:
    """Input reflection Γ (F,) of the network terminated in the problem's load (with several, the
    one named or numbered ``load``), against the system impedance."""
    return problem.response(design.vector(), design.choice, load).gamma[0]


INVENTED_NOTE = "INVENTED data: the study says its load data is invented; this is not about a measured device"


def export_touchstone(problem: Problem, design: Design, folder: str | os.PathLike, rank: int = 1,
                      invented: bool = False, which: str | None = None,
                      per_load: Mapping[str, str] | None = None) -> tuple[Path, ...]:
    """Write ``best_network.s2p`` (the network alone) and ``matched_input.s1p`` into ``folder``;
    with several loads, the matched input on each load named in ``per_load`` (load name -> file name)
    instead of ``matched_input.s1p``.

    Every header names the study, the design (``which``, default ``design rank {rank}``) and the load,
    and says that the data is invented when ``invented``.  Returns the paths.  Every file is written
    atomically.
    """
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    z = problem.z_sys
    common = [
        f"optmatch study: {problem.name}",
        *([INVENTED_NOTE] if invented else []),
        f"{which or f'design rank {rank}'}: margin {design.margin_db:+.2f} dB against the mask",
        f"reference impedance {z:g} ohm",
    ]
    network_lines = [
        *common[:-1],
        "matching network alone, 2-port",
        "port 1 faces the source (input), port 2 faces the load",
        f"both ports referenced to {z:g} ohm",
    ]
    freq = problem.grid.freq
    s2p = write_touchstone(out / NETWORK_FILE, freq, network_sparams(problem, design), z, network_lines)
    if not problem.several:
        input_lines = [*common, "input reflection of the matching network terminated in the study's load"]
        return s2p, write_touchstone(out / INPUT_FILE, freq, matched_input(problem, design), z, input_lines)
    files = [s2p]
    for name, file in (per_load or {}).items():
        lines = [*common, f"input reflection of the matching network terminated in the study's load {name}"]
        files.append(write_touchstone(out / file, freq, matched_input(problem, design, name), z, lines))
    return tuple(files)
