"""Threshold design for CFAR detectors from published detection statistics.

Model: square-law detector, independent identically distributed noise cells
with an exponential power distribution of unit mean (Rayleigh envelope).
The cell under test (CUT) is declared a detection when its power exceeds
``alpha * Z``, where ``Z`` is the noise estimate formed from ``N`` reference
cells (``N/2`` on each side of the guard cells around the CUT):

=======  ===================================================================
kind     noise estimate ``Z`` that the threshold multiplier (alpha) multiplies
=======  ===================================================================
``ca``   mean of all ``N`` reference cells
``go``   the greater of (mean of the lagging half, mean of the leading half)
``so``   the smaller of (mean of the lagging half, mean of the leading half)
``os``   the ``rank``-th smallest of the ``N`` reference cells (rank 1..N)
=======  ===================================================================

Functions here map alpha to the false-alarm probability (Pfa) and back, give
the detection probability (Pd) for Swerling 0 (non-fluctuating) and Swerling I
targets, the same for the ideal fixed-threshold detector that knows the noise
power, the signal-to-noise ratio (SNR) needed for a given Pd, and the CFAR
loss. The formulas, their sources and the numerical methods are written out
in ``docs/theory.md``.

All SNRs are per-cell power ratios (signal power over mean noise power) and
are passed in dB. Bad input raises :class:`refmodel.errors.SpecError` with the
command-line option name as the field (``"--pfa"``, ``"--ref-cells"``, ...).

References
----------
.. [1] H. M. Finn and R. S. Johnson, "Adaptive detection mode with threshold
   control as a function of spatially sampled clutter-level estimates,"
   RCA Review, vol. 29, no. 3, pp. 414-464, 1968.
.. [2] M. A. Richards, *Fundamentals of Radar Signal Processing*, McGraw-Hill,
   2005, ch. 6 (detection fundamentals) and ch. 7 (constant false alarm rate
   detectors).
.. [3] V. G. Hansen and J. H. Sawyers, "Detectability loss due to greatest
   of selection in a cell-averaging CFAR," IEEE Trans. Aerospace and
   Electronic Systems, vol. AES-16, no. 1, pp. 115-118, 1980.
.. [4] M. Weiss, "Analysis of some modified cell-averaging CFAR processors in
   multiple-target situations," IEEE Trans. Aerospace and Electronic
   Systems, vol. AES-18, no. 1, pp. 102-114, 1982.
.. [5] P. P. Gandhi and S. A. Kassam, "Analysis of CFAR processors in
   nonhomogeneous background," IEEE Trans. Aerospace and Electronic
   Systems, vol. AES-24, no. 4, pp. 427-445, 1988.
.. [6] H. Rohling, "Radar CFAR thresholding in clutter and multiple target
   situations," IEEE Trans. Aerospace and Electronic Systems, vol. AES-19,
   no. 4, pp. 608-621, 1983.
.. [7] J. I. Marcum, "A statistical theory of target detection by pulsed
   radar," IRE Trans. Information Theory, vol. IT-6, no. 2, pp. 59-267, 1960.
.. [8] P. Swerling, "Probability of detection for fluctuating targets," IRE
   Trans. Information Theory, vol. IT-6, no. 2, pp. 269-308, 1960.
.. [9] H. A. David and H. N. Nagaraja, *Order Statistics*, 3rd ed., Wiley,
   2003, sec. 2.1 (distribution of a single order statistic).
.. [10] N. L. Johnson, S. Kotz and N. Balakrishnan, *Continuous Univariate
   Distributions*, vol. 2, 2nd ed., Wiley, 1995, ch. 29 (noncentral
   chi-square) and ch. 30 (noncentral F).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Iterable

import numpy as np
from scipy import special

from .errors import SpecError, require
from .spec_fields import choice, integer, number

# scipy.integrate and scipy.optimize are imported inside the functions that use them (GO, SO
# and OS only): together they take about half a second to import, more than scipy.special and
# numpy together, and CA designs need neither.

__all__ = [
    "KINDS",
    "Design",
    "alpha_from_pfa",
    "cfar_loss_db",
    "design",
    "ideal_pd",
    "ideal_required_snr_db",
    "noise_estimate_cdf",
    "pd",
    "pfa_from_alpha",
    "required_snr_db",
    "threshold_rule",
]

#: Detector kinds, in the order the command line lists them.
KINDS = ("ca", "go", "so", "os")

#: What alpha multiplies, per kind (n: total reference cells, h = n/2 per side, k: rank).
_RULES = {
    "ca": "mean of all {n} reference cells",
    "go": "max(mean of {h} lagging cells, mean of {h} leading cells)",
    "so": "min(mean of {h} lagging cells, mean of {h} leading cells)",
    "os": "rank-{k} (k-th smallest) of {n} reference cells",
}

#: Largest total number of reference cells accepted (keeps every computation bounded).
MAX_REF_CELLS = 1_000_000

# OS Pfa: exact product of log1p terms up to this rank, gamma-function form above.
_OS_PRODUCT_MAX_RANK = 100_000

# Tail mass of the CUT power left out of the Swerling 0 integral, per side: at most exp(-_TAIL_R).
_TAIL_R = 42.0

# Integration tolerances of the Swerling 0 Pd (absolute, relative).
_QUAD_EPSABS = 1e-13
_QUAD_EPSREL = 1e-10

# SNR search range for required_snr_db, in dB (widened step by step up to these limits).
_SNR_DB_LIMITS = (-200.0, 300.0)

# Bisection of the required SNR stops when the bracket is this narrow, in dB.
_SNR_DB_XTOL = 2e-10

# Swerling 0, CA and ideal: Pd is one minus a CDF where Pd is at least this (relative error below about
# 1e-13), else a Poisson mixture series; CA above this SNR (linear) falls back to quadrature instead.
_SERIES_BELOW_PD = 1e-3
_CA_SERIES_MAX_SNR = 1e4


#: Parameter descriptions shared by the public functions' docstrings (filled in by _shared_params).
_PARAMS = {
    "{kind_n_ref}": """kind : {"ca", "go", "so", "os"}
        Detector: cell averaging, greatest-of, smallest-of, ordered statistic.
    n_ref : int
        Total number of reference cells N (both sides together; even for
        ``go`` and ``so``, which use N/2 per side).""",
    "{rank}": """rank : int, optional
        Rank k (1..N) of the order statistic; required for ``os`` only.""",
    "{swerling}": """swerling : {0, 1}
        Target model: 0 non-fluctuating; 1 Swerling I (Rayleigh amplitude,
        constant over the single look).""",
    "{brent}": """R. P. Brent, *Algorithms for Minimization without Derivatives*,
       Prentice-Hall, 1973, ch. 4.""",
}


def _shared_params(f):
    """Fill the shared parameter descriptions of :data:`_PARAMS` into ``f``'s docstring."""
    for key, text in _PARAMS.items():
        if f.__doc__:  # None under python -OO
            f.__doc__ = f.__doc__.replace(key, text)
    return f


