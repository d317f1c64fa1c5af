"""Outside checks of the 2D (range-Doppler) float CFAR model (refmodel.floatmodel.float_cfar2d).

As for 1D: a per-cell reference written here as a direct transcription of the
written definition (docs/float-model.md, "2D detectors"), Monte Carlo
false-alarm rates against published formulas or scipy integration of the
published detector model (99.9 % Clopper-Pearson interval, fixed seeds),
properties with hypothesis, and bad-input checks. No expected value comes from
the code under test.
"""

from __future__ import annotations

import math
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, stats

from refmodel.errors import SpecError
from refmodel.floatmodel.float_cfar2d import cfar_2d
from refmodel.floatmodel.window2d import Window2D

KINDS = ("ca", "go", "so", "os")
RANGE_EDGES = ("skip", "zero-pad", "one-sided", "circular")
DOPPLER_EDGES = ("circular", "zero-pad", "skip")
COMPARES = (">", ">=")

LONG = os.environ.get("CFARVEC_LONG") == "1"
# Common practice, no source: modest example counts by default; deadline=None
# because tests never time anything.
HYP = settings(
    max_examples=500 if LONG else 40,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)


# --------------------------------------------------------------------------
# Per-cell reference: a direct transcription of the written definition, one
# cell at a time over explicit offset lists. Deliberately slow and plain.
# Written from docs/float-model.md section 4 (the guard rectangle, the
# reference ring and the cross-shaped window, their halves and the
# 2D edge rules are this project's definitions) and the published 1D
# detectors it extends: CA, the mean of the reference cells (H. M. Finn and
# R. S. Johnson, RCA Review 29(3), 1968; M. A. Richards, Fundamentals of Radar
# Signal Processing, 2005, sec. 7.3); GO and SO, the greater and the smaller
# of the two half means (V. G. Hansen and J. H. Sawyers, IEEE Trans.
# AES-16(1), 1980; P. P. Gandhi and S. A. Kassam, IEEE Trans. AES-24(4),
# 1988); OS, the k-th smallest reference cell (H. Rohling, IEEE Trans.
# AES-19(4), 1983).
# --------------------------------------------------------------------------


def reference_estimate_2d(m, kind, Rd, Rr, Gd, Gr, rank, range_edge, doppler_edge, window="ring"):
    """Return (estimate, valid) as nested lists for one map m[d][n]."""
    D, L = len(m), len(m[0])
    hd, hr = Rd + Gd, Rr + Gr
    est_rows, valid_rows = [], []
    for d in range(D):
        est_row, valid_row = [], []
        for n in range(L):
            range_fits = hr <= n <= L - 1 - hr
            doppler_fits = hd <= d <= D - 1 - hd
            # valid: full window fits along range; along Doppler too unless
            # Doppler is circular (a circular Doppler axis always fits).
            valid_row.append(range_fits and (doppler_fits or doppler_edge == "circular"))
            if (range_edge == "skip" and not range_fits) or (doppler_edge == "skip" and not doppler_fits):
                est_row.append(math.nan)
                continue

            def value(i, j):
                if not 0 <= i < D:
                    if doppler_edge != "circular":
                        return 0.0
                    i %= D
                if not 0 <= j < L:
                    if range_edge != "circular":
                        return 0.0
                    j %= L
                return float(m[i][j])

            ring, lag, lead = [], [], []
            for dd in range(-hd, hd + 1):
                for rr in range(-hr, hr + 1):
                    if abs(dd) <= Gd and abs(rr) <= Gr:
                        continue  # guard rectangle (includes the CUT)
                    if window == "cross" and dd != 0 and rr != 0:
                        continue  # the cross-shaped window keeps the two arms through the CUT only
                    v = value(d + dd, n + rr)
                    ring.append(v)
                    if rr < 0:
                        lag.append(v)
                    elif rr > 0:
                        lead.append(v)
            lag_complete = n - hr >= 0
            lead_complete = n + hr <= L - 1
            if range_edge == "one-sided" and not (lag_complete and lead_complete):
                side = lead if not lag_complete else lag
                if kind == "os":
                    est = sorted(side)[math.ceil(rank * len(side) / len(ring)) - 1]
                else:
                    est = sum(side) / len(side)
            elif kind == "ca":
                est = sum(ring) / len(ring)
            elif kind == "go":
                est = max(sum(lag) / len(lag), sum(lead) / len(lead))
            elif kind == "so":
                est = min(sum(lag) / len(lag), sum(lead) / len(lead))
            else:
                est = sorted(ring)[rank - 1]
            est_row.append(est)
        est_rows.append(est_row)
        valid_rows.append(valid_row)
    return est_rows, valid_rows


