"""Exact Pfa of the fixed pipeline, its input law and its Monte Carlo check.

Every expectation comes from outside the code under test:

- the input word law from scipy.stats (geometric, exponential, non-central
  chi-square laws);
- sums of input words from scipy.stats.nbinom (a sum of n independent
  geometric counts is negative binomial: N. L. Johnson, A. W. Kemp and
  S. Kotz, *Univariate Discrete Distributions*, 3rd ed., Wiley, 2005,
  sec. 5.1, "from memory" for the section number);
- small cases by brute-force enumeration of every reference-cell
  configuration with the decision written out as in docs/bit-true.md;
- the float limit from Finn & Johnson 1968 / Richards 2005 ch. 7 (CA),
  Weiss 1982 / Gandhi & Kassam 1988 (GO/SO), Rohling 1983 (OS), as
  implemented and tested in refmodel.threshold_design;
- Monte Carlo counts with Clopper-Pearson 99.9% intervals (Clopper &
  Pearson, Biometrika 26(4), 1934) and fixed seeds; the Monte Carlo kernel is
  first shown equal, word for word, to the pipeline models.
"""

from __future__ import annotations

import itertools
import math
import os

import numpy as np
import pytest
from hypothesis import HealthCheck, given, reject, settings
from hypothesis import strategies as st
from scipy import stats

from refmodel.fixedpoint import exact_pfa as ep
from refmodel.fixedpoint import input_quantiser as iq
from refmodel import threshold_design as td
from refmodel.study import window_trials as wt
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.pipeline_fast import run_fast
from refmodel.fixedpoint.pipeline_struct import run_structural
from test_block_spec import constant_a, divisor, dropped_bits, t0_of, threshold_word

CONF = 0.999


def make_spec(kind="ca", r=4, g=1, pfa=1e-4, rank=None, **fixed):
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": g, "design_pfa": pfa}
    if rank is not None:
        det["rank"] = rank
    fx = {"input_bits": 12, "alpha_frac_bits": 12, "threshold_frac_bits": 2, "rounding": "half-up"}
    fx.update(fixed)
    return spec_from_dict({"detector": det, "fixed": fx})


# --------------------------------------------------------------------------
# Input word law
# --------------------------------------------------------------------------


@pytest.mark.parametrize("mu,bits", [(0.3, 4), (2.0, 6), (37.5, 8), (1000.0, 12)])
def test_noise_word_is_clipped_geometric(mu, bits):
    """floor(exponential) is geometric (scipy.stats.geom, support shifted to 0); the top word takes expon.sf(top)."""
    top = (1 << bits) - 1
    pmf, dropped = iq.noise_pmf(mu, bits)
    k = np.arange(top)
    want = stats.geom.pmf(k + 1, -math.expm1(-1.0 / mu))
    np.testing.assert_allclose(pmf[:-1], want, rtol=1e-12, atol=0)
    assert pmf[-1] == pytest.approx(stats.expon.sf(top, scale=mu), rel=1e-12)
    assert dropped == 0.0
    assert pmf.sum() == pytest.approx(1.0, abs=1e-13)


def test_truncated_noise_law_states_its_dropped_mass():
    """Mass above K is exactly expon.sf(K + 1) (scipy.stats.expon)."""
    pmf, dropped = iq.noise_pmf(10.0, 16, k_max=200)
    assert pmf.size == 201
    assert dropped == pytest.approx(stats.expon.sf(201, scale=10.0), rel=1e-12)
    assert pmf.sum() + dropped == pytest.approx(1.0, abs=1e-14)


@pytest.mark.parametrize("snr", [0.5, 10.0, 100.0])
def test_target_word_laws_from_scipy(snr):
    """Swerling I: expon(scale=m(1+snr)); Swerling 0: 2y/m ~ ncx2(2, 2 snr) (Marcum 1960; Swerling 1960)."""
    mu, bits = 8.0, 10
    top = (1 << bits) - 1
    c = np.arange(0, top + 2)
    sf1 = iq.word_sf(c, mu, bits, snr, 1)
    sf0 = iq.word_sf(c, mu, bits, snr, 0)
    mid = c[1 : top + 1]
    np.testing.assert_allclose(sf1[1 : top + 1], stats.expon.sf(mid, scale=mu * (1 + snr)), rtol=1e-12)
    np.testing.assert_allclose(sf0[1 : top + 1], stats.ncx2.sf(2 * mid / mu, 2, 2 * snr), rtol=1e-12)
    assert sf0[0] == sf1[0] == 1.0 and sf0[-1] == sf1[-1] == 0.0
    pmf0 = iq.word_pmf(mu, bits, snr, 0)
    assert pmf0.sum() == pytest.approx(1.0, abs=1e-12)
    assert pmf0[-1] == pytest.approx(stats.ncx2.sf(2 * top / mu, 2, 2 * snr), abs=1e-15)


