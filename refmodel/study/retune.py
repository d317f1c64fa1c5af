"""The constant A re-tuned to the quantised pipeline: the A whose exact Pfa meets the design Pfa.

Rounding ``alpha * 2**F_P / D`` to the nearest integer A (or to the nearest
value of at most ``c`` non-zero signed digits) makes the *float* formula's
Pfa close to the design; the quantised pipeline's own Pfa
(:mod:`refmodel.fixedpoint.exact_pfa`) then still moves with the input
quantisation, the rounding of the product and the threshold's width. Since
every threshold word ``T(s)`` is a non-decreasing function of A, the exact
Pfa is a non-increasing function of A, and the re-tuned constant is found by
bisection over the integers:

* ``closest-not-above``: the smallest allowed A whose exact Pfa is at most
  the design Pfa (of those, the one with the Pfa closest to it);
* ``closest``: that A or the next allowed A below it, whichever Pfa is
  closer to the design Pfa (relative distance ``|Pfa / Pfa_design - 1|``).

With ``fixed.truncate_partials`` each partial product of A's signed
digits is floored on its own, and the threshold is then only nearly
monotone in A; the bisection still ends at an A whose Pfa is at most the
design Pfa next to one whose Pfa is above it, but not necessarily the
smallest such A.

"Allowed" means any integer ``>= 1`` when the spec rounds plainly
(``alpha_csd_digits = 0``), else an integer of at most ``alpha_csd_digits``
non-zero signed digits (:func:`next_allowed`). The law of the statistic S
does not depend on A, so it is computed once (:func:`exact_pfa.statistic_law`)
and every candidate costs one pass over its support.

A re-tuned block is expressed as the alpha the constant realises exactly,
``alpha_r = A * D / 2**F_P`` (:func:`spec_with_constant`): the block spec
then quantises ``alpha_r * 2**F_P / D = A`` back to the same A, so every
model, the vectors and the core see that constant.

References
----------
.. [1] G. W. Reitwiesner, "Binary arithmetic," Advances in Computers, vol. 1,
   Academic Press, 1960, pp. 231-308 (the non-adjacent form: fewest non-zero
   signed digits of an integer).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, Mapping

import numpy as np

from ..block_spec import BlockSpec, spec_from_dict
from ..errors import SpecError
from ..fixedpoint.exact_pfa import statistic_law, trigger_words
from ..fixedpoint.input_quantiser import word_sf

__all__ = ["RETUNE_MODES", "Retuned", "next_allowed", "retune_constant", "spec_with_constant"]

#: How the re-tuned constant is chosen (module docstring).
RETUNE_MODES = ("closest-not-above", "closest")
#: Largest constant tried, as a multiple of the rounded one.
SEARCH_FACTOR = 4


@lru_cache(maxsize=65536)
def _up(x: int, c: int) -> float:
    """Smallest integer >= x that is a sum of at most c signed powers of two (inf when none)."""
    if x <= 0:
        return 0
    if c == 0:
        return math.inf
    if x & (x - 1) == 0:
        return x
    k = x.bit_length()
    hi, half = 1 << k, 1 << (k - 1)
    best = hi
    rest = _up(x - half, c - 1)
    if half + rest < best:
        best = half + rest
    low = _down(hi - x, c - 1)
    if hi - low >= x and hi - low < best:
        best = hi - low
    return best


@lru_cache(maxsize=65536)
def _down(x: int, c: int) -> int:
    """Largest integer in 0..x that is a sum of at most c signed powers of two."""
    if x <= 0 or c == 0:
        return 0
    if x & (x - 1) == 0:
        return x
    k = x.bit_length()
    hi, half = 1 << k, 1 << (k - 1)
    best = half + _down(x - half, c - 1)
    up = _up(hi - x, c - 1)
    if up != math.inf and hi - up <= x and hi - up > best:
        best = hi - up
    return best


def next_allowed(x: int, digits: int, up: bool = True) -> int | None:
    """The allowed constant nearest ``x`` from above (``up``) or below: ``>= x`` or ``<= x``.

    Parameters
    ----------
    x : int
    digits : int
        Largest number of non-zero signed digits (0: every integer is allowed).
    up : bool

    Returns
    -------
    int or None
        None when no allowed integer ``>= 1`` lies on that side.

    Notes
    -----
    An integer is a sum of ``c`` signed powers of two exactly when its
    non-adjacent form has at most ``c`` non-zero digits [1]_. The search
    splits off the power of two just below or just above ``x`` and recurses
    on the rest with one digit fewer; the tests compare it with a scan of
    every integer's NAF weight.
    """
    if digits == 0:
        return x if x >= 1 else (1 if up else None)
    if up:
        v = _up(max(x, 1), digits)
        return None if v == math.inf else int(v)
    v = _down(x, digits)
    return v if v >= 1 else None


def spec_with_constant(spec_data: Mapping[str, Any], base: BlockSpec, a: int) -> BlockSpec:
    """The block of ``spec_data`` with the constant A set to ``a``: alpha set to ``a * D / 2**F_P``."""
    d = {k: (dict(v) if isinstance(v, Mapping) else v) for k, v in spec_data.items()}
    det = d["detector"]
    det.pop("design_pfa", None)
    det["alpha"] = a * base.mean_divisor / 2.0 ** base.product_frac_bits
    return spec_from_dict(d)


@dataclass(frozen=True)
class Retuned:
    """The outcome of :func:`retune_constant`.

    Attributes
    ----------
    spec : BlockSpec
        The block with the re-tuned constant.
    alpha_int, alpha_int_rounded : int
        Re-tuned and rounded constant.
    pfa, pfa_rounded : float
        Exact Pfa of each (the same statistic law; error bound ``pfa_bound``).
    met : bool
        Whether the choice satisfies the mode (for ``closest-not-above``:
        ``pfa <= design``); False when no constant in the search range does.
    evaluations : int
        Constants tried.
    """

    spec: BlockSpec
    alpha_int: int
    alpha_int_rounded: int
    pfa: float
    pfa_rounded: float
    pfa_bound: float
    met: bool
    evaluations: int


def retune_constant(spec: BlockSpec, spec_data: Mapping[str, Any], noise_lsb: float, design_pfa: float,
                    mode: str = "closest-not-above", pfa_hint: float | None = None,
                    converter: str = "floor") -> Retuned:
    """Choose A so that the pipeline's exact Pfa at ``noise_lsb`` meets ``design_pfa`` (module docstring).

    Parameters
    ----------
    spec : BlockSpec
        The block with the rounded constant.
    spec_data : mapping
        Its sections (as :func:`spec_from_dict` takes them), changed only in alpha.
    noise_lsb : float
        Noise level in input LSBs at which the Pfa is matched.
    design_pfa : float
    mode : {"closest-not-above", "closest"}
    pfa_hint : float, optional
        Smallest probability of interest (truncation of the input law).
    converter : {"floor", "round"}
        Input converter (:mod:`refmodel.fixedpoint.input_quantiser`).

    Returns
    -------
    Retuned
    """
    if mode not in RETUNE_MODES:
        raise SpecError("--retune", f"got {mode!r}", ", ".join(RETUNE_MODES))
    hint = pfa_hint if pfa_hint is not None else min(design_pfa, 1e-6)
    p, b, dropped = statistic_law(spec, float(noise_lsb), hint, converter)
    s = np.arange(p.size, dtype=np.int64)
    top = (1 << spec.input_bits) - 1
    digits = spec.alpha_csd_digits
    cache: dict[int, tuple[float, float, BlockSpec | None]] = {}

    def pfa_of(a: int) -> tuple[float, float, BlockSpec | None]:
        if a not in cache:
            try:
                sp = spec if a == spec.alpha_int else spec_with_constant(spec_data, spec, a)
            except SpecError:  # e.g. a product wider than the pipeline allows
                cache[a] = (0.0, 0.0, None)
                return cache[a]
            c = np.clip(trigger_words(sp, sp.threshold_from_statistic(s)), 0, top + 1)
            sf = word_sf(c, float(noise_lsb), sp.input_bits, converter=converter)
            cache[a] = (float(np.sum(p * sf)), float(np.sum(b * sf)) + dropped, sp)
        return cache[a]

    a0 = spec.alpha_int
    pfa0 = pfa_of(a0)[0]
    hi_cap = max(SEARCH_FACTOR * a0, a0 + 16)
    # Bracket: lo has Pfa > design (or is 0), hi has Pfa <= design.
    if pfa0 <= design_pfa:
        hi, lo = a0, 0
        step = 1
        while True:
            cand = hi - step
            if cand < 1:
                lo = 0
                break
            if pfa_of(cand)[0] > design_pfa:
                lo = cand
                break
            hi = cand
            step *= 2
    else:
        lo, hi = a0, None
        step = 1
        while hi is None:
            cand = lo + step
            if cand > hi_cap:
                break
            if pfa_of(cand)[0] <= design_pfa and pfa_of(cand)[2] is not None:
                hi = cand
            else:
                lo = cand
                step *= 2
    if hi is None:  # no constant in range reaches the design Pfa: the largest allowed one tried
        best = next_allowed(hi_cap, digits, up=False) or a0
        pf, bound, sp = pfa_of(best)
        if sp is None:
            best, (pf, bound, sp) = a0, pfa_of(a0)
        return Retuned(sp, best, a0, pf, pfa0, bound, False, len(cache))
    while hi - lo > 1:  # smallest integer with Pfa <= design
        mid = (lo + hi) // 2
        if pfa_of(mid)[0] <= design_pfa:
            hi = mid
        else:
            lo = mid
    above = next_allowed(hi, digits, up=True)
    below = next_allowed(hi - 1, digits, up=False)
    choices = []
    if above is not None and pfa_of(above)[2] is not None:
        choices.append(above)
    if mode == "closest" and below is not None and pfa_of(below)[2] is not None:
        choices.append(below)
    if not choices:
        pf, bound, sp = pfa_of(a0)
        return Retuned(sp, a0, a0, pf, pfa0, bound, False, len(cache))
    best = min(choices, key=lambda a: (abs(pfa_of(a)[0] / design_pfa - 1.0), abs(a - a0), a))
    pf, bound, sp = pfa_of(best)
    met = pf <= design_pfa if mode == "closest-not-above" else True
    return Retuned(sp, best, a0, pf, pfa0, bound, met, len(cache))

