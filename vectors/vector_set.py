"""Build a golden vector set from a block spec: validated settings, streamed, written atomically.

A set is a folder holding the stimulus words, the expected output words the
bit-accurate model (:mod:`refmodel.fixedpoint.pipeline_fast`) gives for them, in one or
more text formats (:mod:`vectors.writers`), and ``manifest.json``
(:mod:`vectors.manifest`). The ``[vectors]`` section of the block spec says
which stimulus sources go in; every field is optional (``docs/vectors.md``
lists them with their defaults).

Sources, in stream order, each with a fixed child index of the set's
:class:`numpy.random.SeedSequence` (so adding a source never changes another):

0. ``corner_cases`` - directed frames (:mod:`vectors.corner_cases`, no randomness);
1. ``scenario`` - noise, targets, clutter edge, spikes (:mod:`vectors.stimulus`);
2. ``random`` - random frames across the input range (:mod:`vectors.random_frames`).

Generation streams: blocks of whole frames are regrouped into chunks of
``chunk_samples`` samples, each pushed through the model and appended to
every file before the next is made, so memory does not grow with the set.
Everything is written into a temporary folder beside the target, which is
renamed into place only when complete; any failure (an exception or
``KeyboardInterrupt``) removes it.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np

from refmodel.block_spec import BlockSpec
from refmodel.errors import require
from refmodel.output_folder import staged_folder
from refmodel.spec_fields import boolean, choice_list, integer, number, table
from refmodel.fixedpoint.map_fast import MapPipeline
from refmodel.fixedpoint.pipeline_fast import FastPipeline
from refmodel.fixedpoint.word_format import PipelineOutput, pack_input, pack_output

from .corner_cases import corner_case_blocks
from .manifest import build_manifest, write_manifest
from .random_frames import random_blocks
from .stimulus import FrameBlock, Scenario, Target, scenario_blocks
from .writers import FORMATS, SUFFIX, VectorFileWriter, line_bytes

SOURCES = ("corner_cases", "scenario", "random")
STIMULUS_COLUMNS = ("frame", "index", "sample", "last")
EXPECTED_COLUMNS = ("frame", "index", "cut", "threshold", "det", "valid", "last")
MAX_CHUNK = 1 << 24
#: Longest random frame (``vectors.random_length_max``): the block spec's longest frame, 2^24 samples.
MAX_FRAME = 1 << 24

_KEYS = ("seed", "include_corner_cases", "scenario_frames", "random_frames", "noise_level_lsb", "targets",
         "clutter_start_cell", "clutter_to_noise_db", "spikes_per_frame", "random_length_max", "formats",
         "chunk_samples")
_TARGET_KEYS = ("cell", "snr_db", "extent", "swerling")


@dataclass(frozen=True)
class VectorSettings:
    """The resolved ``[vectors]`` section (see ``docs/vectors.md`` for each field)."""

    seed: int
    include_corner_cases: bool
    scenario_frames: int
    random_frames: int
    noise_level_lsb: float
    targets: tuple[Target, ...]
    clutter_start_cell: int
    clutter_to_noise_db: float
    spikes_per_frame: int
    random_length_max: int
    formats: tuple[str, ...]
    chunk_samples: int

    def to_dict(self) -> dict:
        d = asdict(self)
        d["targets"] = [asdict(t) for t in self.targets]
        d["formats"] = list(self.formats)
        return d


def default_targets(spec: BlockSpec) -> list[dict]:
    """Default scenario targets, placed by fractions of the frame length ``L``.

    A point target (Swerling 0, 15 dB) at ``L/8``; a 4-cell extended target
    (Swerling I, 12 dB) at ``L/4``, cut to the cells left in the frame; two
    closely spaced targets at ``3L/8`` and ``G + 2`` cells further (inside the
    first one's reference cells; 13 dB Swerling 0 and 10 dB Swerling I); a
    Swerling I target of 18 dB just past the clutter edge at ``L/2 + 3``.
    Targets whose cell falls outside the frame are dropped, so the defaults
    are valid for every frame length the block spec accepts.
    """
    L, G = spec.frame_length, spec.guard_per_side
    raw = [
        {"cell": L // 8, "snr_db": 15.0, "extent": 1, "swerling": 0},
        {"cell": L // 4, "snr_db": 12.0, "extent": min(4, L - L // 4), "swerling": 1},
        {"cell": 3 * L // 8, "snr_db": 13.0, "extent": 1, "swerling": 0},
        {"cell": 3 * L // 8 + G + 2, "snr_db": 10.0, "extent": 1, "swerling": 1},
        {"cell": L // 2 + 3, "snr_db": 18.0, "extent": 1, "swerling": 1},
    ]
    return [t for t in raw if t["cell"] < L]


def _formats(key: str, value: Any) -> tuple[str, ...]:
    chosen = choice_list(key, value, FORMATS)
    return tuple(f for f in FORMATS if f == "hex" or f in chosen)


def vector_settings(spec: BlockSpec, *, seed: int | None = None, formats=None) -> VectorSettings:
    """Validate the spec's ``[vectors]`` section and resolve its defaults.

    Parameters
    ----------
    spec : BlockSpec
    seed : int, optional
        Overrides ``vectors.seed`` (the ``--seed`` option).
    formats : sequence of str, optional
        Overrides ``vectors.formats`` (the ``--formats`` option).

    Returns
    -------
    VectorSettings

    Raises
    ------
    SpecError
        Naming the first bad field (``vectors.<key>``, ``vectors.targets[i].<key>``,
        ``--seed`` or ``--formats``).
    """
    if getattr(spec, "is_map", False):  # range-Doppler block: vectors/map_vectors.py
        from .map_vectors import map_vector_settings

        return map_vector_settings(spec, seed=seed, formats=formats)
    raw = table(spec.sections, "vectors", dict.fromkeys(_KEYS))
    raw = {k: v for k, v in raw.items() if v is not None}
    L, W = spec.frame_length, spec.window_length
    full = (1 << spec.input_bits) - 1

    def get(key, default):
        return raw.get(key, default)

    s = {}
    s["seed"] = integer("vectors.seed", get("seed", 1), 0, 2**63 - 1)
    if seed is not None:
        s["seed"] = integer("--seed", seed, 0, 2**63 - 1)
    s["include_corner_cases"] = boolean("vectors.include_corner_cases", get("include_corner_cases", True))
    s["scenario_frames"] = integer("vectors.scenario_frames", get("scenario_frames", 16), 0)
    s["random_frames"] = integer("vectors.random_frames", get("random_frames", 16), 0)
    s["noise_level_lsb"] = number("vectors.noise_level_lsb", get("noise_level_lsb", 2 ** (spec.input_bits // 2)),
                                  0.0, full, open_lo=True, unit="of LSBs (the input's full scale at most)")
    targets = get("targets", None)
    if targets is None:
        targets = default_targets(spec)
    require(isinstance(targets, list), "vectors.targets", f"got {targets!r}", "an array of tables")
    parsed = []
    for i, t in enumerate(targets):
        key = f"vectors.targets[{i}]"
        require(isinstance(t, Mapping), key, f"got {t!r}", "a table with cell, snr_db, extent, swerling")
        bad = sorted(set(t) - set(_TARGET_KEYS))
        require(not bad, f"{key}.{bad[0] if bad else ''}", "unknown field", ", ".join(_TARGET_KEYS))
        require("cell" in t and "snr_db" in t, key, "needs cell and snr_db", "a table with cell, snr_db")
        parsed.append(Target(
            cell=integer(f"{key}.cell", t["cell"], 0, L - 1),
            snr_db=number(f"{key}.snr_db", t["snr_db"], hi=200.0, unit="of dB"),
            extent=integer(f"{key}.extent", t.get("extent", 1), 1, L),
            swerling=integer(f"{key}.swerling", t.get("swerling", 0), 0, 1),
        ))
    s["targets"] = tuple(parsed)
    s["clutter_start_cell"] = integer("vectors.clutter_start_cell", get("clutter_start_cell", L // 2), 0, L)
    s["clutter_to_noise_db"] = number("vectors.clutter_to_noise_db", get("clutter_to_noise_db", 10.0), 0.0, 200.0,
                                      unit="of dB")
    s["spikes_per_frame"] = integer("vectors.spikes_per_frame", get("spikes_per_frame", 1), 0, L)
    s["random_length_max"] = integer("vectors.random_length_max", get("random_length_max", min(2 * L, MAX_FRAME)), W,
                                      MAX_FRAME)
    if formats is not None:
        s["formats"] = _formats("--formats", list(formats))
    else:
        s["formats"] = _formats("vectors.formats", get("formats", ["hex"]))
    s["chunk_samples"] = integer("vectors.chunk_samples", get("chunk_samples", 1 << 20), 1, MAX_CHUNK)
    require(s["include_corner_cases"] or s["scenario_frames"] or s["random_frames"], "vectors",
            "no frames (every source is off)",
            "include_corner_cases = true, or scenario_frames or random_frames >= 1")
    return VectorSettings(**s)


# --------------------------------------------------------------------------
# Streaming
# --------------------------------------------------------------------------


def source_blocks(spec: BlockSpec, settings: VectorSettings) -> Iterator[tuple[str, FrameBlock]]:
    """Every block of the set, in stream order, tagged with its source name."""
    if getattr(spec, "is_map", False):  # range-Doppler block: vectors/map_vectors.py
        from .map_vectors import map_source_blocks

        yield from map_source_blocks(spec, settings)
        return
    seqs = dict(zip(SOURCES, np.random.SeedSequence(settings.seed).spawn(len(SOURCES))))
    if settings.include_corner_cases:
        for b in corner_case_blocks(spec):
            yield "corner_cases", b
    if settings.scenario_frames:
        sc = Scenario(spec.frame_length, spec.input_bits, settings.noise_level_lsb, settings.targets,
                      settings.clutter_start_cell, settings.clutter_to_noise_db, settings.spikes_per_frame)
        for b in scenario_blocks(sc, settings.scenario_frames, seqs["scenario"]):
            yield "scenario", b
    if settings.random_frames:
        for b in random_blocks(settings.random_frames, spec.window_length, settings.random_length_max,
                               spec.input_bits, seqs["random"]):
            yield "random", b


def rechunk(blocks: Iterator[FrameBlock], size: int) -> Iterator[tuple[np.ndarray, np.ndarray]]:
    """Regroup blocks into ``(samples, last)`` chunks of exactly ``size`` samples (the final one shorter)."""
    parts: list[tuple[np.ndarray, np.ndarray]] = []
    held = 0
    for b in blocks:
        s, m = b.samples, b.last
        while held + s.shape[0] >= size:
            take = size - held
            parts.append((s[:take], m[:take]))
            yield np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])
            s, m = s[take:], m[take:]
            parts, held = [], 0
        if s.shape[0]:
            parts.append((s, m))
            held += s.shape[0]
    if held:
        yield np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


class FramePosition:
    """Frame number and index within the frame of each word of a stream, chunk after chunk."""

    def __init__(self):
        self.frame, self.index = 0, 0

    def advance(self, last: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(frame, index)`` arrays for the next words, whose last markers are ``last``."""
        n = last.shape[0]
        pos = np.arange(n, dtype=np.int64)
        begins = np.zeros(n, dtype=bool)
        begins[1:] = last[:-1]
        start = np.maximum.accumulate(np.where(begins, pos, -self.index))
        frame = self.frame + np.cumsum(begins)
        if n:
            self.frame = int(frame[-1]) + int(last[-1])
            self.index = 0 if last[-1] else int(n - start[-1])
        return frame, pos - start


class _Files:
    """The data files of a set being written: one writer per (role, format)."""

    def __init__(self, folder: Path, spec: BlockSpec, formats: tuple[str, ...]):
        self.writers: list[VectorFileWriter] = []
        self.by_role: dict[str, list[VectorFileWriter]] = {"stimulus": [], "expected": []}
        bits = {"stimulus": spec.input_word_bits, "expected": spec.output_bits}
        header = {"stimulus": STIMULUS_COLUMNS, "expected": EXPECTED_COLUMNS}
        try:
            for role in ("stimulus", "expected"):
                for fmt in formats:
                    w = VectorFileWriter(folder / f"{role}{SUFFIX[fmt]}", role, fmt, bits[role], header[role])
                    self.writers.append(w)
                    self.by_role[role].append(w)
        except BaseException:
            self.abort()
            raise
        self.pos = {"stimulus": FramePosition(), "expected": FramePosition()}

    def write(self, role: str, words: np.ndarray, fields: list[np.ndarray], last: np.ndarray) -> None:
        csv = [w for w in self.by_role[role] if w.fmt == "csv"]
        cols = list(self.pos[role].advance(last)) + fields if csv else []
        for w in self.by_role[role]:
            w.write(words, cols)

    def close(self) -> list[dict]:
        return [w.close().to_dict() for w in self.writers]

    def abort(self) -> None:
        for w in self.writers:
            w.abort()


class _Tally:
    """Per-source frame and sample counts and the directed cases' frame ranges."""

    def __init__(self):
        self.sources: list[dict] = []
        self.cases: list[dict] = []
        self.frames = self.samples = 0

    def blocks(self, tagged: Iterator[tuple[str, FrameBlock]]) -> Iterator[FrameBlock]:
        for name, b in tagged:
            if not self.sources or self.sources[-1]["name"] != name:
                self.sources.append({"name": name, "frames": 0, "samples": 0, "first_frame": self.frames,
                                     "first_line": self.samples + 1})
            n_frames, n_samples = int(b.lengths.shape[0]), int(b.samples.shape[0])
            if b.label:
                self.cases.append({"label": b.label, "first_frame": self.frames, "frames": n_frames})
            self.sources[-1]["frames"] += n_frames
            self.sources[-1]["samples"] += n_samples
            self.frames += n_frames
            self.samples += n_samples
            yield b


def _generate(spec: BlockSpec, settings: VectorSettings, folder: Path) -> dict:
    files = _Files(folder, spec, settings.formats)
    tally = _Tally()
    try:
        pipe = MapPipeline(spec) if getattr(spec, "is_map", False) else FastPipeline(spec)

        def emit(out: PipelineOutput) -> None:
            step = settings.chunk_samples  # a map block's words come a whole map at a time: write in chunks
            for a in range(0, len(out), step):
                part = PipelineOutput(*(f[a : a + step] for f in (out.cut, out.threshold, out.det, out.valid,
                                                                   out.last)))
                fields = [part.cut, part.threshold, part.det, part.valid, part.last]
                files.write("expected", pack_output(spec, part), fields, part.last)

        for samples, last in rechunk(tally.blocks(source_blocks(spec, settings)), settings.chunk_samples):
            files.write("stimulus", pack_input(spec, samples, last), [samples, last], last)
            emit(pipe.push(samples, last))
        emit(pipe.finish())
        records = files.close()
    except BaseException:
        files.abort()
        raise
    manifest = build_manifest(spec, settings.to_dict(), tally.sources, tally.cases, records)
    write_manifest(folder, manifest)
    return manifest


def estimated_bytes(spec: BlockSpec, settings: VectorSettings) -> int:
    """About how many bytes the set's data files take (random frames at their mean length).

    Checked against the free space of the target's file system before anything is
    written (:func:`refmodel.output_folder.staged_folder`), so an absurd frame count
    is refused at once instead of filling the disk.
    """
    if getattr(spec, "is_map", False):  # every frame is one whole map
        frames = settings.scenario_maps + settings.random_maps + (64 if settings.include_corner_cases else 0)
        longest = spec.map_cells
        samples = frames * spec.map_cells
    else:
        frames = settings.scenario_frames + settings.random_frames + (64 if settings.include_corner_cases else 0)
        longest = max(spec.frame_length, settings.random_length_max)
        samples = ((settings.scenario_frames + (64 if settings.include_corner_cases else 0)) * spec.frame_length
                   + settings.random_frames * (spec.window_length + settings.random_length_max) // 2)
    digits = {"frame": len(str(frames)), "index": len(str(longest)), "cut": len(str((1 << spec.input_bits) - 1)),
              "threshold": len(str((1 << spec.threshold_bits) - 1))}
    per_sample = 0
    for fmt in settings.formats:
        if fmt == "csv":
            stim = digits["frame"] + digits["index"] + digits["cut"] + 1
            exp = digits["frame"] + digits["index"] + digits["cut"] + digits["threshold"] + 3
            per_sample += stim + len(STIMULUS_COLUMNS) + exp + len(EXPECTED_COLUMNS)
        else:
            per_sample += line_bytes(fmt, spec.input_bits + 1) + line_bytes(fmt, spec.output_bits)
    return samples * per_sample


def write_vector_set(spec: BlockSpec, output: str | Path, *, seed: int | None = None, formats=None,
                     force: bool = False) -> dict:
    """Generate a vector set into the folder ``output``.

    Parameters
    ----------
    spec : BlockSpec
        The block; its ``[vectors]`` section selects the sources.
    output : str or pathlib.Path
        Target folder. It must not exist, or be empty, unless ``force``.
        Missing parent folders are created.
    seed : int, optional
        Overrides ``vectors.seed``.
    formats : sequence of str, optional
        Overrides ``vectors.formats``; ``"hex"`` is always written.
    force : bool
        Replace an existing non-empty folder (only once the new set is complete).

    Returns
    -------
    dict
        The manifest that was written.

    Raises
    ------
    SpecError
        For bad settings, an unusable target, or a set larger than the free
        space of the target's file system (:func:`estimated_bytes`); nothing
        is written then.
    OSError
        When writing fails (nothing is left behind).
    """
    settings = vector_settings(spec, seed=seed, formats=formats)
    with staged_folder(output, force, need_bytes=estimated_bytes(spec, settings)) as tmp:
        manifest = _generate(spec, settings, tmp)
    return manifest