# --------------------------------------------------------------------------
# Validation (the shared value checks of refmodel.spec_fields, named after the CLI options)
# --------------------------------------------------------------------------


def _check_geometry(kind: str, n_ref, rank) -> tuple[str, int, int | None]:
    """Validate detector kind, total reference cells and OS rank."""
    kind = choice("--detector", kind, KINDS)
    n = integer("--ref-cells", n_ref, 1, MAX_REF_CELLS)
    require(kind not in ("go", "so") or n % 2 == 0, "--ref-cells", f"got odd {n} for detector {kind}",
            f"an even integer 2..{MAX_REF_CELLS} (N/2 cells per side)")
    if kind != "os":
        require(rank is None, "--rank", f"given for detector {kind}", "only with detector os")
        return kind, n, None
    require(rank is not None, "--rank", "missing for detector os", f"an integer 1..{n} (1..--ref-cells)")
    return kind, n, integer("--rank", rank, 1, n)


def _check_alpha(alpha) -> float:
    return number("--alpha", alpha, 0.0, open_lo=True)


def _check_pfa(pfa) -> float:
    return number("--pfa", pfa, 0.0, 1.0, open_lo=True, open_hi=True)


def _check_swerling(swerling) -> int:
    return integer("--swerling", swerling, 0, 1, text=True)


def _check_snr_db(snr_db) -> float:
    return number("--snr-db", snr_db, unit="of dB")


def _check_pd(pd_target, pfa: float) -> float:
    return number("--pd", pd_target, pfa, 1.0, open_lo=True, open_hi=True)


# --------------------------------------------------------------------------
# False-alarm probability
# --------------------------------------------------------------------------


def _log_pfa(kind: str, n: int, alpha: float, rank: int | None) -> float:
    """Natural log of Pfa for already-validated arguments (alpha >= 0)."""
    if kind == "ca":
        # Pfa = (1 + alpha/N)^(-N)  [1], [2]
        return -n * math.log1p(alpha / n)
    if kind in ("go", "so"):
        h = n // 2
        t = alpha / h  # multiplier of the per-side sum
        # SO: 2 (1+T)^-n I_{(1+T)/(2+T)}(n, n); GO: 2 (1+T)^-n I_{1/(2+T)}(n, n).
        # Same as the finite sums of [4], [5] (docs/theory.md, eqs. (3)-(6)).
        x = 1.0 / (2.0 + t) if kind == "go" else (1.0 + t) / (2.0 + t)
        reg = special.betainc(h, h, x)
        if reg <= 0.0:
            return -math.inf
        return math.log(2.0) - h * math.log1p(t) + math.log(reg)
    # OS: Pfa = prod_{i=0}^{k-1} (N-i) / (N-i+alpha)  [6]
    k = rank
    if k <= _OS_PRODUCT_MAX_RANK:
        m = n - np.arange(k, dtype=float)
        return -float(np.sum(np.log1p(alpha / m)))
    # Same, as Gamma functions: Gamma(N+1) Gamma(N-k+1+alpha) / (Gamma(N-k+1) Gamma(N+1+alpha))
    return float(
        special.gammaln(n + 1.0)
        - special.gammaln(n - k + 1.0)
        + special.gammaln(n - k + 1.0 + alpha)
        - special.gammaln(n + 1.0 + alpha)
    )