@pytest.mark.parametrize("mu,snr", [(100.0, 0.3), (256.0, 10.0), (5000.0, 40.0)])
def test_hermite_swerling0_survival_within_stated_error(mu, snr):
    """Interpolated Marcum Q against scipy.stats.ncx2.sf at every word: within 4e-8 (docstring bound)."""
    c = np.arange(0, int(mu * (40 + 3 * snr)))
    exact = stats.ncx2.sf(2 * c / mu, 2, 2 * snr)
    got = iq.word_sf_smooth(c, mu, 24, snr, 0)
    assert np.abs(got[1:] - exact[1:]).max() < 4e-8


def test_quantise_power_floors_and_clips():
    """Convention: min(floor(y), 2^W - 1) (common practice, no source: ADC-like truncation)."""
    y = np.array([0.0, 0.999, 1.0, 14.5, 15.0, 15.99, 16.0, 1e9])
    assert iq.quantise_power(y, 4).tolist() == [0, 0, 1, 14, 15, 15, 15, 15]


# --------------------------------------------------------------------------
# Law of the statistic
# --------------------------------------------------------------------------


@pytest.mark.parametrize("direct", [True, False])
def test_ca_statistic_law_is_negative_binomial(monkeypatch, direct):
    """Unclipped geometric cells: S ~ nbinom(2R, 1 - exp(-1/m)) (Johnson, Kemp & Kotz 2005), in the tails too."""
    monkeypatch.setattr(ep, "DIRECT_MAX", 10**12 if direct else 0)
    spec = make_spec("ca", r=4, input_bits=24, pfa=1e-9)
    mu = 30.0
    p, err, dropped = ep.statistic_law(spec, mu, 1e-9)
    s = np.arange(p.size)
    want = stats.nbinom.pmf(s, 8, -math.expm1(-1.0 / mu))
    k_max = (p.size - 1) // 8  # largest word kept; sums up to it miss no configuration
    inside = s <= k_max
    assert np.all(np.abs(p - want)[inside] <= err[inside] + 1e-12 * want[inside] + 1e-300)
    # Above it, what is missing is at most the stated dropped mass.
    assert float(np.sum(want[~inside] - p[~inside])) <= dropped + 1e-15
    assert dropped < 1e-20
    # Where the false alarms come from (small sums) the relative error is tiny.
    low = s < 8 * mu / 2
    np.testing.assert_allclose(p[low], want[low], rtol=1e-9)


@pytest.mark.parametrize("kind", ["go", "so"])
def test_go_so_statistic_law_from_side_cdfs(kind):
    """max/min of two independent nbinom(R) side sums: P(max<=s) = F(s)^2, P(min>=s) = G(s)^2 (scipy.stats.nbinom)."""
    spec = make_spec(kind, r=3, input_bits=24, pfa=1e-6)
    mu = 12.0
    p, err, _ = ep.statistic_law(spec, mu, 1e-6)
    s = np.arange(p.size)
    q = -math.expm1(-1.0 / mu)
    # Differences of squares written as (a - b)(a + b) to keep scipy's tail accuracy.
    pmf = stats.nbinom.pmf(s, 3, q)
    if kind == "go":
        want = pmf * (stats.nbinom.cdf(s, 3, q) + stats.nbinom.cdf(s - 1, 3, q))
    else:
        want = pmf * (stats.nbinom.sf(s - 1, 3, q) + stats.nbinom.sf(s, 3, q))
    big = want > 1e-12
    np.testing.assert_allclose(p[big], want[big], rtol=1e-8)
    assert np.all(err >= 0)


