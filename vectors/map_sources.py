"""Stimulus maps for range-Doppler (map) blocks: invented scenario, directed corner cases, random maps.

Every source yields :class:`vectors.stimulus.FrameBlock` objects holding whole
maps, each map's cells in the spec's streaming order (one frame = one map of
``L_r * L_d`` cells, the last marker on its last cell). Maps are made as
``(doppler_bins, range_cells)`` arrays and put into stream order by
:meth:`refmodel.map_spec.MapSpec.stream_cells`. Doppler bin 0 is zero Doppler
(FFT order, not shifted), so the Doppler axis wraps around it.

Scenario (per map, powers in input LSBs, one generator per map spawned from
the source's seed):

- noise: exponential power of mean ``noise_level_lsb`` (square-law detected
  complex Gaussian noise) [1]_;
- clutter ridge: the ``clutter_width_bins`` Doppler bins nearest zero Doppler
  (circularly) are raised by ``clutter_to_noise_db`` at every range cell;
- targets: ``range_extent x doppler_extent`` cells from ``(range_cell,
  doppler_bin)`` (Doppler wraps, range is cut at the map's end); each cell is
  ``|a + n|^2`` with ``n`` complex Gaussian of the local background power;
  Swerling 0: ``|a|^2`` the signal power, Swerling I: exponential with that
  mean, one draw per target per map [2]_;
- interference: ``interference_per_map`` range cells at random, raised by
  30 dB over the noise in every Doppler bin (a strobe across Doppler);
- quantised by the project's one input quantiser
  (:func:`refmodel.fixedpoint.input_quantiser.quantise_power`).

Directed corner cases (no randomness), by label: ``all_zero``,
``all_full_scale`` (saturating thresholds where the threshold word is narrow),
``all_one_lsb``; ``hot_cells``: single full-scale cells on a background of
``B = max(1, F >> 5)`` at every corner, at both ends of every edge, at the
middle of every edge, at ``H`` cells from each edge and in the middle, spread
over as few maps as keeps every two hot cells more than one window apart;
``doppler_wrap``: a full-scale target two bins wide across the wrap (bins
``L_d - 1`` and 0) at three range cells; ``ties``: background ``B`` with a
grid of CUTs one window apart at ``t`` and ``t + 1``, ``t`` the interior
threshold of a constant ``B`` map in input LSBs (rounded down), so that the
compare sees an exact tie wherever ``T`` is a whole number of LSBs.

Random maps: each draws a magnitude ``b`` in ``0 .. input_bits`` and uniform
cells in ``0 .. 2^b - 1``.

References
----------
.. [1] M. A. Richards, *Fundamentals of Radar Signal Processing*, McGraw-Hill,
   2005, sec. 6.2.
.. [2] P. Swerling, "Probability of detection for fluctuating targets," IRE
   Trans. Information Theory, vol. IT-6, no. 2, pp. 269-308, 1960.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator

import numpy as np

from refmodel.map_spec import MapSpec

from refmodel.fixedpoint.input_quantiser import quantise_power

from .stimulus import FrameBlock, block_generators

INTERFERENCE_DB = 30.0


@dataclass(frozen=True)
class MapTarget:
    """A target in every scenario map (range cell, Doppler bin, SNR in dB, extents, Swerling case)."""

    range_cell: int
    doppler_bin: int
    snr_db: float
    range_extent: int = 1
    doppler_extent: int = 1
    swerling: int = 0


@dataclass(frozen=True)
class MapScenario:
    """Everything the scenario source needs (see the module notes)."""

    noise_level_lsb: float
    targets: tuple[MapTarget, ...]
    clutter_to_noise_db: float
    clutter_width_bins: int
    interference_per_map: int


def _block(spec: MapSpec, maps: list[np.ndarray], label: str = "") -> FrameBlock:
    cells = np.concatenate([spec.stream_cells(m) for m in maps], dtype=np.int64)
    return FrameBlock(cells, np.full(len(maps), spec.map_cells, dtype=np.int64), label)


def ridge_bins(doppler_bins: int, width: int) -> np.ndarray:
    """The ``width`` Doppler bins nearest zero Doppler, circularly (0, 1, L-1, 2, L-2, ...)."""
    order = [0]
    k = 1
    while len(order) < min(width, doppler_bins):
        order.append(k % doppler_bins)
        if len(order) < width:
            order.append(-k % doppler_bins)
        k += 1
    return np.array(sorted(set(order[:width])), dtype=np.int64) if width else np.zeros(0, dtype=np.int64)


def scenario_map(spec: MapSpec, sc: MapScenario, rng: np.random.Generator) -> np.ndarray:
    """One scenario map, ``(doppler_bins, range_cells)`` input words."""
    ld, lr = spec.doppler_bins, spec.range_cells
    bg = np.full((ld, 1), sc.noise_level_lsb)
    bg[ridge_bins(ld, sc.clutter_width_bins)] *= 10.0 ** (sc.clutter_to_noise_db / 10.0)
    p = rng.standard_exponential((ld, lr))
    p *= bg
    for t in sc.targets:
        dops = (t.doppler_bin + np.arange(t.doppler_extent)) % ld
        rngs = np.arange(t.range_cell, min(t.range_cell + t.range_extent, lr))
        power = sc.noise_level_lsb * 10.0 ** (t.snr_db / 10.0)
        if t.swerling == 1:
            power *= rng.standard_exponential()
        sigma = np.sqrt(bg[dops] / 2.0)
        shape = (dops.size, rngs.size)
        re = np.sqrt(power) + sigma * rng.standard_normal(shape)
        im = sigma * rng.standard_normal(shape)
        p[np.ix_(dops, rngs)] = re * re + im * im
    if sc.interference_per_map:
        cols = rng.integers(0, lr, sc.interference_per_map)
        p[:, cols] = sc.noise_level_lsb * 10.0 ** (INTERFERENCE_DB / 10.0) * rng.standard_exponential((ld, cols.size))
    return quantise_power(p, spec.input_bits, out=p).astype(np.int64)  # in place, then one integer copy


def scenario_blocks(spec: MapSpec, sc: MapScenario, maps: int, seq: np.random.SeedSequence) -> Iterator[FrameBlock]:
    """``maps`` scenario maps, one block each; map ``b`` draws from the ``b``-th child of ``seq``."""
    gens = block_generators(seq)
    for _ in range(maps):
        yield _block(spec, [scenario_map(spec, sc, next(gens))])


def random_blocks(spec: MapSpec, maps: int, seq: np.random.SeedSequence) -> Iterator[FrameBlock]:
    """``maps`` random maps, one block each."""
    gens = block_generators(seq)
    for _ in range(maps):
        rng = next(gens)
        b = int(rng.integers(0, spec.input_bits + 1))
        m = np.floor(rng.random((spec.doppler_bins, spec.range_cells)) * 2.0**b).astype(np.int64)
        yield _block(spec, [m])


def _axis_marks(length: int, half: int) -> list[int]:
    marks = {0, 1, half, length // 2, length - 1 - half, length - 2, length - 1}
    return sorted(m for m in marks if 0 <= m < length)


def hot_cell_positions(spec: MapSpec) -> list[list[tuple[int, int]]]:
    """Hot-cell positions ``(doppler, range)`` of the ``hot_cells`` case, grouped into maps.

    Candidates: every pair of marks (ends, next-to-ends, ``H`` from each end, middle) along the two
    axes that lies on an edge of the map or in its middle; greedily grouped so that within a map two hot
    cells are more than a window apart along some axis.
    """
    w = spec.window
    ds, rs = _axis_marks(spec.doppler_bins, w.hd), _axis_marks(spec.range_cells, w.hr)
    edge_d, edge_r = {0, spec.doppler_bins - 1}, {0, spec.range_cells - 1}
    cand = [(d, r) for d in ds for r in rs
            if d in edge_d or r in edge_r or (d == spec.doppler_bins // 2 and r == spec.range_cells // 2)]
    groups: list[list[tuple[int, int]]] = []
    for c in cand:
        for g in groups:
            if all(abs(c[0] - o[0]) > w.wd or abs(c[1] - o[1]) > w.wr for o in g):
                g.append(c)
                break
        else:
            groups.append([c])
    return groups


def corner_case_blocks(spec: MapSpec) -> Iterator[FrameBlock]:
    """The directed maps of the module notes, one labelled block per case."""
    ld, lr = spec.doppler_bins, spec.range_cells
    w = spec.window
    full = (1 << spec.input_bits) - 1
    bgv = max(1, full >> 5)
    yield _block(spec, [np.zeros((ld, lr), dtype=np.int64)], "all_zero")
    yield _block(spec, [np.full((ld, lr), full, dtype=np.int64)], "all_full_scale")
    yield _block(spec, [np.ones((ld, lr), dtype=np.int64)], "all_one_lsb")
    maps = []
    for group in hot_cell_positions(spec):
        m = np.full((ld, lr), bgv, dtype=np.int64)
        for d, r in group:
            m[d, r] = full
        maps.append(m)
    yield _block(spec, maps, "hot_cells")
    m = np.full((ld, lr), bgv, dtype=np.int64)
    for r in sorted({0, lr // 2, lr - 1}):
        m[[ld - 1, 0], r] = full
    yield _block(spec, [m], "doppler_wrap")
    s_const = {"ca": spec.n_cells, "go": spec.n_half, "so": spec.n_half}.get(spec.kind, 1) * bgv
    t = int(spec.threshold_from_statistic(s_const)) >> spec.threshold_frac_bits
    m = np.full((ld, lr), bgv, dtype=np.int64)
    cuts = m[w.hd : ld - w.hd : w.wd, w.hr : lr - w.hr : w.wr]
    vals = np.minimum(np.array([t, t + 1]), full)
    cuts[...] = np.resize(vals, cuts.size).reshape(cuts.shape)
    yield _block(spec, [m], "ties")