@_shared_params
def pfa_from_alpha(kind: str, n_ref: int, alpha: float, rank: int | None = None) -> float:
    """False-alarm probability of a CFAR detector for a given threshold multiplier (alpha).

    Parameters
    ----------
    {kind_n_ref}
    alpha : float
        Threshold multiplier (alpha), finite and > 0. The threshold is
        ``alpha * Z`` with ``Z`` as listed in the module docstring.
    {rank}

    Returns
    -------
    float
        Pfa in (0, 1); may underflow to 0.0 for astronomically large alpha.

    Notes
    -----
    Closed forms, with noise power exponential of unit mean in every cell:

    * CA: ``(1 + alpha/N)^(-N)`` [1]_, [2]_.
    * SO: ``2 (2+T)^(-n) sum_{j=0}^{n-1} C(n-1+j, j) (2+T)^(-j)`` with
      ``n = N/2`` and ``T = alpha/n`` [4]_, [5]_; GO: ``2 (1+T)^(-n) - Pfa_SO``
      [3]_, [5]_. Evaluated as the equal regularized incomplete beta forms
      ``2 (1+T)^(-n) I_x(n, n)`` with ``x = (1+T)/(2+T)`` (SO) or
      ``x = 1/(2+T)`` (GO), which avoid cancellation at small Pfa.
    * OS: ``prod_{i=0}^{k-1} (N-i)/(N-i+alpha)`` [6]_, summed as logs with
      ``log1p`` (exact to rounding) up to rank 100000; above that as the
      equal Gamma-function form ``Gamma(N+1) Gamma(N-k+1+alpha) /
      (Gamma(N-k+1) Gamma(N+1+alpha))`` with ``gammaln`` (relative error
      about ``eps * ln Gamma(N)``, ~1e-9 at N = 1e6).

    References
    ----------
    .. [1] Finn & Johnson, RCA Review 29(3), 1968.
    .. [2] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 7.
    .. [3] Hansen & Sawyers, IEEE Trans. AES-16(1), 1980.
    .. [4] Weiss, IEEE Trans. AES-18(1), 1982.
    .. [5] Gandhi & Kassam, IEEE Trans. AES-24(4), 1988.
    .. [6] Rohling, IEEE Trans. AES-19(4), 1983.
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    a = _check_alpha(alpha)
    return math.exp(_log_pfa(kind, n, a, k))


@_shared_params
def alpha_from_pfa(kind: str, n_ref: int, pfa: float, rank: int | None = None) -> float:
    """Threshold multiplier (alpha) that gives a wanted false-alarm probability.

    Parameters
    ----------
    {kind_n_ref}
    pfa : float
        Wanted Pfa, in (0, 1).
    {rank}

    Returns
    -------
    float
        alpha > 0 with ``pfa_from_alpha(kind, n_ref, alpha, rank) == pfa``.

    Notes
    -----
    CA has the closed form ``alpha = N (Pfa^(-1/N) - 1)`` [1]_, evaluated as
    ``N expm1(-ln(Pfa)/N)``. GO, SO and OS invert the Pfa expression of
    :func:`pfa_from_alpha`, which decreases strictly in alpha from 1 at
    alpha = 0 towards 0, by Brent's method on ``ln Pfa(e^u) - ln Pfa`` in
    ``u = ln(alpha)`` (scipy.optimize.brentq [2]_, tolerance 1e-15 in u,
    i.e. about 1e-15 relative in alpha).

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 7.
    .. [2] {brent}
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    p = _check_pfa(pfa)
    return _alpha_from_pfa(kind, n, p, k)


def _alpha_from_pfa(kind: str, n: int, pfa: float, k: int | None) -> float:
    target = math.log(pfa)
    if kind == "ca":
        return n * math.expm1(-target / n)

    from scipy import optimize

    # Solve in u = ln(alpha): one bracket search covers every magnitude of alpha.
    def f(u: float) -> float:
        return _log_pfa(kind, n, math.exp(u), k) - target

    lo, hi = -1.0, 1.0
    while f(lo) <= 0.0:
        lo -= 8.0  # ln Pfa -> 0 > target as alpha -> 0, so this ends
    while f(hi) >= 0.0:
        hi += 8.0
        if hi > 709.0:
            raise SpecError("--pfa", f"got {pfa!r}, alpha would exceed the double range", "a larger Pfa")
    u = optimize.brentq(f, lo, hi, xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=500)
    return math.exp(u)