def _brute_force_pfa(spec, mu, threshold_bits=None):
    """Enumerate every reference configuration; decide as docs/bit-true.md sections 3-7 say, written out here.

    The threshold comes from the written rule (test_block_spec.threshold_word: A from alpha, product,
    rounding, overflow at the given width ``threshold_bits`` or the default of section 6).
    """
    bits = spec.input_bits
    top = (1 << bits) - 1
    k = np.arange(top + 1)
    pmf = stats.expon.cdf(k + 1, scale=mu) - stats.expon.cdf(k, scale=mu)
    pmf[-1] = stats.expon.sf(top, scale=mu)
    r = spec.ref_per_side
    total = 0.0
    for cells in itertools.product(range(top + 1), repeat=2 * r):
        lag, lead = sum(cells[:r]), sum(cells[r:])
        if spec.kind == "ca":
            s = lag + lead
        elif spec.kind == "go":
            s = max(lag, lead)
        elif spec.kind == "so":
            s = min(lag, lead)
        else:
            s = sorted(cells)[spec.rank - 1]
        t = threshold_word(s, spec, threshold_bits)
        f = spec.threshold_frac_bits
        hit = [(c << f) > t if spec.compare == ">" else (c << f) >= t for c in range(top + 1)]
        p_cut = float(pmf[np.array(hit)].sum())
        total += float(np.prod(pmf[list(cells)])) * p_cut
    return total


@pytest.mark.parametrize(
    "kind,rank,fixed",
    [
        ("ca", None, {"rounding": "floor", "threshold_frac_bits": 1}),
        ("go", None, {"rounding": "half-even", "compare_ge": True}),
        ("so", None, {"alpha_csd_digits": 2, "rounding": "half-up"}),
        ("os", 3, {"threshold_frac_bits": 0}),
        ("ca", None, {"threshold_bits": 5, "overflow": "wrap"}),
    ],
)
def test_exact_pfa_equals_brute_force(kind, rank, fixed):
    """Four 3-bit cells: all 4096 configurations enumerated (common practice, no source)."""
    fixed = dict(fixed)
    compare = ">=" if fixed.pop("compare_ge", False) else ">"
    det = {"kind": kind, "ref_cells_per_side": 2, "guard_cells_per_side": 0, "design_pfa": 0.05, "compare": compare}
    if rank:
        det["rank"] = rank
    fx = {"input_bits": 3, "alpha_frac_bits": 8, "threshold_frac_bits": 2, "rounding": "half-up", **fixed}
    spec = spec_from_dict({"detector": det, "fixed": fx})
    mu = 1.7
    law = ep.trigger_law(spec, mu)
    want = _brute_force_pfa(spec, mu, fixed.get("threshold_bits"))
    assert law.pfa() == pytest.approx(want, rel=1e-12)
    assert law.dropped == 0.0


def trigger_word(t: int, spec) -> int:
    """Smallest CUT word the threshold word t lets through (docs/bit-true.md section 7, written out):
    (C << F_T) > T iff C >= floor(T / 2^F_T) + 1; (C << F_T) >= T iff C >= ceil(T / 2^F_T)."""
    f = spec.threshold_frac_bits
    return (t >> f) + 1 if spec.compare == ">" else -((-t) >> f)


def pfa_from_negative_binomial(spec, mu):
    """Pfa of an interior cell from closed-form laws (CA, GO, SO with the default, saturating threshold).

    Unclipped noise words floor(y), y exponential of mean mu, are geometric, and a sum of n of them
    is negative binomial, scipy.stats.nbinom(n, 1 - exp(-1/mu)) (Johnson, Kemp & Kotz 2005): CA
    S ~ nbinom(2R); GO / SO from the side law nbinom(R), P(max = s) = p(s) (F(s) + F(s-1)),
    P(min = s) = p(s) (G(s) + G(s+1)), G(s) = P(S >= s) (independent sides). A CUT word reaches c
    exactly when y >= c, for 0 <= c <= top (clipping only merges y >= top into the top word), so
    P(CUT >= c) = scipy.stats.expon.sf(c, scale=mu). Clipping the reference cells changes S only in
    configurations where S >= top in both the clipped and the unclipped model (ca: the clipped cell
    is in the sum; go: in the max; so: the min changes only if both sides reach top), and there the
    trigger word exceeds top whenever c(top) > top (asserted), so no CUT word reaches it: the sum
    over s < s_stop, the first statistic whose trigger word exceeds top, is exact. The threshold
    follows the written rule (test_block_spec.threshold_word), non-decreasing in s.
    """
    top = (1 << spec.input_bits) - 1
    r, q = spec.ref_per_side, -math.expm1(-1.0 / mu)
    c = []
    while not c or c[-1] <= top:
        c.append(trigger_word(threshold_word(len(c), spec), spec))
    s_stop = len(c) - 1
    assert s_stop <= top and trigger_word(threshold_word(top, spec), spec) > top
    s = np.arange(s_stop)
    if spec.kind == "ca":
        law = stats.nbinom.pmf(s, 2 * r, q)
    elif spec.kind == "go":
        law = stats.nbinom.pmf(s, r, q) * (stats.nbinom.cdf(s, r, q) + stats.nbinom.cdf(s - 1, r, q))
    else:
        law = stats.nbinom.pmf(s, r, q) * (stats.nbinom.sf(s - 1, r, q) + stats.nbinom.sf(s, r, q))
    return float(np.sum(law * stats.expon.sf(np.array(c[:s_stop]), scale=mu)))


