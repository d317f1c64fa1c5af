"""Float golden models of 2D CFAR detectors on range-Doppler maps.

A map has shape ``(..., n_doppler, n_range)``: range along the last axis,
Doppler along the one before. Around the cell under test (CUT) the window is a
rectangle of ``(2*Rd + 2*Gd + 1) x (2*Rr + 2*Gr + 1)`` cells (Doppler x range).
The guard rectangle of ``(2*Gd + 1) x (2*Gr + 1)`` cells holds the CUT; the
reference cells are either the reference ring (the whole rectangle outside the
guard rectangle) or the cross-shaped window (the range and Doppler arms through
the CUT, beyond the guard rectangle). The geometry lives in
:mod:`refmodel.floatmodel.window2d`; the exact definitions are in
``docs/float-model.md``.
"""

from __future__ import annotations

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from .edge_policy import (
    CIRCULAR,
    EDGE_POLICIES,
    ONE_SIDED,
    SKIP,
    ZERO_PAD,
    check_edge,
    full_window_mask,
    incomplete_side_slices,
    one_sided_rank,
    pad_axis,
)
from ..errors import require
from .float_cfar import (
    _OS_GATHER_BUDGET,
    CfarResult,
    _check_alpha,
    _check_compare,
    _check_kind,
    _check_rank,
    _check_samples,
    _decide,
    _kth_smallest,
)
from .window2d import box_sums, make_window

#: Edge policies accepted along Doppler. ``"one-sided"`` is not offered there:
#: the GO/SO halves are defined along range, so there is no Doppler "side".
DOPPLER_EDGE_POLICIES: tuple[str, ...] = (CIRCULAR, ZERO_PAD, SKIP)


def cfar_2d(
    rd_map,
    kind: str,
    ref: tuple[int, int],
    guard: tuple[int, int],
    alpha: float,
    *,
    rank: int | None = None,
    compare: str = ">",
    range_edge: str = "skip",
    doppler_edge: str = "circular",
    window: str = "ring",
) -> CfarResult:
    """Run a 2D CFAR detector over every range-Doppler map of ``rd_map``.

    Parameters
    ----------
    rd_map : array_like, shape (..., n_doppler, n_range)
        Square-law power samples (real, finite, ``>= 0``); range along the
        last axis. Every leading index is processed independently.
    kind : {"ca", "go", "so", "os"}
        Noise estimate over the reference cells of ``window``:

        - ``"ca"``: mean of all ``N`` reference cells [1]_, [2]_;
        - ``"go"``: larger of the means of the lagging half (reference cells
          with range offset < 0) and the leading half (range offset > 0),
          the halves along range of [3]_;
        - ``"so"``: smaller of the two half means [4]_;
        - ``"os"``: the ``rank``-th smallest reference cell [5]_.

        Reference cells with range offset 0 (the Doppler arm: above and below
        the guard rectangle) belong to neither half; they count for CA and OS
        only.
    ref : (int, int)
        Reference depth ``(ref_doppler, ref_range)`` beyond the guard
        rectangle along each axis, each ``>= 0``, not both 0. For GO/SO the
        halves must not be empty: ``ref_range >= 1`` (or, for the ring,
        ``guard_range >= 1`` and ``ref_doppler >= 1``).
    guard : (int, int)
        Guard cells per side ``(guard_doppler, guard_range)``, each ``>= 0``:
        the guard rectangle is ``(2*guard_doppler + 1) x (2*guard_range + 1)``.
    alpha : float
        Threshold multiplier (alpha), finite and ``> 0``.
    rank : int or None, optional
        Rank ``k`` in ``1 .. N`` (``N`` = reference cell count) for
        ``kind="os"``; must be None for the other kinds.
    compare : {">", ">="}, optional
        Detection when the CUT is ``>`` or ``>=`` its threshold.
    range_edge : {"skip", "zero-pad", "one-sided", "circular"}, optional
        Edge policy along range, as in 1D. ``"one-sided"`` uses the complete
        range half: its mean for CA/GO/SO, and for OS the rank
        ``ceil(k * N_half / N)`` among its ``N_half`` cells.
    doppler_edge : {"circular", "zero-pad", "skip"}, optional
        Edge policy along Doppler. The default ``"circular"`` matches the
        periodic Doppler axis of an FFT.
    window : {"ring", "cross"}, optional
        ``"ring"``: the reference ring, every window cell outside the guard
        rectangle; ``"cross"``: the cross-shaped window, the range and
        Doppler arms through the CUT beyond the guard cells
        (:mod:`refmodel.floatmodel.window2d`).

    Returns
    -------
    CfarResult
        ``estimate``, ``threshold``, ``detections``, ``valid``, each of the
        shape of ``rd_map``. ``valid`` is True where the full window fits
        along range and, unless ``doppler_edge`` is ``"circular"``, along
        Doppler too (a circular Doppler axis always fits).

    Raises
    ------
    refmodel.errors.SpecError
        For any parameter out of range, and when ``n_range`` or ``n_doppler``
        is shorter than the window along that axis.

    Notes
    -----
    CA/GO/SO use one summed-area table (2D cumulative sum) per map [6]_, so
    every rectangle sum costs four look-ups; rounding is of order
    ``eps * sum(map)``, exact for integer-valued samples whose map sum stays
    below ``2**53``. Sums are clipped at 0. OS gathers the reference cells of
    every CUT from a strided window view and partially sorts them
    (:func:`numpy.partition`), in Doppler blocks to bound memory.

    On i.i.d. exponential noise with ``N`` reference cells the full-window CA
    false-alarm probability is ``(1 + alpha/N)**(-N)`` [1]_, [2]_ and the OS
    one is ``prod_{i=0}^{k-1} (N - i) / (N - i + alpha)`` [5]_.

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
    .. [6] F. C. Crow, "Summed-area tables for texture mapping", Computer
       Graphics (Proc. SIGGRAPH), vol. 18, no. 3, pp. 207-212, 1984.
    """
    kind = _check_kind(kind)
    win = make_window(window, ref, guard, kind)
    hd, hr = win.hd, win.hr
    alpha = _check_alpha(alpha)
    rank = _check_rank(rank, kind, win.n_cells)
    compare = _check_compare(compare)
    range_edge = check_edge(range_edge, "range_edge", EDGE_POLICIES)
    doppler_edge = check_edge(doppler_edge, "doppler_edge", DOPPLER_EDGE_POLICIES)
    require(
        range_edge != ONE_SIDED or hr == 0 or win.n_half >= 1,
        "range_edge",
        f"got 'one-sided' with ref={tuple(ref)!r}, guard={tuple(guard)!r}: the range halves are empty",
        "another range edge policy, or a window whose range halves hold cells",
    )
    m = _check_samples("rd_map", rd_map, min_ndim=2)
    D, L = m.shape[-2], m.shape[-1]
    require(
        L >= win.wr,
        "range length (rd_map.shape[-1])",
        f"got {L}",
        f"an integer >= 2*ref_range + 2*guard_range + 1 = {win.wr}",
    )
    require(
        D >= win.wd,
        "Doppler length (rd_map.shape[-2])",
        f"got {D}",
        f"an integer >= 2*ref_doppler + 2*guard_doppler + 1 = {win.wd}",
    )

    # Pad Doppler, then range; the order does not matter (each pad is either a
    # modulo index map or zeros). CUT (d, n) sits at P[..., d + hd, n + hr],
    # and its window is P[..., d : d + Wd, n : n + Wr].
    P = pad_axis(pad_axis(m, hd, doppler_edge, axis=-2), hr, range_edge, axis=-1)

    range_fits = full_window_mask(L, hr)
    doppler_fits = full_window_mask(D, hd)
    valid = range_fits[None, :] & (doppler_fits[:, None] | (doppler_edge == CIRCULAR))
    decided = np.ones((D, L), dtype=bool)
    if range_edge == SKIP:
        decided &= range_fits[None, :]
    if doppler_edge == SKIP:
        decided &= doppler_fits[:, None]
    lag_bad, lead_bad = incomplete_side_slices(L, hr)
    one_sided = range_edge == ONE_SIDED and hr > 0  # hr = 0: the window always fits in range

    if kind == "os":
        estimate = _os_estimate_2d(P, win, rank, one_sided, D, L, lag_bad, lead_bad)
    else:
        estimate = _mean_estimate_2d(P, win, kind, one_sided, D, L, lag_bad, lead_bad)

    estimate, threshold, det = _decide(m, estimate, alpha, compare, decided)
    return CfarResult(
        estimate=estimate,
        threshold=threshold,
        detections=det,
        valid=np.broadcast_to(valid, m.shape).copy(),
    )


