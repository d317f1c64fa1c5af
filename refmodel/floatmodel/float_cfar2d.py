"""Float golden models of 2D CFAR detectors on range-Doppler maps.

A map has shape ``(..., n_doppler, n_range)``: range along the last axis,
Doppler along the one before. Around the cell under test (CUT) the window is a
rectangle of ``(2*Rd + 2*Gd + 1) x (2*Rr + 2*Gr + 1)`` cells (Doppler x range);
the guard rectangle of ``(2*Gd + 1) x (2*Gr + 1)`` cells, which contains the
CUT, is removed from it, and what remains is the reference band. The exact
definitions are in ``docs/float-model.md``.
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
from ..errors import SpecError, require
from .float_cfar import (
    _OS_GATHER_BUDGET,
    CfarResult,
    _check_alpha,
    _check_compare,
    _check_int,
    _check_kind,
    _check_rank,
    _check_samples,
    _decide,
    _kth_smallest,
)

#: Edge policies accepted along Doppler. ``"one-sided"`` is not offered there:
#: the GO/SO halves are defined along range, so there is no Doppler "side".
DOPPLER_EDGE_POLICIES: tuple[str, ...] = (CIRCULAR, ZERO_PAD, SKIP)


def _check_pair(field: str, value: object, names: tuple[str, str]) -> tuple[int, int]:
    if not isinstance(value, (tuple, list)) or len(value) != 2:
        raise SpecError(field, f"got {value!r}", f"a pair ({names[0]}, {names[1]}) of integers >= 0")
    return (
        _check_int(f"{field}[0] ({names[0]})", value[0], 0),
        _check_int(f"{field}[1] ({names[1]})", value[1], 0),
    )


def band_offsets(ref: tuple[int, int], guard: tuple[int, int]) -> tuple[np.ndarray, np.ndarray]:
    """Doppler and range offsets of the reference-band cells relative to the CUT.

    Parameters
    ----------
    ref : (int, int)
        Reference cells per side ``(Rd, Rr)`` along Doppler and range.
    guard : (int, int)
        Guard cells per side ``(Gd, Gr)`` along Doppler and range.

    Returns
    -------
    d_off, r_off : numpy.ndarray of int
        Offsets of every band cell, in row-major order of the window: the
        cells with ``|d| <= Rd + Gd`` and ``|r| <= Rr + Gr`` that are not in
        the guard rectangle ``|d| <= Gd and |r| <= Gr``.
    """
    (Rd, Rr), (Gd, Gr) = ref, guard
    hd, hr = Rd + Gd, Rr + Gr
    d, r = np.meshgrid(np.arange(-hd, hd + 1), np.arange(-hr, hr + 1), indexing="ij")
    band = ~((np.abs(d) <= Gd) & (np.abs(r) <= Gr))
    return d[band], r[band]


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
) -> CfarResult:
    """Run a 2D CFAR detector over every range-Doppler map of ``rd_map``.

    Parameters
    ----------
    rd_map : array_like, shape (..., n_doppler, n_range)
        Square-law power samples (real, finite, ``>= 0``); range along the
        last axis. Every leading index is processed independently.
    kind : {"ca", "go", "so", "os"}
        Noise estimate over the reference band (window minus guard rectangle):

        - ``"ca"``: mean of all band cells [1]_, [2]_;
        - ``"go"``: larger of the means of the lagging half (band cells with
          range offset < 0) and the leading half (range offset > 0) [3]_;
        - ``"so"``: smaller of the two half means [4]_;
        - ``"os"``: the ``rank``-th smallest band cell [5]_.

        Band cells with range offset 0 (above and below the guard rectangle
        in Doppler) belong to neither half; they count for CA and OS only.
    ref : (int, int)
        Reference cells per side ``(ref_doppler, ref_range)``, each ``>= 0``,
        not both 0. For GO/SO the halves must not be empty, which needs
        ``ref_range >= 1`` or (``guard_range >= 1`` and ``ref_doppler >= 1``).
    guard : (int, int)
        Guard cells per side ``(guard_doppler, guard_range)``, each ``>= 0``.
    alpha : float
        Threshold factor (alpha), finite and ``> 0``.
    rank : int or None, optional
        Rank ``k`` in ``1 .. N`` (``N`` = band cell count) for ``kind="os"``;
        must be None for the other kinds.
    compare : {">", ">="}, optional
        Detection when the CUT is ``>`` or ``>=`` its threshold.
    range_edge : {"skip", "zero-pad", "one-sided", "circular"}, optional
        Edge policy along range, as in 1D. ``"one-sided"`` uses the complete
        range half: its mean for CA/GO/SO, and for OS the rank
        ``ceil(k * N_half / N)`` among its ``N_half`` cells.
    doppler_edge : {"circular", "zero-pad", "skip"}, optional
        Edge policy along Doppler. The default ``"circular"`` matches the
        periodic Doppler axis of an FFT.

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
    below ``2**53``. Sums are clipped at 0. OS gathers the band of every CUT
    from a strided window view and partially sorts it
    (:func:`numpy.partition`), in Doppler blocks to bound memory.

    On i.i.d. exponential noise with ``N`` band cells the full-window CA
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
    Rd, Rr = _check_pair("ref", ref, ("ref_doppler", "ref_range"))
    Gd, Gr = _check_pair("guard", guard, ("guard_doppler", "guard_range"))
    require(
        Rd + Rr >= 1,
        "ref",
        f"got ({Rd}, {Rr}), an empty reference band",
        "ref_doppler >= 0 and ref_range >= 0, not both 0",
    )
    hd, hr = Rd + Gd, Rr + Gr
    Wd, Wr = 2 * hd + 1, 2 * hr + 1
    n_band = Wd * Wr - (2 * Gd + 1) * (2 * Gr + 1)
    n_half = Wd * hr - (2 * Gd + 1) * Gr  # band cells with range offset < 0 (and > 0)
    if kind in ("go", "so"):
        require(
            n_half >= 1,
            "ref",
            f"got ref={ref!r}, guard={guard!r}: the lagging and leading range halves are empty",
            "ref_range >= 1, or guard_range >= 1 with ref_doppler >= 1, for kind 'go' or 'so'",
        )
    alpha = _check_alpha(alpha)
    rank = _check_rank(rank, kind, n_band)
    compare = _check_compare(compare)
    range_edge = check_edge(range_edge, "range_edge", EDGE_POLICIES)
    doppler_edge = check_edge(doppler_edge, "doppler_edge", DOPPLER_EDGE_POLICIES)
    m = _check_samples("rd_map", rd_map, min_ndim=2)
    D, L = m.shape[-2], m.shape[-1]
    require(
        L >= Wr,
        "range length (rd_map.shape[-1])",
        f"got {L}",
        f"an integer >= 2*ref_range + 2*guard_range + 1 = {Wr}",
    )
    require(
        D >= Wd,
        "Doppler length (rd_map.shape[-2])",
        f"got {D}",
        f"an integer >= 2*ref_doppler + 2*guard_doppler + 1 = {Wd}",
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

    geom = (Rd, Rr, Gd, Gr, D, L)
    if kind == "os":
        estimate = _os_estimate_2d(P, geom, rank, n_band, n_half, range_edge, lag_bad, lead_bad)
    else:
        estimate = _mean_estimate_2d(P, geom, kind, n_band, n_half, range_edge, lag_bad, lead_bad)

    estimate, threshold, det = _decide(m, estimate, alpha, compare, decided)
    return CfarResult(
        estimate=estimate,
        threshold=threshold,
        detections=det,
        valid=np.broadcast_to(valid, m.shape).copy(),
    )


def _mean_estimate_2d(P, geom, kind, n_band, n_half, range_edge, lag_bad, lead_bad):
    """CA/GO/SO estimate from one summed-area table per map."""
    Rd, Rr, Gd, Gr, D, L = geom
    hd, hr = Rd + Gd, Rr + Gr
    Wd, Wr = 2 * hd + 1, 2 * hr + 1
    S = np.zeros(P.shape[:-2] + (P.shape[-2] + 1, P.shape[-1] + 1))
    S[..., 1:, 1:] = np.cumsum(np.cumsum(P, axis=-2), axis=-1)  # S[i, j] = sum P[:i, :j]

    def box(r0, c0, nr, nc):
        # sum of P[d + r0 : d + r0 + nr, n + c0 : n + c0 + nc] for every CUT (d, n)
        r1, c1 = r0 + nr, c0 + nc
        return (
            S[..., r1 : r1 + D, c1 : c1 + L]
            - S[..., r0 : r0 + D, c1 : c1 + L]
            - S[..., r1 : r1 + D, c0 : c0 + L]
            + S[..., r0 : r0 + D, c0 : c0 + L]
        )

    if kind == "ca":
        s_band = np.maximum(box(0, 0, Wd, Wr) - box(Rd, Rr, 2 * Gd + 1, 2 * Gr + 1), 0.0)
        est = s_band / n_band
    one_sided = range_edge == ONE_SIDED and hr > 0  # hr = 0: the window always fits in range
    if kind != "ca" or one_sided:
        s_lag = np.maximum(box(0, 0, Wd, hr) - box(Rd, Rr, 2 * Gd + 1, Gr), 0.0)
        s_lead = np.maximum(box(0, hr + 1, Wd, hr) - box(Rd, hr + 1, 2 * Gd + 1, Gr), 0.0)
        mean_lag = s_lag / n_half
        mean_lead = s_lead / n_half
    if kind == "go":
        est = np.maximum(mean_lag, mean_lead)
    elif kind == "so":
        est = np.minimum(mean_lag, mean_lead)
    if one_sided:
        est[..., lag_bad] = mean_lead[..., lag_bad]
        est[..., lead_bad] = mean_lag[..., lead_bad]
    return est


def _os_estimate_2d(P, geom, k, n_band, n_half, range_edge, lag_bad, lead_bad):
    """OS estimate: gather each CUT's band from a window view, partial sort."""
    Rd, Rr, Gd, Gr, D, L = geom
    hd, hr = Rd + Gd, Rr + Gr
    d_off, r_off = band_offsets((Rd, Rr), (Gd, Gr))
    rows, cols = d_off + hd, r_off + hr  # positions inside the window
    lag_sel, lead_sel = r_off < 0, r_off > 0
    win = sliding_window_view(P, (2 * hd + 1, 2 * hr + 1), axis=(-2, -1))  # (..., D, L, Wd, Wr)
    one_sided = range_edge == ONE_SIDED and hr > 0  # hr = 0: the window always fits in range
    kh = one_sided_rank(k, n_band, n_half) if one_sided else None

    est = np.empty(P.shape[:-2] + (D, L))
    batch = int(np.prod(P.shape[:-2], dtype=np.int64))
    block = max(1, _OS_GATHER_BUDGET // max(1, batch * L * n_band))
    for d0 in range(0, D, block):  # blocks of Doppler rows, not a per-cell loop
        w = win[..., d0 : d0 + block, :, :, :]
        est[..., d0 : d0 + block, :] = _kth_smallest(w[..., rows, cols], k)
        if one_sided:
            est[..., d0 : d0 + block, lag_bad] = _kth_smallest(
                w[..., lag_bad, :, :][..., rows[lead_sel], cols[lead_sel]], kh
            )
            est[..., d0 : d0 + block, lead_bad] = _kth_smallest(
                w[..., lead_bad, :, :][..., rows[lag_sel], cols[lag_sel]], kh
            )
    return est