# Allowance for the float64 evaluation of that reference: a sum of at most a few thousand positive
# terms, each a product of scipy values accurate to a few ulps, so a relative error of about n u
# (Higham 2002, sec. 4.2) stays below 1e-12.
REF_REL = 1e-12


@pytest.mark.parametrize("kind,bits,mu", [("ca", 10, 24.0), ("go", 10, 24.0), ("so", 12, 300.0)])
def test_fft_path_within_its_bound_at_pfa_1e9(monkeypatch, kind, bits, mu):
    """FFT with exponential tilting and direct convolution against the negative binomial law, design Pfa 1e-9.

    Outside reference: :func:`pfa_from_negative_binomial` (scipy.stats.nbinom and expon). Each
    path must lie within its own stated error bound of it, and the FFT bound must stay below
    1e-6 relative: the point of the tilting is relative accuracy in the tail that makes a Pfa of
    1e-9 (docs/quantisation-study.md, "Accuracy"), and 1e-6 keeps six significant digits, more
    than any Pfa ratio the study reports (common practice, no source, for the figure).
    """
    # SO needs a finer noise level: its all-zero sides put a Pfa floor near 2 (1/m)^R.
    spec = make_spec(kind, r=4, pfa=1e-9, input_bits=bits)
    want = pfa_from_negative_binomial(spec, mu)
    assert 1e-11 < want < 1e-7
    monkeypatch.setattr(ep, "DIRECT_MAX", 10**12)
    direct = ep.trigger_law(spec, mu)
    monkeypatch.setattr(ep, "DIRECT_MAX", 0)
    fft = ep.trigger_law(spec, mu)
    assert abs(fft.pfa() - want) <= fft.pfa_error_bound() + REF_REL * want
    assert abs(direct.pfa() - want) <= direct.pfa_error_bound() + REF_REL * want
    assert fft.pfa_error_bound() < 1e-6 * fft.pfa()
    # Internal consistency (not a main-job check): the two paths agree within their joint bound.
    assert abs(fft.pfa() - direct.pfa()) <= fft.pfa_error_bound() + direct.pfa_error_bound()


# --------------------------------------------------------------------------
# Float limit
# --------------------------------------------------------------------------