@_shared_params
def threshold_rule(kind: str, n_ref: int, rank: int | None = None) -> str:
    """One-line description of what alpha multiplies, e.g. for reports.

    Parameters
    ----------
    {kind_n_ref}
    {rank}

    Returns
    -------
    str
        E.g. ``"alpha * mean of all 32 reference cells"``.
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    return "alpha * " + _RULES[kind].format(n=n, h=n // 2, k=k)


# --------------------------------------------------------------------------
# Noise estimate distribution
# --------------------------------------------------------------------------


def _estimate_cdf(kind: str, n: int, k: int | None, z):
    """P(Z <= z) for the normalized noise estimate Z (vectorized, z >= 0)."""
    z = np.maximum(np.asarray(z, dtype=float), 0.0)
    if kind == "ca":
        return special.gammainc(n, n * z)
    if kind in ("go", "so"):
        h = n // 2
        if kind == "go":
            return special.gammainc(h, h * z) ** 2
        # 1 - (1 - P)^2 = P (1 + Q), P + Q = 1: no cancellation for small P
        return special.gammainc(h, h * z) * (1.0 + special.gammaincc(h, h * z))
    # k-th smallest of N unit exponentials: U_(k) = 1 - exp(-Z) is Beta(k, N-k+1)  [9]
    return special.betainc(k, n - k + 1, -np.expm1(-z))


def _estimate_ppf(kind: str, n: int, k: int | None, q):
    """Inverse of :func:`_estimate_cdf` (vectorized, 0 < q < 1)."""
    q = np.asarray(q, dtype=float)
    if kind == "ca":
        return special.gammaincinv(n, q) / n
    if kind in ("go", "so"):
        h = n // 2
        side_q = np.sqrt(q) if kind == "go" else -np.expm1(0.5 * np.log1p(-q))
        return special.gammaincinv(h, side_q) / h
    return -np.log1p(-special.betaincinv(k, n - k + 1, q))


@_shared_params
def noise_estimate_cdf(kind: str, n_ref: int, z: float, rank: int | None = None) -> float:
    """Cumulative distribution of the noise estimate that alpha multiplies.

    Parameters
    ----------
    {kind_n_ref}
    z : float
        Level, in units of the mean noise power per cell.
    {rank}

    Returns
    -------
    float
        ``P(Z <= z)`` for noise-only reference cells.

    Notes
    -----
    With ``G(n, x) = P(n, n x)`` the regularized lower incomplete gamma
    function (CDF of the mean of n unit exponentials):

    * CA: ``G(N, z)``.
    * GO: ``G(n, z)^2``; SO: ``1 - (1 - G(n, z))^2``, n = N/2 (the two
      half-window means are independent) [1]_.
    * OS: ``I_{1-exp(-z)}(k, N-k+1)``, the regularized incomplete beta
      function: the k-th smallest of N uniforms is Beta(k, N-k+1) [1]_.

    References
    ----------
    .. [1] David & Nagaraja, Order Statistics, 3rd ed., 2003, sec. 2.1.
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    zz = number("z", z)
    return float(_estimate_cdf(kind, n, k, zz))


# --------------------------------------------------------------------------
# Detection probability
# --------------------------------------------------------------------------


def _snr_linear(snr_db: float) -> float:
    return 10.0 ** (snr_db / 10.0)


def _poisson_mixture(snr: float, term) -> float:
    """``sum_j Pois(j; snr) term(j)`` for terms in [0, 1], as a float <= 1.

    The sum runs over ``j < snr + 40 sqrt(snr) + 1000``; by Bernstein's
    inequality, ``P(J - snr >= u) <= exp(-u^2 / (2 (snr + u/3)))``, the rest of
    the Poisson mass is below ``exp(-800)``, i.e. nothing in double precision.
    """
    j = np.arange(math.ceil(snr + 40.0 * math.sqrt(snr) + 1000.0), dtype=float)
    if snr <= 0.0:
        return min(float(term(j[:1])[0]), 1.0)
    pois = np.exp(j * math.log(snr) - snr - special.gammaln(j + 1.0))
    return min(float(np.sum(pois * term(j))), 1.0)


