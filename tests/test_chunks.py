"""Tests for atlas.chunks: the chunk plan covers the grid once, and the cost model's order."""

import numpy as np

from atlas import chunks, grid

# The grid of tests/test_build.py: small and large n (narrow windows and the nested search).
N_SPEC = "1:25,log:30:3000000:10"
P_SPEC = "logit:0.001:0.999:7,0.5"


def test_plan_chunks_cover_the_grid():
    n, p = grid.parse_n(N_SPEC), grid.parse_p(P_SPEC)
    for kwargs in ({}, {"p_block": 3}, {"cost": 1}, {"cost": 1e12, "p_block": 5}):
        plan = chunks.plan_chunks(n, p, **kwargs)
        covered = np.zeros((n.size, p.size), dtype=int)
        for i, c in enumerate(plan):
            assert c.index == i
            covered[c.n_start : c.n_stop, c.p_start : c.p_stop] += 1
        assert (covered == 1).all(), kwargs
    assert len(chunks.plan_chunks(n, p, cost=1)) == n.size  # one n per chunk
    assert len(chunks.plan_chunks(n, p, cost=1e12, p_block=5)) == 2  # 7 p in blocks of 5


def test_cell_cost_grows_with_n():
    p = grid.default_p()
    costs = [chunks.cell_cost(n, p) for n in (1, 100, 2000, 10**5, 10**8)]
    assert costs == sorted(costs)
    assert chunks.cell_cost(10, p[:1]) < chunks.cell_cost(10, p)


def test_chunk_arrays_is_compute_chunk_of_its_cells():
    # A chunk of the whole axes is the same computation as its own slice of them.
    n, p = grid.parse_n(N_SPEC), grid.parse_p(P_SPEC)
    chunk = chunks.Chunk(0, 3, 9, 2, 6)
    part = chunks.chunk_arrays(chunk, n, p, ("normal_cc", "poisson"))
    alone = chunks.compute_chunk(n[3:9], p[2:6], ("normal_cc", "poisson"))
    assert part.keys() == alone.keys()
    for name, values in part.items():
        assert values.shape == (2, 6, 4), name
        assert np.array_equal(values, alone[name]), name
