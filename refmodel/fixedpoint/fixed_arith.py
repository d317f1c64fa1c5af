"""Integer arithmetic shared by the bit-accurate models: rounding, overflow, CSD constants.

Every function works on Python ints and on int64 numpy arrays alike and
never goes through floating point, so it is exact for all widths the block
spec allows (products up to 62 bits).

References
----------
.. [1] G. W. Reitwiesner, "Binary arithmetic", Advances in Computers 1,
   1960, pp. 231-308 (the non-adjacent form has the fewest non-zero digits
   of all signed-digit representations).
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


def _signed_digit_candidates(t: float, digits: int) -> set[int]:
    """Integers of at most ``digits`` signed power-of-two terms reachable near ``t``.

    Each level takes the power of two just below or just above ``|t|`` (or
    stops), then recurses on the remainder: at most ``3**digits`` leaves.
    """
    if digits == 0 or abs(t) < 0.5:
        return {0}
    sign = 1 if t > 0 else -1
    lo = max(0, int(np.floor(np.log2(abs(t)))))
    out = {0}
    for p in (lo, lo + 1):
        head = sign * (1 << p)
        out.update(head + rest for rest in _signed_digit_candidates(t - head, digits - 1))
    return out


def best_csd_constant(target: float, digits: int) -> int:
    """The integer nearest ``target`` with at most ``digits`` non-zero signed digits.

    Ties go to the smaller integer. An integer is a sum of ``digits`` signed
    powers of two exactly when its NAF weight is at most ``digits`` [1]_.
    The candidates come from a search that, digit by digit, takes the power of
    two just below or just above what is left to approximate; the tests check
    the result against a brute-force scan of every integer by NAF weight.
    """
    if target <= 0:
        return 0
    cands = [c for c in _signed_digit_candidates(target, digits) if c >= 0]
    return min(cands, key=lambda a: (abs(a - target), a))


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