def _mean_estimate_2d(P, win, kind, one_sided, D, L, lag_bad, lead_bad):
    """CA/GO/SO estimate from one summed-area table per map."""
    S = np.zeros(P.shape[:-2] + (P.shape[-2] + 1, P.shape[-1] + 1))
    S[..., 1:, 1:] = np.cumsum(np.cumsum(P, axis=-2), axis=-1)  # S[i, j] = sum P[:i, :j]

    def mean(part, count):
        return np.maximum(box_sums(S, win.boxes(part), D, L), 0.0) / count

    if kind == "ca":
        est = mean("all", win.n_cells)
    if kind != "ca" or one_sided:
        mean_lag, mean_lead = mean("lag", win.n_half), mean("lead", win.n_half)
    if kind == "go":
        est = np.maximum(mean_lag, mean_lead)
    elif kind == "so":
        est = np.minimum(mean_lag, mean_lead)
    if one_sided:
        est[..., lag_bad] = mean_lead[..., lag_bad]
        est[..., lead_bad] = mean_lag[..., lead_bad]
    return est


def _os_estimate_2d(P, win, k, one_sided, D, L, lag_bad, lead_bad):
    """OS estimate: gather each CUT's reference cells from a window view, partial sort."""
    hd, hr = win.hd, win.hr
    d_off, r_off = win.offsets()
    rows, cols = d_off + hd, r_off + hr  # positions inside the window
    lag_sel, lead_sel = r_off < 0, r_off > 0
    view = sliding_window_view(P, (win.wd, win.wr), axis=(-2, -1))  # (..., D, L, Wd, Wr)
    kh = one_sided_rank(k, win.n_cells, win.n_half) if one_sided else None

    est = np.empty(P.shape[:-2] + (D, L))
    batch = int(np.prod(P.shape[:-2], dtype=np.int64))
    block = max(1, _OS_GATHER_BUDGET // max(1, batch * L * win.n_cells))
    for d0 in range(0, D, block):  # blocks of Doppler rows, not a per-cell loop
        w = view[..., d0 : d0 + block, :, :, :]
        est[..., d0 : d0 + block, :] = _kth_smallest(w[..., rows, cols], k)
        if one_sided:
            est[..., d0 : d0 + block, lag_bad] = _kth_smallest(
                w[..., lag_bad, :, :][..., rows[lead_sel], cols[lead_sel]], kh
            )
            est[..., d0 : d0 + block, lead_bad] = _kth_smallest(
                w[..., lead_bad, :, :][..., rows[lag_sel], cols[lag_sel]], kh
            )
    return est