def _pd_sw0(kind: str, n: int, k: int | None, alpha: float, snr: float) -> float:
    """Swerling 0 Pd of a CFAR detector, P(X > alpha Z).

    CA: ``X / Z`` is noncentral F(2, 2N) with noncentrality ``2 SNR`` [10], so
    Pd is one minus its CDF (``scipy.special.ncfdtr``, Boost), or below Pd =
    1e-3 its survival function as a Poisson mixture of central ones [10].
    Every other kind (and CA where neither applies: Pd below 1e-3 at an SNR
    above 1e4, or SNR above about 187 dB where ncfdtr has no finite value):
    Pd = integral f_X(x) P(Z <= x/alpha) dx, f_X the Rician-power density, by quadrature.
    """
    if kind == "ca":
        cdf = float(special.ncfdtr(2.0, 2.0 * n, 2.0 * snr, alpha))
        if math.isfinite(cdf) and cdf <= 1.0 - _SERIES_BELOW_PD:
            return 1.0 - cdf
        if snr <= _CA_SERIES_MAX_SNR:
            # Small Pd, where 1 - F loses digits: sum_j Pois(j; SNR) I_{N/(N+alpha)}(N, j+1)
            x = n / (n + alpha)
            return _poisson_mixture(snr, lambda j: special.betainc(float(n), j + 1.0, x))

    from scipy import integrate

    rs, rt = math.sqrt(snr), math.sqrt(_TAIL_R)
    # In the amplitude u = sqrt(x) = sqrt(SNR) + v the CUT's density is close to a unit Gaussian
    # in v at any SNR. |sqrt(X) - sqrt(SNR)| <= |w| and P(|w|^2 > r) = exp(-r): outside
    # [v_lo, v_hi] lies at most 2 exp(-_TAIL_R) of the CUT power's mass.
    v_lo, v_hi = max(-rs, -rt), rt
    q = np.array([1e-9, 1e-4, 0.05, 0.5, 0.95, 1 - 1e-4, 1 - 1e-9])
    pts = set(float(v) for v in np.sqrt(alpha * _estimate_ppf(kind, n, k, q)) - rs)
    pts.update([0.0, -3.0, 3.0])
    pts = sorted(p for p in pts if v_lo < p < v_hi and math.isfinite(p))

    def integrand(v: float) -> float:
        u = rs + v
        density = 2.0 * u * math.exp(-v * v) * float(special.i0e(2.0 * rs * u))  # Rice, i0e: no overflow
        return density * float(_estimate_cdf(kind, n, k, u * u / alpha))

    val, _err = integrate.quad(
        integrand, v_lo, v_hi, points=pts or None, epsabs=_QUAD_EPSABS, epsrel=_QUAD_EPSREL, limit=500
    )
    return min(max(val, 0.0), 1.0)


def _pd(kind: str, n: int, k: int | None, alpha: float, snr: float, swerling: int) -> float:
    if swerling == 1:
        # Exponential CUT power of mean 1 + snr: Pfa formula at alpha / (1 + snr)  [2], [8]
        return math.exp(_log_pfa(kind, n, alpha / (1.0 + snr), k))
    return _pd_sw0(kind, n, k, alpha, snr)


