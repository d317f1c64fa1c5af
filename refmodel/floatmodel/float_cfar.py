"""Float golden models of 1D CFAR detectors (CA, GO, SO, OS).

These models are the reference the bit-accurate fixed-point model and the HDL
are compared against. They follow the written definitions in
``docs/float-model.md`` exactly, in float64, vectorised over any number of
leading axes.

Conventions
-----------
Samples are square-law power (real, finite, ``>= 0``). A frame (range line)
of length ``L`` runs along the last axis. ``R`` reference cells and ``G``
guard cells lie on each side of the cell under test (CUT); the window length
is ``W = 2R + 2G + 1``. For the CUT at index ``n`` the lagging side is the
``R`` cells ``n-G-R .. n-G-1`` and the leading side is ``n+G+1 .. n+G+R``.
The threshold is ``alpha`` times the noise estimate, and a cell is declared a
detection when it exceeds (``">"``) or reaches (``">="``) its threshold.
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from .edge_policy import (
    ONE_SIDED,
    SKIP,
    check_edge,
    full_window_mask,
    incomplete_side_slices,
    one_sided_rank,
    pad_axis,
)
from ..errors import SpecError, require

#: Detector kinds, by noise estimate.
KINDS: tuple[str, ...] = ("ca", "go", "so", "os")
#: Comparison operators between the CUT and its threshold.
COMPARES: tuple[str, ...] = (">", ">=")

#: Upper bound on the number of float64 values the OS detectors gather at once
#: (32 MiB); longer inputs are processed in blocks of CUT positions.
_OS_GATHER_BUDGET = 1 << 22


@dataclass(frozen=True)
class CfarResult:
    """Per-cell output of a float CFAR model; all arrays have the input's shape.

    Attributes
    ----------
    estimate : numpy.ndarray of float64
        Noise estimate (what ``alpha`` multiplies). NaN where the ``"skip"``
        policy gives no decision.
    threshold : numpy.ndarray of float64
        ``alpha * estimate``. NaN where ``estimate`` is NaN.
    detections : numpy.ndarray of bool
        CUT ``>`` (or ``>=``) threshold; False where there is no decision.
    valid : numpy.ndarray of bool
        True exactly where the full window fits inside the frame, i.e. where
        no edge handling was applied, whatever the edge policy.
    """

    estimate: np.ndarray
    threshold: np.ndarray
    detections: np.ndarray
    valid: np.ndarray


# --------------------------------------------------------------------------
# Validation helpers (shared with refmodel.floatmodel.float_cfar2d)
# --------------------------------------------------------------------------


def _check_kind(kind: object) -> str:
    if not isinstance(kind, str) or kind not in KINDS:
        raise SpecError("kind", f"got {kind!r}", "one of " + ", ".join(repr(k) for k in KINDS))
    return kind


def _check_int(field: str, value: object, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise SpecError(field, f"got {value!r}", f"an integer >= {minimum}")
    value = int(value)
    require(value >= minimum, field, f"got {value}", f"an integer >= {minimum}")
    return value


def _check_alpha(alpha: object) -> float:
    allowed = "a finite real number > 0"
    if isinstance(alpha, bool) or not isinstance(alpha, numbers.Real):
        raise SpecError("alpha", f"got {alpha!r}", allowed)
    a = float(alpha)
    require(np.isfinite(a) and a > 0.0, "alpha", f"got {a!r}", allowed)
    return a


def _check_rank(rank: object, kind: str, n_ref: int) -> int | None:
    if kind != "os":
        require(rank is None, "rank", f"got {rank!r} for kind {kind!r}", "None unless kind is 'os'")
        return None
    allowed = f"an integer in 1..{n_ref} (the number of reference cells) for kind 'os'"
    if rank is None or isinstance(rank, bool) or not isinstance(rank, numbers.Integral):
        raise SpecError("rank", f"got {rank!r}", allowed)
    rank = int(rank)
    require(1 <= rank <= n_ref, "rank", f"got {rank}", allowed)
    return rank


def _check_compare(compare: object) -> str:
    if not isinstance(compare, str) or compare not in COMPARES:
        raise SpecError("compare", f"got {compare!r}", "one of " + ", ".join(repr(c) for c in COMPARES))
    return compare


def _check_samples(field: str, x: object, min_ndim: int) -> np.ndarray:
    allowed = "a real array of finite square-law power samples >= 0"
    try:
        a = np.asarray(x)
    except (TypeError, ValueError) as exc:  # ragged lists and the like
        raise SpecError(field, f"not an array ({exc})", allowed) from None
    require(a.dtype.kind in "iuf", field, f"dtype {a.dtype}", allowed + " (integer or floating dtype)")
    require(a.ndim >= min_ndim, field, f"{a.ndim} dimension(s)", allowed + f" with at least {min_ndim} dimension(s)")
    a = a.astype(np.float64, copy=False)
    require(bool(np.all(np.isfinite(a))), field, "contains NaN or infinity", allowed)
    require(bool(np.all(a >= 0.0)), field, "contains negative values", allowed)
    return a


def _decide(x: np.ndarray, estimate: np.ndarray, alpha: float, compare: str, decided: np.ndarray):
    """Return ``(estimate, threshold, detections)``; NaN/False where ``decided`` is False."""
    estimate = np.where(decided, estimate, np.nan)
    threshold = alpha * estimate
    det = (x > threshold) if compare == ">" else (x >= threshold)
    return estimate, threshold, det & decided


# --------------------------------------------------------------------------
# 1D model
# --------------------------------------------------------------------------


def cfar_1d(
    x,
    kind: str,
    ref_per_side: int,
    guard_per_side: int,
    alpha: float,
    *,
    rank: int | None = None,
    compare: str = ">",
    edge: str = "skip",
) -> CfarResult:
    """Run a 1D CFAR detector over every frame of ``x``.

    Parameters
    ----------
    x : array_like, shape (..., L)
        Square-law power samples (real, finite, ``>= 0``). The frame runs
        along the last axis; every leading index is processed independently.
    kind : {"ca", "go", "so", "os"}
        Noise estimate. With ``R = ref_per_side``:

        - ``"ca"``: mean of all ``2R`` reference cells [1]_, [2]_;
        - ``"go"``: larger of the lagging-side and leading-side means [3]_;
        - ``"so"``: smaller of the two side means [4]_;
        - ``"os"``: the ``rank``-th smallest of the ``2R`` reference cells [5]_.
    ref_per_side : int
        Reference cells per side, ``R >= 1``.
    guard_per_side : int
        Guard cells per side, ``G >= 0``.
    alpha : float
        Threshold factor (alpha), finite and ``> 0``; threshold =
        ``alpha * estimate``.
    rank : int or None, optional
        Rank ``k`` in ``1 .. 2R`` for ``kind="os"`` (1 = smallest); must be
        None for the other kinds.
    compare : {">", ">="}, optional
        Detection when the CUT is greater than (``">"``) or greater than or
        equal to (``">="``) the threshold.
    edge : {"skip", "zero-pad", "one-sided", "circular"}, optional
        Edge policy where the window does not fit in the frame; see
        :mod:`refmodel.floatmodel.edge_policy` and ``docs/float-model.md``.

    Returns
    -------
    CfarResult
        ``estimate``, ``threshold`` (float64), ``detections`` and ``valid``
        (bool), each of the shape of ``x``.

    Raises
    ------
    refmodel.errors.SpecError
        For any parameter out of range, and when the frame length
        ``x.shape[-1]`` is shorter than the window ``2R + 2G + 1``.

    Notes
    -----
    Window sums come from one cumulative sum per frame, so the cost is
    ``O(L)`` per frame for CA, GO and SO; OS uses a strided window view and
    :func:`numpy.partition`. Differences of cumulative sums carry a rounding
    error of order ``eps * sum(frame)``; for integer-valued samples whose
    frame sum stays below ``2**53`` the sums are exact. Window sums are
    clipped at 0 so that rounding can never give a negative estimate.

    With the ``"one-sided"`` policy, where one side is incomplete, CA, GO and
    SO all use the mean of the complete side and OS uses rank
    ``ceil(k / 2)`` among that side's ``R`` cells (common practice, no
    source).

    On independent, identically distributed exponential samples (noise only,
    square-law detected complex Gaussian noise) the full-window false-alarm probabilities
    are, with ``N = 2R``: CA ``Pfa = (1 + alpha/N)**(-N)`` [1]_, [2]_;
    OS ``Pfa = prod_{i=0}^{k-1} (N - i) / (N - i + alpha)`` [5]_.

    References
    ----------
    .. [1] H. M. Finn and R. S. Johnson, "Adaptive detection mode with
       threshold control as a function of spatially sampled clutter-level
       estimates", RCA Review, vol. 29, no. 3, pp. 414-464, 1968.
    .. [2] M. A. Richards, *Fundamentals of Radar Signal Processing*,
       McGraw-Hill, 2005, sec. 7.3.
    .. [3] V. G. Hansen and J. H. Sawyers, "Detectability loss due to
       'greatest of' selection in a cell-averaging CFAR", IEEE Trans.
       Aerospace and Electronic Systems, vol. AES-16, no. 1, pp. 115-118, 1980.
    .. [4] P. P. Gandhi and S. A. Kassam, "Analysis of CFAR processors in
       nonhomogeneous background", IEEE Trans. Aerospace and Electronic
       Systems, vol. 24, no. 4, pp. 427-445, 1988.
    .. [5] H. Rohling, "Radar CFAR thresholding in clutter and multiple target
       situations", IEEE Trans. Aerospace and Electronic Systems,
       vol. AES-19, no. 4, pp. 608-621, 1983.
    """
    kind = _check_kind(kind)
    R = _check_int("ref_per_side", ref_per_side, 1)
    G = _check_int("guard_per_side", guard_per_side, 0)
    alpha = _check_alpha(alpha)
    rank = _check_rank(rank, kind, 2 * R)
    compare = _check_compare(compare)
    edge = check_edge(edge)
    x = _check_samples("x", x, min_ndim=1)
    L = x.shape[-1]
    W = 2 * R + 2 * G + 1
    require(
        L >= W,
        "frame length (x.shape[-1])",
        f"got {L}",
        f"an integer >= 2*ref_per_side + 2*guard_per_side + 1 = {W}",
    )

    half = R + G
    xp = pad_axis(x, half, edge, axis=-1)  # CUT n sits at xp[..., n + half]
    valid = full_window_mask(L, half)
    lag_bad, lead_bad = incomplete_side_slices(L, half)

    if kind == "os":
        estimate = _os_estimate_1d(xp, L, R, G, rank, edge, lag_bad, lead_bad)
    else:
        estimate = _mean_estimate_1d(xp, L, R, G, kind, edge, lag_bad, lead_bad)

    decided = valid if edge == SKIP else np.ones(L, dtype=bool)
    estimate, threshold, det = _decide(x, estimate, alpha, compare, decided)
    return CfarResult(
        estimate=estimate,
        threshold=threshold,
        detections=det,
        valid=np.broadcast_to(valid, x.shape).copy(),
    )


def _mean_estimate_1d(xp, L, R, G, kind, edge, lag_bad, lead_bad):
    """CA/GO/SO estimate from one cumulative sum per frame."""
    c = np.cumsum(xp, axis=-1)
    c = np.concatenate([np.zeros(c.shape[:-1] + (1,)), c], axis=-1)  # c[j] = sum xp[:j]

    def window_sum(start, count):
        # sum of xp[n + start : n + start + count] for n = 0 .. L-1
        return np.maximum(c[..., start + count : start + count + L] - c[..., start : start + L], 0.0)

    # In padded coordinates the window of CUT n is xp[n .. n + W - 1].
    s_lag = window_sum(0, R)
    s_lead = window_sum(R + 2 * G + 1, R)
    mean_lag = s_lag / R
    mean_lead = s_lead / R
    if kind == "ca":
        est = (s_lag + s_lead) / (2 * R)
    elif kind == "go":
        est = np.maximum(mean_lag, mean_lead)
    else:
        est = np.minimum(mean_lag, mean_lead)
    if edge == ONE_SIDED:
        est[..., lag_bad] = mean_lead[..., lag_bad]
        est[..., lead_bad] = mean_lag[..., lead_bad]
    return est


def _kth_smallest(cells, k):
    """k-th smallest (1-based) along the last axis."""
    return np.partition(cells, k - 1, axis=-1)[..., k - 1]


def _os_estimate_1d(xp, L, R, G, k, edge, lag_bad, lead_bad):
    """OS estimate: gather each CUT's reference cells from a window view, partial sort."""
    W = 2 * R + 2 * G + 1
    win = sliding_window_view(xp, W, axis=-1)  # (..., L, W), a view
    cols = np.r_[0:R, R + 2 * G + 1 : W]  # reference cells inside the window
    est = np.empty(xp.shape[:-1] + (L,))
    batch = int(np.prod(xp.shape[:-1], dtype=np.int64))
    block = max(1, _OS_GATHER_BUDGET // max(1, batch * 2 * R))
    for n0 in range(0, L, block):  # blocks of frame positions, to bound memory
        est[..., n0 : n0 + block] = _kth_smallest(win[..., n0 : n0 + block, cols], k)
    if edge == ONE_SIDED:
        kh = one_sided_rank(k, 2 * R, R)
        est[..., lag_bad] = _kth_smallest(win[..., lag_bad, R + 2 * G + 1 :], kh)
        est[..., lead_bad] = _kth_smallest(win[..., lead_bad, :R], kh)
    return est
