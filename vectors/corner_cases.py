"""Directed corner cases: fixed frames that reach the pipeline's edges and extremes.

No randomness: the frames follow from the block spec's geometry alone. With
``R`` reference and ``G`` guard cells per side, ``H = R + G``, window length
``W = 2H + 1``, full scale ``F = 2**input_bits - 1``, frame length ``L``
(``stream.frame_length``), background level ``B = max(1, F >> 5)`` and
pattern ``P(i) = ((i * 2654435761 + 12345) mod 2**32) >> (32 - input_bits)``
(a fixed multiplicative hash, so the values look irregular), the cases are,
by label:

``all_zero``
    one frame of ``L`` zeros.
``all_full_scale``
    one frame of ``L`` times ``F``.
``all_one_lsb``
    one frame of ``L`` ones.
``impulse_from_start``
    for each offset ``k``: a frame of length ``2W``, zeros, ``F`` at index ``k``.
``impulse_from_end``
    for each offset ``k``: length ``2W``, zeros, ``F`` at index ``2W - 1 - k``.
``second_target_in_guard_cells``
    for ``d = 1 .. G``, two frames of length ``2W + 1``: ``B`` everywhere,
    ``F`` at the centre ``c = W`` and ``F >> 1`` at ``c - d`` (first frame) or
    ``c + d`` (second frame). Absent when ``G = 0``.
``second_target_in_reference_cells``
    the same for ``d = G + 1 .. H``.
``step_up``
    length ``2W + 1``: ``0``, then ``F`` from index ``W``; then a second frame
    ``B``, then ``F >> 1`` from index ``W``.
``step_down``
    the same two steps reversed (``F`` then ``0``; ``F >> 1`` then ``B``).
``alternating``
    length ``2W + 1``: ``0, F, 0, F, ...``; then ``F, 0, F, 0, ...``.
``frame_equals_window``
    three frames of length ``W``: the ramp ``i * F // (W - 1)``; ``B`` with
    ``F`` at the CUT position ``H``; ``P(i)``.
``odd_lengths``
    ``P(i)`` frames of lengths ``W, W+2, W+4, W+6, 2W+1, 2W+3``, and ``L + 1``
    when ``L`` is even.
``back_to_back``
    64 frames of length ``W``; frame ``j`` holds ``min(F, (j mod 16 + 1) * B')``
    everywhere, ``B' = max(1, F >> 6)``, and ``F`` at index ``j mod W``.

The offsets ``k`` are every index ``0 .. W-1`` when ``W <= 511``. For wider
windows, so that the set stays a sane size, they are ``0 .. 63``, ``W-64 ..
W-1`` and every index within 2 cells of ``G``, ``H`` and ``H + G``; the
second-target distances ``d`` are thinned the same way.
"""

from __future__ import annotations

from typing import Iterator

import numpy as np

from refmodel.block_spec import BlockSpec

from .stimulus import FrameBlock

#: Windows up to this length get an impulse at every offset.
ALL_OFFSETS_MAX = 511
BACK_TO_BACK_FRAMES = 64


def hash_pattern(n: int, input_bits: int) -> np.ndarray:
    """``P(i)`` for ``i = 0 .. n-1``: an irregular but fixed sequence over the input range."""
    i = np.arange(n, dtype=np.uint64)
    h = (i * np.uint64(2654435761) + np.uint64(12345)) & np.uint64(0xFFFFFFFF)
    return (h >> np.uint64(32 - input_bits)).astype(np.int64)


def _positions(count: int, marks: tuple[int, ...]) -> list[int]:
    """Every position ``0 .. count-1``, or a thinned set for very wide windows."""
    if count <= ALL_OFFSETS_MAX:
        return list(range(count))
    keep = set(range(64)) | set(range(count - 64, count))
    for m in marks:
        keep |= {p for p in range(m - 2, m + 3) if 0 <= p < count}
    return sorted(keep)


def corner_case_blocks(spec: BlockSpec) -> Iterator[FrameBlock]:
    """The directed frames of the module table, one labelled block per case.

    Parameters
    ----------
    spec : BlockSpec
        Geometry (``R``, ``G``), ``input_bits`` and ``frame_length``.

    Yields
    ------
    FrameBlock
        In table order; each carries its case label.
    """
    R, G = spec.ref_per_side, spec.guard_per_side
    H, W, L = R + G, spec.window_length, spec.frame_length
    F = (1 << spec.input_bits) - 1
    B = max(1, F >> 5)
    half = F >> 1

    def const(n: int, v: int) -> np.ndarray:
        return np.full(n, v, dtype=np.int64)

    yield FrameBlock.of_frames([const(L, 0)], "all_zero")
    yield FrameBlock.of_frames([const(L, F)], "all_full_scale")
    yield FrameBlock.of_frames([const(L, 1)], "all_one_lsb")

    offsets = _positions(W, (G, H, H + G))
    for label, at in (("impulse_from_start", lambda k: k), ("impulse_from_end", lambda k: 2 * W - 1 - k)):
        frames = []
        for k in offsets:
            f = const(2 * W, 0)
            f[at(k)] = F
            frames.append(f)
        yield FrameBlock.of_frames(frames, label)

    c = W
    for label, dists in (("second_target_in_guard_cells", range(1, G + 1)),
                         ("second_target_in_reference_cells", range(G + 1, H + 1))):
        chosen = [d for d in dists if d - dists.start in _positions(len(dists), (0, len(dists) - 1))]
        frames = []
        for d in chosen:
            for side in (-1, 1):
                f = const(2 * W + 1, B)
                f[c] = F
                f[c + side * d] = half
                frames.append(f)
        if frames:
            yield FrameBlock.of_frames(frames, label)

    def step(a: int, b: int) -> np.ndarray:
        f = const(2 * W + 1, a)
        f[W:] = b
        return f

    yield FrameBlock.of_frames([step(0, F), step(B, half)], "step_up")
    yield FrameBlock.of_frames([step(F, 0), step(half, B)], "step_down")

    alt = np.where(np.arange(2 * W + 1) % 2 == 1, F, 0).astype(np.int64)
    yield FrameBlock.of_frames([alt, F - alt], "alternating")

    ramp = np.arange(W, dtype=np.int64) * F // (W - 1)
    cut = const(W, B)
    cut[H] = F
    yield FrameBlock.of_frames([ramp, cut, hash_pattern(W, spec.input_bits)], "frame_equals_window")

    lengths = [W, W + 2, W + 4, W + 6, 2 * W + 1, 2 * W + 3] + ([L + 1] if L % 2 == 0 else [])
    yield FrameBlock.of_frames([hash_pattern(n, spec.input_bits) for n in lengths], "odd_lengths")

    step_level = max(1, F >> 6)
    frames = []
    for j in range(BACK_TO_BACK_FRAMES):
        f = const(W, min(F, (j % 16 + 1) * step_level))
        f[j % W] = F
        frames.append(f)
    yield FrameBlock.of_frames(frames, "back_to_back")