@_shared_params
def pd(kind: str, n_ref: int, alpha: float, snr_db: float, swerling: int, rank: int | None = None) -> float:
    """Detection probability of a CFAR detector.

    Parameters
    ----------
    {kind_n_ref}
    alpha : float
        Threshold multiplier (alpha) > 0.
    snr_db : float
        Per-cell signal-to-noise power ratio of the target in the CUT, dB
        (finite). Reference cells hold noise only.
    {swerling}
    {rank}

    Returns
    -------
    float
        Pd in [0, 1].

    Notes
    -----
    Swerling I: the CUT power is exponential with mean ``1 + SNR``, so
    ``Pd = Pfa(alpha / (1 + SNR))`` for every kind, e.g. CA
    ``(1 + alpha / (N (1 + SNR)))^(-N)`` [1]_, [3]_.

    Swerling 0: given the noise estimate, ``P(X > t) = Q1(sqrt(2 SNR),
    sqrt(2 t))`` (Marcum Q [2]_). Pd is its average over the distribution of
    the noise estimate (:func:`noise_estimate_cdf`).

    * CA: ``2X`` is noncentral chi-square with 2 degrees of freedom and
      noncentrality ``2 SNR``, ``2 N Z`` central chi-square with ``2N``, the
      two independent, so ``X / Z`` is noncentral F(2, 2N) with
      noncentrality ``2 SNR`` [4]_ and ``Pd = 1 - F(alpha)``, its CDF from
      scipy.special.ncfdtr (Boost). Below Pd = 1e-3, where that difference
      loses digits, Pd is summed as the Poisson mixture ``sum_j Pois(j; SNR)
      I_{N/(N+alpha)}(N, j+1)`` of central F survival functions [4]_
      (scipy.special.betainc), every term >= 0. Both agree with
      scipy.stats.ncf.sf to 1e-9 relative in the tests (5e-11 seen).
    * GO, SO, OS, and CA where neither applies (Pd below 1e-3 at an SNR
      above 40 dB, or above about 187 dB, where ncfdtr has no finite value):
      ``integral f_X(x) P(Z <= x / alpha) dx`` with ``f_X(x) = exp(-(x +
      SNR)) I0(2 sqrt(SNR x))``, written in the amplitude offset ``v =
      sqrt(x) - sqrt(SNR)`` (whose density is close to a unit Gaussian at
      any SNR), by adaptive Gauss-Kronrod quadrature (scipy.integrate.quad)
      on ``v`` in ``[max(-sqrt(SNR), -sqrt(42)), sqrt(42)]`` with
      breakpoints at quantiles of ``sqrt(alpha Z) - sqrt(SNR)``. Absolute
      error below 1e-9 (tolerances 1e-13 absolute, 1e-10 relative; the two
      cut tails hold at most ``2 exp(-42)``).

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 7.
    .. [2] Marcum, IRE Trans. IT-6(2), 1960.
    .. [3] Swerling, IRE Trans. IT-6(2), 1960.
    .. [4] Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions,
       vol. 2, 2nd ed., 1995, ch. 29-30.
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    a = _check_alpha(alpha)
    s = _snr_linear(_check_snr_db(snr_db))
    return _pd(kind, n, k, a, s, _check_swerling(swerling))


def _ideal_pd(pfa: float, snr: float, swerling: int) -> float:
    if swerling == 1:
        return pfa ** (1.0 / (1.0 + snr))
    if snr <= 0:
        return pfa
    t = -math.log(pfa)
    cdf = float(special.chndtr(2.0 * t, 2.0, 2.0 * snr))
    if cdf <= 1.0 - _SERIES_BELOW_PD:
        return 1.0 - cdf
    # Small Pd: sum_j Pois(j; SNR) Q(j + 1, t), Q the regularized upper incomplete gamma function
    return _poisson_mixture(snr, lambda j: special.gammaincc(j + 1.0, t))


@_shared_params
def ideal_pd(pfa: float, snr_db: float, swerling: int) -> float:
    """Detection probability of the ideal fixed-threshold detector (noise power known).

    Parameters
    ----------
    pfa : float
        False-alarm probability in (0, 1); the threshold is ``-ln(Pfa)``
        times the noise power.
    snr_db : float
        Per-cell SNR in dB.
    {swerling}

    Returns
    -------
    float
        Pd.

    Notes
    -----
    Swerling I: ``Pd = Pfa^(1 / (1 + SNR))`` [1]_, [3]_. Swerling 0:
    ``Pd = Q1(sqrt(2 SNR), sqrt(-2 ln Pfa))`` [2]_, the survival function at
    ``2t = -2 ln Pfa`` of the noncentral chi-square distribution with 2
    degrees of freedom and noncentrality ``2 SNR`` [4]_: one minus its CDF
    (scipy.special.chndtr, Boost), or below Pd = 1e-3, where that difference
    loses digits, the Poisson mixture ``sum_j Pois(j; SNR) Q(j + 1, t)`` of
    central ones (Q the regularized upper incomplete gamma function,
    scipy.special.gammaincc), every term >= 0. Agrees with
    scipy.stats.ncx2.sf to about 1e-13 relative down to Pfa = 1e-300 (tests).

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 6.
    .. [2] Marcum, IRE Trans. IT-6(2), 1960.
    .. [3] Swerling, IRE Trans. IT-6(2), 1960.
    .. [4] Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions,
       vol. 2, 2nd ed., 1995, ch. 29.
    """
    p = _check_pfa(pfa)
    s = _snr_linear(_check_snr_db(snr_db))
    return _ideal_pd(p, s, _check_swerling(swerling))


# --------------------------------------------------------------------------
# Required SNR and CFAR loss
# --------------------------------------------------------------------------


def _too_close(target: float, to_one: bool) -> SpecError:
    if to_one:
        return SpecError("--pd", f"got {target!r}, too close to 1 to resolve", "a Pd well below 1")
    return SpecError("--pd", f"got {target!r}, too close to Pfa to resolve", "a Pd well above Pfa")


def _snr_db_of(snr: float, target: float) -> float:
    """A solved linear SNR in dB, refused outside the search range."""
    if not snr > 0.0 or 10.0 * math.log10(snr) < _SNR_DB_LIMITS[0]:
        raise _too_close(target, False)
    if not math.isfinite(snr) or 10.0 * math.log10(snr) > _SNR_DB_LIMITS[1]:
        raise _too_close(target, True)
    return 10.0 * math.log10(snr)


def _solve_snr_db(pd_of_snr, target: float) -> float:
    """Solve pd_of_snr(snr) = target for snr in dB; pd_of_snr increases with SNR.

    Bracketed by 20 dB steps, then bisected to _SNR_DB_XTOL (about 38 steps from a 60 dB bracket).
    """

    def f(db: float) -> float:
        return pd_of_snr(_snr_linear(db)) - target

    lo, hi = -20.0, 40.0
    while f(lo) >= 0.0:
        lo -= 20.0
        if lo < _SNR_DB_LIMITS[0]:
            raise _too_close(target, False)
    while f(hi) <= 0.0:
        hi += 20.0
        if hi > _SNR_DB_LIMITS[1]:
            raise _too_close(target, True)
    while hi - lo > _SNR_DB_XTOL:
        mid = 0.5 * (lo + hi)
        if f(mid) < 0.0:
            lo = mid
        else:
            hi = mid
    return 0.5 * (lo + hi)


def _required_snr_db(kind: str, n: int, k: int | None, alpha: float, target: float, sw: int) -> float:
    if sw == 1:
        # Pd = Pfa(alpha / (1 + SNR)) [2], [8], so alpha / (1 + SNR) is the alpha whose Pfa is the target
        return _snr_db_of(alpha / _alpha_from_pfa(kind, n, target, k) - 1.0, target)
    return _solve_snr_db(lambda s: _pd(kind, n, k, alpha, s, sw), target)


def _ideal_required_snr_db(pfa: float, target: float, sw: int) -> float:
    t = -math.log(pfa)
    if sw == 1:
        # Pd = Pfa^(1 / (1 + SNR))  =>  1 + SNR = ln Pfa / ln Pd  [2]
        return _snr_db_of((t + math.log(target)) / -math.log(target), target)
    return _solve_snr_db(lambda s: _ideal_pd(pfa, s, sw), target)


@_shared_params
def required_snr_db(
    kind: str, n_ref: int, pfa: float, pd: float, swerling: int, rank: int | None = None
) -> float:
    """SNR (dB) a CFAR detector designed for ``pfa`` needs to reach ``pd``.

    Parameters
    ----------
    {kind_n_ref}
    pfa : float
        Design false-alarm probability in (0, 1); alpha follows from
        :func:`alpha_from_pfa`.
    pd : float
        Wanted detection probability in (pfa, 1).
    {swerling}
    {rank}

    Returns
    -------
    float
        SNR in dB.

    Notes
    -----
    Swerling I: ``Pd = Pfa(alpha / (1 + SNR))`` [1]_, so ``1 + SNR =
    alpha / alpha_from_pfa(Pd)``, exact (for CA ``alpha / (N (Pd^(-1/N) -
    1))``). Swerling 0: ``Pd(SNR_dB) - pd`` increases strictly with SNR; its
    root is bracketed by 20 dB steps in -200..300 dB and bisected to 1e-10 dB.

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 7.
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    p = _check_pfa(pfa)
    return _required_snr_db(kind, n, k, _alpha_from_pfa(kind, n, p, k), _check_pd(pd, p), _check_swerling(swerling))