def test_ca_converges_to_finn_johnson_formula():
    """24-bit input, 16 alpha fraction bits, noise 2^13 LSB: Pfa -> (1 + alpha/N)^-N.

    Finn & Johnson, RCA Review 29(3), 1968; Richards, Fundamentals of Radar
    Signal Processing, 2005, ch. 7. Evaluated independently here at the
    realised alpha; the quantisation error must shrink as the noise level
    ``m`` in LSBs grows, as 1/m: flooring removes about half an LSB from the
    CUT and from every reference cell, which lowers the threshold by about
    ``(alpha - 1) / 2`` LSBs and multiplies an exponential tail by about
    ``1 + (alpha - 1) / (2 m)`` (first-order derivation, no source).
    """
    spec = make_spec("ca", r=4, pfa=1e-6, input_bits=24, alpha_frac_bits=16, threshold_frac_bits=4)
    # Realised alpha from the written rule (docs/bit-true.md section 4): A * D / 2^F_A, D = 8.
    n, a = 8, constant_a(spec) * 8 / 2**16
    formula = (1.0 + a / n) ** (-n)
    errs = []
    mus = (2.0**6, 2.0**9, 2.0**13)
    for mu in mus:
        errs.append(abs(ep.trigger_law(spec, mu).pfa() / formula - 1))
    assert errs[0] > errs[1] > errs[2]
    assert errs[2] < 2.5e-3  # first order: (alpha - 1) / (2m) = (37 - 1) / 2^14 = 2.2e-3 at m = 2^13
    first_order = (a - 1) / 2
    for mu, e in zip(mus[1:], errs[1:]):
        # 5 %: the next term of the expansion is of relative size (alpha - 1) / (4m), at most 1.8 % here.
        assert e * mu == pytest.approx(first_order, rel=0.05)
    # 16 fraction bits keep alpha itself close: A = alpha 2^16 / 8 is about 3e5, so alpha_r is within
    # 0.5 / 3e5 = 1.7e-6 relative of alpha, and the CA Pfa moves by N (alpha/N) / (1 + alpha/N) = 6.6 times
    # that, about 1e-5 relative, well inside 1e-3.
    assert abs(formula / 1e-6 - 1) < 1e-3


@pytest.mark.parametrize("kind,rank", [("go", None), ("so", None), ("os", 6)])
def test_go_so_os_converge_to_float_formulas(kind, rank):
    """GO/SO: Hansen & Sawyers 1980, Weiss 1982, Gandhi & Kassam 1988; OS: Rohling 1983 (via threshold_design).

    The same first-order derivation as for CA above (no source): flooring lowers every reference
    cell, hence the side means and the k-th smallest cell, by about half an LSB and the CUT by half
    an LSB, so the threshold drops by about ``(alpha - 1) / 2`` LSBs relative to the CUT and the
    Pfa rises by the factor ``1 + x``, ``x = (alpha - 1) / (2 m)``. The next term of the expansion
    is of relative size about ``x / 2``; the check allows ``x`` (twice that) plus 1 %.
    """
    spec = make_spec(kind, r=4, pfa=1e-5, rank=rank, input_bits=24, alpha_frac_bits=16, threshold_frac_bits=4)
    a_r = constant_a(spec) * divisor(kind, 4) / 2**16  # realised alpha, A * D / 2^F_A (section 4)
    formula = td.pfa_from_alpha(kind, 8, a_r, rank)
    first_order = (a_r - 1) / 2
    for mu in (2.0**9, 2.0**12):
        excess = ep.trigger_law(spec, mu).pfa() / formula - 1
        x = first_order / mu
        assert excess * mu == pytest.approx(first_order, rel=x + 0.01), (mu, excess * mu, first_order)


# --------------------------------------------------------------------------
# Monte Carlo kernel == pipeline, then Monte Carlo == exact
# --------------------------------------------------------------------------


def _frames(spec, rng, n_frames=3):
    top = (1 << spec.input_bits) - 1
    lengths = rng.integers(spec.window_length, spec.window_length + 40, n_frames)
    x = rng.integers(0, top + 1, int(lengths.sum()))
    # Some full-scale and zero runs so that sums, saturation and wrap are exercised.
    x[rng.random(x.size) < 0.1] = top
    x[rng.random(x.size) < 0.1] = 0
    last = np.zeros(x.size, bool)
    last[np.cumsum(lengths) - 1] = True
    return x, last


LONG = os.environ.get("CFARVEC_LONG") == "1"


@st.composite
def block_specs(draw):
    """Any detector kind and arithmetic option, including narrow saturating or wrapping thresholds."""
    kind = draw(st.sampled_from(["ca", "go", "so", "os"]))
    r = draw(st.integers(1, 6))
    det = {"kind": kind, "ref_cells_per_side": r, "guard_cells_per_side": draw(st.integers(0, 3)),
           "compare": draw(st.sampled_from([">", ">="])), "alpha": draw(st.floats(0.5, 30.0))}
    if kind == "os":
        det["rank"] = draw(st.integers(1, 2 * r))
    f_a = draw(st.integers(4, 16))
    truncate = draw(st.booleans())
    fixed = {"input_bits": draw(st.integers(1, 12)), "alpha_frac_bits": f_a,
             "alpha_csd_digits": draw(st.sampled_from([0, 0, 1, 2, 3])), "truncate_partials": truncate,
             "threshold_frac_bits": draw(st.integers(0, f_a)),
             "rounding": "floor" if truncate else draw(st.sampled_from(["floor", "half-up", "half-even"])),
             "overflow": draw(st.sampled_from(["saturate", "wrap"]))}
    try:
        spec = spec_from_dict({"detector": det, "fixed": fixed})
        if draw(st.booleans()):
            fixed["threshold_bits"] = draw(st.integers(1, spec.threshold_bits))
            spec = spec_from_dict({"detector": det, "fixed": fixed})
    except SpecError:
        reject()
    return spec


