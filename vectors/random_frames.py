"""Seeded random frames across the whole input range, with random lengths.

Each frame draws its length uniformly from ``window_length .. max_length``
and a magnitude ``b`` uniformly from ``0 .. input_bits``; its samples are
then uniform integers in ``0 .. 2**b - 1``. Small and large magnitudes are
thus equally likely, so sums, products and thresholds are exercised from
zero to full scale, and frames of every length from the shortest legal one.

Frames come in blocks of :data:`FRAMES_PER_BLOCK`; block ``b`` draws from the
``b``-th child of the source's :class:`numpy.random.SeedSequence`, so the
samples do not depend on how the caller chunks them.
"""

from __future__ import annotations

from typing import Iterator

import numpy as np

from .stimulus import FrameBlock, block_generators

FRAMES_PER_BLOCK = 64


def random_blocks(frames: int, window_length: int, max_length: int, input_bits: int,
                  seq: np.random.SeedSequence) -> Iterator[FrameBlock]:
    """Random frames in blocks of :data:`FRAMES_PER_BLOCK`.

    Parameters
    ----------
    frames : int
        Frames to produce.
    window_length : int
        Shortest frame length (the window length W).
    max_length : int
        Longest frame length, ``>= window_length``.
    input_bits : int
        Sample width.
    seq : numpy.random.SeedSequence
        This source's seed.

    Yields
    ------
    FrameBlock
    """
    gens = block_generators(seq)
    for start in range(0, frames, FRAMES_PER_BLOCK):
        rng = next(gens)
        k = min(FRAMES_PER_BLOCK, frames - start)
        lengths = rng.integers(window_length, max_length + 1, size=k, dtype=np.int64)
        bits = rng.integers(0, input_bits + 1, size=k)
        span = np.repeat(np.ldexp(1.0, bits), lengths)  # 2**b per sample
        samples = np.floor(rng.random(int(lengths.sum())) * span).astype(np.int64)
        yield FrameBlock(samples, lengths)
