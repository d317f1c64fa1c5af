"""Exact false-alarm and detection probabilities of the fixed-point CFAR pipeline.

For a cell deep inside a frame (both sides complete, ``docs/bit-true.md``
sections 3 to 7) the pipeline declares a detection exactly when the CUT word
reaches the *trigger word*

    c(s) = floor(T(s) / 2**F_T) + 1        (compare ">")
    c(s) = ceil(T(s) / 2**F_T)             (compare ">=")

where ``s`` is the integer noise statistic and ``T(s)`` =
``spec.threshold_from_statistic(s)`` the threshold word (product, rounding,
overflow: bit for bit the pipeline's). With independent cells,

    P(detection) = sum_c P(c(S) = c) * P(CUT word >= c)              (1)

so one law, that of the trigger word (:class:`TriggerLaw`), gives the Pfa
(CUT = noise) and the Pd of every target model and SNR (CUT = target plus
noise) without recomputation. The law of ``S`` is computed exactly from the
law of the quantised, clipped input word (:mod:`refmodel.fixedpoint.input_quantiser`):

* ``ca``: the 2R-fold convolution power of the word's pmf (sum of 2R cells);
* ``go`` / ``so``: the R-fold power (one side), then the law of the larger /
  smaller of two independent side sums, ``P(max = s) = p(s) (F(s) + F(s-1))``
  and ``P(min = s) = p(s) (G(s) + G(s+1))`` with ``F`` the cdf and ``G(s) =
  P(S >= s)`` -- products of non-negative terms, free of cancellation;
* ``os``: the k-th smallest of 2R cells, ``P(X_(k) <= x) = I_F(x)(k, 2R-k+1)``
  (regularized incomplete beta function, the binomial tail that holds for any
  parent law) [3]_.

Numerical method and accuracy
-----------------------------
A convolution power of a short vector is computed by binary powering of
direct sums (``numpy.convolve``), whose terms are all non-negative, so each
element carries a *relative* error of at most about ``m * u`` (``m`` terms,
unit round-off ``u``) even deep in the tails. A long one is a single
transform, ``irfft(rfft(p)**n)`` (scipy.fft; one forward and one inverse
transform instead of the ``log2(n)`` products that repeated
``scipy.signal.fftconvolve`` would need; negative round-off clipped to 0),
whose error is *absolute*: per element at most
``n kappa ||p||_2 + (kappa + (n+2) u) ||y||_2`` with ``kappa = 7 u log2(L)``
(the FFT error bound of [1]_ carried through the power and the inverse
transform, ``L`` the transform length, ``y`` the result). Absolute errors
would swamp the tiny tail probabilities that make up a Pfa of 1e-9, so the
FFT path is run twice: once on the plain law and once on the exponentially
tilted law ``p_theta(k) = p(k) exp(theta k) / M(theta)``, ``theta = -alpha_r
/ (D m)`` (``D`` the mean divisor, ``m`` the noise level in LSBs). Tilting
commutes with convolution, ``P(S = s) = M(theta)^n exp(-theta s) P_theta(S =
s)`` [2]_, and puts the tilted law's bulk where the terms of (1) that make
the Pfa are, so there the FFT's absolute error is small relative to them.
For every ``s`` the estimate with the smaller error bound is kept, and the
bounds are carried into every result: :meth:`TriggerLaw.pfa_error_bound`
bounds the Pfa's absolute error (the tests check it against direct
convolution, closed-form laws and Monte Carlo).

The law of a noise word is truncated above ``K`` words (mass at most
``tail``), which drops only configurations with some reference cell above
``K``: computed probabilities are then low by at most ``2R * tail``
(:attr:`TriggerLaw.dropped`). ``K`` is chosen so that this is below
``1e-12`` times the design Pfa.

References
----------
.. [1] N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd
   ed., SIAM, 2002, sec. 24.1 (error bound of the fast Fourier transform).
.. [2] S. Asmussen and P. W. Glynn, *Stochastic Simulation: Algorithms and
   Analysis*, Springer, 2007, ch. VI, sec. 2 (exponential change of measure:
   the tilted law of a sum is the sum of tilted laws).
.. [3] H. A. David and H. N. Nagaraja, *Order Statistics*, 3rd ed., Wiley,
   2003, sec. 2.1 (cdf of the r-th order statistic as a binomial tail) and
   sec. 2.4 (discrete parent laws).
.. [4] H. M. Finn and R. S. Johnson, "Adaptive detection mode with threshold
   control as a function of spatially sampled clutter-level estimates," RCA
   Review, vol. 29, no. 3, pp. 414-464, 1968 (the float limit of the CA Pfa).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import fft as sp_fft
from scipy import special

from ..block_spec import BlockSpec
from ..errors import require
from .fixed_arith import scale_product
from .input_quantiser import log_noise_pmf, noise_cdf, support_limit, word_sf, word_sf_smooth

__all__ = ["TriggerLaw", "statistic_law", "trigger_law", "trigger_words"]

_U = np.finfo(np.float64).eps / 2.0
#: Convolution powers costing up to this many multiply-adds (``len(p)**2 * n``) are direct sums.
DIRECT_MAX = 4_000_000
#: Values below this are set to 0 (and counted in the error bound) to avoid subnormal arithmetic.
_TINY = 1e-290
#: Relative accuracy assumed of scipy.special.betainc (OS law); checked by the tests.
BETAINC_REL = 1e-13
#: Truncation: mass left out is at most this times the Pfa hint.
TAIL_REL = 1e-12
#: Trigger words of smaller mass are left out of Pd sums.
PD_MASS_FLOOR = 1e-20
#: Probabilities below this are ignored in the arithmetic-error maximum.
ERR_MAX_FLOOR = 1e-12


# --------------------------------------------------------------------------
# Convolution powers with error bounds
# --------------------------------------------------------------------------


@dataclass(frozen=True)
class _Law:
    """A non-negative vector with an element-wise error bound ``abs + rel * value``."""

    p: np.ndarray
    abs: float
    rel: float

    def bound(self) -> np.ndarray:
        return self.abs + self.rel * self.p


def _dot(a: np.ndarray, b: np.ndarray) -> float:
    """Sum of products without BLAS (whose thread pool stalls on a loaded shared machine)."""
    return float(np.sum(a * b))


def _norm2(a: np.ndarray) -> float:
    return math.sqrt(_dot(a, a))


def _conv(a: _Law, b: _Law) -> _Law:
    """Direct convolution of non-negative vectors: element-wise relative error ``(m + 1) u``."""
    na, nb = a.p.size, b.p.size
    sa, sb = float(a.p.sum()), float(b.p.sum())
    c = np.convolve(a.p, b.p)
    c[c < _TINY] = 0.0  # keep clear of subnormal numbers (slow); counted in the bound
    absb = a.abs * sb + b.abs * sa + a.abs * b.abs * min(na, nb) + _TINY
    rel = a.rel + b.rel + a.rel * b.rel + (min(na, nb) + 1) * _U * 1.01
    return _Law(c, absb, rel)


def _power_direct(base: _Law, n: int) -> _Law:
    """``n``-fold convolution power by binary powering of direct convolutions."""
    result = None
    while True:
        if n & 1:
            result = base if result is None else _conv(result, base)
        n >>= 1
        if not n:
            return result
        base = _conv(base, base)


def _power_fft(p: np.ndarray, n: int) -> _Law:
    """``n``-fold convolution power in one transform: ``irfft(rfft(p)**n)``.

    Error bound (from the FFT bound of [1]_ with ``kappa = 7 u log2(L)``, ``L``
    the transform length, and ``|rfft(p)| <= sum(p) <= 1``): every element is
    off by at most ``n kappa ||p||_2 + (kappa + (n + 2) u) ||y||_2``, ``y`` the
    result.
    """
    m = n * (p.size - 1) + 1
    size = sp_fft.next_fast_len(m, real=True)
    y = sp_fft.irfft(sp_fft.rfft(p, size) ** n, size)[:m]
    np.clip(y, 0.0, None, out=y)
    kappa = 7.0 * _U * math.log2(max(size, 2))
    absb = n * kappa * _norm2(p) + (kappa + (n + 2) * _U) * _norm2(y) + _TINY
    y[y < _TINY] = 0.0
    return _Law(y, absb, 0.0)


def _power(p: np.ndarray, n: int) -> _Law:
    """Law of the sum of ``n`` independent cells of pmf ``p``: direct when short, else FFT."""
    if p.size * p.size * n <= DIRECT_MAX:
        return _power_direct(_Law(p, 0.0, 0.0), n)
    return _power_fft(p, n)


def _fold(lp: np.ndarray, n: int, theta: float | None) -> tuple[np.ndarray, np.ndarray]:
    """Law of the sum of ``n`` cells with log pmf ``lp``: estimate and absolute error bound.

    With ``theta`` the sum is computed both plainly and tilted, and each
    element is taken from the computation with the smaller bound.
    """
    plain = _power(np.exp(lp), n)
    p0, b0 = plain.p, plain.bound()
    if theta is None or plain.abs == 0.0:
        return p0, b0
    k = np.arange(lp.size, dtype=np.float64)
    lt = lp + theta * k
    log_m = float(special.logsumexp(lt))
    tilted = _power(np.exp(lt - log_m), n)
    s = np.arange(tilted.p.size, dtype=np.float64)
    scale = n * log_m - theta * s  # log of M^n exp(-theta s)
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        pt = np.where(tilted.p > 0, np.exp(np.log(np.where(tilted.p > 0, tilted.p, 1.0)) + scale), 0.0)
        bt = np.exp(np.log(tilted.abs) + scale) if tilted.abs > 0 else np.zeros_like(pt)
        bt = bt + tilted.rel * pt
    take = bt < b0
    return np.where(take, pt, p0), np.where(take, bt, b0)


# --------------------------------------------------------------------------
# Law of the noise statistic
# --------------------------------------------------------------------------


def statistic_law(spec: BlockSpec, noise_lsb: float, pfa_hint: float = 1e-6,
                  converter: str = "floor") -> tuple[np.ndarray, np.ndarray, float]:
    """Exact law of the integer noise statistic S for noise-only reference cells.

    Parameters
    ----------
    spec : BlockSpec
        The block (kind, R, rank, input width, realised alpha).
    noise_lsb : float
        Noise level: mean square-law power in input LSBs.
    pfa_hint : float
        Smallest probability of interest; the input law is truncated so that
        the dropped mass is below ``1e-12 * pfa_hint``.
    converter : {"floor", "round"}
        Input converter (:mod:`refmodel.fixedpoint.input_quantiser`).

    Returns
    -------
    p : numpy.ndarray
        ``P(S = s)`` for ``s = 0 .. len(p) - 1``.
    err : numpy.ndarray
        Absolute error bound of each element (round-off only).
    dropped : float
        Probability of the configurations left out by truncation (an upper
        bound on how much every probability computed from ``p`` is low).

    Notes
    -----
    Methods and their accuracy: module docstring; sources [1]_ to [3]_ there.
    """
    n_cells = spec.n_ref
    tail = TAIL_REL * min(pfa_hint, 1.0) / n_cells
    k_max = support_limit(noise_lsb, spec.input_bits, tail)
    lp, dropped_one = log_noise_pmf(noise_lsb, spec.input_bits, k_max, converter)
    dropped = min(1.0, n_cells * dropped_one)
    r = spec.ref_per_side
    theta = -spec.realised_alpha / (spec.mean_divisor * noise_lsb)
    if spec.kind == "ca":
        p, b = _fold(lp, 2 * r, theta)
        return p, b, dropped
    if spec.kind in ("go", "so"):
        ps, bs = _fold(lp, r, theta)
        m = ps.size
        guard = (np.arange(1, m + 1) * _U * 1.01)
        if spec.kind == "go":
            f = np.cumsum(ps)
            bf = np.cumsum(bs) + guard * f
            f1 = np.concatenate([[0.0], f[:-1]])
            bf1 = np.concatenate([[0.0], bf[:-1]])
            p = ps * (f + f1)
            b = bs * (f + f1) + ps * (bf + bf1) + 3 * _U * p
        else:
            g = np.cumsum(ps[::-1])[::-1]  # P(S >= s)
            bg = np.cumsum(bs[::-1])[::-1] + guard[::-1] * g
            g1 = np.concatenate([g[1:], [0.0]])
            bg1 = np.concatenate([bg[1:], [0.0]])
            p = ps * (g + g1)
            b = bs * (g + g1) + ps * (bg + bg1) + 3 * _U * p
        return p, b, dropped
    # os: k-th smallest of 2R cells, cdf I_F(k, N-k+1), complement I_G(N-k+1, k)  [3]
    k, n = spec.rank, n_cells
    f, g = noise_cdf(noise_lsb, spec.input_bits, k_max, converter)
    h = special.betainc(k, n - k + 1, f)
    hc = special.betainc(n - k + 1, k, g)
    h_prev = np.concatenate([[0.0], h[:-1]])
    hc_prev = np.concatenate([[1.0], hc[:-1]])
    low = h <= 0.5
    p = np.where(low, h - h_prev, hc_prev - hc)
    np.clip(p, 0.0, None, out=p)
    b = BETAINC_REL * np.where(low, h + h_prev, hc_prev + hc) + 2 * _U * p
    return p, b, dropped


# --------------------------------------------------------------------------
# Trigger word
# --------------------------------------------------------------------------


def trigger_words(spec: BlockSpec, threshold) -> np.ndarray:
    """Smallest CUT word that the threshold word(s) let through.

    ``(C << F_T) > T``  iff  ``C >= floor(T / 2**F_T) + 1``;
    ``(C << F_T) >= T`` iff  ``C >= ceil(T / 2**F_T)`` (``docs/bit-true.md`` section 7).
    """
    t = np.asarray(threshold, dtype=np.int64)
    f = spec.threshold_frac_bits
    if spec.compare == ">":
        return (t >> f) + 1
    return (t + (1 << f) - 1) >> f


@dataclass(frozen=True)
class TriggerLaw:
    """Law of the trigger word ``c(S)``: everything (1) needs, for one block and noise level.

    Attributes
    ----------
    words : numpy.ndarray of int64
        Distinct trigger words, ascending (``2**W_in`` means "never detects").
    mass : numpy.ndarray
        ``P(c(S) = word)``.
    err : numpy.ndarray
        Absolute round-off bound of each mass.
    dropped : float
        Truncation bound: every probability from this law may be low by up to this.
    saturation : float
        Probability that the threshold overflows its width (``T0 >= 2**W_T``).
    arith_err_mean_lsb, arith_err_rms_lsb, arith_err_max_lsb : float
        Threshold error ``T / 2**F_T - alpha * S / D`` in input LSBs (alpha
        quantisation, rounding, overflow; same integer statistic), its mean and
        root-mean-square under the law of ``S`` and its largest magnitude over
        statistics of probability at least 1e-12.
    noise_lsb : float
    input_bits : int
    converter : {"floor", "round"}
        Input converter of the CUT word (:mod:`refmodel.fixedpoint.input_quantiser`).
    """

    words: np.ndarray
    mass: np.ndarray
    err: np.ndarray
    dropped: float
    saturation: float
    arith_err_mean_lsb: float
    arith_err_rms_lsb: float
    arith_err_max_lsb: float
    noise_lsb: float
    input_bits: int
    converter: str = "floor"

    def detection_probability(self, snr: float = 0.0, swerling: int = 1) -> float:
        """Equation (1): P(CUT word >= c(S)) for a CUT of noise (``snr = 0``) or a target in noise.

        Parameters
        ----------
        snr : float
            Linear per-cell SNR of the CUT's target.
        swerling : {0, 1}
            Target model (see :func:`refmodel.fixedpoint.input_quantiser.word_sf`).

        Notes
        -----
        With a target, words of mass below 1e-20 are left out (at most
        ``2**W_in * 1e-20`` absolute) and Swerling 0 survival values are
        interpolated (:func:`refmodel.fixedpoint.input_quantiser.word_sf_smooth`, error
        below 4e-8); the Pfa (``snr = 0``) uses every word and exact values.
        """
        if snr == 0.0:
            sf = word_sf(self.words, self.noise_lsb, self.input_bits, converter=self.converter)
            return float(_dot(self.mass, sf))
        words, mass = self._pd_support()
        sf = word_sf_smooth(words, self.noise_lsb, self.input_bits, snr, swerling, converter=self.converter)
        return float(_dot(mass, sf))

    def _pd_support(self) -> tuple[np.ndarray, np.ndarray]:
        cached = self.__dict__.get("_pd_cache")
        if cached is None:
            keep = self.mass > PD_MASS_FLOOR
            cached = (np.ascontiguousarray(self.words[keep]), np.ascontiguousarray(self.mass[keep]))
            object.__setattr__(self, "_pd_cache", cached)
        return cached

    def pfa(self) -> float:
        """Exact Pfa of the pipeline (to the bound :meth:`pfa_error_bound`)."""
        return self.detection_probability(0.0)

    def pfa_error_bound(self) -> float:
        """Bound on the absolute error of :meth:`pfa`: round-off plus truncation."""
        sf = word_sf(self.words, self.noise_lsb, self.input_bits, converter=self.converter)
        return float(_dot(self.err, sf)) + self.dropped

    def pd(self, snr_db: float, swerling: int) -> float:
        """Pd of the pipeline for a target of per-cell SNR ``snr_db`` (dB)."""
        return self.detection_probability(10.0 ** (snr_db / 10.0), swerling)

    def pd_limit(self) -> float:
        """Pd as SNR grows without bound: the CUT word goes to the top word, so P(c(S) <= top)."""
        top = (1 << self.input_bits) - 1
        return float(self.mass[self.words <= top].sum())


def trigger_law(spec: BlockSpec, noise_lsb: float, pfa_hint: float | None = None,
                converter: str = "floor") -> TriggerLaw:
    """Law of the trigger word for noise-only reference cells at ``noise_lsb``.

    Parameters
    ----------
    spec : BlockSpec
        The block; every integer step is ``spec.threshold_from_statistic``.
    noise_lsb : float
        Noise level, mean power in input LSBs (> 0).
    pfa_hint : float, optional
        Smallest probability of interest (default: the spec's design Pfa, else 1e-6).
    converter : {"floor", "round"}
        Input converter (:mod:`refmodel.fixedpoint.input_quantiser`; default floor).

    Returns
    -------
    TriggerLaw

    Notes
    -----
    ``T(s)`` is evaluated for every statistic value ``s`` in the support of
    the law from :func:`statistic_law`, so the result is exact up to the
    stated round-off and truncation bounds.
    """
    ok = isinstance(noise_lsb, (int, float)) and math.isfinite(noise_lsb) and noise_lsb > 0
    require(ok, "noise_level_lsb", f"got {noise_lsb!r}", "a finite number of LSBs > 0")
    hint = pfa_hint if pfa_hint is not None else (spec.design_pfa or 1e-6)
    p, b, dropped = statistic_law(spec, float(noise_lsb), hint, converter)
    s = np.arange(p.size, dtype=np.int64)
    t0 = scale_product(s, spec.alpha_int, spec.drop_bits, spec.rounding, spec.truncate_partials)
    t = spec.threshold_from_statistic(s)
    over = (t0 < 0) | (t0 > (1 << spec.threshold_bits) - 1)
    saturation = float(p[over].sum())
    top = (1 << spec.input_bits) - 1
    c = np.clip(trigger_words(spec, t), 0, top + 1)
    # Threshold error against the exact product alpha * S / D, in input LSBs.
    err = t / 2.0 ** spec.threshold_frac_bits - spec.alpha * s / spec.mean_divisor
    tot = float(p.sum())
    mean = float(_dot(p, err) / tot)
    rms = float(math.sqrt(_dot(p, err * err) / tot))
    big = p >= ERR_MAX_FLOOR
    emax = float(np.abs(err[big]).max()) if np.any(big) else 0.0
    if np.all(np.diff(c) >= 0):
        starts = np.concatenate([[0], np.flatnonzero(np.diff(c)) + 1])
        words = c[starts]
        mass = np.add.reduceat(p, starts)
        berr = np.add.reduceat(b, starts)
    else:
        words, inv = np.unique(c, return_inverse=True)
        mass = np.bincount(inv, weights=p, minlength=words.size)
        berr = np.bincount(inv, weights=b, minlength=words.size)
    return TriggerLaw(words.astype(np.int64), mass, berr, dropped, saturation, mean, rms, emax,
                      float(noise_lsb), spec.input_bits, converter)
