"""Edge policies: what a CFAR window does where it runs past the end of a frame.

A CFAR window of half-width ``h`` (reference plus guard cells per side) around
the cell under test (CUT) at index ``n`` of a frame of length ``L`` covers the
indices ``n - h .. n + h``. The window fits inside the frame exactly when
``h <= n <= L - 1 - h``. Elsewhere one of four named policies decides what the
missing cells are:

``"skip"``
    No decision. The float models report a NaN estimate and threshold and no
    detection there.
``"zero-pad"``
    Cells outside the frame hold the value 0 and count as reference cells.
``"one-sided"``
    Only the reference side (half) that lies completely inside the frame is
    used; for order statistics the rank is scaled to that side
    (:func:`one_sided_rank`).
``"circular"``
    Indices wrap modulo ``L`` within the frame.

This module holds the names, their validation, the padding that realises them
along one axis, and the masks telling where the window fits and which side is
incomplete. The detectors themselves live in :mod:`refmodel.floatmodel.float_cfar` and
:mod:`refmodel.floatmodel.float_cfar2d`; the exact definitions are in
``docs/float-model.md``.

Notes
-----
All four policies are common practice in CFAR implementations; none of them
comes from a single published source.
"""

from __future__ import annotations

import numpy as np

from ..errors import SpecError

SKIP = "skip"
ZERO_PAD = "zero-pad"
ONE_SIDED = "one-sided"
CIRCULAR = "circular"

#: All edge policy names, in documentation order.
EDGE_POLICIES: tuple[str, ...] = (SKIP, ZERO_PAD, ONE_SIDED, CIRCULAR)


def check_edge(edge: object, field: str = "edge", allowed: tuple[str, ...] = EDGE_POLICIES) -> str:
    """Return ``edge`` if it is one of ``allowed``, else raise :class:`SpecError`.

    Parameters
    ----------
    edge : object
        The policy name given by the caller.
    field : str, optional
        Parameter name used in the error message.
    allowed : tuple of str, optional
        The policy names accepted at this place.

    Returns
    -------
    str
        The validated policy name.
    """
    if not isinstance(edge, str) or edge not in allowed:
        raise SpecError(field, f"got {edge!r}", "one of " + ", ".join(repr(a) for a in allowed))
    return edge


def full_window_mask(length: int, half: int) -> np.ndarray:
    """Where a window of half-width ``half`` fits inside a frame.

    Parameters
    ----------
    length : int
        Frame length ``L``.
    half : int
        Cells on each side of the CUT that the window covers (``R + G``).

    Returns
    -------
    numpy.ndarray of bool, shape (length,)
        True exactly where ``half <= n <= length - 1 - half``.
    """
    n = np.arange(length)
    return (n >= half) & (n <= length - 1 - half)


def incomplete_side_slices(length: int, half: int) -> tuple[slice, slice]:
    """Frame positions whose lagging or leading side runs past the frame.

    The lagging side of the CUT at ``n`` reaches back to ``n - half``; it lies
    partly outside the frame for ``n < half``. The leading side reaches to
    ``n + half``; it lies partly outside for ``n > length - 1 - half``. When
    the frame is at least one window long (``length >= 2 * half + 1``) the two
    ranges never overlap, so at most one side is incomplete.

    Parameters
    ----------
    length : int
        Frame length ``L``.
    half : int
        Cells on each side of the CUT that the window covers (``R + G``).

    Returns
    -------
    lag_incomplete : slice
        Positions ``0 .. half - 1`` (only the leading side is complete).
    lead_incomplete : slice
        Positions ``length - half .. length - 1`` (only the lagging side is
        complete).
    """
    return slice(0, half), slice(length - half, length)


def pad_axis(x: np.ndarray, half: int, edge: str, axis: int = -1) -> np.ndarray:
    """Extend ``x`` by ``half`` cells on both ends of ``axis`` following ``edge``.

    After padding, the window of the CUT at frame index ``n`` is the slice
    ``n .. n + 2 * half`` of the padded axis, for every ``n``.

    Parameters
    ----------
    x : numpy.ndarray
        Samples; the frame runs along ``axis``.
    half : int
        Cells to add on each end (``>= 0``).
    edge : str
        One of :data:`EDGE_POLICIES`. ``"circular"`` fills the pads with the
        samples from the other end of the frame (index modulo ``L``);
        ``"zero-pad"`` fills them with 0. ``"skip"`` and ``"one-sided"`` also
        fill them with 0, but as placeholders only: the callers discard every
        value that depends on them (NaN for ``"skip"``, the incomplete side
        for ``"one-sided"``).
    axis : int, optional
        Axis along which to pad.

    Returns
    -------
    numpy.ndarray
        Array with ``x.shape[axis] + 2 * half`` cells along ``axis``.
    """
    if half == 0:
        return x
    length = x.shape[axis]
    if edge == CIRCULAR:
        idx = np.arange(-half, length + half) % length
        return np.take(x, idx, axis=axis)
    widths = [(0, 0)] * x.ndim
    widths[axis] = (half, half)
    return np.pad(x, widths, mode="constant", constant_values=0.0)


def one_sided_rank(rank: int, n_all: int, n_side: int) -> int:
    """Rank used by an order-statistic detector when only one side is used.

    The rank ``k`` chosen for all ``n_all`` reference cells is scaled to the
    ``n_side`` cells of the complete side and rounded up:
    ``ceil(k * n_side / n_all)``. In 1D, ``n_side = R`` and ``n_all = 2R``,
    which gives ``ceil(k / 2)``.

    Parameters
    ----------
    rank : int
        Rank ``k`` among all reference cells, ``1 <= k <= n_all``.
    n_all : int
        Number of reference cells of the full window.
    n_side : int
        Number of reference cells of the complete side (``>= 1``).

    Returns
    -------
    int
        Rank among the side's cells, in ``1 .. n_side``.

    Notes
    -----
    Common practice, no source.
    """
    return max(1, -(-rank * n_side // n_all))
