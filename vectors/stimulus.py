"""Scenario stimulus: square-law noise, targets, a clutter edge and interference spikes.

A stimulus source yields :class:`FrameBlock` objects, runs of whole frames of
unsigned integer samples. This module holds that common currency and the
scenario source; the directed cases live in :mod:`vectors.corner_cases` and the
random frames in :mod:`vectors.random_frames`.

Scenario model (per frame of ``L`` cells, all powers in input LSBs):

- Noise: square-law detected complex Gaussian noise, i.e. exponential power
  with mean ``noise_level_lsb`` [1]_.
- Clutter edge: from ``clutter_start_cell`` to the end of the frame the
  background mean is raised by ``clutter_to_noise_db``.
- Targets: a target of signal-to-noise ratio ``snr_db`` (signal power over
  the noise level ``noise_level_lsb``) covers ``extent`` cells from ``cell``.
  Each of its cells holds ``|a + n|**2`` with ``n`` complex Gaussian of the
  local background power. Swerling 0: ``|a|**2`` is the signal power itself;
  Swerling I: ``|a|**2`` is exponential with that mean, one draw per target
  per frame, shared by its cells (scan-to-scan fluctuation) [2]_.
- Interference spikes: ``spikes_per_frame`` cells at random positions set to
  full scale.
- Quantisation: rounded to the nearest integer and clipped to
  ``0 .. 2**input_bits - 1``.

Reproducibility: frames come in blocks of a fixed number of frames, and block
``b`` draws from its own generator, the ``b``-th child spawned from the
source's :class:`numpy.random.SeedSequence`. The samples therefore do not
depend on how the caller chunks them for writing.

References
----------
.. [1] M. A. Richards, *Fundamentals of Radar Signal Processing*, McGraw-Hill,
   2005, sec. 6.2 (square-law detected noise is exponentially distributed).
.. [2] P. Swerling, "Probability of detection for fluctuating targets,"
   IRE Trans. Information Theory, vol. IT-6, no. 2, pp. 269-308, 1960.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterator

import numpy as np

from refmodel.fixedpoint.input_quantiser import quantise_power

#: Nominal samples per generated block (whole frames; at least one frame).
BLOCK_SAMPLES = 1 << 16


@dataclass(frozen=True)
class FrameBlock:
    """Consecutive whole frames of integer samples.

    Attributes
    ----------
    samples : numpy.ndarray of int64
        The frames' samples, concatenated.
    lengths : numpy.ndarray of int64
        Length of each frame (sums to ``len(samples)``).
    label : str
        What the frames exercise (directed cases), else ``""``.
    """

    samples: np.ndarray
    lengths: np.ndarray
    label: str = ""

    @property
    def last(self) -> np.ndarray:
        """Last marker per sample: set on each frame's final sample."""
        m = np.zeros(self.samples.shape[0], dtype=bool)
        m[np.cumsum(self.lengths) - 1] = True
        return m

    @staticmethod
    def of_frames(frames: list[np.ndarray], label: str = "") -> "FrameBlock":
        """A block from a list of 1-D frames."""
        return FrameBlock(np.concatenate(frames).astype(np.int64),
                          np.array([len(f) for f in frames], dtype=np.int64), label)


@dataclass(frozen=True)
class Target:
    """A target in every scenario frame.

    Attributes
    ----------
    cell : int
        First cell it occupies (0-based, inside the frame).
    snr_db : float
        Signal power over the noise level, in dB.
    extent : int
        Cells it occupies (1 for a point target); cut at the frame end.
    swerling : {0, 1}
        Swerling case: 0 non-fluctuating, 1 one exponential power draw per frame.
    """

    cell: int
    snr_db: float
    extent: int = 1
    swerling: int = 0


@dataclass(frozen=True)
class Scenario:
    """Everything the scenario source needs.

    Attributes
    ----------
    frame_length : int
        Cells per frame.
    input_bits : int
        Sample width; samples are clipped to ``2**input_bits - 1``.
    noise_level_lsb : float
        Mean noise power in LSBs.
    targets : tuple of Target
    clutter_start_cell : int
        First cell of the clutter region (``frame_length``: no clutter).
    clutter_to_noise_db : float
        Clutter region's extra background power, in dB over the noise level.
    spikes_per_frame : int
        Full-scale interference spikes per frame, at random cells.
    """

    frame_length: int
    input_bits: int
    noise_level_lsb: float
    targets: tuple[Target, ...] = field(default=())
    clutter_start_cell: int = 0
    clutter_to_noise_db: float = 0.0
    spikes_per_frame: int = 0

    @property
    def full_scale(self) -> int:
        return (1 << self.input_bits) - 1

    def background(self) -> np.ndarray:
        """Mean background power per cell (noise, plus clutter from its start cell)."""
        bg = np.full(self.frame_length, self.noise_level_lsb)
        bg[self.clutter_start_cell :] *= 10.0 ** (self.clutter_to_noise_db / 10.0)
        return bg


def quantise(power: np.ndarray, input_bits: int) -> np.ndarray:
    """Input words from powers in LSB units, by the project's one input quantiser.

    :func:`refmodel.fixedpoint.input_quantiser.quantise_power`: ``min(floor(power), 2**input_bits - 1)``
    (an ADC-like truncation), the same law the quantisation study computes with.
    """
    return quantise_power(power, input_bits).astype(np.int64)


def block_generators(seq: np.random.SeedSequence) -> Iterator[np.random.Generator]:
    """One generator per block: the children of ``seq``, spawned in order."""
    while True:
        yield np.random.default_rng(seq.spawn(1)[0])


def _scenario_block(sc: Scenario, rng: np.random.Generator, frames: int) -> np.ndarray:
    bg = sc.background()
    p = rng.standard_exponential((frames, sc.frame_length)) * bg
    for t in sc.targets:
        cells = slice(t.cell, min(t.cell + t.extent, sc.frame_length))
        n_cells = cells.stop - cells.start
        signal = sc.noise_level_lsb * 10.0 ** (t.snr_db / 10.0)
        power = np.full(frames, signal)
        if t.swerling == 1:
            power = power * rng.standard_exponential(frames)
        amp = np.sqrt(power)[:, None]
        sigma = np.sqrt(bg[cells] / 2.0)
        re = amp + sigma * rng.standard_normal((frames, n_cells))
        im = sigma * rng.standard_normal((frames, n_cells))
        p[:, cells] = re * re + im * im
    if sc.spikes_per_frame:
        pos = rng.integers(0, sc.frame_length, (frames, sc.spikes_per_frame))
        p[np.arange(frames)[:, None], pos] = sc.full_scale
    return quantise(p, sc.input_bits).ravel()


def scenario_blocks(sc: Scenario, frames: int, seq: np.random.SeedSequence) -> Iterator[FrameBlock]:
    """Scenario frames in blocks of ``max(1, BLOCK_SAMPLES // frame_length)`` frames.

    Parameters
    ----------
    sc : Scenario
    frames : int
        Frames to produce.
    seq : numpy.random.SeedSequence
        This source's seed; block ``b`` uses its ``b``-th spawned child.

    Yields
    ------
    FrameBlock
    """
    per_block = max(1, BLOCK_SAMPLES // sc.frame_length)
    gens = block_generators(seq)
    for start in range(0, frames, per_block):
        k = min(per_block, frames - start)
        yield FrameBlock(_scenario_block(sc, next(gens), k), np.full(k, sc.frame_length, dtype=np.int64))
