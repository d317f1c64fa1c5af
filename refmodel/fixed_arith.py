"""Integer arithmetic shared by the bit-accurate models: rounding, overflow, CSD constants.

Every function works on Python ints and on int64 numpy arrays alike and
never goes through floating point, so it is exact for all widths the block
spec allows (products up to 62 bits).

References
----------
.. [1] G. W. Reitwiesner, "Binary arithmetic", Advances in Computers 1,
   1960, pp. 231-308 (the non-adjacent form has the fewest non-zero digits
   of all signed-digit representations).
.. [2] H. Prodinger, "On binary representations of integers with digits
   -1, 0, 1", Integers 0, 2000, A8 (non-zero digits of the NAF of x are
   the set bits of (x >> 1) ^ (x + (x >> 1))).
"""

from __future__ import annotations

import numpy as np

ROUNDING_MODES = ("floor", "half-up", "half-even")
OVERFLOW_MODES = ("saturate", "wrap")


def round_shift(p, d: int, mode: str):
    """Drop ``d`` fraction bits from the non-negative integer(s) ``p``.

    Parameters
    ----------
    p : int or numpy.ndarray of int64
        Non-negative value(s) with ``d`` fraction bits.
    d : int
        Number of bits to drop, ``d >= 0``.
    mode : {"floor", "half-up", "half-even"}
        ``floor`` keeps the upper bits (hardware LSB drop); ``half-up`` adds
        ``2**(d-1)`` then drops; ``half-even`` rounds to nearest and sends
        exact ties to the even result (convergent rounding).

    Returns
    -------
    int or numpy.ndarray
        ``p / 2**d`` rounded as requested.
    """
    if d == 0:
        return p
    if mode == "floor":
        return p >> d
    half = 1 << (d - 1)
    if mode == "half-up":
        return (p + half) >> d
    if mode == "half-even":
        q = (p + half) >> d
        tie = (p & ((1 << d) - 1)) == half
        return q - (tie & (q & 1))
    raise ValueError(f"unknown rounding mode {mode!r}")


def apply_overflow(t, width: int, mode: str):
    """Fit the integer(s) ``t`` into ``width`` unsigned bits.

    ``saturate`` clamps to ``[0, 2**width - 1]``; ``wrap`` keeps the low
    ``width`` bits (two's-complement wrap of the signed value).
    """
    top = (1 << width) - 1
    if mode == "saturate":
        if isinstance(t, np.ndarray):
            return np.clip(t, 0, top)
        return min(max(t, 0), top)
    if mode == "wrap":
        return t & top
    raise ValueError(f"unknown overflow mode {mode!r}")


def naf_digits(a: int) -> list[tuple[int, int]]:
    """Non-adjacent form of ``a >= 0`` as ``[(sign, power), ...]``, highest power first [1]_."""
    digits = []
    power = 0
    while a:
        if a & 1:
            d = 2 - (a & 3)  # +1 if a % 4 == 1, -1 if a % 4 == 3
            digits.append((d, power))
            a -= d
        a >>= 1
        power += 1
    return digits[::-1]


def naf_weight(x: np.ndarray) -> np.ndarray:
    """Number of non-zero NAF digits of each non-negative int64 in ``x`` [2]_."""
    x = np.asarray(x, dtype=np.int64)
    c = (x >> 1) ^ (x + (x >> 1))
    return np.bitwise_count(c.astype(np.uint64)).astype(np.int64)


def best_csd_constant(target: float, digits: int) -> int:
    """The integer nearest ``target`` with at most ``digits`` non-zero signed digits.

    Ties go to the smaller integer. The search is exact: since the NAF has
    the minimum number of non-zero digits [1]_, an integer is representable
    with ``digits`` signed power-of-two terms exactly when its NAF weight
    is at most ``digits`` [2]_; the scan widens around ``target`` until such
    an integer is found on both sides.
    """
    if target <= 0:
        return 0
    centre = int(np.floor(target))
    span = 64
    while True:
        lo = max(0, centre - span)
        cand = np.arange(lo, centre + span + 2, dtype=np.int64)
        ok = cand[naf_weight(cand) <= digits]
        below = ok[ok <= target]
        above = ok[ok > target]
        if (below.size or lo == 0) and above.size:
            best = None
            for a in ([int(below.max())] if below.size else []) + [int(above.min())]:
                err = abs(a - target)
                if best is None or err < best[0] or (err == best[0] and a < best[1]):
                    best = (err, a)
            return best[1]
        span *= 4


def quantise_constant(target: float, digits: int = 0) -> int:
    """Quantise a non-negative scaled constant to an integer.

    ``digits == 0``: round to nearest, ties up (``floor(target + 1/2)``).
    ``digits >= 1``: the best ``digits``-term canonical-signed-digit value.
    """
    if digits == 0:
        return int(np.floor(target + 0.5))
    return best_csd_constant(target, digits)


def scale_product(s, a: int, d: int, mode: str, truncate_partials: bool = False):
    """``round(s * a / 2**d)``, optionally as truncated shift-and-add partial products.

    Parameters
    ----------
    s : int or numpy.ndarray of int64
        Non-negative noise statistic.
    a : int
        Quantised constant.
    d : int
        Fraction bits dropped from the full product.
    mode : str
        Rounding mode (see :func:`round_shift`); must be ``"floor"`` when
        ``truncate_partials`` is set.
    truncate_partials : bool
        When set, the product is ``sum_i sign_i * ((s << p_i) >> d)`` over the
        NAF digits ``(sign_i, p_i)`` of ``a``: each shifted copy of ``s`` is cut
        to the kept bits before it is added or subtracted.

    Returns
    -------
    int or numpy.ndarray
        The threshold before overflow handling (signed, may exceed the
        threshold width).
    """
    if not truncate_partials:
        return round_shift(s * a, d, mode)
    total = 0
    for sign, power in naf_digits(a):
        term = (s << power) >> d
        total = total + term if sign > 0 else total - term
    return total