@settings(max_examples=1000 if LONG else 60, deadline=None, derandomize=not LONG,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(spec=block_specs(), seed=st.integers(0, 2**32 - 1))
def test_kernel_equals_fast_pipeline_word_for_word(spec, seed):
    """The trial kernel's threshold and decision equal refmodel.fixedpoint.pipeline_fast's at every interior CUT."""
    x, last = _frames(spec, np.random.default_rng(seed))
    out = run_fast(spec, x, last)
    idx, cut, ref = wt.interior_windows(spec, x, last)
    assert np.array_equal(out.valid, np.isin(np.arange(x.size), idx))
    _, t, det = wt.window_decisions(spec, cut, ref)
    assert np.array_equal(t, out.threshold[idx])
    assert np.array_equal(det, out.det[idx])
    # Float-held words (as the Monte Carlo uses them) decide the same.
    _, t2, det2 = wt.window_decisions(spec, cut.astype(float), ref.astype(float))
    assert np.array_equal(t2, t) and np.array_equal(det2, det)


@pytest.mark.parametrize("kind,rank", [("ca", None), ("go", None), ("so", None), ("os", 5)])
def test_kernel_equals_structural_pipeline(kind, rank):
    """Same check against the cycle-stepped model (the executable bit-true spec), one spec per kind."""
    spec = make_spec(kind, r=3, g=1, rank=rank, input_bits=6, alpha_frac_bits=9, threshold_frac_bits=3,
                     rounding="half-even")
    x, last = _frames(spec, np.random.default_rng(7), n_frames=2)
    out = run_structural(spec, x, last)
    idx, cut, ref = wt.interior_windows(spec, x, last)
    _, t, det = wt.window_decisions(spec, cut, ref)
    assert np.array_equal(t, out.threshold[idx]) and np.array_equal(det, out.det[idx])


MC_CASES = [
    # kind, rank, design Pfa, input bits, noise LSB, extra fixed fields, float formula must be outside the CI
    ("ca", None, 1e-3, 6, 2.0, {"rounding": "floor", "threshold_frac_bits": 0}, True),
    ("ca", None, 1e-3, 12, 64.0, {"alpha_csd_digits": 2}, False),
    ("go", None, 1e-3, 8, 4.0, {}, True),
    ("so", None, 1e-3, 10, 16.0, {"rounding": "half-even"}, False),
    ("os", 6, 1e-3, 8, 3.0, {}, True),
]


@pytest.mark.parametrize("kind,rank,pfa,bits,mu,fixed,visible", MC_CASES)
def test_exact_pfa_inside_monte_carlo_interval(kind, rank, pfa, bits, mu, fixed, visible):
    """Exact Pfa inside the 99.9% Clopper-Pearson interval of 300000 kernel trials (fixed seed).

    Where the quantisation is coarse (``visible``) the float formula at the
    design alpha lies outside the same interval.
    """
    spec = make_spec(kind, r=4, pfa=pfa, rank=rank, input_bits=bits, **fixed)
    exact = ep.trigger_law(spec, mu).pfa()
    rng = np.random.default_rng(np.random.SeedSequence(20261202, spawn_key=(bits, int(mu))))
    mc = wt.run_trials(spec, mu, 300_000, rng)
    lo, hi = wt.clopper_pearson(mc.detections, mc.trials, CONF)
    assert lo <= exact <= hi, (mc.detections, lo, exact, hi)
    if visible:
        assert not lo <= pfa <= hi, (lo, pfa, hi)


def test_six_bit_example_differs_visibly_from_float():
    """Coarse 6-bit CA, noise at 2 LSB: the exact Pfa (negative binomial reference) is far from the float formula.

    Float formula at the realised alpha (Finn & Johnson 1968): (1 + alpha_r / 8)^-8 with
    alpha_r = A * 8 / 2^12, A = floor(alpha * 2^12 / 8 + 1/2) (docs/bit-true.md section 4). The
    first-order factor 1 + (alpha - 1) / (2m) of test_ca_converges_to_finn_johnson_formula is
    about 1 + 10 / 4 = 3.5 here (m = 2, where the expansion is only indicative); "visibly" is taken
    as a ratio above 1.5 (common practice, no source).
    """
    spec = make_spec("ca", r=4, pfa=1e-3, input_bits=6, rounding="floor", threshold_frac_bits=0)
    law = ep.trigger_law(spec, 2.0)
    want = pfa_from_negative_binomial(spec, 2.0)
    assert abs(law.pfa() - want) <= law.pfa_error_bound() + REF_REL * want
    a = math.floor(spec.alpha * 2**12 / 8 + 0.5)
    formula = (1 + a * 8 / 2**12 / 8) ** -8
    assert want / formula > 1.5


def test_saturation_and_clipping_rates_match_monte_carlo():
    """A narrow saturating threshold: saturation rate from the exact clipped law written here; clipping = expon.sf(2^W).

    Reference: the clipped 8-bit noise word's pmf from scipy.stats.expon (P(word = k) =
    P(k <= y < k + 1) = sf(k) - sf(k + 1), the top word taking sf(255); the difference of two
    survival values a factor 1 - exp(-1/20) apart loses at most a factor 20 of relative
    accuracy), its 8-fold convolution power by direct
    sums of non-negative terms (numpy.convolve; each of the 7 convolutions has element-wise
    relative error below (m + 1) u, m <= 2041 terms: Higham 2002, sec. 4.2, so below 1e-11 in
    all), and the threshold before overflow from the written rule (section 5: A, half-up, d);
    saturation is T0 > 2^9 - 1 (section 6).
    """
    spec = make_spec("ca", r=4, pfa=1e-3, input_bits=8, threshold_bits=9, threshold_frac_bits=0,
                     overflow="saturate")
    mu = 20.0
    law = ep.trigger_law(spec, mu)
    k = np.arange(256)
    word = stats.expon.sf(k, scale=mu) - stats.expon.sf(k + 1, scale=mu)  # sf: no cancellation in the tail
    word[-1] = stats.expon.sf(255, scale=mu)
    p = word
    for _ in range(7):
        p = np.convolve(p, word)
    a, d = constant_a(spec), dropped_bits(spec)
    over = np.array([t0_of(s, a, d, "half-up", False) > 2**9 - 1 for s in range(p.size)])
    want = float(p[over].sum())
    assert 1e-3 < want < 0.5
    assert law.saturation == pytest.approx(want, rel=1e-9)
    # Internal consistency (not a main-job check): the Monte Carlo kernel's counts against the
    # same law, in 99.9 % Clopper-Pearson intervals.
    mc = wt.run_trials(spec, mu, 100_000, np.random.default_rng(3))
    lo, hi = wt.clopper_pearson(mc.saturated, mc.trials, CONF)
    assert lo <= law.saturation <= hi
    assert iq.clip_rate(mu, 8) == pytest.approx(stats.expon.sf(256, scale=mu), rel=1e-12)
    lo, hi = wt.clopper_pearson(mc.clipped, mc.trials * 9, CONF)
    assert lo <= iq.clip_rate(mu, 8) <= hi


def test_exact_pd_inside_monte_carlo_interval():
    """Pd of a Swerling I target, coarse CA: exact (equation 1) against Monte Carlo of the kernel."""
    spec = make_spec("ca", r=4, pfa=1e-3, input_bits=8, threshold_frac_bits=1)
    mu, snr_db = 3.0, 10.0
    law = ep.trigger_law(spec, mu)
    rng = np.random.default_rng(11)
    n = 100_000
    y = rng.standard_exponential((n, 9)) * mu
    y[:, 0] *= 1 + 10 ** (snr_db / 10)
    w = iq.quantise_power(y, 8)
    _, _, det = wt.window_decisions(spec, w[:, 0], w[:, 1:])
    lo, hi = wt.clopper_pearson(int(det.sum()), n, CONF)
    assert lo <= law.pd(snr_db, 1) <= hi
