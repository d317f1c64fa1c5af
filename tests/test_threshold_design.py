"""Outside checks of refmodel.threshold_design.

Every expected value comes from a published formula (source beside it), from
scipy used as a reference library along an independent route, or from a
Monte Carlo simulation written here with numpy only (fixed seed, 99.9 %
Clopper-Pearson interval). Model throughout: square-law detection of complex
Gaussian noise of unit power, i.e. exponential cell powers of mean 1.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize, special, stats

from refmodel import threshold_design as td
from refmodel.errors import SpecError

LONG = os.environ.get("CFARVEC_LONG") == "1"
PROPS = settings(max_examples=300 if LONG else 20, deadline=None, derandomize=not LONG)


# --------------------------------------------------------------------------
# Independent reference formulas, written out here
# --------------------------------------------------------------------------


def so_sum(n: int, t: float) -> Fraction:
    """SO Pfa, finite sum: 2 (2+T)^-n sum_{j<n} C(n-1+j, j) (2+T)^-j, in exact rationals.

    Weiss, "Analysis of some modified cell-averaging CFAR processors in
    multiple-target situations", IEEE Trans. AES-18(1), 1982 (SO-CFAR Pfa);
    Gandhi & Kassam, "Analysis of CFAR processors in nonhomogeneous
    background", IEEE Trans. AES-24(4), 1988 (homogeneous case).
    """
    u = 2 + Fraction(t)
    return 2 * sum(Fraction(math.comb(n - 1 + j, j)) / u ** (n + j) for j in range(n))


def go_sum(n: int, t: float) -> Fraction:
    """GO Pfa = 2 (1+T)^-n - Pfa_SO (Hansen & Sawyers, IEEE Trans. AES-16(1), 1980;
    Gandhi & Kassam 1988): E[e^{-T max}] + E[e^{-T min}] = E[e^{-T S1}] + E[e^{-T S2}].
    Exact rationals, so the subtraction loses nothing."""
    return 2 / (1 + Fraction(t)) ** n - so_sum(n, t)


def estimate_law(kind: str, n_ref: int, rank: int | None):
    """(pdf, ppf) of the normalized noise estimate, from scipy.stats distributions.

    Mean of m unit exponentials ~ Gamma(m, scale 1/m); the max / min of two
    independent variables has density 2 f F / 2 f (1 - F); the k-th order
    statistic of N draws has density k C(N, k) F^{k-1} (1-F)^{N-k} f
    (David & Nagaraja, Order Statistics, 3rd ed., 2003, sec. 2.1).
    """
    if kind == "ca":
        g = stats.gamma(n_ref, scale=1.0 / n_ref)
        return g.pdf, g.ppf
    if kind in ("go", "so"):
        n = n_ref // 2
        g = stats.gamma(n, scale=1.0 / n)
        if kind == "go":
            return (lambda z: 2 * g.pdf(z) * g.cdf(z)), (lambda q: g.ppf(np.sqrt(q)))
        return (lambda z: 2 * g.pdf(z) * g.sf(z)), (lambda q: g.isf(np.sqrt(1.0 - q)))
    e = stats.expon()
    c = rank * math.comb(n_ref, rank)
    b = stats.beta(rank, n_ref - rank + 1)

    def pdf(z):
        return c * e.cdf(z) ** (rank - 1) * e.sf(z) ** (n_ref - rank) * e.pdf(z)

    return pdf, (lambda q: -np.log1p(-b.ppf(q)))


def expect_over_estimate(kind, n_ref, rank, g):
    """E[g(Z)] by scipy.integrate.quad over the estimate density, split at its quantiles."""
    pdf, ppf = estimate_law(kind, n_ref, rank)
    hi = float(ppf(1 - 1e-15))
    pts = sorted(float(p) for p in ppf(np.array([1e-15, 1e-12, 1e-9, 1e-6, 1e-3, 0.5, 0.999])) if 0 < p < hi)
    val, _ = integrate.quad(lambda z: g(z) * pdf(z), 0.0, hi, points=pts, epsabs=1e-14, epsrel=1e-11, limit=500)
    return val


def sw0_pd_reference(kind, n_ref, rank, alpha, snr_db):
    """Swerling 0 CFAR Pd = E_Z[Q1(sqrt(2 SNR), sqrt(2 alpha Z))] with the Marcum Q as
    scipy.stats.ncx2.sf(2 t, 2, 2 SNR) (Marcum, IRE Trans. IT-6(2), 1960); integral over Z,
    the other order of integration from the one the code uses."""
    s = 10 ** (snr_db / 10)
    return expect_over_estimate(kind, n_ref, rank, lambda z: stats.ncx2.sf(2 * alpha * z, 2, 2 * s))


def rank_for(kind, n_ref):
    return max(1, (3 * n_ref) // 4) if kind == "os" else None


# --------------------------------------------------------------------------
# Pfa(alpha)
# --------------------------------------------------------------------------


@pytest.mark.parametrize("n_ref", [1, 2, 8, 32, 100])
@pytest.mark.parametrize("alpha", [0.3, 4.0, 17.0, 250.0])
def test_ca_pfa_closed_form_and_f_distribution(n_ref, alpha):
    got = td.pfa_from_alpha("ca", n_ref, alpha)
    # Finn & Johnson, RCA Review 29(3), 1968; Richards, Fundamentals of Radar Signal
    # Processing, 2005, ch. 7 (cell-averaging CFAR): Pfa = (1 + alpha/N)^-N.
    assert got == pytest.approx((1 + alpha / n_ref) ** (-n_ref), rel=1e-12)
    # X ~ chi2(2)/2 and mean(Y) ~ chi2(2N)/(2N), so X / mean(Y) ~ F(2, 2N)
    # (Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions, vol. 2, 1995, ch. 27).
    assert got == pytest.approx(stats.f.sf(alpha, 2, 2 * n_ref), rel=1e-9)


def test_ca_alpha_done_when_value():
    # Richards 2005, ch. 7: alpha = N (Pfa^(-1/N) - 1); issue done-when check.
    assert td.alpha_from_pfa("ca", 32, 1e-6) == pytest.approx(32 * (1e-6 ** (-1 / 32) - 1), rel=1e-9)


@pytest.mark.parametrize("kind", td.KINDS)
@pytest.mark.parametrize("n_ref", [2, 4, 16, 64, 1000])
@pytest.mark.parametrize("pfa", [0.3, 1e-2, 1e-6, 1e-12, 1e-40])
def test_alpha_round_trip(kind, n_ref, pfa):
    rank = rank_for(kind, n_ref)
    alpha = td.alpha_from_pfa(kind, n_ref, pfa, rank)
    assert alpha > 0
    # inverse of a strictly decreasing function (common practice, no source)
    assert td.pfa_from_alpha(kind, n_ref, alpha, rank) == pytest.approx(pfa, rel=1e-10)


@pytest.mark.parametrize("pfa", [0.5, 1e-3, 1e-6, 1e-10])
def test_alpha_from_pfa_closed_form_special_cases(pfa):
    # OS rank 1: the minimum of N unit exponentials is exponential with mean 1/N
    # (David & Nagaraja 2003, sec. 2.1), so Pfa = N / (N + alpha), alpha = N (1/Pfa - 1).
    assert td.alpha_from_pfa("os", 10, pfa, rank=1) == pytest.approx(10 * (1 / pfa - 1), rel=1e-10)
    # SO with one cell per side is the same minimum: Pfa = 2 / (2 + alpha) (so_sum with n = 1).
    assert td.alpha_from_pfa("so", 2, pfa) == pytest.approx(2 * (1 / pfa - 1), rel=1e-10)
    # GO with one cell per side: Pfa = 2/(1+a) - 2/(2+a) = 2/((1+a)(2+a)), a root of
    # a^2 + 3a + 2 - 2/Pfa = 0 (go_sum with n = 1).
    assert td.alpha_from_pfa("go", 2, pfa) == pytest.approx((-3 + math.sqrt(1 + 8 / pfa)) / 2, rel=1e-10)


@pytest.mark.parametrize("n", [1, 2, 4, 8, 16, 50])
@pytest.mark.parametrize("t", [0.05, 0.7, 2.5, 9.0])
def test_go_so_closed_forms(n, t):
    alpha = n * t  # T = alpha / n multiplies the per-side sum
    so = td.pfa_from_alpha("so", 2 * n, alpha)
    go = td.pfa_from_alpha("go", 2 * n, alpha)
    # published finite sums (Weiss 1982; Hansen & Sawyers 1980; Gandhi & Kassam 1988)
    assert so == pytest.approx(float(so_sum(n, t)), rel=1e-11)
    assert go == pytest.approx(float(go_sum(n, t)), rel=1e-11)
    # identity Pfa_GO + Pfa_SO = 2 (1+T)^-n (max + min = S1 + S2 in the exponent; Gandhi & Kassam 1988)
    assert go + so == pytest.approx(2 * (1 + t) ** (-n), rel=1e-12)


@pytest.mark.parametrize("kind", ["go", "so"])
@pytest.mark.parametrize("n_ref", [2, 8, 32])
@pytest.mark.parametrize("pfa", [1e-2, 1e-6])
def test_go_so_pfa_against_integration(kind, n_ref, pfa):
    alpha = td.alpha_from_pfa(kind, n_ref, pfa)
    # Pfa = E[exp(-alpha Z)] for an exponential CUT (Gandhi & Kassam 1988), integrated with scipy
    # over the density of the max / min of two Gamma(n, 1/n) side means.
    ref = expect_over_estimate(kind, n_ref, None, lambda z: math.exp(-alpha * z))
    assert pfa == pytest.approx(ref, rel=1e-7)


@pytest.mark.parametrize(
    "n_ref,rank", [(1, 1), (8, 1), (8, 6), (8, 8), (24, 18), (64, 48), (5000, 3750), (200_001, 150_000)]
)
@pytest.mark.parametrize("alpha", [0.5, 6.0, 40.0])
def test_os_product_and_gamma_forms(n_ref, rank, alpha):
    got = td.pfa_from_alpha("os", n_ref, alpha, rank)
    # Rohling, IEEE Trans. AES-19(4), 1983: Pfa = prod_{i=0}^{k-1} (N-i)/(N-i+alpha)
    i = np.arange(rank, dtype=float)
    prod = math.exp(float(np.sum(np.log((n_ref - i) / (n_ref - i + alpha)))))
    # same paper: k C(N,k) Gamma(alpha+N-k+1) Gamma(k) / Gamma(alpha+N+1), in logs with gammaln
    lg = (
        math.log(rank)
        + special.gammaln(n_ref + 1)
        - special.gammaln(rank + 1)
        - special.gammaln(n_ref - rank + 1)
        + special.gammaln(alpha + n_ref - rank + 1)
        + special.gammaln(rank)
        - special.gammaln(alpha + n_ref + 1)
    )
    rel = 1e-11 if n_ref < 1000 else 1e-7  # gammaln cancellation grows with ln Gamma(N)
    assert got == pytest.approx(prod, rel=rel)
    assert got == pytest.approx(math.exp(lg), rel=rel)


@pytest.mark.parametrize("n_ref", [1, 2, 5, 16])
@pytest.mark.parametrize("alpha", [0.5, 3.0, 30.0])
def test_os_max_rank_and_cross_kind_identities(n_ref, alpha):
    # k = N: the maximum has density N (1-e^-y)^(N-1) e^-y (David & Nagaraja 2003, sec. 2.1);
    # E[e^{-alpha max}] = N B(alpha+1, N) (substitute u = e^-y).
    assert td.pfa_from_alpha("os", n_ref, alpha, rank=n_ref) == pytest.approx(
        n_ref * special.beta(alpha + 1, n_ref), rel=1e-11
    )
    # One cell per side: GO is the max of 2 cells, i.e. OS(N = 2, k = 2), SO the min, OS(2, 1), and CA
    # with N = 1 is OS(1, 1). Closed forms: Rohling 1983, prod_{i<k} (N-i)/(N-i+alpha), gives
    # 2/((2+a)(1+a)), 2/(2+a) and 1/(1+a); go_sum / so_sum with n = 1 give the same GO and SO values.
    go, so, ca1 = 2 / ((2 + alpha) * (1 + alpha)), 2 / (2 + alpha), 1 / (1 + alpha)
    assert float(go_sum(1, alpha)) == pytest.approx(go, rel=1e-14)
    assert float(so_sum(1, alpha)) == pytest.approx(so, rel=1e-14)
    assert td.pfa_from_alpha("go", 2, alpha) == pytest.approx(go, rel=1e-12)
    assert td.pfa_from_alpha("os", 2, alpha, 2) == pytest.approx(go, rel=1e-12)
    assert td.pfa_from_alpha("so", 2, alpha) == pytest.approx(so, rel=1e-12)
    assert td.pfa_from_alpha("os", 2, alpha, 1) == pytest.approx(so, rel=1e-12)
    assert td.pfa_from_alpha("ca", 1, alpha) == pytest.approx(ca1, rel=1e-12)
    assert td.pfa_from_alpha("os", 1, alpha, 1) == pytest.approx(ca1, rel=1e-12)


@pytest.mark.parametrize("kind", td.KINDS)
def test_noise_estimate_cdf_against_scipy_densities(kind):
    n_ref = 12
    rank = rank_for(kind, n_ref)
    pdf, _ = estimate_law(kind, n_ref, rank)
    for z in (0.3, 0.8, 1.0, 1.7):
        # CDF = integral of the density (David & Nagaraja 2003, sec. 2.1), scipy quad
        ref, _ = integrate.quad(pdf, 0.0, z, epsabs=1e-14, epsrel=1e-12)
        assert td.noise_estimate_cdf(kind, n_ref, z, rank) == pytest.approx(ref, rel=1e-9, abs=1e-14)


# --------------------------------------------------------------------------
# Pd
# --------------------------------------------------------------------------


@pytest.mark.parametrize("n_ref", [4, 16, 64])
@pytest.mark.parametrize("snr_db", [-5.0, 5.0, 13.0, 25.0])
def test_ca_swerling1_pd(n_ref, snr_db):
    alpha = td.alpha_from_pfa("ca", n_ref, 1e-5)
    s = 10 ** (snr_db / 10)
    # Richards 2005, ch. 7: CA-CFAR, Swerling I, Pd = (1 + alpha / (N (1 + SNR)))^-N
    assert td.pd("ca", n_ref, alpha, snr_db, 1) == pytest.approx((1 + alpha / (n_ref * (1 + s))) ** (-n_ref), rel=1e-12)


@pytest.mark.parametrize("kind", ["go", "so", "os"])
@pytest.mark.parametrize("snr_db", [0.0, 10.0, 20.0])
def test_swerling1_pd_against_integration(kind, snr_db):
    n_ref = 16
    rank = rank_for(kind, n_ref)
    alpha = td.alpha_from_pfa(kind, n_ref, 1e-4, rank)
    s = 10 ** (snr_db / 10)
    # exponential CUT power of mean 1+SNR (Swerling, IRE Trans. IT-6(2), 1960):
    # Pd = E_Z[exp(-alpha Z / (1 + SNR))], integrated with scipy over the estimate density
    ref = expect_over_estimate(kind, n_ref, rank, lambda z: math.exp(-alpha * z / (1 + s)))
    assert td.pd(kind, n_ref, alpha, snr_db, 1, rank) == pytest.approx(ref, rel=1e-7)


@pytest.mark.parametrize("pfa", [1e-2, 1e-6, 1e-10])
@pytest.mark.parametrize("snr_db", [-3.0, 6.0, 12.0, 18.0])
def test_ideal_pd(pfa, snr_db):
    s = 10 ** (snr_db / 10)
    t = -math.log(pfa)
    # Swerling I, known noise power: Pd = Pfa^(1/(1+SNR)) (Richards 2005, ch. 6)
    assert td.ideal_pd(pfa, snr_db, 1) == pytest.approx(pfa ** (1 / (1 + s)), rel=1e-12)
    # Swerling 0: Pd = Q1(sqrt(2 SNR), sqrt(2t)) (Marcum 1960) = scipy.stats.ncx2.sf(2t, 2, 2 SNR)
    got = td.ideal_pd(pfa, snr_db, 0)
    assert got == pytest.approx(stats.ncx2.sf(2 * t, 2, 2 * s), rel=1e-9, abs=1e-15)
    # same through the Rice envelope law (Rice, "Mathematical analysis of random noise", Bell
    # Syst. Tech. J. 24, 1945): amplitude |sqrt(S) + w| with per-component variance 1/2
    assert got == pytest.approx(stats.rice.sf(math.sqrt(2 * t), math.sqrt(2 * s)), rel=1e-6, abs=1e-12)


@pytest.mark.parametrize("pfa", [1e-1, 1e-2, 1e-4, 1e-6, 1e-8, 1e-10, 1e-14, 1e-50, 1e-150, 1e-300])
def test_ideal_swerling0_pd_grid_against_ncx2(pfa):
    # Pd = Q1(sqrt(2 SNR), sqrt(2t)) = scipy.stats.ncx2.sf(2t, 2, 2 SNR) (Marcum 1960); the code
    # takes 1 - scipy.special.chndtr, or a Poisson mixture series below Pd = 1e-3, instead.
    t = -math.log(pfa)
    for snr_db in np.arange(-40.0, 40.01, 0.5):
        s = 10 ** (snr_db / 10)
        assert td.ideal_pd(pfa, snr_db, 0) == pytest.approx(stats.ncx2.sf(2 * t, 2, 2 * s), rel=1e-11), snr_db


SW0_CASES = [
    ("ca", 2, 1e-6, 20.0),
    ("ca", 16, 1e-2, 0.0),
    ("ca", 32, 1e-6, 13.0),
    ("ca", 64, 1e-10, 16.0),
    ("go", 4, 1e-6, 20.0),
    ("go", 16, 1e-6, 13.0),
    ("so", 2, 1e-6, 10.0),
    ("so", 32, 1e-10, 15.0),
    ("os", 2, 1e-6, 20.0),
    ("os", 24, 1e-6, 13.0),
    ("os", 64, 1e-2, -10.0),
]


@pytest.mark.parametrize("kind,n_ref,pfa,snr_db", SW0_CASES)
def test_swerling0_pd_against_other_integration_order(kind, n_ref, pfa, snr_db):
    rank = rank_for(kind, n_ref)
    alpha = td.alpha_from_pfa(kind, n_ref, pfa, rank)
    ref = sw0_pd_reference(kind, n_ref, rank, alpha, snr_db)
    # accuracy target 1e-6 absolute (docs/theory.md); checked far tighter here
    assert td.pd(kind, n_ref, alpha, snr_db, 0, rank) == pytest.approx(ref, abs=1e-9)


# CA over a grid: the code takes Pd = 1 - F(alpha) with F the noncentral F(2, 2N; 2 SNR) CDF
# (scipy.special.ncfdtr); the reference integrates the Marcum Q over the estimate (scipy ncx2.sf
# and the gamma density), the route the code used before. (N = 1 and 2 are among SW0_CASES; here
# scipy.stats.ncx2.sf raises OverflowError near x = 1e-13 for them at 25 dB.)
@pytest.mark.parametrize("n_ref", [3, 16, 100, 1000, 100000])
@pytest.mark.parametrize("pfa", [1e-2, 1e-6, 1e-12])
def test_ca_swerling0_pd_grid_against_integration(n_ref, pfa):
    alpha = td.alpha_from_pfa("ca", n_ref, pfa)
    for snr_db in (-10.0, 3.0, 10.0, 13.0, 16.0, 25.0):
        ref = sw0_pd_reference("ca", n_ref, None, alpha, snr_db)
        assert td.pd("ca", n_ref, alpha, snr_db, 0) == pytest.approx(ref, abs=1e-9), snr_db


@pytest.mark.parametrize("n_ref", [1, 2, 16, 1000, 1000000])
@pytest.mark.parametrize("pfa", [1e-6, 1e-14, 1e-50, 1e-300])
def test_ca_swerling0_small_pd_against_ncf(n_ref, pfa):
    # X / Z is noncentral F(2, 2N) with noncentrality 2 SNR (Johnson, Kotz & Balakrishnan,
    # Continuous Univariate Distributions vol. 2, 1995, ch. 30), so Pd = scipy.stats.ncf.sf(alpha, ...);
    # checked in relative terms where Pd is small (the code sums a Poisson series there)
    alpha = td.alpha_from_pfa("ca", n_ref, pfa)
    for snr_db in np.arange(-40.0, 40.01, 2.0):
        s = 10 ** (snr_db / 10)
        ref = stats.ncf.sf(alpha, 2, 2 * n_ref, 2 * s)
        assert td.pd("ca", n_ref, alpha, snr_db, 0) == pytest.approx(ref, rel=1e-9), snr_db


@pytest.mark.parametrize("kind", td.KINDS)
@pytest.mark.parametrize("snr_db", [60.0, 80.0, 100.0, 150.0, 186.0, 200.0, 250.0])
def test_swerling0_pd_at_very_high_snr(kind, snr_db):
    n_ref = 32
    rank = rank_for(kind, n_ref)
    alpha = td.alpha_from_pfa(kind, n_ref, 1e-6, rank)
    s = 10 ** (snr_db / 10)
    # Lower bound written here (no source): with x0 = SNR / 4, Pd >= 1 - P(X <= x0) - P(alpha Z >= x0).
    # |sqrt(X) - sqrt(SNR)| <= |w| (triangle inequality) and P(|w|^2 > r) = exp(-r) for the unit
    # complex Gaussian noise, so P(X <= x0) <= exp(-SNR / 4); every estimate is at most the largest
    # reference cell, so P(Z >= z) <= N exp(-z). Both terms underflow to 0 here (SNR >= 1e6).
    bound = 1.0 - math.exp(-s / 4) - n_ref * math.exp(-s / (4 * alpha))
    got = td.pd(kind, n_ref, alpha, snr_db, 0, rank)
    assert bound - 1e-12 <= got <= 1.0


@pytest.mark.parametrize("kind", td.KINDS)
def test_pd_without_signal_is_pfa(kind):
    rank = rank_for(kind, 8)
    alpha = td.alpha_from_pfa(kind, 8, 1e-2, rank)
    # a vanishing signal leaves noise only, so Pd -> Pfa (definition of Pfa); at -80 dB the
    # first-order excess is SNR * E[alpha Z] ~ 1e-8 * 10 (Marcum 1960, series of Q1 in SNR)
    for sw in (0, 1):
        assert td.pd(kind, 8, alpha, -80.0, sw, rank) == pytest.approx(1e-2, abs=1e-6)


def _cut_power_sf_and_derivatives(t, snr, swerling):
    """P(X > t) of the CUT power X (unit noise) and its first two derivatives in t.

    Swerling I: X exponential of mean 1 + SNR, P = exp(-t / (1 + SNR)) (Swerling 1960).
    Swerling 0: X = |sqrt(SNR) + n|^2, density f(t) = exp(-(t + SNR)) I0(2 sqrt(SNR t))
    (Rice 1945; Marcum 1960), P = scipy.stats.ncx2.sf(2t, 2, 2 SNR); dP/dt = -f(t) and
    d2P/dt2 = -f'(t) = exp(-(t + SNR)) [I0(x) - sqrt(SNR / t) I1(x)], x = 2 sqrt(SNR t)
    (d I0(x)/dx = I1(x)); exponentially scaled Bessel functions keep it finite.
    """
    if swerling == 1:
        m = 1.0 + snr
        p = math.exp(-t / m)
        return p, -p / m, p / m**2
    x = 2.0 * math.sqrt(snr * t)
    scale = math.exp(x - t - snr)
    f = scale * special.i0e(x)
    return stats.ncx2.sf(2 * t, 2, 2 * snr), -f, f - scale * special.i1e(x) * math.sqrt(snr / t)


@pytest.mark.parametrize("snr_db", [8.0, 13.0, 16.0])
def test_large_window_approaches_ideal(snr_db):
    n = 10000
    alpha = td.alpha_from_pfa("ca", n, 1e-6)
    # As N grows the CA estimate converges to the noise power and the CFAR detector to the
    # fixed-threshold one (Richards 2005, ch. 7, limiting behaviour of the CFAR loss). How fast,
    # by a second-order expansion (delta method; derivation written here, no source): with
    # T = -ln Pfa, alpha = N (Pfa^(-1/N) - 1) = T + T^2 / (2N) + O(N^-2), and the estimate Z of
    # mean 1 and variance 1/N (Gamma(N, 1/N)),
    #     Pd_CA - Pd_ideal = E[P(alpha Z)] - P(T) = T^2 / (2N) (P'(T) + P''(T)) + O(N^-2),
    # P(t) the CUT power's survival function. Here T^2 / (2N) = 9.5e-3 and |P' + P''| <= 0.05, so
    # the gap is below 5e-4 < 1e-3; the O(N^-2) rest is about (T^2 / 2N)^2 = 1e-4 times P's
    # derivatives, so the expansion itself must hold to 1e-5.
    t = -math.log(1e-6)
    snr = 10 ** (snr_db / 10)
    for sw in (0, 1):
        gap = td.pd("ca", n, alpha, snr_db, sw) - td.ideal_pd(1e-6, snr_db, sw)
        assert abs(gap) < 1e-3
        _, d1, d2 = _cut_power_sf_and_derivatives(t, snr, sw)
        assert gap == pytest.approx(t**2 / (2 * n) * (d1 + d2), abs=1e-5)


# --------------------------------------------------------------------------
# Required SNR and CFAR loss
# --------------------------------------------------------------------------


@pytest.mark.parametrize("n_ref", [8, 16, 32, 128])
@pytest.mark.parametrize("pfa,pd_", [(1e-6, 0.9), (1e-4, 0.5), (1e-8, 0.99)])
def test_swerling1_required_snr_and_loss_closed_form(n_ref, pfa, pd_):
    # ideal: Pd = Pfa^(1/(1+S))  =>  1 + S = ln Pfa / ln Pd  (Richards 2005, ch. 6)
    s_ideal = math.log(pfa) / math.log(pd_) - 1
    # CA: Pd = (1 + alpha/(N(1+S)))^-N  =>  1 + S = alpha / (N (Pd^(-1/N) - 1))  (Richards 2005, ch. 7)
    alpha = n_ref * (pfa ** (-1 / n_ref) - 1)
    s_ca = alpha / (n_ref * (pd_ ** (-1 / n_ref) - 1)) - 1
    assert td.ideal_required_snr_db(pfa, pd_, 1) == pytest.approx(10 * math.log10(s_ideal), abs=1e-7)
    assert td.required_snr_db("ca", n_ref, pfa, pd_, 1) == pytest.approx(10 * math.log10(s_ca), abs=1e-7)
    assert td.cfar_loss_db("ca", n_ref, pfa, pd_, 1) == pytest.approx(10 * math.log10(s_ca / s_ideal), abs=1e-7)


@pytest.mark.parametrize("kind", ["go", "so", "os"])
@pytest.mark.parametrize("pd_", [0.3, 0.9, 0.999])
def test_swerling1_required_snr_reaches_pd(kind, pd_):
    n_ref = 16
    rank = rank_for(kind, n_ref)
    snr_db = td.required_snr_db(kind, n_ref, 1e-6, pd_, 1, rank)
    alpha = td.alpha_from_pfa(kind, n_ref, 1e-6, rank)
    s = 10 ** (snr_db / 10)
    # Pd at the solved SNR: E_Z[exp(-alpha Z / (1 + SNR))] (Swerling 1960), integrated with scipy
    assert expect_over_estimate(kind, n_ref, rank, lambda z: math.exp(-alpha * z / (1 + s))) == pytest.approx(
        pd_, abs=1e-9)


@pytest.mark.parametrize("pfa,pd_", [(1e-6, 1.0000001e-6), (1e-6, 2e-6), (1e-300, 1e-299), (1e-12, 1 - 1e-12)])
def test_swerling0_required_snr_at_extreme_pd(pfa, pd_):
    # Pd at the solved SNR, relative to the target: ideal by scipy.stats.ncx2.sf (Marcum 1960), CA by
    # scipy.stats.ncf.sf (noncentral F, Johnson, Kotz & Balakrishnan 1995, ch. 30). The bisection
    # stops within 1e-10 dB, 2.3e-11 relative in SNR; Pd's relative change is that times its
    # elasticity d ln Pd / d ln SNR, at most a few units here (derivation written here, no source).
    t = -math.log(pfa)
    s = 10 ** (td.ideal_required_snr_db(pfa, pd_, 0) / 10)
    assert stats.ncx2.sf(2 * t, 2, 2 * s) == pytest.approx(pd_, rel=1e-9)
    alpha = td.alpha_from_pfa("ca", 32, pfa)
    s = 10 ** (td.required_snr_db("ca", 32, pfa, pd_, 0) / 10)
    assert stats.ncf.sf(alpha, 2, 64, 2 * s) == pytest.approx(pd_, rel=1e-9)


@pytest.mark.parametrize("pfa", [1e-3, 1e-5, 1e-7])
@pytest.mark.parametrize("pd_", [0.5, 0.7, 0.9])
def test_swerling0_ideal_required_snr(pfa, pd_):
    snr_db = td.ideal_required_snr_db(pfa, pd_, 0)
    s = 10 ** (snr_db / 10)
    # the solved SNR gives the wanted Pd under scipy's noncentral chi-square (Marcum 1960)
    assert stats.ncx2.sf(-2 * math.log(pfa), 2, 2 * s) == pytest.approx(pd_, abs=1e-9)
    # Albersheim, "A closed-form approximation to Robertson's detection characteristics",
    # Proc. IEEE 69(7), 1981, single pulse: SNR_dB = 9.983 log10(A + 0.12 A B + 1.7 B),
    # A = ln(0.62/Pfa), B = ln(Pd/(1-Pd)); stated accuracy about 0.2 dB (from memory).
    a = math.log(0.62 / pfa)
    b = math.log(pd_ / (1 - pd_))
    albersheim = (6.2 + 4.54 / math.sqrt(1.44)) * math.log10(a + 0.12 * a * b + 1.7 * b)
    assert snr_db == pytest.approx(albersheim, abs=0.2)


@pytest.mark.parametrize("kind,n_ref", [("ca", 16), ("go", 16), ("so", 24), ("os", 24)])
def test_swerling0_required_snr_reaches_pd(kind, n_ref):
    rank = rank_for(kind, n_ref)
    snr_db = td.required_snr_db(kind, n_ref, 1e-6, 0.9, 0, rank)
    alpha = td.alpha_from_pfa(kind, n_ref, 1e-6, rank)
    # Pd at the solved SNR, by the independent integration route (Marcum 1960; scipy ncx2)
    assert sw0_pd_reference(kind, n_ref, rank, alpha, snr_db) == pytest.approx(0.9, abs=1e-7)
    loss = td.cfar_loss_db(kind, n_ref, 1e-6, 0.9, 0, rank)
    # Ideal Swerling 0 detector (known noise, threshold -ln Pfa on the unit-noise CUT power):
    # Pd = Q1(sqrt(2 SNR), sqrt(-2 ln Pfa)) = scipy.stats.ncx2.sf(-2 ln Pfa, 2, 2 SNR) (Marcum 1960),
    # solved for SNR with scipy.optimize.brentq (xtol 1e-13 on a linear SNR near 21, i.e. below 1e-13 dB).
    s_ideal = optimize.brentq(lambda s: stats.ncx2.sf(-2 * math.log(1e-6), 2, 2 * s) - 0.9, 1.0, 100.0,
                              xtol=1e-13, rtol=1e-14)
    # CFAR loss = required SNR of the CFAR detector minus that of the ideal one (Richards 2005, ch. 7);
    # the required SNR was checked against the integration above. Tolerance 1e-8 dB: the code's
    # root-finders stop within 1e-9 dB (threshold_design.required_snr_db docstring) plus brentq's
    # 2 (xtol + rtol |x|) (scipy.optimize.brentq documentation), both far below it.
    assert loss == pytest.approx(snr_db - 10 * math.log10(s_ideal), abs=1e-8)
    # a detector that must estimate the noise power never beats one that knows it
    # (Richards 2005, ch. 7, definition of CFAR loss)
    assert loss > 0


# --------------------------------------------------------------------------
# Monte Carlo, numpy only, independent of the float model
# --------------------------------------------------------------------------

MC_TRIALS = 200_000
MC_N = 16
MC_SNR_DB = 8.0


def complex_gaussian(rng, shape, power=1.0):
    return np.sqrt(power / 2) * (rng.standard_normal(shape) + 1j * rng.standard_normal(shape))


def clopper_pearson(hits, trials):
    return stats.binomtest(int(hits), trials).proportion_ci(confidence_level=0.999, method="exact")


@pytest.mark.parametrize("kind,seed", [("ca", 101), ("go", 202), ("so", 303), ("os", 404)])
def test_monte_carlo(kind, seed):
    rng = np.random.default_rng(seed)
    rank = rank_for(kind, MC_N)
    pfa = 1e-2
    alpha = td.alpha_from_pfa(kind, MC_N, pfa, rank)
    # square-law detected complex Gaussian noise of unit power in every reference cell
    ref = np.abs(complex_gaussian(rng, (MC_TRIALS, MC_N))) ** 2
    h = MC_N // 2
    if kind == "ca":
        z = ref.mean(axis=1)
    elif kind == "go":
        z = np.maximum(ref[:, :h].mean(axis=1), ref[:, h:].mean(axis=1))
    elif kind == "so":
        z = np.minimum(ref[:, :h].mean(axis=1), ref[:, h:].mean(axis=1))
    else:
        z = np.partition(ref, rank - 1, axis=1)[:, rank - 1]
    s = 10 ** (MC_SNR_DB / 10)
    noise = complex_gaussian(rng, MC_TRIALS)
    cuts = {
        "noise": np.abs(noise) ** 2,
        # Swerling 0: constant amplitude sqrt(S), random phase absorbed by the circular noise
        "sw0": np.abs(math.sqrt(s) + noise) ** 2,
        # Swerling I: complex Gaussian target amplitude of power S (Swerling 1960)
        "sw1": np.abs(complex_gaussian(rng, MC_TRIALS, s) + noise) ** 2,
    }
    expected = {
        "noise": pfa,
        "sw0": td.pd(kind, MC_N, alpha, MC_SNR_DB, 0, rank),
        "sw1": td.pd(kind, MC_N, alpha, MC_SNR_DB, 1, rank),
    }
    for case, x in cuts.items():
        hits = np.count_nonzero(x > alpha * z)
        ci = clopper_pearson(hits, MC_TRIALS)
        assert ci.low <= expected[case] <= ci.high, (case, hits / MC_TRIALS, expected[case], ci)
    # the estimate's CDF at two levels, same interval
    for level in (0.8, 1.2):
        ci = clopper_pearson(np.count_nonzero(z <= level), MC_TRIALS)
        assert ci.low <= td.noise_estimate_cdf(kind, MC_N, level, rank) <= ci.high


# --------------------------------------------------------------------------
# Properties (common practice, no source)
# --------------------------------------------------------------------------


@st.composite
def geometries(draw):
    kind = draw(st.sampled_from(td.KINDS))
    half = draw(st.integers(1, 40))
    n_ref = 2 * half if kind in ("go", "so") else draw(st.integers(1, 80))
    rank = draw(st.integers(1, n_ref)) if kind == "os" else None
    return kind, n_ref, rank


@PROPS
@given(
    geom=geometries(),
    a1=st.floats(0.01, 500.0),
    a2=st.floats(0.01, 500.0),
    snr_db=st.floats(-10.0, 25.0),
    swerling=st.sampled_from([0, 1]),
)
def test_raising_alpha_never_raises_pfa_or_pd(geom, a1, a2, snr_db, swerling):
    # common practice, no source: a higher threshold cannot detect more often
    kind, n_ref, rank = geom
    lo, hi = sorted((a1, a2))
    assert td.pfa_from_alpha(kind, n_ref, hi, rank) <= td.pfa_from_alpha(kind, n_ref, lo, rank) * (1 + 1e-12)
    p_hi = td.pd(kind, n_ref, hi, snr_db, swerling, rank)
    p_lo = td.pd(kind, n_ref, lo, snr_db, swerling, rank)
    assert p_hi <= p_lo + 1e-9  # 1e-9: quadrature accuracy of Swerling 0 Pd


def estimate_variance(n_ref):
    # Var Z = E Z^2 - (E Z)^2 with E Z^k = integral k z^(k-1) (1 - F(z)) dz over the CDF of the code
    sf = lambda z: 1.0 - td.noise_estimate_cdf("ca", n_ref, z)  # noqa: E731
    m1 = integrate.quad(sf, 0, np.inf, epsabs=1e-12)[0]
    m2 = integrate.quad(lambda z: 2 * z * sf(z), 0, np.inf, epsabs=1e-12)[0]
    return m2 - m1**2


@PROPS
@given(
    n1=st.integers(1, 100),
    extra=st.integers(1, 100),
    pfa_exp=st.floats(2.0, 8.0),
    pd_=st.floats(0.5, 0.99),
    swerling=st.sampled_from([0, 1]),
)
def test_more_reference_cells_lower_variance_and_loss(n1, extra, pfa_exp, pd_, swerling):
    # common practice, no source: averaging more cells gives a less noisy estimate and a lower loss
    n2 = n1 + extra
    pfa = 10.0**-pfa_exp
    assert estimate_variance(n2) < estimate_variance(n1)
    assert td.cfar_loss_db("ca", n2, pfa, pd_, swerling) < td.cfar_loss_db("ca", n1, pfa, pd_, swerling)


def test_variance_of_ca_estimate():
    # mean of N unit exponentials ~ Gamma(N, 1/N), variance 1/N (Johnson, Kotz & Balakrishnan,
    # Continuous Univariate Distributions, vol. 1, 1994, ch. 17)
    for n_ref in (1, 4, 32):
        assert estimate_variance(n_ref) == pytest.approx(1 / n_ref, rel=1e-6)


# --------------------------------------------------------------------------
# Bad input
# --------------------------------------------------------------------------

BAD_CALLS = [
    (lambda: td.alpha_from_pfa("ca", 16, 0.0), "--pfa"),
    (lambda: td.alpha_from_pfa("ca", 16, 1.0), "--pfa"),
    (lambda: td.alpha_from_pfa("ca", 16, float("nan")), "--pfa"),
    (lambda: td.pfa_from_alpha("ca", 16, 0.0), "--alpha"),
    (lambda: td.pfa_from_alpha("ca", 16, -2.0), "--alpha"),
    (lambda: td.pfa_from_alpha("ca", 16, float("inf")), "--alpha"),
    (lambda: td.pfa_from_alpha("ca", 0, 3.0), "--ref-cells"),
    (lambda: td.pfa_from_alpha("ca", 2.5, 3.0), "--ref-cells"),
    (lambda: td.pfa_from_alpha("ca", True, 3.0), "--ref-cells"),
    (lambda: td.pfa_from_alpha("go", 15, 3.0), "--ref-cells"),
    (lambda: td.pfa_from_alpha("so", 7, 3.0), "--ref-cells"),
    (lambda: td.pfa_from_alpha("os", 16, 3.0), "--rank"),
    (lambda: td.pfa_from_alpha("os", 16, 3.0, rank=0), "--rank"),
    (lambda: td.pfa_from_alpha("os", 16, 3.0, rank=17), "--rank"),
    (lambda: td.pfa_from_alpha("ca", 16, 3.0, rank=4), "--rank"),
    (lambda: td.pfa_from_alpha("xx", 16, 3.0), "--detector"),
    (lambda: td.pd("ca", 16, 3.0, 10.0, 2), "--swerling"),
    (lambda: td.pd("ca", 16, 3.0, float("nan"), 1), "--snr-db"),
    (lambda: td.required_snr_db("ca", 16, 1e-3, 1e-3, 1), "--pd"),
    (lambda: td.required_snr_db("ca", 16, 1e-3, 1.0, 0), "--pd"),
    (lambda: td.ideal_pd(1.5, 10.0, 0), "--pfa"),
    (lambda: td.design("ca", 16), "--pfa"),
    (lambda: td.design("ca", 16, pfa=1e-3, alpha=3.0), "--pfa"),
    (lambda: td.design("ca", 16, pfa=1e-3, snr_db=()), "--snr-db"),
]


@pytest.mark.parametrize("call,field", BAD_CALLS)
def test_bad_input_raises_spec_error(call, field):
    # project contract: refmodel/errors.py (common practice, no source)
    with pytest.raises(SpecError) as info:
        call()
    assert info.value.field == field


def test_design_bundle():
    d = td.design("ca", 32, pfa=1e-6, snr_db=(13.0,), loss_pd=0.9)
    # Richards 2005, ch. 7: alpha = N (Pfa^(-1/N) - 1) and the Swerling I closed forms
    assert d.alpha == pytest.approx(32 * (1e-6 ** (-1 / 32) - 1), rel=1e-12)
    sw1 = {c.swerling: c for c in d.cases}[1]
    s = 10**1.3
    assert sw1.pd[0] == pytest.approx((1 + d.alpha / (32 * (1 + s))) ** -32, rel=1e-12)
    assert sw1.ideal_pd[0] == pytest.approx(1e-6 ** (1 / (1 + s)), rel=1e-12)
    s_ideal = math.log(1e-6) / math.log(0.9) - 1
    s_ca = d.alpha / (32 * (0.9 ** (-1 / 32) - 1)) - 1
    assert sw1.cfar_loss_db == pytest.approx(10 * math.log10(s_ca / s_ideal), abs=1e-7)


def test_ca_design_imports_no_scipy_stats_integrate_or_optimize():
    # issue 15 item 7 (start-up of `cfarvec design`): scipy.stats, scipy.integrate and scipy.optimize
    # take longer to import than numpy and scipy.special together; a CA design needs none of them
    code = ("import sys\nfrom refmodel import threshold_design as td\n"
            "td.design('ca', 32, pfa=1e-6)\ntd.design('ca', 16, alpha=20.0, snr_db=(-3.0, 30.0), loss_pd=0.5)\n"
            "print(' '.join(sorted(sys.modules)))")
    mods = set(subprocess.run([sys.executable, "-c", code], check=True, capture_output=True, text=True).stdout.split())
    assert not {"scipy.stats", "scipy.integrate", "scipy.optimize"} & mods
    assert "scipy.special" in mods  # the probe did run the design