def reference_decision(x, est, alpha, compare):
    """Threshold and detection of one cell, from the written definition."""
    if math.isnan(est):
        return math.nan, False
    thr = alpha * est
    return thr, (x > thr) if compare == ">" else (x >= thr)


# (Rd, Rr, Gd, Gr, D, L): minimal maps, a pure range ring (Rd = 0), no guard,
# range reference 0 with guard (halves beside the guard in Doppler only), a
# ring with guard 0 in range.
GEOMETRIES = [
    (1, 2, 1, 1, 5, 8),
    (0, 3, 0, 1, 3, 11),
    (1, 1, 0, 0, 4, 6),
    (2, 0, 0, 1, 6, 5),
    (1, 2, 2, 0, 7, 9),
]


def _check_2d_against_reference(m, kind, geom, rank, range_edge, doppler_edge, alphas=(1.0, 1.5), exact=True,
                                window="ring"):
    Rd, Rr, Gd, Gr, _, _ = geom
    maps = m.reshape((-1,) + m.shape[-2:])
    refs = [reference_estimate_2d(mm, kind, Rd, Rr, Gd, Gr, rank, range_edge, doppler_edge, window) for mm in maps]
    for alpha in alphas:
        for compare in COMPARES:
            res = cfar_2d(
                m, kind, (Rd, Rr), (Gd, Gr), alpha,
                rank=rank, compare=compare, range_edge=range_edge, doppler_edge=doppler_edge, window=window,
            )
            for arr in (res.estimate, res.threshold, res.detections, res.valid):
                assert arr.shape == m.shape
            got_e = res.estimate.reshape(maps.shape)
            got_t = res.threshold.reshape(maps.shape)
            got_d = res.detections.reshape(maps.shape)
            got_v = res.valid.reshape(maps.shape)
            for i, mm in enumerate(maps):
                e, v = np.array(refs[i][0]), np.array(refs[i][1])
                td = [[reference_decision(mm[a, b], e[a, b], alpha, compare) for b in range(mm.shape[1])]
                      for a in range(mm.shape[0])]
                t = np.array([[c[0] for c in row] for row in td])
                d = np.array([[c[1] for c in row] for row in td])
                np.testing.assert_array_equal(got_v[i], v)
                if exact:
                    # Integer-valued samples: sums are exact, so bit-for-bit
                    # agreement, ties (x == threshold) included.
                    np.testing.assert_array_equal(got_e[i], e)
                    np.testing.assert_array_equal(got_t[i], t)
                    np.testing.assert_array_equal(got_d[i], d)
                else:
                    # Real-valued samples: window sums from a summed-area table carry a rounding
                    # error of order eps * (map total) (docs/float-model.md section 5); 256 eps
                    # leaves room for the four-term differences and the division by N.
                    tol = 256 * np.finfo(float).eps * (float(mm.sum()) + 1.0)
                    np.testing.assert_allclose(got_e[i], e, rtol=0, atol=tol, equal_nan=True)
                    clear = ~np.isnan(t) & (np.abs(mm - t) > alpha * tol + tol)
                    np.testing.assert_array_equal(got_d[i][clear], d[clear])
                    np.testing.assert_array_equal(got_d[i][np.isnan(t)], False)


