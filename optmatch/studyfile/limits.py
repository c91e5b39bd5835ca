"""Bounds on the work a study file may ask for, checked before anything runs.

Static caps keep every count finite and sane; the memory estimate catches the combinations (a large
population on a fine grid) that the caps alone let through.  Figures are our own choices, sized for
the 2-core, 24 GiB machines this project runs on, with room for a second worker.
"""

from __future__ import annotations

MAX_NAME = 100  # characters in a study name (it names the results folder)
MAX_DESCRIPTION = 10_000  # characters
MAX_POINTS_PER_SEGMENT = 10_001
MAX_GRID_POINTS = 20_001  # after merging every segment
MAX_SEGMENTS = 1_000
MAX_ELEMENTS = 64
MAX_ALTERNATIVES = 8  # named networks in one study, each searched in full
MAX_SECTIONS = 64  # stepped-line sections
MAX_TRIALS = 100_000
MAX_KEEP = 1_000
MAX_POPULATION = 1_000_000
MAX_GENERATIONS = 100_000
MAX_SAMPLES = 1_000_000  # tolerance Monte Carlo builds
MAX_SEED = 2**32 - 1  # numpy and optuna seeds
MAX_STOCK_COUNT = 1_000_000
MAX_LOADS = 1_000  # loads in one study (named entries and files matched by patterns together)
MAX_LOAD_POINTS = 200_000  # loads × grid points: what one candidate's evaluation covers
MAX_LOAD_BYTES = 256 * 2**20  # the Touchstone files of all the loads together
MEMORY_BUDGET_BYTES = 2 * 1024**3  # one study's peak working memory

# Working-memory model, measured with tracemalloc on the engine (our own figures): the engine walks
# candidates in chunks of 256 and holds about 14 complex (16 B) arrays of chunk × grid points; each
# candidate of a generation holds about 8 float arrays of its search dimension plus 3 engine
# parameters per element.
ENGINE_CHUNK = 256
ENGINE_ARRAYS = 14
BYTES_PER_PARAMETER = 8 * 8
BYTES_PER_ELEMENT = 8 * 3


def engine_bytes(grid_points: int, rows: int) -> int:
    """Working set of the engine for ``rows`` candidates on ``grid_points`` frequencies (every
    load's grid together); the engine takes fewer candidates per chunk on long grids."""
    from optmatch.engine.cascade import chunk_for

    return 16 * ENGINE_ARRAYS * min(rows, ENGINE_CHUNK, chunk_for(grid_points)) * grid_points


def search_bytes(population: int, dim: int, elements: int, grid_points: int) -> int:
    """Peak memory (bytes) of one generation of the inner search."""
    rows = max(population, 8)
    return rows * (BYTES_PER_PARAMETER * max(dim, 1) + BYTES_PER_ELEMENT * elements) \
        + engine_bytes(grid_points, rows)


def robustness_bytes(samples: int, elements: int, grid_points: int) -> int:
    """Peak memory (bytes) of the tolerance Monte Carlo of one design and its sensitivities."""
    draws = samples * elements * 8 * 8  # four error draws and the perturbed parameters
    sens = 4 * (2 * 3 * elements) * elements * 8  # central differences: 6 builds per element
    return draws + sens + engine_bytes(grid_points, max(samples, 6 * elements))


def gib(n: int | float) -> str:
    """Bytes as GiB for messages."""
    return f"{n / 1024**3:.3g} GiB"
