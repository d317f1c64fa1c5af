"""The ``[vectors]`` section of a map (range-Doppler) block, and its stimulus sources in stream order.

:func:`vectors.vector_set.vector_settings` and
:func:`vectors.vector_set.source_blocks` hand a map spec to
:func:`map_vector_settings` and :func:`map_source_blocks`; everything else
(chunked writing, files, manifest, hashes) is the 1D set builder's. Sources,
in stream order, each with a fixed child index of the set's
:class:`numpy.random.SeedSequence`: 0 ``corner_cases``, 1 ``scenario``,
2 ``random`` (:mod:`vectors.map_sources`). Field reference:
``docs/vectors.md`` section "Map blocks".
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Iterator, Mapping

import numpy as np

from refmodel.errors import require
from refmodel.map_spec import MapSpec
from refmodel.spec_fields import boolean, integer, number, table

from .map_sources import MapScenario, MapTarget, corner_case_blocks, random_blocks, scenario_blocks
from .stimulus import FrameBlock
from .vector_set import _formats

SOURCES = ("corner_cases", "scenario", "random")
MAX_CHUNK = 1 << 24
_KEYS = ("seed", "include_corner_cases", "scenario_maps", "random_maps", "noise_level_lsb", "targets",
         "clutter_to_noise_db", "clutter_width_bins", "interference_per_map", "formats", "chunk_samples")
_TARGET_KEYS = ("range_cell", "doppler_bin", "snr_db", "range_extent", "doppler_extent", "swerling")


@dataclass(frozen=True)
class MapVectorSettings:
    """The resolved ``[vectors]`` section of a map block."""

    seed: int
    include_corner_cases: bool
    scenario_maps: int
    random_maps: int
    noise_level_lsb: float
    targets: tuple[MapTarget, ...]
    clutter_to_noise_db: float
    clutter_width_bins: int
    interference_per_map: int
    formats: tuple[str, ...]
    chunk_samples: int

    def to_dict(self) -> dict:
        d = asdict(self)
        d["targets"] = [asdict(t) for t in self.targets]
        d["formats"] = list(self.formats)
        return d


def default_map_targets(spec: MapSpec) -> list[dict]:
    """Default scenario targets, placed by fractions of the map.

    A point target (Swerling 0, 15 dB) at ``(L_r/4, L_d/4)``; a Swerling I target of
    3 range cells by 2 Doppler bins (12 dB) at ``(L_r/2, L_d/2)``; two targets close together
    in both axes at ``(3L_r/4, L_d/3)`` (13 dB) and ``G_r + 1`` cells and ``G_d + 1`` bins further
    (10 dB, Swerling I, inside the first one's reference ring); an 18 dB Swerling I target at
    ``L_r/8`` just beside the zero-Doppler clutter ridge.
    """
    lr, ld, w = spec.range_cells, spec.doppler_bins, spec.window
    return [
        {"range_cell": lr // 4, "doppler_bin": ld // 4, "snr_db": 15.0},
        {"range_cell": lr // 2, "doppler_bin": ld // 2, "snr_db": 12.0, "range_extent": 3, "doppler_extent": 2,
         "swerling": 1},
        {"range_cell": 3 * lr // 4, "doppler_bin": ld // 3, "snr_db": 13.0},
        {"range_cell": min(lr - 1, 3 * lr // 4 + w.guard_range + 1),
         "doppler_bin": (ld // 3 + w.guard_doppler + 1) % ld, "snr_db": 10.0, "swerling": 1},
        {"range_cell": lr // 8, "doppler_bin": 2 % ld, "snr_db": 18.0, "swerling": 1},
    ]


def map_vector_settings(spec: MapSpec, *, seed: int | None = None, formats=None) -> MapVectorSettings:
    """Validate the ``[vectors]`` section of a map block and resolve its defaults.

    Raises
    ------
    SpecError
        Naming the first bad field (``vectors.<key>``, ``vectors.targets[i].<key>``, ``--seed`` or
        ``--formats``).
    """
    raw = table(spec.sections, "vectors", dict.fromkeys(_KEYS))
    raw = {k: v for k, v in raw.items() if v is not None}
    lr, ld = spec.range_cells, spec.doppler_bins
    full = (1 << spec.input_bits) - 1
    s: dict[str, Any] = {}
    s["seed"] = integer("vectors.seed", raw.get("seed", 1), 0, 2**63 - 1)
    if seed is not None:
        s["seed"] = integer("--seed", seed, 0, 2**63 - 1)
    s["include_corner_cases"] = boolean("vectors.include_corner_cases", raw.get("include_corner_cases", True))
    s["scenario_maps"] = integer("vectors.scenario_maps", raw.get("scenario_maps", 2), 0, 1 << 20)
    s["random_maps"] = integer("vectors.random_maps", raw.get("random_maps", 2), 0, 1 << 20)
    s["noise_level_lsb"] = number("vectors.noise_level_lsb", raw.get("noise_level_lsb", 2 ** (spec.input_bits // 2)),
                                  0.0, full, open_lo=True, unit="of LSBs (the input's full scale at most)")
    targets = raw.get("targets", None)
    if targets is None:
        targets = default_map_targets(spec)
    require(isinstance(targets, list), "vectors.targets", f"got {targets!r}", "an array of tables")
    parsed = []
    for i, t in enumerate(targets):
        key = f"vectors.targets[{i}]"
        require(isinstance(t, Mapping), key, f"got {t!r}", "a table with range_cell, doppler_bin, snr_db")
        bad = sorted(set(t) - set(_TARGET_KEYS))
        require(not bad, f"{key}.{bad[0] if bad else ''}", "unknown field", ", ".join(_TARGET_KEYS))
        for need in ("range_cell", "doppler_bin", "snr_db"):
            require(need in t, f"{key}.{need}", "missing", "a table with range_cell, doppler_bin, snr_db")
        parsed.append(MapTarget(
            range_cell=integer(f"{key}.range_cell", t["range_cell"], 0, lr - 1),
            doppler_bin=integer(f"{key}.doppler_bin", t["doppler_bin"], 0, ld - 1),
            snr_db=number(f"{key}.snr_db", t["snr_db"], hi=200.0, unit="of dB"),
            range_extent=integer(f"{key}.range_extent", t.get("range_extent", 1), 1, lr),
            doppler_extent=integer(f"{key}.doppler_extent", t.get("doppler_extent", 1), 1, ld),
            swerling=integer(f"{key}.swerling", t.get("swerling", 0), 0, 1),
        ))
    s["targets"] = tuple(parsed)
    s["clutter_to_noise_db"] = number("vectors.clutter_to_noise_db", raw.get("clutter_to_noise_db", 10.0), 0.0,
                                      200.0, unit="of dB")
    s["clutter_width_bins"] = integer("vectors.clutter_width_bins", raw.get("clutter_width_bins", min(3, ld)), 0, ld)
    s["interference_per_map"] = integer("vectors.interference_per_map", raw.get("interference_per_map", 1), 0, lr)
    if formats is not None:
        s["formats"] = _formats("--formats", list(formats))
    else:
        s["formats"] = _formats("vectors.formats", raw.get("formats", ["hex"]))
    s["chunk_samples"] = integer("vectors.chunk_samples", raw.get("chunk_samples", 1 << 20), 1, MAX_CHUNK)
    require(s["include_corner_cases"] or s["scenario_maps"] or s["random_maps"], "vectors",
            "no maps (every source is off)", "include_corner_cases = true, or scenario_maps or random_maps >= 1")
    return MapVectorSettings(**s)


def map_source_blocks(spec: MapSpec, settings: MapVectorSettings) -> Iterator[tuple[str, FrameBlock]]:
    """Every block of a map set, in stream order, tagged with its source name."""
    seqs = dict(zip(SOURCES, np.random.SeedSequence(settings.seed).spawn(len(SOURCES))))
    if settings.include_corner_cases:
        for b in corner_case_blocks(spec):
            yield "corner_cases", b
    if settings.scenario_maps:
        sc = MapScenario(settings.noise_level_lsb, settings.targets, settings.clutter_to_noise_db,
                         settings.clutter_width_bins, settings.interference_per_map)
        for b in scenario_blocks(spec, sc, settings.scenario_maps, seqs["scenario"]):
            yield "scenario", b
    if settings.random_maps:
        for b in random_blocks(spec, settings.random_maps, seqs["random"]):
            yield "random", b