@pytest.mark.parametrize("doppler_edge", DOPPLER_EDGES)
@pytest.mark.parametrize("range_edge", RANGE_EDGES)
@pytest.mark.parametrize("kind", KINDS)
def test_matches_per_cell_reference(kind, range_edge, doppler_edge):
    rng = np.random.default_rng(31337)
    for geom in GEOMETRIES:
        Rd, Rr, Gd, Gr, D, L = geom
        n_ring = (2 * Rd + 2 * Gd + 1) * (2 * Rr + 2 * Gr + 1) - (2 * Gd + 1) * (2 * Gr + 1)
        ranks = sorted({1, (n_ring + 1) // 2, n_ring}) if kind == "os" else [None]
        lead = (2,) if geom is GEOMETRIES[0] else ()
        m = rng.integers(0, 4, size=lead + (D, L)).astype(float)
        for rank in ranks:
            _check_2d_against_reference(m, kind, geom, rank, range_edge, doppler_edge)
    # One real-valued map per combination (rounding tolerance, see docs).
    geom = GEOMETRIES[0]
    m = rng.exponential(1.0, size=geom[4:])
    _check_2d_against_reference(m, kind, geom, 7 if kind == "os" else None, range_edge, doppler_edge,
                                alphas=(1.3,), exact=False)


@pytest.mark.filterwarnings("error")
@pytest.mark.parametrize("range_edge", RANGE_EDGES)
@pytest.mark.parametrize("kind", ["ca", "os"])
def test_pure_doppler_ring_matches_per_cell_reference(kind, range_edge):
    # ref_range = guard_range = 0: the window is one range cell wide, always
    # fits along range, and the (empty) range halves are never used.
    rng = np.random.default_rng(11)
    geom = (2, 0, 1, 0, 8, 5)
    m = rng.integers(0, 5, size=geom[4:]).astype(float)
    for rank in ([1, 3, 4] if kind == "os" else [None]):
        _check_2d_against_reference(m, kind, geom, rank, range_edge, "zero-pad")


@st.composite
def cases_2d(draw):
    kind = draw(st.sampled_from(KINDS))
    range_edge = draw(st.sampled_from(RANGE_EDGES))
    doppler_edge = draw(st.sampled_from(DOPPLER_EDGES))
    Rd = draw(st.integers(0, 2))
    Rr = draw(st.integers(0 if Rd else 1, 3))
    Gd = draw(st.integers(0, 2))
    Gr = draw(st.integers(0, 2))
    if kind in ("go", "so") and Rr == 0 and (Gr == 0 or Rd == 0):
        Rr = 1  # halves must be non-empty for GO/SO
    D = draw(st.integers(2 * Rd + 2 * Gd + 1, 2 * Rd + 2 * Gd + 4))
    L = draw(st.integers(2 * Rr + 2 * Gr + 1, 2 * Rr + 2 * Gr + 6))
    n_ring = (2 * Rd + 2 * Gd + 1) * (2 * Rr + 2 * Gr + 1) - (2 * Gd + 1) * (2 * Gr + 1)
    rank = draw(st.integers(1, n_ring)) if kind == "os" else None
    vals = draw(st.lists(st.integers(0, 5), min_size=D * L, max_size=D * L))
    m = np.array(vals, dtype=float).reshape(D, L)
    return m, kind, (Rd, Rr, Gd, Gr, D, L), rank, range_edge, doppler_edge


@st.composite
def cross_cases_2d(draw):
    # The cross-shaped window: arms of Rd and Rr cells per side beyond Gd and Gr guard cells.
    kind = draw(st.sampled_from(KINDS))
    range_edge = draw(st.sampled_from(RANGE_EDGES))
    doppler_edge = draw(st.sampled_from(DOPPLER_EDGES))
    Rd = draw(st.integers(0, 2))
    Rr = draw(st.integers(1 if kind in ("go", "so") or Rd == 0 else 0, 3))
    Gd = draw(st.integers(0, 2))
    Gr = draw(st.integers(0, 2) if Rr else st.just(0))  # one-sided needs cells in the range halves
    D = draw(st.integers(2 * Rd + 2 * Gd + 1, 2 * Rd + 2 * Gd + 4))
    L = draw(st.integers(2 * Rr + 2 * Gr + 1, 2 * Rr + 2 * Gr + 6))
    rank = draw(st.integers(1, 2 * Rd + 2 * Rr)) if kind == "os" else None
    vals = draw(st.lists(st.integers(0, 5), min_size=D * L, max_size=D * L))
    m = np.array(vals, dtype=float).reshape(D, L)
    return m, kind, (Rd, Rr, Gd, Gr, D, L), rank, range_edge, doppler_edge


@HYP
@given(cases_2d())
def test_matches_per_cell_reference_random(case):
    m, kind, geom, rank, range_edge, doppler_edge = case
    _check_2d_against_reference(m, kind, geom, rank, range_edge, doppler_edge, alphas=(1.0,))


@HYP
@given(cross_cases_2d())
def test_cross_shaped_window_matches_per_cell_reference_random(case):
    m, kind, geom, rank, range_edge, doppler_edge = case
    _check_2d_against_reference(m, kind, geom, rank, range_edge, doppler_edge, alphas=(1.0,), window="cross")


def test_cross_shaped_window_cell_count_by_hand():
    # Counted by hand from the definition (docs/float-model.md section 4): Rd = 2, Rr = 3, Gd = 1,
    # Gr = 1. Range arm: offsets (0, -4..-2) and (0, 2..4), 6 cells; Doppler arm: (-3..-2, 0) and
    # (2..3, 0), 4 cells; N = 10; each range half holds the 3 range-arm cells on its side.
    w = Window2D("cross", 2, 3, 1, 1)
    cells = set(zip(*(a.tolist() for a in w.offsets())))
    assert cells == {(0, r) for r in (-4, -3, -2, 2, 3, 4)} | {(d, 0) for d in (-3, -2, 2, 3)}
    assert (w.n_cells, w.n_half) == (10, 3)
    assert set(zip(*(a.tolist() for a in w.offsets("lag")))) == {(0, -4), (0, -3), (0, -2)}


@pytest.mark.parametrize("range_edge", RANGE_EDGES)
def test_os_in_small_blocks_matches_per_cell_reference(monkeypatch, range_edge):
    # The OS model bounds memory by working in blocks of Doppler rows; force
    # tiny blocks (and blocks that do not divide n_doppler) and compare again.
    import refmodel.floatmodel.float_cfar2d as fc2

    rng = np.random.default_rng(5)
    geom = (1, 2, 1, 1, 7, 10)
    m = rng.integers(0, 5, size=(2,) + geom[4:]).astype(float)
    for budget in (1, 2 * 10 * 36 * 3, 10**9):
        monkeypatch.setattr(fc2, "_OS_GATHER_BUDGET", budget)
        _check_2d_against_reference(m, "os", geom, 11, range_edge, "circular", alphas=(1.0,))


def test_summed_area_rounding_never_gives_negative_estimate():
    # Huge samples in the first rows and columns, zeros elsewhere: the four-term
    # summed-area difference over an all-zero ring can round below 0; the
    # model must still give estimate >= 0, so a zero CUT with ">" is never a
    # detection (by the definition 0 > alpha * 0 is false). Common practice,
    # no source.
    rng = np.random.default_rng(1)
    for _ in range(20):
        m = np.zeros((12, 40))
        m[:2, :] = rng.exponential(1e16, (2, 40))
        m[:, :3] = rng.exponential(1e16, (12, 3))
        res = cfar_2d(m, "ca", (1, 3), (1, 1), 2.0, range_edge="skip", doppler_edge="skip")
        zero_ring = np.zeros_like(res.valid)
        zero_ring[4:10, 7:36] = True
        assert np.all(res.estimate[zero_ring] >= 0.0)
        assert not res.detections[zero_ring].any()


# --------------------------------------------------------------------------
# Monte Carlo false-alarm rates on i.i.d. unit-mean exponential noise.
# Each trial is a map of exactly one window (Wd x Wr cells) holding a single
# decision at a chosen cell, so trials are independent and the count is
# Binomial(trials, Pfa).
# --------------------------------------------------------------------------

TRIALS = 50_000
CONF = 0.999
PFA_TARGET = 1e-2  # about 500 expected false alarms per run

RD, RR, GD, GR = 1, 2, 0, 1
HD, HR = RD + GD, RR + GR
WD, WR = 2 * HD + 1, 2 * HR + 1
N_RING = WD * WR - (2 * GD + 1) * (2 * GR + 1)  # 21 - 3 = 18
N_HALF = WD * HR - (2 * GD + 1) * GR  # 9 - 1 = 8 cells with range offset < 0


def _assert_rate(hits, trials, pfa):
    ci = stats.binomtest(int(hits), trials).proportion_ci(confidence_level=CONF, method="exact")
    assert ci.low <= pfa <= ci.high, f"measured {hits}/{trials}={hits / trials:.3e}, theory {pfa:.3e}, CI {ci}"


def _maps(seed):
    return np.random.default_rng(seed).exponential(1.0, size=(TRIALS, WD, WR))


def pfa_ca(alpha, N):
    """Finn & Johnson 1968; Richards, Fundamentals of Radar Signal Processing,
    2005, sec. 7.3: Pfa = (1 + alpha/N)^(-N), N i.i.d. exponential cells."""
    return (1.0 + alpha / N) ** (-N)


def pfa_os(alpha, N, k):
    """Rohling, "Radar CFAR thresholding in clutter and multiple target
    situations", IEEE Trans. AES-19(4), 1983: prod_{i<k} (N-i)/(N-i+alpha)."""
    return float(np.prod([(N - i) / (N - i + alpha) for i in range(k)]))


def pfa_go_so(alpha, n, which):
    """GO/SO Pfa by scipy numerical integration. Model: Hansen & Sawyers,
    IEEE Trans. AES-16(1), 1980 (GO); Gandhi & Kassam, IEEE Trans. AES-24(4),
    1988 (GO, SO). Half sums i.i.d. Gamma(n, 1); estimate = max or min of the
    half means; Pfa = E[exp(-alpha * estimate)]."""
    g = stats.gamma(n)
    other = g.cdf if which == "go" else g.sf
    val, err = integrate.quad(lambda y: 2.0 * g.pdf(y) * other(y) * np.exp(-alpha * y / n), 0.0, np.inf,
                              epsabs=1e-13, epsrel=1e-10)
    assert err < 1e-8
    return val


def _alpha_for(pfa_of_alpha, target=PFA_TARGET):
    return optimize.brentq(lambda a: pfa_of_alpha(a) - target, 1e-6, 1e4, xtol=1e-12)


def test_ring_counts_of_the_mc_geometry():
    # Counted by hand from the definition (docs/float-model.md section 4), Rd = 1, Rr = 2, Gd = 0,
    # Gr = 1: the window is Doppler offsets -1..1 by range offsets -3..3, 3 x 7 = 21 cells; the guard
    # rectangle is Doppler 0 by range -1..1, 3 cells (the CUT among them); the reference ring holds 18.
    # Lagging half (range offset < 0): 3 rows x 3 columns minus the guard cell (0, -1) = 8, the
    # leading half likewise 8; the 2 cells (-1, 0) and (1, 0) straight above and below the CUT are
    # in neither half: 8 + 8 + 2 = 18.
    d_off, r_off = Window2D("ring", RD, RR, GD, GR).offsets()
    cells = set(zip(d_off.tolist(), r_off.tolist()))
    assert len(d_off) == len(cells) == 18
    window = {(d, r) for d in (-1, 0, 1) for r in range(-3, 4)}
    assert cells == window - {(0, -1), (0, 0), (0, 1)}
    assert int((r_off < 0).sum()) == 8 and int((r_off > 0).sum()) == 8
    assert {c for c in cells if c[1] == 0} == {(-1, 0), (1, 0)}
    assert (N_RING, N_HALF) == (18, 8)  # the constants the Monte Carlo below uses


def test_monte_carlo_pfa_ca_2d():
    alpha = _alpha_for(lambda a: pfa_ca(a, N_RING))
    res = cfar_2d(_maps(201), "ca", (RD, RR), (GD, GR), alpha, range_edge="skip", doppler_edge="skip")
    assert res.valid[:, HD, HR].all() and res.valid.sum() == TRIALS
    _assert_rate(res.detections.sum(), TRIALS, pfa_ca(alpha, N_RING))


def test_monte_carlo_pfa_os_2d():
    k = 13
    alpha = _alpha_for(lambda a: pfa_os(a, N_RING, k))
    res = cfar_2d(_maps(202), "os", (RD, RR), (GD, GR), alpha, rank=k, range_edge="skip", doppler_edge="skip")
    _assert_rate(res.detections.sum(), TRIALS, pfa_os(alpha, N_RING, k))


@pytest.mark.parametrize("kind", ["go", "so"])
def test_monte_carlo_pfa_go_so_2d(kind):
    # The halves hold N_HALF = 8 cells each (not N_RING / 2 = 9): the rate
    # depends on that count, so this also checks the half definition.
    # alpha of a CA detector on the two halves at PFA_TARGET: GO/SO then sit
    # near it (numerical integration is too slow to invert in a test).
    alpha = _alpha_for(lambda a: pfa_ca(a, 2 * N_HALF))
    pfa = pfa_go_so(alpha, N_HALF, kind)
    assert 1e-3 <= pfa <= 5e-2
    res = cfar_2d(_maps(203 if kind == "go" else 204), kind, (RD, RR), (GD, GR), alpha,
                  range_edge="skip", doppler_edge="skip")
    _assert_rate(res.detections.sum(), TRIALS, pfa)


def test_monte_carlo_pfa_one_sided_range_edge_2d():
    # At range cell 0 the lagging half is outside the map: CA uses the mean of
    # the leading half (N_HALF exponentials, Finn & Johnson 1968 with
    # N = N_HALF); OS uses rank ceil(k * N_HALF / N_RING) among the half
    # (rule: common practice, no source; Pfa: Rohling 1983 with N = N_HALF).
    x = _maps(205)
    alpha = _alpha_for(lambda a: pfa_ca(a, N_HALF))
    res = cfar_2d(x, "ca", (RD, RR), (GD, GR), alpha, range_edge="one-sided", doppler_edge="skip")
    assert not res.valid[:, HD, 0].any()
    _assert_rate(res.detections[:, HD, 0].sum(), TRIALS, pfa_ca(alpha, N_HALF))
    k = 13
    kh = math.ceil(k * N_HALF / N_RING)
    alpha = _alpha_for(lambda a: pfa_os(a, N_HALF, kh))
    res = cfar_2d(x, "os", (RD, RR), (GD, GR), alpha, rank=k, range_edge="one-sided", doppler_edge="skip")
    _assert_rate(res.detections[:, HD, -1].sum(), TRIALS, pfa_os(alpha, N_HALF, kh))


def test_monte_carlo_pfa_circular_doppler_edge_2d():
    # Doppler row 0 of a map of exactly WD rows: the circular Doppler axis
    # wraps the upper rows to distinct cells of the same map, so the full CA
    # formula holds there (Finn & Johnson 1968).
    alpha = _alpha_for(lambda a: pfa_ca(a, N_RING))
    res = cfar_2d(_maps(206), "ca", (RD, RR), (GD, GR), alpha, range_edge="skip", doppler_edge="circular")
    assert res.valid[:, 0, HR].all()
    _assert_rate(res.detections[:, 0, HR].sum(), TRIALS, pfa_ca(alpha, N_RING))


# --------------------------------------------------------------------------
# Properties (common practice, no source).
# --------------------------------------------------------------------------


@st.composite
def real_cases(draw):
    m, kind, geom, rank, range_edge, doppler_edge = draw(cases_2d())
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    x = rng.exponential(draw(st.floats(1e-3, 1e3)), size=(2,) + m.shape)
    x[rng.random(x.shape) < 0.1] = 0.0
    Rd, Rr, Gd, Gr, _, _ = geom
    return x, kind, (Rd, Rr), (Gd, Gr), rank, range_edge, doppler_edge


def _run(case, alpha, x=None, compare=">"):
    x0, kind, ref, guard, rank, range_edge, doppler_edge = case
    return cfar_2d(x0 if x is None else x, kind, ref, guard, alpha, rank=rank, compare=compare,
                   range_edge=range_edge, doppler_edge=doppler_edge)


@HYP
@given(real_cases(), st.floats(0.1, 5.0), st.floats(1.0, 3.0), st.sampled_from(COMPARES))
def test_raising_alpha_never_adds_detections(case, alpha, factor, compare):
    lo = _run(case, alpha, compare=compare)
    hi = _run(case, alpha * factor, compare=compare)
    assert not (hi.detections & ~lo.detections).any()


@HYP
@given(real_cases(), st.floats(0.1, 5.0), st.sampled_from(COMPARES))
def test_detections_exactly_where_cut_beats_threshold(case, alpha, compare):
    x = case[0]
    res = _run(case, alpha, compare=compare)
    beats = (x > res.threshold) if compare == ">" else (x >= res.threshold)
    np.testing.assert_array_equal(res.detections, beats & ~np.isnan(res.threshold))
    np.testing.assert_array_equal(np.isnan(res.estimate), np.isnan(res.threshold))
    assert np.all(res.estimate[~np.isnan(res.estimate)] >= 0.0)


@HYP
@given(real_cases(), st.floats(1e-6, 1e6))
def test_constant_map_estimate_is_the_constant(case, c):
    x = np.full_like(case[0], c)
    res = _run(case, 1.0, x=x)
    np.testing.assert_allclose(res.estimate[res.valid], c, rtol=1e-12)


@HYP
@given(real_cases(), st.floats(0.1, 5.0), st.integers(-30, 30))
def test_scaling_input_scales_threshold_and_keeps_detections(case, alpha, p):
    # s = 2**p scales every float operation exactly, so the CFAR property
    # holds bit for bit.
    s = 2.0**p
    a = _run(case, alpha)
    b = _run(case, alpha, x=case[0] * s)
    np.testing.assert_array_equal(b.estimate, a.estimate * s)
    np.testing.assert_array_equal(b.threshold, a.threshold * s)
    np.testing.assert_array_equal(b.detections, a.detections)


def test_maps_are_independent():
    rng = np.random.default_rng(8)
    x = rng.exponential(size=(3, 2, 9, 14))
    for kind in KINDS:
        rank = 10 if kind == "os" else None
        a = cfar_2d(x, kind, (1, 2), (1, 1), 2.0, rank=rank, range_edge="zero-pad")
        y = x.copy()
        y[2, 1] *= 100.0
        b = cfar_2d(y, kind, (1, 2), (1, 1), 2.0, rank=rank, range_edge="zero-pad")
        keep = np.ones((3, 2), bool)
        keep[2, 1] = False
        np.testing.assert_array_equal(a.estimate[keep], b.estimate[keep])


# --------------------------------------------------------------------------
# Bad input: each invalid parameter raises SpecError naming the parameter.
# --------------------------------------------------------------------------

GOOD = dict(rd_map=np.ones((8, 16)), kind="ca", ref=(1, 3), guard=(1, 1), alpha=2.0)


def _call(**over):
    args = {**GOOD, **over}
    kw = {k: args.pop(k) for k in ("rank", "compare", "range_edge", "doppler_edge", "window") if k in args}
    return cfar_2d(args["rd_map"], args["kind"], args["ref"], args["guard"], args["alpha"], **kw)


BAD = [
    ("kind", dict(kind="mean")),
    ("ref", dict(ref=3)),
    ("ref", dict(ref=(1, 2, 3))),
    ("ref", dict(ref=(0, 0))),
    ("ref_doppler", dict(ref=(-1, 3))),
    ("ref_range", dict(ref=(1, -3))),
    ("ref_range", dict(ref=(1, 2.5))),
    ("ref", dict(kind="go", ref=(1, 0), guard=(1, 0))),  # empty range halves
    ("ref", dict(kind="so", ref=(0, 0), guard=(1, 1))),
    ("guard", dict(guard=None)),
    ("guard_doppler", dict(guard=(-1, 1))),
    ("guard_range", dict(guard=(1, True))),
    ("alpha", dict(alpha=0)),
    ("alpha", dict(alpha=float("nan"))),
    ("rank", dict(kind="os")),
    ("rank", dict(kind="os", rank=0)),
    ("rank", dict(kind="os", rank=37)),  # the ring of (1, 3), (1, 1) has 36 cells
    ("window", dict(window="box")),
    ("ref", dict(kind="go", ref=(2, 0), guard=(1, 1), window="cross")),  # cross: no range arm
    ("range_edge", dict(ref=(2, 0), guard=(1, 1), window="cross", range_edge="one-sided")),
    ("rank", dict(kind="go", rank=1)),
    ("compare", dict(compare="gt")),
    ("range_edge", dict(range_edge="wrap")),
    ("doppler_edge", dict(doppler_edge="one-sided")),
    ("doppler_edge", dict(doppler_edge="reflect")),
    ("rd_map", dict(rd_map=np.ones(16))),
    ("rd_map", dict(rd_map=-np.ones((8, 16)))),
    ("rd_map", dict(rd_map=np.full((8, 16), np.nan))),
    ("rd_map", dict(rd_map=np.ones((8, 16), dtype=complex))),
    ("range length", dict(rd_map=np.ones((8, 8)))),  # Wr = 9
    ("Doppler length", dict(rd_map=np.ones((4, 16)))),  # Wd = 5
]


@pytest.mark.parametrize("field,over", BAD, ids=[f"{f}-{i}" for i, (f, _) in enumerate(BAD)])
def test_bad_input_raises_spec_error_naming_the_parameter(field, over):
    with pytest.raises(SpecError) as exc:
        _call(**over)
    assert field in str(exc.value)
    assert field in exc.value.field
    assert exc.value.allowed


def test_rank_equal_to_ring_count_and_minimal_map_are_accepted():
    res = _call(kind="os", rank=36, rd_map=np.ones((5, 9)))
    assert res.valid.sum() == 5  # circular Doppler: every row fits; one range cell
