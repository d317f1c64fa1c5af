"""Mismatch reports: where a failing run went wrong and which simple bug explains the received words.

:func:`analyse` compares the words a bench received with the expected words
of the vector set and returns a plain dict (it goes into the run's summary
JSON):

``table``
    the first :data:`TABLE_ROWS` mismatching words, each with its word index,
    vector source (``corner_cases``, ``scenario``, ``random``) and directed-
    case label, frame and cell (sample index within the frame), every output
    field expected and received, and the noise statistic ``S`` and the
    reference-cell sum the model saw at that cell;
``field_counts``
    mismatching words per output field (``cut``, ``threshold``, ``det``,
    ``valid``, ``last``) over every compared word;
``hypotheses``
    the simple bugs tested against the model and, for each, how many of the
    mismatching words in the tried frames it explains; ``explained`` lists
    those that explain all of them;
``failing_frames``
    every frame with a mismatch (for a rerun of just those frames).

Hypotheses (each is the bit-accurate model of ``refmodel`` run on the same
frames with one thing changed, or a plain index shift):

- the output shifted by ``k`` words (received word ``i`` is expected word
  ``i + k``), ``k`` in ``-3..3``;
- the window one cell off on either side: ``G + 1`` or ``G - 1`` guard cells,
  ``R + 1`` or ``R - 1`` reference cells per side;
- rounding at ties: the other rounding modes (floor, half-up, half-even);
- the saturation boundary: wrap instead of saturate and the reverse, and a
  threshold one bit narrower (saturating or wrapping one bit early);
- the comparison ``>`` instead of ``>=`` and the reverse.

Notes
-----
Frames are independent in the bit-true spec (``docs/bit-true.md``
sections 1 and 9: the window never crosses a last marker), so each
hypothesis is evaluated on the failing frames alone.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Mapping, Sequence

import numpy as np

from refmodel.block_spec import BlockSpec, spec_from_dict
from refmodel.errors import SpecError
from refmodel.fixedpoint.pipeline_fast import run_fast, statistic
from refmodel.fixedpoint.word_format import FIELDS, PipelineOutput, unpack_output

#: Mismatching words listed in full.
TABLE_ROWS = 12
#: Frames a hypothesis is tried on (the first failing ones).
HYPOTHESIS_FRAMES = 24
#: Largest output shift tried, in words.
MAX_SHIFT = 3
_ROUNDINGS = ("floor", "half-up", "half-even")


def frame_bounds(last: np.ndarray) -> np.ndarray:
    """Start index of every frame and one past the end, from the last markers."""
    ends = np.flatnonzero(last) + 1
    return np.concatenate([[0], ends]).astype(np.int64)


def _source_of(manifest: Mapping, frame: int) -> tuple[str, str]:
    source = ""
    for s in manifest.get("sources", ()):
        if s["first_frame"] <= frame < s["first_frame"] + s["frames"]:
            source = s["name"]
    label = ""
    for c in manifest.get("corner_cases", ()):
        if c["first_frame"] <= frame < c["first_frame"] + c["frames"]:
            label = c["label"]
    return source, label


def _variant(spec: BlockSpec, detector: Mapping | None = None, fixed: Mapping | None = None) -> BlockSpec | None:
    data = spec.to_dict(resolved=True)
    data.pop("ports", None)
    data["detector"].update(detector or {})
    data["fixed"].update(fixed or {})
    try:
        return spec_from_dict(data)
    except SpecError:
        return None


def hypothesis_specs(spec: BlockSpec) -> list[tuple[str, BlockSpec]]:
    """The model variants tried, each with the line that names it."""
    out: list[tuple[str, BlockSpec | None]] = []
    r, g = spec.ref_per_side, spec.guard_per_side
    for dg in (1, -1):
        out.append((f"window off by one cell: {g + dg} guard cells per side instead of {g}",
                    _variant(spec, {"guard_cells_per_side": g + dg})))
    for dr in (1, -1):
        out.append((f"window off by one cell: {r + dr} reference cells per side instead of {r}",
                    _variant(spec, {"ref_cells_per_side": r + dr})))
    for mode in _ROUNDINGS:
        if mode != spec.rounding and not spec.truncate_partials:
            out.append((f"rounding at ties: {mode} instead of {spec.rounding}", _variant(spec, fixed={"rounding": mode})))
    other = "wrap" if spec.overflow == "saturate" else "saturate"
    out.append((f"saturation boundary: {other} instead of {spec.overflow}", _variant(spec, fixed={"overflow": other})))
    if spec.threshold_bits > 1:
        out.append((f"saturation boundary: a {spec.threshold_bits - 1}-bit threshold ({spec.overflow} one bit early)",
                    _narrow(spec)))
    flipped = ">" if spec.compare == ">=" else ">="
    out.append((f"compare CUT {flipped} T instead of CUT {spec.compare} T", _variant(spec, {"compare": flipped})))
    return [(name, s) for name, s in out if s is not None]


def _narrow(spec: BlockSpec) -> BlockSpec | None:
    """The spec with a threshold one bit narrower (its words are widened back for the comparison)."""
    return _variant(spec, fixed={"threshold_bits": spec.threshold_bits - 1})


def _fields(out: PipelineOutput) -> np.ndarray:
    return np.stack([np.asarray(getattr(out, f), dtype=np.int64) for f in FIELDS])


def analyse(spec: BlockSpec, stimulus: np.ndarray, expected: np.ndarray, received: np.ndarray,
            manifest: Mapping | None = None, frame_numbers: Sequence[int] | None = None) -> dict:
    """The mismatch report of one run.

    Parameters
    ----------
    spec : BlockSpec
        The block the vectors were made for.
    stimulus : numpy.ndarray of uint64
        The stimulus words streamed (sample and last marker), whole frames.
    expected : numpy.ndarray of uint64
        Expected output words, one per stimulus word (standard layout,
        ``docs/bit-true.md`` section 8).
    received : numpy.ndarray of uint64
        Received words in the standard layout, in order (may be shorter or
        longer than ``expected``).
    manifest : mapping, optional
        The vector set's manifest (``sources`` and ``corner_cases`` name the
        source and the directed case of each frame).
    frame_numbers : sequence of int, optional
        Frame number in the vector set of each streamed frame (default
        ``0, 1, ...``; a rerun of chosen frames passes their numbers).

    Returns
    -------
    dict
        ``table``, ``field_counts``, ``mismatching_words``, ``failing_frames``,
        ``hypotheses`` (name, explained, of) and ``explained`` (names).
    """
    manifest = manifest or {}
    n_in = spec.input_bits
    last = ((stimulus >> np.uint64(n_in)) & np.uint64(1)).astype(bool)
    samples = (stimulus & np.uint64((1 << n_in) - 1)).astype(np.int64)
    bounds = frame_bounds(last)
    n = min(expected.shape[0], received.shape[0])
    exp_f = _fields(unpack_output(spec, expected[:n]))
    got_f = _fields(unpack_output(spec, received[:n]))
    diff = exp_f != got_f
    bad = np.flatnonzero(diff.any(axis=0))
    frame_of = np.searchsorted(bounds, np.arange(n), side="right") - 1
    numbers = list(frame_numbers) if frame_numbers is not None else list(range(bounds.size - 1))
    failing = sorted({int(f) for f in frame_of[bad]})
    report: dict = {
        "mismatching_words": int(bad.size),
        "field_counts": {f: int(diff[k].sum()) for k, f in enumerate(FIELDS)},
        "failing_frames": [int(numbers[f]) for f in failing],
        "table": [],
        "hypotheses": [],
        "explained": [],
    }
    stats: dict[int, tuple[np.ndarray, np.ndarray | None]] = {}
    ca = _variant(spec, {"kind": "ca"}) if spec.kind != "ca" else spec
    for i in bad[:TABLE_ROWS]:
        f = int(frame_of[i])
        if f not in stats:
            frame = samples[bounds[f]:bounds[f + 1]]
            try:
                s = statistic(spec, frame)
                ref = statistic(ca, frame) if ca is not None else None
            except SpecError:
                s, ref = np.full(frame.size, -1), None
            stats[f] = (s, ref)
        cell = int(i - bounds[f])
        s, ref = stats[f]
        source, label = _source_of(manifest, int(numbers[f]))
        row = {"word": int(i), "frame": int(numbers[f]), "cell": cell, "source": source, "case": label,
               "statistic": int(s[cell]), "reference_sum": None if ref is None else int(ref[cell])}
        for k, name in enumerate(FIELDS):
            row[f"{name}_expected"] = int(exp_f[k, i])
            row[f"{name}_received"] = int(got_f[k, i])
        report["table"].append(row)
    if bad.size == 0:
        return report

    # Shifted output: received word i equals expected word i + k.
    for k in range(-MAX_SHIFT, MAX_SHIFT + 1):
        if k == 0:
            continue
        idx = bad[(bad + k >= 0) & (bad + k < expected.shape[0])]
        hits = int(np.count_nonzero(received[idx] == expected[idx + k])) if idx.size else 0
        report["hypotheses"].append({"name": f"output shifted by {k} words (received word i is expected word i{k:+d})",
                                     "explained": hits, "of": int(bad.size)})

    # Model variants on the first failing frames.
    tried = failing[:HYPOTHESIS_FRAMES]
    picked = np.concatenate([np.arange(bounds[f], bounds[f + 1]) for f in tried])
    x, m = samples[picked], last[picked]
    sel = picked[picked < n]  # a prefix: the frames are in order
    bad_sel = diff[:, sel].any(axis=0)
    for name, variant in hypothesis_specs(spec):
        try:
            model = _fields(run_fast(variant, x, m))[:, :sel.size]
        except SpecError:
            continue
        same = (model == got_f[:, sel]).all(axis=0)
        report["hypotheses"].append({"name": name, "explained": int(np.count_nonzero(same & bad_sel)),
                                     "of": int(np.count_nonzero(bad_sel)), "frames": len(tried),
                                     "all_words_agree": bool(same.all())})
    report["explained"] = [h["name"] for h in report["hypotheses"]
                           if h["of"] and h["explained"] == h["of"] and h.get("all_words_agree", True)]
    return report


def format_report(report: Mapping, limit: int = TABLE_ROWS) -> list[str]:
    """The report as text lines: the table, the counts per field, the hypothesis line."""
    lines: list[str] = []
    rows = report.get("table", [])[:limit]
    if rows:
        head = (f"  {'word':>8} {'frame':>6} {'cell':>5}  {'source / case':<34} "
                f"{'cut e/r':>13} {'T e/r':>17} {'det':>4} {'valid':>5} {'last':>4} {'S':>9} {'ref sum':>9}")
        lines.append("  mismatches (first {} of {}):".format(len(rows), report.get("mismatching_words", len(rows))))
        lines.append(head)
        for r in rows:
            where = r["source"] + (f" / {r['case']}" if r["case"] else "")
            ref = "-" if r["reference_sum"] is None else str(r["reference_sum"])
            lines.append(
                f"  {r['word']:>8} {r['frame']:>6} {r['cell']:>5}  {where[:34]:<34} "
                f"{str(r['cut_expected']) + '/' + str(r['cut_received']):>13} "
                f"{str(r['threshold_expected']) + '/' + str(r['threshold_received']):>17} "
                f"{str(r['det_expected']) + '/' + str(r['det_received']):>4} "
                f"{str(r['valid_expected']) + '/' + str(r['valid_received']):>5} "
                f"{str(r['last_expected']) + '/' + str(r['last_received']):>4} {r['statistic']:>9} {ref:>9}")
    counts = report.get("field_counts")
    if counts:
        lines.append("  per field        " + ", ".join(f"{k} {v:,}" for k, v in counts.items()))
    explained = report.get("explained", [])
    if explained:
        for name in explained:
            lines.append(f"  hypothesis       explains every mismatch: {name}")
    elif report.get("hypotheses"):
        best = max(report["hypotheses"], key=lambda h: h["explained"] / h["of"] if h["of"] else 0)
        lines.append(f"  hypothesis       none explains every mismatch (closest: {best['name']}, "
                     f"{best['explained']} of {best['of']})")
    return lines


def read_manifest(folder: str | Path) -> dict:
    """The manifest of a testbench folder's vector set ({} when it cannot be read)."""
    try:
        return json.loads((Path(folder) / "vectors" / "manifest.json").read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
