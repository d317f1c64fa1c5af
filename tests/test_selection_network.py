"""The OS order statistic by the shared selection network, against outside references.

Sources: the network must give the ``k``-th smallest of the ``2R`` reference
cells (``docs/bit-true.md`` section 3). References: ``numpy.partition`` (a
general-purpose selection routine) on random cells; the 0-1 principle
(D. E. Knuth, "The Art of Computer Programming", vol. 3, 2nd ed., 1998,
sec. 5.3.4, Theorem Z: a network of min/max operations gives the right
result on every input if it does on every 0-1 input; the same argument holds
for one output of a selection network, since min and max commute with every
monotone threshold), exhaustively for short sides; and the structural,
cycle-stepped model (``refmodel.fixedpoint.pipeline_struct``), word for word,
for the OS pipeline built on it, on both the network path and the partition
fallback.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from numpy.lib.stride_tricks import sliding_window_view

import refmodel.fixedpoint.pipeline_fast as pipeline_fast
from refmodel.block_spec import spec_from_dict
from refmodel.fixedpoint.selection_network import selection_plan
from test_pipeline_equivalence import assert_same_words


def _network(r, g, k, cells, m, side_only=False):
    plan = selection_plan(r, g, k, side_only)
    kern = plan.kernel(cells.shape[0], m, cells.dtype)
    kern.cells[...] = 0
    n = min(cells.shape[1], kern.cells.shape[1])
    kern.cells[:, :n] = cells[:, :n]
    return np.array(kern.run())


def _reference(r, g, k, cells, m, side_only=False):
    win = sliding_window_view(cells, 2 * r + 2 * g + 1, axis=1)[:, :m]
    cols = np.r_[0:r] if side_only else np.r_[0:r, r + 2 * g + 1 : 2 * r + 2 * g + 1]
    return np.partition(win[:, :, cols], k - 1, axis=-1)[..., k - 1]


@pytest.mark.parametrize("r", [1, 2, 3, 4, 5, 6])
def test_every_rank_on_every_0_1_input(r):
    """Short sides: all 2^(2R) 0-1 patterns of the reference cells (G = 1), every rank k."""
    g = 1
    w = 2 * r + 2 * g + 1
    pats = np.array(list(itertools.product((0, 1), repeat=2 * r)), dtype=np.uint8)
    cells = np.zeros((pats.shape[0], w), dtype=np.uint8)
    cells[:, np.r_[0:r, r + 2 * g + 1 : w]] = pats
    cells[:, r : r + 2 * g + 1] = 1 - cells[:, :1]  # guard cells and CUT: values that must not count
    zeros = (pats == 0).sum(axis=1)
    for k in range(1, 2 * r + 1):
        # The k-th smallest of a 0-1 vector is 1 exactly when fewer than k cells are 0.
        want = (zeros < k).astype(np.uint8)
        got = _network(r, g, k, cells, 1)[:, 0]
        assert np.array_equal(got, want), k


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.uint32])
def test_random_cells_against_numpy_partition(dtype):
    rng = np.random.default_rng(7)
    top = np.iinfo(dtype).max
    for _ in range(60):
        r, g = int(rng.integers(1, 41)), int(rng.integers(0, 4))
        k = int(rng.integers(1, 2 * r + 1))
        m = int(rng.integers(1, 400))
        rows = int(rng.integers(1, 4))
        # Few distinct values too, so that ties are common.
        hi = int(rng.choice([2, 5, top]))
        cells = rng.integers(0, hi, (rows, m + 2 * r + 2 * g), endpoint=True).astype(dtype)
        assert np.array_equal(_network(r, g, k, cells, m), _reference(r, g, k, cells, m)), (r, g, k)
        ks = int(rng.integers(1, r + 1))
        assert np.array_equal(_network(r, g, ks, cells, m, True), _reference(r, g, ks, cells, m, True))


def _os_spec(r, g, k, edge, bits, frame):
    return spec_from_dict({"detector": {"kind": "os", "ref_cells_per_side": r, "guard_cells_per_side": g,
                                        "rank": k, "alpha": 3.5, "edge": edge},
                           "fixed": {"input_bits": bits, "alpha_frac_bits": 6}, "stream": {"frame_length": frame}})


def _os_stream(spec, rng, frames):
    w, top = spec.window_length, (1 << spec.input_bits) - 1
    lengths = rng.integers(w, 3 * w + 40, frames)
    lengths[: frames // 2] = lengths[0]  # a run of equal lengths: the frames-as-rows layout
    x = rng.integers(0, top, int(lengths.sum()), endpoint=True)
    x[: w] = top  # full scale somewhere
    last = np.zeros(x.size, dtype=bool)
    last[np.cumsum(lengths) - 1] = True
    return x, last


@pytest.mark.parametrize("edge", ["skip", "zero-pad", "one-sided", "circular"])
@pytest.mark.parametrize("bits", [5, 12, 20])
def test_os_pipeline_equals_structural_on_both_paths(monkeypatch, edge, bits):
    """OS words: the network path with small blocks (rows and block splits everywhere), and the
    partition fallback (MAX_NODES = 0), each equal to the structural model."""
    rng = np.random.default_rng(bits * 10 + len(edge))
    for r, g, k in ((1, 0, 1), (3, 1, 5), (8, 2, 12), (13, 0, 7)):
        spec = _os_spec(r, g, k, edge, bits, 2 * r + 2 * g + 1)
        x, last = _os_stream(spec, rng, 12)
        monkeypatch.setattr(pipeline_fast, "OS_BLOCK_CUTS", 64)
        assert_same_words(spec, x, last)
        assert_same_words(spec, x, last, chunk=int(rng.integers(1, 50)))
        monkeypatch.setattr(pipeline_fast, "MAX_NODES", 0)
        assert_same_words(spec, x, last)
        monkeypatch.undo()
