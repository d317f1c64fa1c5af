"""Stimulus sources against their statistical definitions (Monte Carlo with stated intervals).

Sources: square-law detected complex Gaussian noise has exponential power,
mean = standard deviation = the noise power (M. A. Richards, *Fundamentals of
Radar Signal Processing*, 2005, sec. 6.2); a constant signal of power S in
such noise has E|a+n|^2 = S + N and Var = N^2 + 2SN (non-central chi-square
with two degrees of freedom, same section); a Swerling I target plus noise is
again complex Gaussian, so its power is exponential with mean S + N
(P. Swerling, IRE Trans. IT-6, 1960). Intervals are 5 standard errors of the
estimate plus half an LSB for rounding to integers. Scenario data is invented
(a made-up ridge-top radar's range line).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from vectors.random_frames import random_blocks
from vectors.stimulus import Scenario, Target, scenario_blocks

N0 = 1000.0
BITS = 20
L = 64


def _frames(sc: Scenario, n: int, seed: int = 3) -> np.ndarray:
    return np.concatenate([b.samples for b in scenario_blocks(sc, n, np.random.SeedSequence(seed))]).reshape(n, -1)


def test_noise_is_exponential_with_the_stated_level():
    x = _frames(Scenario(L, BITS, N0), 2000).ravel().astype(float)
    n = x.size
    assert abs(x.mean() - N0) <= 5 * N0 / math.sqrt(n) + 0.5
    p = math.exp(-2999.5 / N0)  # P(round(x) >= 3000) for exponential x of mean N0
    assert abs((x >= 3000).mean() - p) <= 5 * math.sqrt(p * (1 - p) / n)


def test_swerling_0_and_1_targets():
    snr = 10.0
    s = N0 * 10 ** (snr / 10)
    sc = Scenario(L, BITS, N0, (Target(10, snr, 3, 0), Target(40, snr, 3, 1)))
    f = _frames(sc, 4000).astype(float)
    sw0, sw1 = f[:, 10], f[:, 40]
    n = f.shape[0]
    assert abs(sw0.mean() - (s + N0)) <= 5 * math.sqrt(N0**2 + 2 * s * N0) / math.sqrt(n) + 0.5
    assert abs(sw1.mean() - (s + N0)) <= 5 * (s + N0) / math.sqrt(n) + 0.5
    p = math.exp(-3.0)  # Swerling I: P(x > 3 (S + N)) = e^-3
    assert abs((sw1 > 3 * (s + N0)).mean() - p) <= 5 * math.sqrt(p * (1 - p) / n)
    # A steady target hardly ever reaches that: 2x/N ~ ncx2(2, 2S/N) (same section), and the rounded
    # sample exceeds the integer 3 (S + N) = 33000 when x >= 33000.5; 5 standard errors as above.
    p0 = stats.ncx2.sf(2 * (3 * (s + N0) + 0.5) / N0, 2, 2 * s / N0)
    assert abs((sw0 > 3 * (s + N0)).mean() - p0) <= 5 * math.sqrt(p0 * (1 - p0) / n)
    # Extent: one power draw P per Swerling I target per frame is shared by its cells, so
    # E[x1 x2] = E[(P + N)^2] = 2S^2 + 2SN + N^2 and Cov(x1, x2) = S^2 (correlation S^2/(S+N)^2 = 0.83).
    # The sample covariance about the known means, within 5 of its own standard errors.
    prod = (f[:, 40] - (s + N0)) * (f[:, 41] - (s + N0))
    assert abs(prod.mean() - s**2) <= 5 * prod.std() / math.sqrt(n)
    # Swerling 0 cells are independent given the constant amplitude: a sample correlation of
    # independent pairs has standard error 1/sqrt(n) (its large-sample law is N(0, 1/n)); 5 of them.
    assert abs(np.corrcoef(f[:, 10], f[:, 11])[0, 1]) < 5 / math.sqrt(n)
    assert abs(f[:, 12].mean() - (s + N0)) <= 5 * math.sqrt(N0**2 + 2 * s * N0) / math.sqrt(n) + 0.5
    assert abs(f[:, 13].mean() - N0) <= 5 * N0 / math.sqrt(n) + 0.5  # the extent ends after 3 cells


def test_clutter_edge_raises_the_background():
    f = _frames(Scenario(L, BITS, N0, (), clutter_start_cell=32, clutter_to_noise_db=10.0), 2000).astype(float)
    before, after = f[:, :32].ravel(), f[:, 32:].ravel()
    assert abs(before.mean() - N0) <= 5 * N0 / math.sqrt(before.size) + 0.5
    assert abs(after.mean() - 10 * N0) <= 5 * 10 * N0 / math.sqrt(after.size) + 0.5


def test_spikes_and_clipping_to_the_input_range():
    full = (1 << 10) - 1
    sc = Scenario(L, 10, 8.0, (Target(5, 60.0),), spikes_per_frame=2)
    f = _frames(sc, 300)
    assert f.min() >= 0 and f.max() <= full
    assert np.all(f[:, 5] == full)  # a 60 dB target clips at full scale
    spikes = (np.delete(f, 5, axis=1) == full).sum(axis=1)
    assert spikes.max() <= 2  # at most spikes_per_frame cells besides the target
    # Every frame has the clipped target; a second full-scale cell is missing only when both spikes
    # (independent uniform positions among 64) land on cell 5: probability q = 1/64^2. 5 standard errors.
    q = 1 / 64**2
    assert (f == full).sum(axis=1).min() >= 1
    assert ((f == full).sum(axis=1) < 2).mean() <= q + 5 * math.sqrt(q * (1 - q) / f.shape[0])


def test_same_seed_same_frames_other_seed_other_frames():
    sc = Scenario(L, 12, 30.0, (Target(3, 12.0, 1, 1),), 40, 5.0, 1)
    assert np.array_equal(_frames(sc, 50, 7), _frames(sc, 50, 7))
    assert not np.array_equal(_frames(sc, 50, 7), _frames(sc, 50, 8))


def test_random_frames_cover_lengths_and_magnitudes():
    blocks = list(random_blocks(400, 11, 40, 16, np.random.SeedSequence(1)))
    lengths = np.concatenate([b.lengths for b in blocks])
    assert lengths.min() >= 11 and lengths.max() <= 40 and len(set(lengths.tolist())) == 30
    maxima = [int(f.max()) for b in blocks for f in np.split(b.samples, np.cumsum(b.lengths)[:-1])]
    # magnitude b drawn from 0..16: a frame's maximum then has bit length b almost surely
    assert {m.bit_length() for m in maxima} == set(range(17))
    assert max(maxima) < 1 << 16
