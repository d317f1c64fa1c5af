"""Outside checks of the range-Doppler models, each with its source beside it.

1. The float 2D model (refmodel.floatmodel.float_cfar2d) against scipy.ndimage: the CA and GO/SO
   estimates are correlations of the map with the reference cells as kernel
   (scipy.ndimage.correlate), the OS estimate a rank filter with them as footprint
   (scipy.ndimage.rank_filter). The circular Doppler axis is padded by numpy.pad(mode="wrap").
2. CA false-alarm probability of the N-cell reference ring: the fixed-point map model on
   exponential noise against the closed form (1 + alpha/N)^-N (H. M. Finn and R. S. Johnson, RCA
   Review 29(3), 1968; M. A. Richards, Fundamentals of Radar Signal Processing, 2005, sec. 7.3),
   and refmodel.threshold_design against the same closed form for the spec's N.
3. OS against the rank formula prod_{i<k} (N-i)/(N-i+alpha) (H. Rohling, IEEE Trans. AES-19(4),
   1983), for the ring and the cross-shaped window.
Monte Carlo counts are checked inside a 99.9 % Clopper-Pearson interval (fixed seeds); trials are
CUTs on a grid spaced one window apart, so no two share a cell and the count is binomial.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import ndimage, stats

from refmodel import threshold_design as td
from refmodel.block_spec import spec_from_dict
from refmodel.fixedpoint.map_fast import run_map_fast
from refmodel.floatmodel.float_cfar2d import cfar_2d
from refmodel.floatmodel.window2d import Window2D

CONF = 0.999


def _scipy_pad(m, hd, doppler_edge):
    if doppler_edge == "circular":
        return np.pad(m, ((hd, hd), (0, 0)), mode="wrap")
    return np.pad(m, ((hd, hd), (0, 0)), mode="constant")


@pytest.mark.parametrize("shape", ["ring", "cross"])
@pytest.mark.parametrize("doppler_edge", ["circular", "zero-pad"])
def test_float_ca_go_so_are_ndimage_correlations(shape, doppler_edge):
    rng = np.random.default_rng(7)
    m = rng.exponential(3.0, (20, 33))
    rd, rr, gd, gr = 2, 3, 1, 1
    w = Window2D(shape, rd, rr, gd, gr)
    r_off = np.arange(-w.hr, w.hr + 1)[None, :]
    kernels = {"all": w.member(), "lag": w.member() & (r_off < 0), "lead": w.member() & (r_off > 0)}
    padded = _scipy_pad(m, w.hd, doppler_edge)
    sums = {k: ndimage.correlate(padded, v.astype(float), mode="constant", cval=0.0)[w.hd : w.hd + 20]
            for k, v in kernels.items()}
    want = {"ca": sums["all"] / w.n_cells,
            "go": np.maximum(sums["lag"], sums["lead"]) / w.n_half,
            "so": np.minimum(sums["lag"], sums["lead"]) / w.n_half}
    for kind, est in want.items():
        res = cfar_2d(m, kind, (rd, rr), (gd, gr), 1.0, range_edge="zero-pad", doppler_edge=doppler_edge,
                      window=shape)
        np.testing.assert_allclose(res.estimate, est, rtol=1e-10, atol=1e-10)


@pytest.mark.parametrize("shape", ["ring", "cross"])
def test_float_os_is_an_ndimage_rank_filter(shape):
    rng = np.random.default_rng(8)
    m = rng.integers(0, 50, (16, 25)).astype(float)
    w = Window2D(shape, 1, 2, 1, 1)
    for k in (1, w.n_cells // 2, w.n_cells):
        want = ndimage.rank_filter(np.pad(m, ((w.hd, w.hd), (0, 0)), mode="wrap"), k - 1,
                                   footprint=w.member(), mode="constant", cval=0.0)[w.hd : w.hd + 16]
        res = cfar_2d(m, "os", (1, 2), (1, 1), 1.0, rank=k, range_edge="zero-pad", doppler_edge="circular",
                      window=shape)
        np.testing.assert_array_equal(res.estimate, want)


def _noise_map_spec(kind, shape, rank=None, design_pfa=1e-2):
    det = {"kind": kind, "design_pfa": design_pfa}
    if rank is not None:
        det["rank"] = rank
    return spec_from_dict({
        "detector": det,
        "fixed": {"input_bits": 16, "alpha_frac_bits": 16, "threshold_frac_bits": 4},
        "map": {"range_cells": 700, "doppler_bins": 250, "order": "doppler-fast", "window": shape,
                "ref_range": 2, "ref_doppler": 1, "guard_range": 1, "guard_doppler": 1,
                "range_edge": "zero-pad", "doppler_edge": "circular"},
    })


def _grid_rate(spec, seed, maps=3, level=2000.0):
    """False alarms at CUTs spaced one window apart (disjoint windows) on exponential noise maps,
    quantised as the vectors' input quantiser does (floor, docs/vectors.md)."""
    rng = np.random.default_rng(seed)
    w = spec.window
    hits = trials = 0
    for _ in range(maps):
        rd = np.floor(rng.exponential(level, (spec.doppler_bins, spec.range_cells)))
        rd = np.minimum(rd, (1 << spec.input_bits) - 1).astype(np.int64)
        x = spec.stream_cells(rd)
        last = np.zeros(x.size, dtype=bool)
        last[-1] = True
        det = spec.rd_map(run_map_fast(spec, x, last).det)
        sel = det[w.hd : spec.doppler_bins - w.hd : w.wd, w.hr : spec.range_cells - w.hr : w.wr]
        hits += int(sel.sum())
        trials += sel.size
    return hits, trials


def _assert_rate(hits, trials, pfa):
    ci = stats.binomtest(hits, trials).proportion_ci(confidence_level=CONF, method="exact")
    assert ci.low <= pfa <= ci.high, f"{hits}/{trials} = {hits / trials:.4e}, theory {pfa:.4e}, CI {ci}"


@pytest.mark.parametrize("shape", ["ring", "cross"])
def test_ca_pfa_of_the_reference_cells_closed_form_and_monte_carlo(shape):
    spec = _noise_map_spec("ca", shape)
    n = spec.n_cells
    assert n == (5 * 7 - 3 * 3 if shape == "ring" else 2 * 1 + 2 * 2)  # counted by hand
    # The design: alpha from the closed form, (1 + alpha/N)^-N = Pfa (Finn & Johnson 1968).
    assert math.isclose((1 + spec.alpha / n) ** -n, 1e-2, rel_tol=1e-9)
    assert math.isclose(td.pfa_from_alpha("ca", n, spec.alpha), 1e-2, rel_tol=1e-9)
    hits, trials = _grid_rate(spec, 11 if shape == "ring" else 12)
    assert trials > 10_000
    _assert_rate(hits, trials, (1 + spec.realised_alpha / n) ** -n)


@pytest.mark.parametrize("shape,rank", [("ring", 20), ("cross", 4)])
def test_os_pfa_against_the_rank_formula(shape, rank):
    spec = _noise_map_spec("os", shape, rank=rank)
    n, k = spec.n_cells, rank
    pfa = math.prod((n - i) / (n - i + spec.realised_alpha) for i in range(k))  # Rohling 1983
    hits, trials = _grid_rate(spec, 13 if shape == "ring" else 14)
    _assert_rate(hits, trials, pfa)
