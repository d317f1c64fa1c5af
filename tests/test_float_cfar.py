"""Outside checks of the 1D float CFAR model (refmodel.floatmodel.float_cfar).

Three kinds of checks, none of which takes its expected values from the code
under test:

1. a deliberately simple per-cell reference written in this file as a direct
   transcription of the written definitions (docs/float-model.md), compared
   cell by cell with the vectorised model;
2. Monte Carlo false-alarm rates on i.i.d. exponential noise against published
   Pfa formulas, or against scipy numerical integration of the published
   detector model, with a 99.9 % Clopper-Pearson interval and a fixed seed;
3. properties (hypothesis) and bad-input checks.
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
from refmodel.floatmodel.float_cfar import CfarResult, cfar_1d

KINDS = ("ca", "go", "so", "os")
EDGES = ("skip", "zero-pad", "one-sided", "circular")
COMPARES = (">", ">=")

LONG = os.environ.get("CFARVEC_LONG") == "1"
# Common practice, no source: modest example counts by default, many more for
# local heavy runs. deadline=None because tests never time anything.
HYP = settings(
    max_examples=1000 if LONG else 60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)


# --------------------------------------------------------------------------
# Per-cell reference: a direct transcription of the written definition
# (docs/float-model.md, sections "Detectors" and "Edge policies"), one cell at
# a time over explicit index lists. Deliberately slow and plain. The
# estimates are those of the published detectors: CA, the mean of the 2R
# reference cells (H. M. Finn and R. S. Johnson, "Adaptive detection mode
# with threshold control as a function of spatially sampled clutter-level
# estimates", RCA Review 29(3), 1968; M. A. Richards, Fundamentals of Radar
# Signal Processing, 2005, sec. 7.3); GO, the greater of the two side means
# (V. G. Hansen and J. H. Sawyers, "Detectability loss due to 'greatest of'
# selection in a cell-averaging CFAR", IEEE Trans. AES-16(1), 1980); SO, the
# smaller (P. P. Gandhi and S. A. Kassam, "Analysis of CFAR processors in
# nonhomogeneous background", IEEE Trans. AES-24(4), 1988); OS, the k-th
# smallest reference cell (H. Rohling, "Radar CFAR thresholding in clutter
# and multiple target situations", IEEE Trans. AES-19(4), 1983). The edge
# policies are this project's (docs/float-model.md section 3: common
# practice, no source).
# --------------------------------------------------------------------------


def reference_1d(line, kind, R, G, alpha, rank, compare, edge):
    """Return (estimate, threshold, detections, valid) lists for one frame."""
    L = len(line)
    h = R + G
    est_out, thr_out, det_out, val_out = [], [], [], []
    for n in range(L):
        valid = (R + G <= n) and (n <= L - 1 - R - G)
        lag_idx = list(range(n - G - R, n - G))  # n-G-R .. n-G-1
        lead_idx = list(range(n + G + 1, n + G + R + 1))  # n+G+1 .. n+G+R

        def value(i):
            if 0 <= i < L:
                return float(line[i])
            if edge == "circular":
                return float(line[i % L])
            return 0.0  # zero-pad (skip / one-sided never use it)

        lag = [value(i) for i in lag_idx]
        lead = [value(i) for i in lead_idx]
        if edge == "skip" and not valid:
            est_out.append(math.nan)
            thr_out.append(math.nan)
            det_out.append(False)
            val_out.append(valid)
            continue
        lag_complete = n - G - R >= 0
        lead_complete = n + G + R <= L - 1
        if edge == "one-sided" and not (lag_complete and lead_complete):
            side = lead if not lag_complete else lag
            if kind == "os":
                est = sorted(side)[math.ceil(rank / 2) - 1]
            else:
                est = sum(side) / len(side)
        elif kind == "ca":
            est = sum(lag + lead) / len(lag + lead)
        elif kind == "go":
            est = max(sum(lag) / len(lag), sum(lead) / len(lead))
        elif kind == "so":
            est = min(sum(lag) / len(lag), sum(lead) / len(lead))
        else:
            est = sorted(lag + lead)[rank - 1]
        thr = alpha * est
        x = float(line[n])
        det = (x > thr) if compare == ">" else (x >= thr)
        est_out.append(est)
        thr_out.append(thr)
        det_out.append(det)
        val_out.append(valid)
    return est_out, thr_out, det_out, val_out


def _check_against_reference(x, kind, R, G, alpha, rank, compare, edge, exact):
    res = cfar_1d(x, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    assert isinstance(res, CfarResult)
    for arr in (res.estimate, res.threshold, res.detections, res.valid):
        assert arr.shape == x.shape
    assert res.estimate.dtype == np.float64 and res.detections.dtype == bool and res.valid.dtype == bool
    lines = x.reshape(-1, x.shape[-1])
    got_e = res.estimate.reshape(lines.shape)
    got_t = res.threshold.reshape(lines.shape)
    got_d = res.detections.reshape(lines.shape)
    got_v = res.valid.reshape(lines.shape)
    for i, line in enumerate(lines):
        e, t, d, v = (np.array(a) for a in reference_1d(line, kind, R, G, alpha, rank, compare, edge))
        np.testing.assert_array_equal(got_v[i], v)
        if exact:
            # Integer-valued samples: every sum is exact in float64, so the
            # model must agree bit for bit, ties (x == threshold) included.
            np.testing.assert_array_equal(got_e[i], e)
            np.testing.assert_array_equal(got_t[i], t)
            np.testing.assert_array_equal(got_d[i], d)
        else:
            # Real-valued samples: sums differ by rounding only (bound
            # eps * frame sum, stated in docs/float-model.md).
            tol = 64 * np.finfo(float).eps * (float(np.sum(line)) + 1.0)
            np.testing.assert_allclose(got_e[i], e, rtol=0, atol=tol, equal_nan=True)
            np.testing.assert_array_equal(np.isnan(got_t[i]), np.isnan(t))
            clear = ~np.isnan(t) & (np.abs(line - t) > alpha * tol + tol)
            np.testing.assert_array_equal(got_d[i][clear], d[clear])
            np.testing.assert_array_equal(got_d[i][np.isnan(t)], False)


@pytest.mark.parametrize("compare", COMPARES)
@pytest.mark.parametrize("edge", EDGES)
@pytest.mark.parametrize("kind", KINDS)
def test_matches_per_cell_reference(kind, edge, compare):
    rng = np.random.default_rng(20240611)
    # (R, G, L, batch shape): the minimum frame length L = W, guard 0, and
    # frames much longer than the window.
    for R, G, L, lead in [(1, 0, 3, (4,)), (2, 1, 7, (3,)), (3, 2, 25, (2, 2)), (4, 0, 40, ())]:
        for rank in range(1, 2 * R + 1) if kind == "os" else [None]:
            # Small integers make ties x == alpha * estimate frequent, so
            # ">" and ">=" are told apart.
            x = rng.integers(0, 4, size=lead + (L,)).astype(float)
            for alpha in (1.0, 2.0, 0.75):
                _check_against_reference(x, kind, R, G, alpha, rank, compare, edge, exact=True)
            xf = rng.exponential(1.0, size=lead + (L,))
            _check_against_reference(xf, kind, R, G, 1.7, rank, compare, edge, exact=False)


@pytest.mark.parametrize("edge", EDGES)
def test_os_in_small_blocks_matches_per_cell_reference(monkeypatch, edge):
    # The OS model bounds memory by working in blocks of CUT positions; force
    # tiny blocks (and blocks that do not divide L) and compare again.
    import refmodel.floatmodel.float_cfar as fc

    rng = np.random.default_rng(99)
    x = rng.integers(0, 5, size=(2, 3, 23)).astype(float)
    for budget in (1, 7, 50):
        monkeypatch.setattr(fc, "_OS_GATHER_BUDGET", budget)
        for rank in (1, 4, 8):
            _check_against_reference(x, "os", 4, 1, 1.0, rank, ">=", edge, exact=True)


@st.composite
def cases_1d(draw):
    kind = draw(st.sampled_from(KINDS))
    edge = draw(st.sampled_from(EDGES))
    compare = draw(st.sampled_from(COMPARES))
    R = draw(st.integers(1, 4))
    G = draw(st.integers(0, 3))
    L = draw(st.integers(2 * R + 2 * G + 1, 2 * R + 2 * G + 12))
    rows = draw(st.integers(1, 3))
    rank = draw(st.integers(1, 2 * R)) if kind == "os" else None
    alpha = draw(st.sampled_from([0.5, 1.0, 1.5, 2.0, 3.0]))
    vals = draw(st.lists(st.integers(0, 6), min_size=rows * L, max_size=rows * L))
    x = np.array(vals, dtype=float).reshape(rows, L)
    return x, kind, R, G, alpha, rank, compare, edge


@HYP
@given(cases_1d())
def test_matches_per_cell_reference_random(case):
    x, kind, R, G, alpha, rank, compare, edge = case
    _check_against_reference(x, kind, R, G, alpha, rank, compare, edge, exact=True)


def test_accepts_plain_list_and_integer_dtype_and_leaves_input_alone():
    x = np.array([3, 0, 1, 7, 2, 2, 9, 4, 0, 1], dtype=np.int64)
    before = x.copy()
    res = cfar_1d(x.tolist(), "ca", 2, 1, 1.0, edge="zero-pad")
    e, _, d, _ = reference_1d(x, "ca", 2, 1, 1.0, None, ">", "zero-pad")
    np.testing.assert_array_equal(res.estimate, e)
    np.testing.assert_array_equal(res.detections, d)
    res2 = cfar_1d(x, "ca", 2, 1, 1.0, edge="zero-pad")
    np.testing.assert_array_equal(res2.estimate, e)
    np.testing.assert_array_equal(x, before)


def test_large_offset_does_not_make_zero_window_negative():
    # A huge sample early in the frame followed by (near) zeros: the
    # cumulative-sum difference over a later window must not come out
    # negative, so a zero CUT with ">" is never a detection there (by the
    # definition, 0 > alpha * 0 is false). Common practice, no source.
    x = np.zeros(64)
    x[0] = 1e17 + 3.0
    x[1] = 0.1
    res = cfar_1d(x, "ca", 3, 1, 2.0, edge="skip")
    v = res.valid & (np.arange(64) > 12)
    assert np.all(res.estimate[v] >= 0.0)
    assert not res.detections[v].any()


# --------------------------------------------------------------------------
# Monte Carlo false-alarm rates on i.i.d. unit-mean exponential noise.
#
# Square-law detected complex Gaussian noise is exponential (Richards 2005,
# sec. 6.2). To keep the binomial interval honest, each trial is a frame of
# exactly W cells holding a single decision (the centre cell for the full
# window, or one edge cell for the edge policies), so the trials are
# independent and the detection count is Binomial(trials, Pfa).
# --------------------------------------------------------------------------

TRIALS = 100_000
PFA_TARGET = 1e-2  # about 1000 expected false alarms per run
CONF = 0.999


def _assert_rate(hits, trials, pfa):
    ci = stats.binomtest(int(hits), trials).proportion_ci(confidence_level=CONF, method="exact")
    assert ci.low <= pfa <= ci.high, f"measured {hits}/{trials}={hits / trials:.3e}, theory {pfa:.3e}, CI {ci}"


def _frames(seed, R, G):
    W = 2 * R + 2 * G + 1
    return np.random.default_rng(seed).exponential(1.0, size=(TRIALS, W))


def pfa_ca(alpha, N, n_cells=None):
    """CA Pfa with alpha times (sum of n_cells exponentials) / N.

    For n_cells = N: Pfa = (1 + alpha/N)^(-N), Finn & Johnson 1968; Richards,
    Fundamentals of Radar Signal Processing, 2005, sec. 7.3 (eq. 7.29 from
    memory). For n_cells != N the estimate is Gamma(n_cells)/N and Pfa is its
    Laplace transform E[exp(-alpha S / N)] = (1 + alpha/N)^(-n_cells)
    (moment generating function of the Gamma distribution, e.g. Papoulis &
    Pillai, Probability, Random Variables and Stochastic Processes, 2002, from
    memory); here it is evaluated with scipy instead of the closed form.
    """
    if n_cells is None or n_cells == N:
        return (1.0 + alpha / N) ** (-N)
    return stats.gamma(n_cells).expect(lambda s: np.exp(-alpha * s / N))


def pfa_os(alpha, N, k):
    """Rohling, "Radar CFAR thresholding in clutter and multiple target
    situations", IEEE Trans. AES-19(4), 1983, Pfa of the OS detector:
    Pfa = prod_{i=0}^{k-1} (N - i) / (N - i + alpha)."""
    return float(np.prod([(N - i) / (N - i + alpha) for i in range(k)]))


def pfa_go_so(alpha, R, which):
    """GO/SO Pfa by numerical integration (scipy.integrate.quad).

    Model: Hansen & Sawyers, "Detectability loss due to 'greatest of'
    selection in a cell-averaging CFAR", IEEE Trans. AES-16(1), 1980 (GO);
    Gandhi & Kassam, "Analysis of CFAR processors in nonhomogeneous
    background", IEEE Trans. AES-24(4), 1988 (GO and SO). The side sums Y1, Y2
    are i.i.d. Gamma(R, 1); the estimate is max (GO) or min (SO) of Y/R; with
    an exponential CUT, Pfa = E[exp(-alpha * est)].
    """
    g = stats.gamma(R)
    if which == "go":
        dens = lambda y: 2.0 * g.pdf(y) * g.cdf(y)  # noqa: E731 - density of max
    else:
        dens = lambda y: 2.0 * g.pdf(y) * g.sf(y)  # noqa: E731 - density of min
    val, err = integrate.quad(lambda y: dens(y) * np.exp(-alpha * y / R), 0.0, np.inf, epsabs=1e-13, epsrel=1e-10)
    assert err < 1e-8
    return val


def _alpha_for(pfa_of_alpha, target):
    # Pick alpha so the theory Pfa equals target (keeps runs short and rates
    # measurable); the theory function is the outside reference.
    return optimize.brentq(lambda a: pfa_of_alpha(a) - target, 1e-6, 1e4, xtol=1e-12)


R_MC, G_MC = 6, 1
N_MC = 2 * R_MC


def test_pfa_reference_functions_agree_with_closed_forms():
    # Checks of the test's own references. Tolerance rel=1e-9: ten times the
    # relative accuracy requested from scipy.integrate.quad (epsrel=1e-10 in
    # pfa_go_so; scipy's default for stats.gamma.expect is tighter still).
    #
    # GO + SO: {max, min} of the two side sums is {Y1, Y2}, so
    # exp(-a max/R) + exp(-a min/R) = exp(-a Y1/R) + exp(-a Y2/R) and, with
    # Y1, Y2 i.i.d. Gamma(R, 1), E[exp(-a Y/R)] = (1 + a/R)^-R (Laplace
    # transform of the Gamma law), the two Pfa add up to 2 (1 + a/R)^-R
    # (Gandhi & Kassam 1988, homogeneous case; Hansen & Sawyers 1980).
    a = 3.0
    for R in (1, 2, R_MC):
        total = pfa_go_so(a, R, "go") + pfa_go_so(a, R, "so")
        assert total == pytest.approx(2.0 * (1.0 + a / R) ** (-R), rel=1e-9)
    # For R = 1 each is elementary (two exponentials): Pfa_SO = 2/(2 + a),
    # Pfa_GO = 2/(1 + a) - 2/(2 + a) (direct integration, from memory;
    # verified here against quad).
    assert pfa_go_so(a, 1, "so") == pytest.approx(2.0 / (2.0 + a), rel=1e-9)
    assert pfa_go_so(a, 1, "go") == pytest.approx(2.0 / (1.0 + a) - 2.0 / (2.0 + a), rel=1e-9)
    # Rohling with k = N is the pure product; CA closed form vs scipy Laplace
    # transform of Gamma(N)/N.
    assert pfa_ca(a, 10, 10) == pytest.approx(stats.gamma(10).expect(lambda s: np.exp(-a * s / 10)), rel=1e-9)
    # OS with N = k = 1: Rohling's product is 1/(1 + a); both sides are one
    # rational expression, so pytest.approx's default rel=1e-6 is ample.
    assert pfa_os(a, 1, 1) == pytest.approx(1.0 / (1.0 + a))


@pytest.mark.parametrize("compare", COMPARES)
def test_monte_carlo_pfa_ca_full_window(compare):
    alpha = _alpha_for(lambda a: pfa_ca(a, N_MC), PFA_TARGET)
    x = _frames(101, R_MC, G_MC)
    res = cfar_1d(x, "ca", R_MC, G_MC, alpha, compare=compare, edge="skip")
    c = R_MC + G_MC
    assert res.valid[:, c].all() and res.valid.sum() == TRIALS
    _assert_rate(res.detections.sum(), TRIALS, pfa_ca(alpha, N_MC))


@pytest.mark.parametrize("k", [N_MC * 3 // 4, N_MC])
def test_monte_carlo_pfa_os_full_window(k):
    alpha = _alpha_for(lambda a: pfa_os(a, N_MC, k), PFA_TARGET)
    x = _frames(102 + k, R_MC, G_MC)
    res = cfar_1d(x, "os", R_MC, G_MC, alpha, rank=k, edge="skip")
    _assert_rate(res.detections.sum(), TRIALS, pfa_os(alpha, N_MC, k))


@pytest.mark.parametrize("kind", ["go", "so"])
def test_monte_carlo_pfa_go_so_full_window(kind):
    # alpha of CA at PFA_TARGET: GO/SO then sit near it (numerical
    # integration is too slow to invert in a test).
    alpha = _alpha_for(lambda a: pfa_ca(a, N_MC), PFA_TARGET)
    pfa = pfa_go_so(alpha, R_MC, kind)
    assert 1e-3 <= pfa <= 5e-2
    x = _frames(103 if kind == "go" else 104, R_MC, G_MC)
    res = cfar_1d(x, kind, R_MC, G_MC, alpha, edge="skip")
    _assert_rate(res.detections.sum(), TRIALS, pfa)


def test_monte_carlo_pd_ca_swerling1():
    # Swerling 1 target in the CUT (exponential with mean 1 + SNR): Pd =
    # (1 + alpha / (N (1 + SNR)))^(-N); Richards, Fundamentals of Radar Signal
    # Processing, 2005, sec. 7.3 (from memory for the equation number).
    snr = 10.0
    alpha = _alpha_for(lambda a: pfa_ca(a, N_MC), 1e-3)
    x = _frames(105, R_MC, G_MC)
    c = R_MC + G_MC
    x[:, c] *= 1.0 + snr
    res = cfar_1d(x, "ca", R_MC, G_MC, alpha, edge="skip")
    pd = (1.0 + alpha / (N_MC * (1.0 + snr))) ** (-N_MC)
    _assert_rate(res.detections[:, c].sum(), TRIALS, pd)


# Edge policies at the first cell n = 0 of a frame of exactly W cells: the
# lagging side lies wholly before the frame. Each frame gives one decision.


def test_monte_carlo_pfa_one_sided_edge_ca_go_so():
    # one-sided: CA, GO and SO all become the mean of the complete (leading)
    # side, R exponentials: Pfa = (1 + alpha/R)^(-R) (Finn & Johnson 1968 with
    # N = R).
    alpha = _alpha_for(lambda a: pfa_ca(a, R_MC), PFA_TARGET)
    x = _frames(106, R_MC, G_MC)
    for kind in ("ca", "go", "so"):
        res = cfar_1d(x, kind, R_MC, G_MC, alpha, edge="one-sided")
        assert not res.valid[:, 0].any()
        _assert_rate(res.detections[:, 0].sum(), TRIALS, pfa_ca(alpha, R_MC))


@pytest.mark.parametrize("k", [3, 2 * R_MC])
def test_monte_carlo_pfa_one_sided_edge_os(k):
    # one-sided OS: rank ceil(k/2) among the R leading cells (common practice,
    # no source, for the rule); Pfa from Rohling 1983 with N = R.
    kh = math.ceil(k / 2)
    alpha = _alpha_for(lambda a: pfa_os(a, R_MC, kh), PFA_TARGET)
    x = _frames(107 + k, R_MC, G_MC)
    res = cfar_1d(x, "os", R_MC, G_MC, alpha, rank=k, edge="one-sided")
    _assert_rate(res.detections[:, 0].sum(), TRIALS, pfa_os(alpha, R_MC, kh))


def test_monte_carlo_pfa_zero_pad_edge():
    x = _frames(108, R_MC, G_MC)
    # CA: R zeros and R exponentials, mean over 2R cells: estimate is
    # Gamma(R)/(2R), Pfa = E[exp(-alpha S / (2R))], scipy integration.
    alpha = _alpha_for(lambda a: (1.0 + a / N_MC) ** (-R_MC), PFA_TARGET)
    res = cfar_1d(x, "ca", R_MC, G_MC, alpha, edge="zero-pad")
    _assert_rate(res.detections[:, 0].sum(), TRIALS, pfa_ca(alpha, N_MC, n_cells=R_MC))
    # OS, rank k > R: the R zeros take ranks 1..R, so the estimate is the
    # (k-R)-th smallest of the R exponentials: Rohling 1983 with N = R.
    k = R_MC + 4
    alpha = _alpha_for(lambda a: pfa_os(a, R_MC, k - R_MC), PFA_TARGET)
    res = cfar_1d(x, "os", R_MC, G_MC, alpha, rank=k, edge="zero-pad")
    _assert_rate(res.detections[:, 0].sum(), TRIALS, pfa_os(alpha, R_MC, k - R_MC))
    # OS, rank k <= R: the estimate is a padded zero, so any positive CUT is a
    # detection (Pfa = 1 on continuous noise).
    res = cfar_1d(x, "os", R_MC, G_MC, 5.0, rank=R_MC, edge="zero-pad")
    assert res.detections[:, 0].all()


def test_monte_carlo_pfa_circular_edge():
    # circular with L = W: the wrapped lagging side is R other cells of the
    # same frame, all distinct from the CUT and the leading side, so the full
    # CA formula holds at n = 0 (Finn & Johnson 1968).
    alpha = _alpha_for(lambda a: pfa_ca(a, N_MC), PFA_TARGET)
    x = _frames(109, R_MC, G_MC)
    res = cfar_1d(x, "ca", R_MC, G_MC, alpha, edge="circular")
    _assert_rate(res.detections[:, 0].sum(), TRIALS, pfa_ca(alpha, N_MC))


# --------------------------------------------------------------------------
# Properties (common practice, no source).
# --------------------------------------------------------------------------


@st.composite
def real_cases(draw):
    kind = draw(st.sampled_from(KINDS))
    edge = draw(st.sampled_from(EDGES))
    compare = draw(st.sampled_from(COMPARES))
    R = draw(st.integers(1, 5))
    G = draw(st.integers(0, 3))
    L = draw(st.integers(2 * R + 2 * G + 1, 2 * R + 2 * G + 20))
    rank = draw(st.integers(1, 2 * R)) if kind == "os" else None
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    x = rng.exponential(draw(st.floats(1e-3, 1e3)), size=(2, L))
    x[rng.random(x.shape) < 0.1] = 0.0
    return x, kind, R, G, rank, compare, edge


@HYP
@given(real_cases(), st.floats(0.1, 5.0), st.floats(1.0, 3.0))
def test_raising_alpha_never_adds_detections(case, alpha, factor):
    x, kind, R, G, rank, compare, edge = case
    lo = cfar_1d(x, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    hi = cfar_1d(x, kind, R, G, alpha * factor, rank=rank, compare=compare, edge=edge)
    assert not (hi.detections & ~lo.detections).any()


@HYP
@given(real_cases(), st.floats(0.1, 5.0))
def test_detections_exactly_where_cut_beats_threshold(case, alpha):
    x, kind, R, G, rank, compare, edge = case
    res = cfar_1d(x, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    beats = (x > res.threshold) if compare == ">" else (x >= res.threshold)
    np.testing.assert_array_equal(res.detections, beats & ~np.isnan(res.threshold))
    np.testing.assert_array_equal(np.isnan(res.estimate), np.isnan(res.threshold))
    # NaN only where skip gives no decision; the validity mask is the full
    # window fit for every policy.
    n = np.arange(x.shape[-1])
    fits = (n >= R + G) & (n <= x.shape[-1] - 1 - R - G)
    np.testing.assert_array_equal(res.valid, np.broadcast_to(fits, x.shape))
    np.testing.assert_array_equal(np.isnan(res.estimate), ~res.valid if edge == "skip" else False)
    assert np.all(res.estimate[~np.isnan(res.estimate)] >= 0.0)


@HYP
@given(real_cases(), st.floats(1e-6, 1e6))
def test_constant_line_estimate_is_the_constant(case, c):
    x, kind, R, G, rank, compare, edge = case
    res = cfar_1d(np.full_like(x, c), kind, R, G, 1.0, rank=rank, compare=compare, edge=edge)
    np.testing.assert_allclose(res.estimate[res.valid], c, rtol=1e-12)
    if edge in ("one-sided", "circular"):
        # These policies only ever use cells of the frame, so every cell sees c.
        np.testing.assert_allclose(res.estimate, c, rtol=1e-12)


@HYP
@given(real_cases(), st.floats(0.1, 5.0), st.integers(-30, 30))
def test_scaling_input_scales_threshold_and_keeps_detections(case, alpha, p):
    # Scale by s = 2**p so that every float operation scales exactly; the
    # CFAR property then holds bit for bit.
    x, kind, R, G, rank, compare, edge = case
    s = 2.0**p
    a = cfar_1d(x, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    b = cfar_1d(x * s, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    np.testing.assert_array_equal(b.estimate, a.estimate * s)
    np.testing.assert_array_equal(b.threshold, a.threshold * s)
    np.testing.assert_array_equal(b.detections, a.detections)


@HYP
@given(real_cases(), st.floats(0.1, 5.0), st.floats(1e-3, 1e3))
def test_scaling_by_any_factor_scales_estimate(case, alpha, s):
    x, kind, R, G, rank, compare, edge = case
    a = cfar_1d(x, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    b = cfar_1d(x * s, kind, R, G, alpha, rank=rank, compare=compare, edge=edge)
    # Rounding of the cumulative sums is bounded by eps * frame sum (see
    # docs/float-model.md); OS picks a sample, so it scales exactly.
    tol = 64 * np.finfo(float).eps * np.sum(x * s, axis=-1, keepdims=True)
    both = ~np.isnan(a.estimate)
    np.testing.assert_array_equal(np.isnan(b.estimate), ~both)
    err = np.abs(np.where(both, b.estimate - a.estimate * s, 0.0))
    assert np.all(err <= 1e-12 * np.abs(np.where(both, a.estimate * s, 0.0)) + tol)


def test_rows_are_independent():
    # Changing one frame must not change the result of any other frame.
    rng = np.random.default_rng(7)
    x = rng.exponential(size=(3, 4, 30))
    for kind in KINDS:
        rank = 5 if kind == "os" else None
        for edge in EDGES:
            a = cfar_1d(x, kind, 3, 1, 2.0, rank=rank, edge=edge)
            y = x.copy()
            y[1, 2] *= 100.0
            b = cfar_1d(y, kind, 3, 1, 2.0, rank=rank, edge=edge)
            keep = np.ones((3, 4), bool)
            keep[1, 2] = False
            np.testing.assert_array_equal(a.estimate[keep], b.estimate[keep])


# --------------------------------------------------------------------------
# Bad input: each invalid parameter raises SpecError naming the parameter.
# --------------------------------------------------------------------------

GOOD = dict(x=np.ones(20), kind="ca", ref_per_side=3, guard_per_side=1, alpha=2.0)


def _call(**over):
    args = {**GOOD, **over}
    kw = {k: args.pop(k) for k in ("rank", "compare", "edge") if k in args}
    return cfar_1d(args["x"], args["kind"], args["ref_per_side"], args["guard_per_side"], args["alpha"], **kw)


BAD = [
    ("kind", dict(kind="cago")),
    ("kind", dict(kind=None)),
    ("kind", dict(kind="CA")),
    ("ref_per_side", dict(ref_per_side=0)),
    ("ref_per_side", dict(ref_per_side=-2)),
    ("ref_per_side", dict(ref_per_side=2.0)),
    ("ref_per_side", dict(ref_per_side=True)),
    ("guard_per_side", dict(guard_per_side=-1)),
    ("guard_per_side", dict(guard_per_side=0.5)),
    ("alpha", dict(alpha=0.0)),
    ("alpha", dict(alpha=-1.0)),
    ("alpha", dict(alpha=float("nan"))),
    ("alpha", dict(alpha=float("inf"))),
    ("alpha", dict(alpha="2")),
    ("alpha", dict(alpha=True)),
    ("rank", dict(kind="os")),
    ("rank", dict(kind="os", rank=0)),
    ("rank", dict(kind="os", rank=7)),
    ("rank", dict(kind="os", rank=2.0)),
    ("rank", dict(kind="ca", rank=3)),
    ("compare", dict(compare="<")),
    ("compare", dict(compare="==")),
    ("edge", dict(edge="wrap")),
    ("edge", dict(edge="zero_pad")),
    ("edge", dict(edge=None)),
    ("x", dict(x=-np.ones(20))),
    ("x", dict(x=np.r_[np.ones(19), np.nan])),
    ("x", dict(x=np.r_[np.ones(19), np.inf])),
    ("x", dict(x=np.ones(20) + 0j)),
    ("x", dict(x=np.ones(20, dtype=bool))),
    ("x", dict(x=np.array(3.0))),
    ("x", dict(x=["a"] * 20)),
    ("x", dict(x=[[1.0] * 20, [1.0] * 19])),
    ("frame length", dict(x=np.ones(8))),  # W = 2*3 + 2*1 + 1 = 9
    ("frame length", dict(x=np.ones((4, 0)))),
]


@pytest.mark.parametrize("field,over", BAD, ids=[f"{f}-{i}" for i, (f, _) in enumerate(BAD)])
def test_bad_input_raises_spec_error_naming_the_parameter(field, over):
    with pytest.raises(SpecError) as exc:
        _call(**over)
    assert field in str(exc.value)
    assert field in exc.value.field
    assert exc.value.allowed  # the allowed range is stated


def test_frame_length_equal_to_window_is_accepted():
    res = _call(x=np.ones(9))
    assert res.valid.sum() == 1 and res.valid[4]