@_shared_params
def ideal_required_snr_db(pfa: float, pd: float, swerling: int) -> float:
    """SNR (dB) the ideal fixed-threshold detector needs to reach ``pd``.

    Parameters
    ----------
    pfa : float
        False-alarm probability in (0, 1).
    pd : float
        Wanted detection probability in (pfa, 1).
    {swerling}

    Returns
    -------
    float
        SNR in dB.

    Notes
    -----
    Swerling I: ``1 + SNR = ln Pfa / ln Pd`` [1]_. Swerling 0: the root of
    ``ideal_pd(SNR_dB) - pd`` (:func:`ideal_pd`, Marcum [2]_), which increases
    strictly with SNR, bracketed by 20 dB steps in -200..300 dB and bisected
    to 1e-10 dB.

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 6.
    .. [2] Marcum, IRE Trans. IT-6(2), 1960.
    """
    p = _check_pfa(pfa)
    return _ideal_required_snr_db(p, _check_pd(pd, p), _check_swerling(swerling))


@_shared_params
def cfar_loss_db(kind: str, n_ref: int, pfa: float, pd: float, swerling: int, rank: int | None = None) -> float:
    """CFAR loss: extra SNR (dB) the CFAR detector needs over the ideal detector.

    Parameters
    ----------
    {kind_n_ref}
    pfa : float
        False-alarm probability in (0, 1), the same for both detectors.
    pd : float
        Detection probability in (pfa, 1) at which the SNRs are compared.
    {swerling}
    {rank}

    Returns
    -------
    float
        ``required_snr_db(...) - ideal_required_snr_db(pfa, pd, swerling)``,
        positive for every finite N.

    Notes
    -----
    Definition as in [1]_: the increase in SNR needed by the CFAR detector
    to keep the same Pd and Pfa as a detector that knows the noise power.

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 7.
    """
    return required_snr_db(kind, n_ref, pfa, pd, swerling, rank) - ideal_required_snr_db(pfa, pd, swerling)


# --------------------------------------------------------------------------
# Bundle for the command line
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class SwerlingCase:
    """Detection figures of one target model.

    Attributes
    ----------
    swerling : int
        0 or 1.
    pd : tuple of float
        CFAR Pd at each SNR of :attr:`Design.snr_db`.
    ideal_pd : tuple of float
        Ideal fixed-threshold Pd at the same SNRs and Pfa.
    snr_db_required : float
        SNR the CFAR detector needs for :attr:`Design.loss_pd`.
    snr_db_ideal : float
        SNR the ideal detector needs for :attr:`Design.loss_pd`.
    cfar_loss_db : float
        ``snr_db_required - snr_db_ideal``.
    """

    swerling: int
    pd: tuple[float, ...]
    ideal_pd: tuple[float, ...]
    snr_db_required: float
    snr_db_ideal: float
    cfar_loss_db: float


