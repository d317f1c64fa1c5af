"""How a square-law power becomes an input word, and the exact law of that word.

Convention (an ADC-like truncation, used by the quantisation study): a cell's
square-law power ``y >= 0``, measured in input LSBs, becomes the unsigned
``W_in``-bit word

    x = min(floor(y), 2**W_in - 1)

i.e. the fraction is dropped and anything at or above full scale is clipped
to the largest word. ``y`` at or above ``2**W_in`` is counted as *clipped*
(``y`` in ``[2**W_in - 1, 2**W_in)`` gives the top word without clipping).

The noise model is the square-law detected complex Gaussian noise of the
threshold design: ``y`` exponential with mean ``mean_lsb`` (the noise level
in LSBs). A cell holding a target of per-cell SNR ``snr`` (linear) has

* Swerling I: ``y`` exponential with mean ``mean_lsb * (1 + snr)`` [1]_, [2]_;
* Swerling 0 (non-fluctuating): ``2 y / mean_lsb`` non-central chi-square
  with 2 degrees of freedom and non-centrality ``2 snr`` [1]_, [3]_.

Because the word is a floor, ``P(x >= c) = P(y >= c)`` for ``1 <= c <=
2**W_in - 1``; every probability here comes from that survival function.

A second converter, ``converter="round"`` (round to nearest, ties up), gives
``x = min(floor(y + 1/2), 2**W_in - 1)``, so ``P(x >= c) = P(y >= c - 1/2)``
for ``1 <= c <= 2**W_in - 1``: every function here takes ``converter`` and
shifts the survival function by the converter's offset (:data:`CONVERTERS`:
0 for ``floor``, 1/2 for ``round``). Flooring removes half an LSB from every
cell on average; rounding removes that bias. The default is ``floor``.

References
----------
.. [1] M. A. Richards, *Fundamentals of Radar Signal Processing*,
   McGraw-Hill, 2005, ch. 6 (square-law detection of a target in complex
   Gaussian noise).
.. [2] P. Swerling, "Probability of detection for fluctuating targets," IRE
   Trans. Information Theory, vol. IT-6, no. 2, pp. 269-308, 1960.
.. [3] J. I. Marcum, "A statistical theory of target detection by pulsed
   radar," IRE Trans. Information Theory, vol. IT-6, no. 2, pp. 59-267, 1960.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import interpolate, special, stats

from ..errors import require

#: Knots per noise level of the Hermite interpolation in :func:`word_sf_smooth`.
HERMITE_KNOTS_PER_LEVEL = 16
#: Input converters and the offset each adds to the power before the floor.
CONVERTERS = {"floor": 0.0, "round": 0.5}

__all__ = [
    "CONVERTERS",
    "clip_rate",
    "log_noise_pmf",
    "noise_cdf",
    "noise_pmf",
    "quantise_power",
    "support_limit",
    "word_pmf",
    "word_sf",
    "word_sf_smooth",
]


def _top(input_bits: int) -> int:
    return (1 << input_bits) - 1


def _offset(converter: str) -> float:
    require(converter in CONVERTERS, "input_converter", f"got {converter!r}", ", ".join(CONVERTERS))
    return CONVERTERS[converter]


def _check(mean_lsb: float, input_bits: int) -> None:
    require(isinstance(input_bits, int) and 1 <= input_bits <= 32, "input_bits", f"got {input_bits!r}",
            "an integer 1..32")
    ok = isinstance(mean_lsb, (int, float)) and math.isfinite(mean_lsb) and mean_lsb > 0
    require(ok, "noise_level_lsb", f"got {mean_lsb!r}", "a finite number of LSBs > 0")


def quantise_power(y, input_bits: int, out: np.ndarray | None = None, converter: str = "floor") -> np.ndarray:
    """Input words from square-law powers in LSB units: ``min(floor(y + offset), 2**W_in - 1)``.

    Parameters
    ----------
    y : array_like of float
        Powers ``>= 0`` in input LSBs.
    input_bits : int
        Input word width ``W_in``.
    out : numpy.ndarray of float64, optional
        Where to write the words (may be ``y`` itself, for in-place use).
    converter : {"floor", "round"}
        Offset 0 (floor) or 1/2 (round to nearest, ties up).

    Returns
    -------
    numpy.ndarray of float64
        The words, as exact integers held in float64 (exact below 2**53).
    """
    y = np.asarray(y, dtype=np.float64)
    off = _offset(converter)
    if off:
        out = np.add(y, off, out=out)
        y = out
    out = np.floor(y, out=out)
    return np.minimum(out, float(_top(input_bits)), out=out)


def support_limit(mean_lsb: float, input_bits: int, tail: float) -> int:
    """Largest noise word kept when the law is truncated at tail mass ``tail``.

    ``K = min(2**W_in - 1, ceil(mean_lsb * ln(1 / tail)))``, so that
    ``P(x > K) = exp(-(K + 1) / mean_lsb) <= tail`` (zero when ``K`` is the
    top word).
    """
    _check(mean_lsb, input_bits)
    k = math.ceil(mean_lsb * math.log(1.0 / tail))
    return int(min(_top(input_bits), max(k, 1)))


def log_noise_pmf(mean_lsb: float, input_bits: int, k_max: int | None = None,
                  converter: str = "floor") -> tuple[np.ndarray, float]:
    """Natural log of the noise word's probability mass function, words ``0 .. K``.

    Parameters
    ----------
    mean_lsb : float
        Noise level: mean power in input LSBs.
    input_bits : int
        Input word width.
    k_max : int, optional
        Largest word kept, ``K`` (default: the top word, no truncation).

    Returns
    -------
    log_pmf : numpy.ndarray
        ``ln P(x = k)`` for ``k = 0 .. K``.
    dropped : float
        Probability mass above ``K`` that was left out (0 when ``K`` is the top word).

    Notes
    -----
    For exponential ``y`` of mean ``m``, ``P(x = k) = exp(-k/m) (1 - exp(-1/m))``
    below the top word and ``P(x = top) = exp(-top/m)`` (everything from
    ``top`` up clips there) [1]_. In logs, ``-k/m + ln(-expm1(-1/m))``: no
    underflow and full relative accuracy for every ``k``. With the ``round``
    converter (offset ``h = 1/2``) ``P(x = 0) = 1 - exp(-h/m)`` and ``k``
    becomes ``k - h`` in the other words.

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 6.
    """
    _check(mean_lsb, input_bits)
    h = _offset(converter)
    top = _top(input_bits)
    k_max = top if k_max is None else int(min(k_max, top))
    k = np.arange(k_max + 1, dtype=np.float64)
    lp = -(k - h) / mean_lsb + math.log(-math.expm1(-1.0 / mean_lsb))
    if h:
        lp[0] = math.log(-math.expm1(-h / mean_lsb))
    if k_max == top:
        lp[-1] = -(top - h) / mean_lsb
        dropped = 0.0
    else:
        dropped = math.exp(-(k_max + 1 - h) / mean_lsb)
    return lp, dropped


def noise_pmf(mean_lsb: float, input_bits: int, k_max: int | None = None,
              converter: str = "floor") -> tuple[np.ndarray, float]:
    """Probability mass function of the noise word, words ``0 .. K`` (see :func:`log_noise_pmf`)."""
    lp, dropped = log_noise_pmf(mean_lsb, input_bits, k_max, converter)
    return np.exp(lp), dropped


def noise_cdf(mean_lsb: float, input_bits: int, k_max: int | None = None,
              converter: str = "floor") -> tuple[np.ndarray, np.ndarray]:
    """``P(x <= k)`` and ``P(x > k)`` of the noise word for ``k = 0 .. K``, both to full relative accuracy.

    Notes
    -----
    ``P(x > k) = P(y >= k + 1) = exp(-(k+1)/m)`` below the top word (0 at
    the top), ``P(x <= k) = -expm1(-(k+1)/m)`` [1]_; ``k + 1 - 1/2`` for the
    ``round`` converter.

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 6.
    """
    _check(mean_lsb, input_bits)
    top = _top(input_bits)
    k_max = top if k_max is None else int(min(k_max, top))
    k1 = np.arange(1, k_max + 2, dtype=np.float64) - _offset(converter)
    sf = np.exp(-k1 / mean_lsb)
    cdf = -np.expm1(-k1 / mean_lsb)
    if k_max == top:
        sf[-1] = 0.0
        cdf[-1] = 1.0
    return cdf, sf


def _power_sf(c: np.ndarray, mean_lsb: float, snr: float, swerling: int) -> np.ndarray:
    """``P(y >= c)`` of the continuous power for real ``c >= 0``."""
    if snr == 0.0 or swerling == 1:
        return np.exp(-c / (mean_lsb * (1.0 + snr)))
    return stats.ncx2.sf(2.0 * c / mean_lsb, 2, 2.0 * snr)


def word_sf(c, mean_lsb: float, input_bits: int, snr: float = 0.0, swerling: int = 1,
            converter: str = "floor") -> np.ndarray:
    """``P(x >= c)`` for integer(s) ``c``: the chance a cell's word reaches ``c``.

    Parameters
    ----------
    c : array_like of int
        Word values (any integers; ``c <= 0`` gives 1, ``c > top`` gives 0).
    mean_lsb : float
        Noise level in LSBs.
    input_bits : int
        Input word width.
    snr : float
        Linear per-cell SNR of a target in the cell (0: noise only).
    swerling : {0, 1}
        Target model when ``snr > 0``.
    converter : {"floor", "round"}
        Input converter (module docstring): ``P(y >= c - offset)``.

    Returns
    -------
    numpy.ndarray of float
        The survival probabilities.

    Notes
    -----
    ``P(x >= c) = P(y >= c)`` for ``1 <= c <= top`` (floor convention):
    ``exp(-c / (m (1 + snr)))`` for noise and Swerling I [2]_, the Marcum Q
    function ``Q1(sqrt(2 snr), sqrt(2 c / m))``, evaluated as the survival
    function of the non-central chi-square law (scipy.stats.ncx2.sf), for
    Swerling 0 [3]_.

    References
    ----------
    .. [1] Richards, Fundamentals of Radar Signal Processing, 2005, ch. 6.
    .. [2] Swerling, IRE Trans. IT-6(2), 1960.
    .. [3] Marcum, IRE Trans. IT-6(2), 1960.
    """
    _check(mean_lsb, input_bits)
    h = _offset(converter)
    top = _top(input_bits)
    c = np.asarray(c, dtype=np.int64)
    out = np.zeros(c.shape, dtype=np.float64)
    out[c <= 0] = 1.0
    mid = (c >= 1) & (c <= top)
    if np.any(mid):
        out[mid] = _power_sf(c[mid].astype(np.float64) - h, mean_lsb, snr, swerling)
    return out


def _power_density(c: np.ndarray, mean_lsb: float, snr: float) -> np.ndarray:
    """Density of the Swerling 0 cell power at ``c`` LSBs: ``(1/m) exp(-(x + s)) I0(2 sqrt(s x))``, ``x = c/m``."""
    x = np.maximum(c / mean_lsb, 0.0)
    rx, rs = np.sqrt(x), math.sqrt(snr)
    return np.exp(-((rx - rs) ** 2)) * special.i0e(2.0 * rs * rx) / mean_lsb


def word_sf_smooth(c, mean_lsb: float, input_bits: int, snr: float, swerling: int = 0,
                   knots_per_level: int | None = None, converter: str = "floor") -> np.ndarray:
    """:func:`word_sf` for many words at once, through cubic Hermite interpolation for Swerling 0.

    Parameters
    ----------
    c : array_like of int
        Word values.
    mean_lsb, input_bits, snr, swerling
        As for :func:`word_sf`.
    knots_per_level : int, optional
        Interpolation knots per noise level (``mean_lsb`` words); default
        :data:`HERMITE_KNOTS_PER_LEVEL`.
    converter : {"floor", "round"}
        Input converter (module docstring).

    Returns
    -------
    numpy.ndarray
        ``P(x >= c)``.

    Notes
    -----
    The Marcum Q function is costly, and a Pd sum over the trigger law needs it
    at up to ``2**W_in`` words. For Swerling 0 with a noise level above
    ``knots_per_level`` LSBs, ``P(y >= c)`` is evaluated exactly at knots
    ``h = mean_lsb / knots_per_level`` words apart, together with its
    derivative (minus the Rician power density, via the scaled Bessel
    function ``i0e``), and interpolated by the piecewise cubic Hermite
    polynomial (scipy.interpolate.CubicHermiteSpline). Its error is at most
    ``h**4 / 384`` times the largest fourth derivative [1]_; in units of the
    noise level the fourth derivative of the survival function (the third of
    the density) stays below 1, so the error is below
    ``knots_per_level**-4 / 384`` (4e-8 for 16 knots; the tests compare with
    exact values). Other cases are exact (:func:`word_sf`).

    References
    ----------
    .. [1] R. L. Burden and J. D. Faires, *Numerical Analysis*, 9th ed.,
       Brooks/Cole, 2011, sec. 3.4 (error of Hermite interpolation).
    """
    knots_per_level = knots_per_level or HERMITE_KNOTS_PER_LEVEL
    c = np.asarray(c, dtype=np.int64)
    if swerling != 0 or snr == 0.0 or mean_lsb <= knots_per_level or c.size < 64:
        return word_sf(c, mean_lsb, input_bits, snr, swerling, converter)
    _check(mean_lsb, input_bits)
    shift = _offset(converter)
    top = _top(input_bits)
    mid = (c >= 1) & (c <= top)
    out = np.where(c <= 0, 1.0, 0.0)
    if not np.any(mid):
        return out
    lo, hi = float(c[mid].min()), float(c[mid].max())
    h = mean_lsb / knots_per_level
    n = max(2, int(math.ceil((hi - lo) / h)) + 1)
    if n >= c.size // 2:
        return word_sf(c, mean_lsb, input_bits, snr, swerling, converter)
    knots = lo - shift + h * np.arange(n)
    vals = _power_sf(knots, mean_lsb, snr, 0)
    spline = interpolate.CubicHermiteSpline(knots, vals, -_power_density(knots, mean_lsb, snr))
    out[mid] = np.clip(spline(c[mid].astype(np.float64) - shift), 0.0, 1.0)
    return out


def word_pmf(mean_lsb: float, input_bits: int, snr: float = 0.0, swerling: int = 1,
             k_max: int | None = None, converter: str = "floor") -> np.ndarray:
    """Probability mass function of a cell's word for noise or a target in noise, words ``0 .. K``.

    ``P(x = k) = P(x >= k) - P(x >= k + 1)`` from :func:`word_sf`; the top
    word takes all of ``P(y >= top)``. Absolute accuracy (differences of
    survival values); for relative accuracy in the tail of noise-only cells
    use :func:`log_noise_pmf`.
    """
    top = _top(input_bits)
    k_max = top if k_max is None else int(min(k_max, top))
    sf = word_sf(np.arange(k_max + 2), mean_lsb, input_bits, snr, swerling, converter)
    return np.clip(sf[:-1] - sf[1:], 0.0, None)


def clip_rate(mean_lsb: float, input_bits: int, snr: float = 0.0, swerling: int = 1,
              converter: str = "floor") -> float:
    """Probability that a cell's power reaches full scale, ``P(y + offset >= 2**W_in)`` (clipped).

    See :func:`word_sf` for the laws and their references.
    """
    _check(mean_lsb, input_bits)
    return float(_power_sf(np.array([float(1 << input_bits) - _offset(converter)]), mean_lsb, snr, swerling)[0])