@dataclass(frozen=True)
class Design:
    """A threshold design: alpha, Pfa, Pd at chosen SNRs and CFAR loss.

    Attributes
    ----------
    kind : str
        Detector kind.
    n_ref : int
        Total number of reference cells N.
    rank : int or None
        OS rank k.
    alpha : float
        Threshold multiplier (alpha).
    pfa : float
        False-alarm probability of ``alpha``.
    snr_db : tuple of float
        SNRs (dB) at which Pd is reported.
    loss_pd : float
        Pd at which the CFAR loss is computed.
    cases : tuple of SwerlingCase
        One entry per requested Swerling case.
    inputs : dict
        The arguments as given (for echoing in reports).
    """

    kind: str
    n_ref: int
    rank: int | None
    alpha: float
    pfa: float
    snr_db: tuple[float, ...]
    loss_pd: float
    cases: tuple[SwerlingCase, ...]
    inputs: dict = field(default_factory=dict)

    @property
    def rule(self) -> str:
        """What alpha multiplies, in words."""
        return threshold_rule(self.kind, self.n_ref, self.rank)

    def to_dict(self) -> dict:
        """Plain JSON-ready dictionary of the design."""
        return {
            "inputs": dict(self.inputs),
            "detector": self.kind,
            "ref_cells": self.n_ref,
            "rank": self.rank,
            "threshold": self.rule,
            "alpha": self.alpha,
            "pfa": self.pfa,
            "snr_db": list(self.snr_db),
            "loss_pd": self.loss_pd,
            "swerling": [
                {
                    "swerling": c.swerling,
                    "pd": list(c.pd),
                    "ideal_pd": list(c.ideal_pd),
                    "snr_db_required": c.snr_db_required,
                    "snr_db_ideal": c.snr_db_ideal,
                    "cfar_loss_db": c.cfar_loss_db,
                }
                for c in self.cases
            ],
        }


@_shared_params
def design(
    kind: str,
    n_ref: int,
    *,
    pfa: float | None = None,
    alpha: float | None = None,
    rank: int | None = None,
    snr_db: Iterable[float] = (10.0, 13.0, 16.0),
    loss_pd: float = 0.9,
    swerling: Iterable[int] = (0, 1),
) -> Design:
    """Design (or analyse) a CFAR threshold.

    Parameters
    ----------
    {kind_n_ref}
    pfa, alpha : float
        Give exactly one: the wanted Pfa (alpha is designed) or alpha (its
        Pfa is analysed).
    {rank}
    snr_db : iterable of float
        SNRs (dB) at which to report Pd; at least one.
    loss_pd : float
        Pd in (Pfa, 1) at which to report the CFAR loss.
    swerling : iterable of {0, 1}
        Target models to report.

    Returns
    -------
    Design
        See :class:`Design`.

    Notes
    -----
    Uses :func:`alpha_from_pfa` / :func:`pfa_from_alpha`, :func:`pd`,
    :func:`ideal_pd`, :func:`required_snr_db` and :func:`cfar_loss_db`;
    their references apply.
    """
    kind, n, k = _check_geometry(kind, n_ref, rank)
    if (pfa is None) == (alpha is None):
        raise SpecError("--pfa", "give exactly one of --pfa and --alpha", "--pfa P or --alpha A")
    if pfa is not None:
        p = _check_pfa(pfa)
        a = _alpha_from_pfa(kind, n, p, k)
    else:
        a = _check_alpha(alpha)
        p = math.exp(_log_pfa(kind, n, a, k))
        if not 0.0 < p < 1.0:
            raise SpecError("--alpha", f"got {alpha!r}, Pfa underflows to 0", "an alpha with Pfa > 1e-300")
    snrs = tuple(_check_snr_db(s) for s in snr_db)
    if not snrs:
        raise SpecError("--snr-db", "no value given", "one or more finite numbers of dB")
    target = _check_pd(loss_pd, p)
    sws = tuple(dict.fromkeys(_check_swerling(s) for s in swerling))
    if not sws:
        raise SpecError("--swerling", "no value given", "0 or 1")
    cases = []
    for sw in sws:
        pds = tuple(_pd(kind, n, k, a, _snr_linear(s), sw) for s in snrs)
        ideal = tuple(_ideal_pd(p, _snr_linear(s), sw) for s in snrs)
        req = _required_snr_db(kind, n, k, a, target, sw)
        ide = _ideal_required_snr_db(p, target, sw)
        cases.append(SwerlingCase(sw, pds, ideal, req, ide, req - ide))
    inputs = {
        "detector": kind,
        "ref_cells": n,
        "rank": k,
        "pfa": pfa,
        "alpha": alpha,
        "snr_db": list(snrs),
        "pd": loss_pd,
        "swerling": list(sws),
    }
    return Design(kind, n, k, a, p, snrs, target, tuple(cases), inputs)
