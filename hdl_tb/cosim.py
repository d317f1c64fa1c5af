"""Co-simulation: generate a testbench folder, build, run on Icarus Verilog, summarise.

:func:`cosim` does the whole chain for a block spec (the ``cfarvec cosim``
command); :func:`run_folder` runs one mode of a folder written by
:func:`hdl_tb.tb_generator.write_testbench`:

``bulk``
    the cocotb bench whose Verilog driver streams the vector file (fast);
``interactive``
    the cocotb bench in which Python feeds frame batches and checks each output frame as it arrives;
``verilog``
    the pure-Verilog self-checking testbench, ``iverilog`` + ``vvp`` only.

Each run returns a :class:`CosimResult`; :func:`format_summary` renders it
as one screen. Every mode has two output sinks (``sink``): ``"independent"``
raises TREADY without looking at TVALID; ``"waits-for-valid"`` raises it only
for a word it has seen waiting, as ARM IHI 0051A 2.2.1 allows a sink to do,
so a module whose TVALID waits for TREADY deadlocks and the run fails with
"output never became valid while the sink waited for TVALID". The cocotb modes are built and started with
``cocotb_tools.runner`` in the same build folders the folder's own pytest
runner uses (one per mode and parameter set); every mode leaves a JUnit XML
file ``results.xml`` in its build folder.
"""

from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import json
import logging
import os
import re
import shlex
import shutil
import subprocess
import sys
import tempfile
import time
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Mapping, Sequence

import numpy as np

from refmodel.block_spec import BlockSpec, spec_from_dict
from refmodel.map_spec import is_map
from refmodel.errors import SpecError, require
from refmodel.spec_fields import integer_list
from vectors.writers import ParseError, parse_fixed

from . import mismatch_report
from .pause_pattern import write_pattern
from .shared_build import design_key, shared_build
from .simulators import (DEFAULT_SIMULATOR, LABELS, bench_command, build_verilog_bench, check_simulator,
                         cocotb_build_args, cocotb_test_args, find_simulator, first_error, simulator_environment,
                         waves_name)
from .tb_generator import (COCOTB_MODULE, DEFAULT_GAP_PERCENT, DEFAULT_SINK, DEFAULT_STALL_PERCENT, MODES,
                           check_sink, read_config, read_stimulus, whole_frames, write_testbench)

RUN_FILE = "cfarvec_run.json"
SUMMARY_FILE = "cfarvec_summary.json"
RESULTS_FILE = "results.xml"
RECEIVED_FILE = "received.hex"
#: Format tag of the summary JSON every mode writes.
SUMMARY_FORMAT = "cfarvec-cosim-summary"
_SUMMARY_LINE = re.compile(r"^(PASS|FAIL) (\d+)(?: first=(.*))?$", re.MULTILINE)


@dataclass(frozen=True)
class CosimResult:
    """Outcome of one co-simulation run.

    Attributes
    ----------
    mode : {"bulk", "interactive", "verilog"}
    passed : bool
        Every expected word arrived, equal to the expected one, with no
        handshake error, extra word, deadlock or timeout.
    words_expected : int
        Words streamed (a whole number of frames).
    words_compared : int
        Words received and compared.
    mismatches : int
        Words that differ (the pure-Verilog bench counts all its errors here).
    missing_words, extra_words : int
        Expected words that never arrived; words beyond the expected ones.
    first_mismatch : str or None
        The first mismatch: word index, frame, sample index, CUT, expected
        and received fields.
    problems : tuple of str
        Every reason for a failure, one line each.
    sim_seconds : float
        Wall-clock time of the whole simulator run, start-up included
        (building excluded).
    samples_per_second : float
        ``words_expected / sim_seconds``.
    stream_seconds : float
        Wall-clock time from the release of reset to the end of the stream
        (the cocotb modes measure it inside the simulation; ``verilog``:
        equal to ``sim_seconds``).
    module : str
        Module under test.
    folder, build_dir : pathlib.Path
        The testbench folder and this run's build folder.
    kept : bool
        The folder is still there after the run.
    results_xml : pathlib.Path or None
        JUnit XML results.
    waves : pathlib.Path or None
        Waveform file, when requested.
    log_file : pathlib.Path
        The simulator's output.
    details : mapping
        The bench's own counters (handshake errors, cycles, ...).
    simulator : {"icarus", "verilator"}
    seed : int
        The seed that drove the gaps and stalls of this run (and made the vector set).
    gap_percent, stall_percent : int
    sink : str
    frames : tuple of int or None
        The frames streamed, when only some were (a rerun of failing frames).
    report : mapping or None
        The mismatch report (:func:`hdl_tb.mismatch_report.analyse`) of a failing run.
    rerun : str or None
        A command that reruns just the failing frames.
    summary_file : pathlib.Path or None
        The summary JSON of the run.
    """

    mode: str
    passed: bool
    words_expected: int
    words_compared: int
    mismatches: int
    missing_words: int
    extra_words: int
    first_mismatch: str | None
    problems: tuple[str, ...]
    sim_seconds: float
    samples_per_second: float
    stream_seconds: float
    module: str
    folder: Path
    build_dir: Path
    kept: bool = True
    results_xml: Path | None = None
    waves: Path | None = None
    log_file: Path | None = None
    details: Mapping = field(default_factory=dict)
    simulator: str = DEFAULT_SIMULATOR
    seed: int = 0
    gap_percent: int = 0
    stall_percent: int = 0
    sink: str = DEFAULT_SINK
    frames: tuple[int, ...] | None = None
    report: Mapping | None = None
    rerun: str | None = None
    summary_file: Path | None = None


# --------------------------------------------------------------------------
# Helpers
# --------------------------------------------------------------------------


def build_dir(folder: Path, config: Mapping, mode: str, waves: bool, simulator: str = DEFAULT_SIMULATOR) -> Path:
    """The build folder of one mode: one per simulator, toplevel, source list, parameter set and waveform flag.

    The same rule as the folder's own ``test_cfarvec_cosim.py``, so both share builds.
    """
    m = config["modes"][mode]
    key = json.dumps([m["toplevel"], m["sources"], m["parameters"], waves, simulator], sort_keys=True)
    return Path(folder) / "sim_build" / f"{mode}-{simulator}-{hashlib.sha256(key.encode()).hexdigest()[:12]}"


@contextlib.contextmanager
def _runner_environment(folder: Path) -> Iterator[None]:
    """Make the folder's cocotb module importable; hide pytest from the runner (it would exit on failure)."""
    saved = os.environ.pop("PYTEST_CURRENT_TEST", None)
    entry = str(folder)
    sys.path.insert(0, entry)
    try:
        yield
    finally:
        with contextlib.suppress(ValueError):
            sys.path.remove(entry)
        if saved is not None:
            os.environ["PYTEST_CURRENT_TEST"] = saved


def _words_for_run(folder: Path, config: Mapping, samples: int | None) -> int:
    if samples is None:
        return int(config["words"])
    require(isinstance(samples, int) and not isinstance(samples, bool) and samples >= 1, "--samples",
            f"got {samples!r}", "an integer >= 1")
    total = int(config["total_words"])
    require(samples <= total, "--samples", f"got {samples}, but the folder's vector set has {total} samples",
            f"an integer 1..{total} (or regenerate the folder with more samples)")
    return whole_frames(read_stimulus(folder, config), int(config["input_bits"]), samples)


def parse_frames(text) -> tuple[int, ...]:
    """``--frames``: frame numbers as ``3,17,40``, a range ``3:9`` (inclusive) or both, or a sequence of ints."""
    return tuple(sorted(integer_list("--frames", text, 0, 2**31 - 1)))


def frames_text(frames: Sequence[int]) -> str:
    """Frame numbers as ``--frames`` takes them, runs of consecutive frames as ranges (``0:46,50``)."""
    parts: list[str] = []
    values = sorted(set(frames))
    k = 0
    while k < len(values):
        j = k
        while j + 1 < len(values) and values[j + 1] == values[j] + 1:
            j += 1
        parts.append(str(values[k]) if j == k else f"{values[k]}:{values[j]}")
        k = j + 1
    return ",".join(parts)


def _select_frames(folder: Path, config: Mapping, where: Path, frames: tuple[int, ...]) -> tuple[str, str, int]:
    """Write the chosen frames' stimulus and expected words into the build folder; return their paths and count."""
    stim_lines = (folder / config["stimulus"]).read_bytes().split(b"\n")
    exp_lines = (folder / config["expected"]).read_bytes().split(b"\n")
    stim = read_stimulus(folder, config)
    bounds = mismatch_report.frame_bounds(((stim >> np.uint64(int(config["input_bits"]))) & np.uint64(1)).astype(bool))
    n_frames = bounds.size - 1
    bad = [f for f in frames if f >= n_frames]
    if bad:
        raise SpecError("--frames", f"frame {bad[0]} does not exist", f"frame numbers 0..{n_frames - 1}")
    pick = [i for f in frames for i in range(int(bounds[f]), int(bounds[f + 1]))]
    sub = where / "frames"
    sub.mkdir(parents=True, exist_ok=True)
    (sub / "stimulus.hex").write_bytes(b"".join(stim_lines[i] + b"\n" for i in pick))
    (sub / "expected.hex").write_bytes(b"".join(exp_lines[i] + b"\n" for i in pick))
    rel = sub.relative_to(folder).as_posix()
    return f"{rel}/stimulus.hex", f"{rel}/expected.hex", len(pick)


def _write_junit(path: Path, name: str, classname: str, seconds: float, failure: str | None,
                 properties: Mapping[str, object]) -> None:
    suites = ET.Element("testsuites")
    suite = ET.SubElement(suites, "testsuite", name="cfarvec", tests="1", failures="1" if failure else "0",
                          errors="0", skipped="0", time=f"{seconds:.3f}")
    props = ET.SubElement(suite, "properties")
    for k, v in properties.items():
        ET.SubElement(props, "property", name=k, value=str(v))
    case = ET.SubElement(suite, "testcase", classname=classname, name=name, time=f"{seconds:.3f}")
    if failure:
        ET.SubElement(case, "failure", message=failure)
    ET.ElementTree(suites).write(path, encoding="utf-8", xml_declaration=True)


def _junit_failure(path: Path) -> str | None:
    try:
        root = ET.parse(path).getroot()
    except (OSError, ET.ParseError):
        return None
    for node in root.iter("failure"):
        return (node.get("message") or node.text or "failed").strip().splitlines()[0]
    return None


def _read_words(path: Path, bits: int) -> np.ndarray:
    """Words of a hex file; x or z digits read as 0."""
    data = path.read_bytes() if path.is_file() else b""
    try:
        return parse_fixed(data, "hex", bits)
    except ParseError:
        out = []
        for text in data.decode("ascii", errors="replace").split():
            try:
                out.append(int(text, 16))
            except ValueError:
                out.append(int(re.sub(r"[^0-9a-fA-F]", "0", text), 16))
        return np.array(out, dtype=np.uint64)


def config_spec(config: Mapping) -> BlockSpec:
    """The block spec a folder's vectors were made for (alpha as resolved: nothing is redesigned)."""
    data = json.loads(json.dumps(config["spec"]))
    det = data.get("detector", {})
    if "alpha" in det and "design_pfa" in det:
        det.pop("design_pfa")
    return spec_from_dict(data)


def _report(folder: Path, config: Mapping, where: Path, stim_rel: str, exp_rel: str, words: int,
            frames: tuple[int, ...] | None) -> dict | None:
    """The mismatch report of a failing run, from the words the bench recorded."""
    received = where / RECEIVED_FILE
    if not received.is_file():
        return None
    spec = config_spec(config)
    stim = parse_fixed((folder / stim_rel).read_bytes(), "hex", spec.input_bits + 1)[:words]
    expected = parse_fixed((folder / exp_rel).read_bytes(), "hex", spec.output_bits)[:words]
    got = _read_words(received, spec.output_bits)
    if is_map(spec):
        return _map_report(spec, stim, expected, got, frames)
    return mismatch_report.analyse(spec, stim, expected, got, mismatch_report.read_manifest(folder),
                                   frame_numbers=frames)


def _map_report(spec, stimulus: np.ndarray, expected: np.ndarray, received: np.ndarray,
                frames: tuple[int, ...] | None) -> dict:
    """The mismatch report of a map block: the table of first mismatches (map, cell, line and position in
    the line), the counts per field and the shifted-output hypotheses; the 1D model variants of
    :func:`hdl_tb.mismatch_report.hypothesis_specs` do not apply to a map."""
    from refmodel.fixedpoint.word_format import FIELDS, unpack_output

    n = min(expected.shape[0], received.shape[0])
    exp_f = np.stack([np.asarray(getattr(unpack_output(spec, expected[:n]), f), dtype=np.int64) for f in FIELDS])
    got_f = np.stack([np.asarray(getattr(unpack_output(spec, received[:n]), f), dtype=np.int64) for f in FIELDS])
    diff = exp_f != got_f
    bad = np.flatnonzero(diff.any(axis=0))
    numbers = list(frames) if frames is not None else list(range(n // spec.map_cells + 1))
    lf = spec.padded_line - 2 * spec.stream_window[3]
    report: dict = {"mismatching_words": int(bad.size),
                    "field_counts": {f: int(diff[k].sum()) for k, f in enumerate(FIELDS)},
                    "failing_frames": sorted({int(numbers[int(i) // spec.map_cells]) for i in bad}),
                    "table": [], "hypotheses": [], "explained": []}
    for i in bad[:mismatch_report.TABLE_ROWS]:
        cell = int(i) % spec.map_cells
        row = {"word": int(i), "frame": int(numbers[int(i) // spec.map_cells]), "cell": cell,
               "source": f"line {cell // lf}", "case": f"position {cell % lf}", "statistic": -1,
               "reference_sum": None}
        for k, name in enumerate(FIELDS):
            row[f"{name}_expected"] = int(exp_f[k, i])
            row[f"{name}_received"] = int(got_f[k, i])
        report["table"].append(row)
    for k in range(-mismatch_report.MAX_SHIFT, mismatch_report.MAX_SHIFT + 1):
        idx = bad[(bad + k >= 0) & (bad + k < expected.shape[0])] if k else bad[:0]
        if k and bad.size:
            hits = int(np.count_nonzero(received[idx] == expected[idx + k])) if idx.size else 0
            report["hypotheses"].append({"name": f"output shifted by {k} words (received word i is expected "
                                                 f"word i{k:+d})", "explained": hits, "of": int(bad.size)})
    report["explained"] = [h["name"] for h in report["hypotheses"] if h["of"] and h["explained"] == h["of"]]
    return report


# --------------------------------------------------------------------------
# Running a folder
# --------------------------------------------------------------------------


def run_folder(folder: str | Path, mode: str = "bulk", *, samples: int | None = None,
               gap_percent: int | None = None, stall_percent: int | None = None, seed: int | None = None,
               sink: str | None = None, waves: bool = False, simulator: str = DEFAULT_SIMULATOR,
               frames=None, build_root: str | Path | None = None) -> CosimResult:
    """Build and run one mode of a generated testbench folder.

    Parameters
    ----------
    folder : path
        Written by :func:`hdl_tb.tb_generator.write_testbench`.
    mode : {"bulk", "interactive", "verilog"}
    samples : int, optional
        Stream only the first ``samples`` samples, rounded up to a whole
        frame (default: the folder's setting).
    gap_percent, stall_percent, seed : int, optional
        Override the folder's input gaps, output backpressure and their seed.
    sink : {"independent", "waits-for-valid"}, optional
        Override the folder's output sink (folders written before the sink
        modes existed use ``"independent"``).
    waves : bool
        Write a waveform (FST for the cocotb modes on Icarus, VCD otherwise).
    simulator : {"icarus", "verilator"}
    frames : str or sequence of int, optional
        Stream only these frames of the vector set (``"3,17"``), for
        example the failing frames of an earlier run; overrides ``samples``.
    build_root : path, optional
        Build under this folder, shared with every run of the same design and
        parameter set (:mod:`hdl_tb.shared_build`); the run's own files
        (results, received words, logs, summary) stay in the folder's build
        folder. Default: build in the folder's own build folder.

    Returns
    -------
    CosimResult
        Its summary is also written to ``cfarvec_summary.json`` in the
        build folder (the same fields for every mode).

    Raises
    ------
    SpecError
        Missing simulator, bad mode or option, a folder that is not a
        testbench folder, RTL that does not compile with the bench.
    """
    require(mode in MODES, "--mode", f"got {mode!r}", ", ".join(MODES))
    check_simulator(simulator)
    folder = Path(folder).resolve()
    config = read_config(folder)
    from .vhdl_bench import check_folder_run  # a VHDL folder runs on GHDL, a Verilog one on Icarus or Verilator

    check_folder_run(config, mode, simulator)
    find_simulator(simulator)
    for copy, original in config.get("rtl_copies", {}).items():  # RTL a Makefile could not refer to
        if Path(original).is_file() and Path(original).read_bytes() != (folder / copy).read_bytes():
            shutil.copyfile(original, folder / copy)
    chosen = parse_frames(frames) if frames is not None else None
    words = _words_for_run(folder, config, None if chosen else samples)
    run = {"words": words, "gap_percent": gap_percent, "stall_percent": stall_percent, "seed": seed, "sink": sink}
    for name, key in (("--gaps", "gap_percent"), ("--stalls", "stall_percent")):
        value = run[key]
        if value is not None:
            require(isinstance(value, int) and not isinstance(value, bool) and 0 <= value <= 95, name,
                    f"got {value!r}", "an integer 0..95")
    if seed is not None:
        require(isinstance(seed, int) and not isinstance(seed, bool) and 0 <= seed < 2**31, "--seed",
                f"got {seed!r}", "an integer 0..2147483647")
    if sink is not None:
        check_sink(sink)
    defaults = {**config, "sink": config.get("sink", DEFAULT_SINK)}
    settings = {k: (v if v is not None else defaults[k]) for k, v in run.items() if k != "words"}
    where = build_dir(folder, config, mode, waves, simulator)
    where.mkdir(parents=True, exist_ok=True)
    if waves:  # the waveform is written where the build is: keep it in this run's own folder
        build_root = None
    stim_rel, exp_rel = config["stimulus"], config["expected"]
    # The benches' memories hold the whole vector file (Verilator's $readmemh refuses a longer file).
    file_words = max(words, int(config.get("total_words", words)))
    if chosen:
        stim_rel, exp_rel, words = _select_frames(folder, config, where, chosen)
        file_words = words
    (where / RECEIVED_FILE).unlink(missing_ok=True)
    if mode == "verilog":
        result = _run_verilog(folder, config, where, words, settings, waves, simulator, stim_rel, exp_rel,
                              build_root, file_words)
    elif mode == "vhdl":
        from .vhdl_bench import run_vhdl_bench

        result = run_vhdl_bench(folder, config, where, words, settings, waves, simulator, stim_rel, exp_rel)
    else:
        result = _run_cocotb(folder, config, mode, where, words, settings, waves, simulator, stim_rel, exp_rel,
                             build_root, file_words)
    report = None if result.passed else _report(folder, config, where, stim_rel, exp_rel, words, chosen)
    if chosen and result.first_mismatch:
        # The benches count words and frames within what they streamed; the report has the set's numbers.
        result = dataclasses.replace(result, first_mismatch=f"{result.first_mismatch} (word and frame counted "
                                     "within the streamed frames)")
    result = dataclasses.replace(result, simulator=simulator, seed=int(settings["seed"]),
                                 gap_percent=int(settings["gap_percent"]),
                                 stall_percent=int(settings["stall_percent"]), sink=settings["sink"],
                                 frames=chosen, report=report, summary_file=where / SUMMARY_FILE)
    write_summary(result)
    return result


def _run_cocotb(folder: Path, config: Mapping, mode: str, where: Path, words: int, settings: dict,
                waves: bool, simulator: str, stim_rel: str, exp_rel: str,
                build_root: Path | None = None, file_words: int = 0) -> CosimResult:
    from cocotb_tools.runner import get_runner

    m = config["modes"][mode]
    build_log = where / "build.log"
    built_at, built_now = where, True
    sim_log = where / "sim.log"
    results = where / RESULTS_FILE
    bench_summary = where / "cfarvec_bench_summary.json"
    with _runner_environment(folder), simulator_environment(simulator):
        runner = get_runner(simulator)
        runner.log.setLevel(logging.CRITICAL)

        def build(into: Path, max_words: int | None = None) -> None:
            nonlocal build_log
            build_log = into / "build.log"
            params = m["parameters"] if max_words is None else {**m["parameters"], "MAX_WORDS": max_words}
            runner.build(sources=[folder / s for s in m["sources"]], hdl_toplevel=m["toplevel"],
                         parameters=params, build_dir=into, timescale=("1ns", "1ps"), waves=waves,
                         build_args=cocotb_build_args(simulator), log_file=build_log)

        try:
            if build_root is None or simulator == "ghdl":
                # GHDL runs from the folder that holds its work library, and its analysis takes well under a
                # second: each run analyses in its own folder instead of sharing a build.
                build(where)
            else:
                key = design_key(folder, toplevel=m["toplevel"], sources=m["sources"], parameters=m["parameters"],
                                 waves=waves, simulator=simulator)
                built_at, _, built_now = shared_build(Path(build_root), f"{m['toplevel']}-{simulator}-{key}",
                                                      max(words, file_words), build)
        except (RuntimeError, SystemExit, subprocess.CalledProcessError):
            text = build_log.read_text(errors="replace") if build_log.is_file() else ""
            raise SpecError("--rtl", f"the RTL does not compile with the {mode} bench on {LABELS[simulator]}: "
                            f"{first_error(text)}",
                            f"Verilog or SystemVerilog sources that {LABELS[simulator]} elaborates") from None
        run = {"words": words, **settings, "stimulus": stim_rel, "expected": exp_rel,
               "summary_file": bench_summary.name}
        (where / RUN_FILE).write_text(json.dumps(run), encoding="utf-8")
        bench_summary.unlink(missing_ok=True)
        t0 = time.perf_counter()
        # A shared build made by another run: the runner has not seen the sources, so it is told the language.
        lang = None if built_now else ("vhdl" if simulator == "ghdl" else "verilog")
        with contextlib.suppress(SystemExit, RuntimeError):  # a simulator that stops: reported from its log below
            runner.test(test_module=COCOTB_MODULE, hdl_toplevel=m["toplevel"], testcase=m["testcase"],
                        build_dir=built_at, test_dir=where, results_xml=str(results), waves=waves,
                        log_file=sim_log, seed=int(settings["seed"]), hdl_toplevel_lang=lang,
                        test_args=cocotb_test_args(simulator))
        seconds = time.perf_counter() - t0
    wave_file = where / waves_name(simulator, m["toplevel"]) if waves else None
    if bench_summary.is_file():
        s = json.loads(bench_summary.read_text(encoding="utf-8"))
    else:
        why = _junit_failure(results) or first_error(sim_log.read_text(errors="replace") if sim_log.is_file() else "")
        s = {"passed": False, "words_received": 0, "words_compared": 0, "mismatches": 0, "missing_words": words,
             "extra_words": 0, "first_mismatch": None, "problems": [f"the cocotb test stopped early: {why}"]}
    return CosimResult(
        mode=mode, passed=bool(s["passed"]) and _junit_failure(results) is None, words_expected=words,
        words_compared=int(s["words_compared"]), mismatches=int(s["mismatches"]),
        missing_words=int(s["missing_words"]), extra_words=int(s["extra_words"]),
        first_mismatch=s.get("first_mismatch"), problems=tuple(s.get("problems", ())), sim_seconds=seconds,
        samples_per_second=words / seconds if seconds > 0 else 0.0,
        stream_seconds=float(s.get("wall_seconds", seconds)), module=config["port_map"]["module"],
        folder=folder, build_dir=where, results_xml=results if results.is_file() else None, waves=wave_file,
        log_file=sim_log, details={**s, **_shared_details(build_root, built_at, built_now)},
    )


def _shared_details(build_root, built_at: Path, built_now: bool) -> dict:
    """The summary's note of a shared build: its folder and whether this run made it."""
    return {} if build_root is None else {"shared_build": str(built_at), "built_shared": built_now}


def _run_verilog(folder: Path, config: Mapping, where: Path, words: int, settings: dict, waves: bool,
                 simulator: str, stim_rel: str, exp_rel: str, build_root: Path | None = None,
                 file_words: int = 0) -> CosimResult:
    m = config["modes"]["verilog"]
    waits = settings["sink"] == "waits-for-valid"
    if not config["reference_core"] and int(settings["stall_percent"]) == 0 and not waits:
        raise SpecError("--stalls", "0 makes the pure-Verilog bench check the reference core's drain and latency, "
                        "which a core of your own need not share",
                        "1..95 with --rtl in verilog mode (or --sink waits-for-valid)")
    flags = ["-f", "bench/timescale.f"] if simulator == "icarus" else []
    top = m["toplevel"]
    built_at, built_now = where, True
    if build_root is None:
        start, _ = build_verilog_bench(simulator, sources=m["sources"], parameters=m["parameters"], top=top,
                                       folder=folder, build=where, waves=waves, flags=flags)
    else:
        def build(into: Path, max_words: int) -> None:
            build_verilog_bench(simulator, sources=m["sources"], parameters={**m["parameters"], "MAX_WORDS": max_words},
                                top=top, folder=folder, build=into, waves=waves, flags=flags)

        key = design_key(folder, toplevel=top, sources=m["sources"], parameters=m["parameters"], waves=waves,
                         simulator=simulator)
        built_at, _, built_now = shared_build(Path(build_root), f"{top}-{simulator}-{key}",
                                              max(words, file_words), build)
        start = bench_command(simulator)
        # The image is started from this run's folder, by a path relative to it.
        image = os.path.relpath(built_at / start[-1], where)
        start = start[:-1] + [image if os.sep in image else os.path.join(".", image)]
    # Every path relative to the run folder (Icarus garbles non-ASCII characters in absolute paths).
    patterns = where / "patterns"
    gap_file = write_pattern(patterns, "gaps", int(settings["gap_percent"]), int(settings["seed"]))
    stall_file = write_pattern(patterns, "stalls", int(settings["stall_percent"]), int(settings["seed"]))

    def rel(p: Path) -> str:
        return os.path.relpath(p, where)

    args = start + [f"+STIM_FILE={rel(folder / stim_rel)}", f"+EXPECT_FILE={rel(folder / exp_rel)}",
                    f"+OUT_FILE={RECEIVED_FILE}", f"+GAP_PERCENT={settings['gap_percent']}",
                    f"+STALL_PERCENT={settings['stall_percent']}", f"+SEED={settings['seed'] & 0x7FFFFFFF}",
                    f"+N_WORDS={words}", f"+SINK_WAITS_FOR_VALID={int(waits)}",
                    f"+GAP_FILE={rel(gap_file)}", f"+STALL_FILE={rel(stall_file)}"]
    wave_file = where / f"{top}.vcd" if waves else None
    if wave_file is not None:
        args += ["+DUMP", f"+DUMP_FILE={wave_file.name}"]
    t0 = time.perf_counter()
    proc = subprocess.run(args, capture_output=True, text=True, cwd=where, errors="replace")
    seconds = time.perf_counter() - t0
    log = proc.stdout + proc.stderr
    log_file = where / "sim.log"
    log_file.write_text(log, encoding="utf-8")
    found = _SUMMARY_LINE.findall(log)
    received = where / RECEIVED_FILE
    n_received = sum(1 for _ in open(received, "rb")) if received.is_file() else 0
    if found and found[-1][0] == "PASS":
        passed, errors, first, problems = True, 0, None, ()
    else:
        passed = False
        errors = int(found[-1][1]) if found else 0
        first = (found[-1][2] or None) if found else None
        problems = (f"{errors} errors, first: {first}",) if found else (
            f"the testbench ended without a summary line (exit code {proc.returncode}): {first_error(log)}",)
    results = where / RESULTS_FILE
    _write_junit(results, f"verilog[{simulator},seed={settings['seed']}]", f"cfarvec.{top}", seconds,
                 None if passed else problems[0], {"seed": settings["seed"], "simulator": simulator,
                                                   "gap_percent": settings["gap_percent"],
                                                   "stall_percent": settings["stall_percent"],
                                                   "sink": settings["sink"]})
    return CosimResult(
        mode="verilog", passed=passed, words_expected=words, words_compared=min(words, n_received),
        mismatches=errors, missing_words=max(0, words - n_received), extra_words=max(0, n_received - words),
        first_mismatch=first, problems=problems, sim_seconds=seconds,
        samples_per_second=words / seconds if seconds > 0 else 0.0, stream_seconds=seconds,
        module=config["port_map"]["module"], folder=folder, build_dir=where, results_xml=results, waves=wave_file,
        log_file=log_file,
        details={"log_tail": log[-2000:], "sink": settings["sink"],
                 **_shared_details(build_root, built_at, built_now)},
    )


def summary_dict(result: CosimResult) -> dict:
    """The summary JSON of a run: the same fields for every mode (``cosim --json`` prints it)."""
    def path(p):
        return None if p is None else str(p)

    bench = {k: v for k, v in result.details.items() if k not in ("log_tail",)}
    return {
        "format": SUMMARY_FORMAT,
        "passed": result.passed,
        "mode": result.mode,
        "simulator": result.simulator,
        "module": result.module,
        "seed": result.seed,
        "gap_percent": result.gap_percent,
        "stall_percent": result.stall_percent,
        "sink": result.sink,
        "frames": None if result.frames is None else list(result.frames),
        "words_expected": result.words_expected,
        "words_compared": result.words_compared,
        "mismatches": result.mismatches,
        "missing_words": result.missing_words,
        "extra_words": result.extra_words,
        "first_mismatch": result.first_mismatch,
        "problems": list(result.problems),
        "report": result.report,
        "sim_seconds": round(result.sim_seconds, 4),
        "stream_seconds": round(result.stream_seconds, 4),
        "samples_per_second": round(result.samples_per_second, 1),
        "kept": result.kept,
        "folder": path(result.folder) if result.kept else None,
        "build_dir": path(result.build_dir) if result.kept else None,
        "results_xml": path(result.results_xml) if result.kept else None,
        "waves": path(result.waves) if result.kept else None,
        "log_file": path(result.log_file) if result.kept else None,
        "rerun": result.rerun,
        "bench": bench,
    }


def write_summary(result: CosimResult) -> None:
    """Write :func:`summary_dict` to the run's ``cfarvec_summary.json``."""
    if result.summary_file is not None and result.summary_file.parent.is_dir():
        result.summary_file.write_text(json.dumps(summary_dict(result), indent=2, sort_keys=True) + "\n",
                                       encoding="utf-8")


# --------------------------------------------------------------------------
# The whole chain
# --------------------------------------------------------------------------


def rerun_command(spec: BlockSpec, *, rtl: Sequence[str | Path] = (), top: str | None = None, mode: str,
                  simulator: str, seed: int, gap_percent: int, stall_percent: int, sink: str,
                  samples: int | None = None, frames: Sequence[int] | None = None) -> str:
    """The ``cfarvec cosim`` command that repeats a run (of only ``frames``, when given)."""
    parts = ["cfarvec", "cosim", shlex.quote(str(Path(spec.source).absolute()) if spec.source else "SPEC")]
    if rtl:
        parts += ["--rtl", *(shlex.quote(str(Path(f).absolute())) for f in rtl)]
    if top:
        parts += ["--top", shlex.quote(top)]
    parts += ["--mode", mode, "--simulator", simulator, "--seed", str(seed), "--gaps", str(gap_percent),
              "--stalls", str(stall_percent), "--sink", sink]
    if samples is not None:  # the vector set depends on it (short sets get more random frames)
        parts += ["--samples", str(samples)]
    if frames:
        parts += ["--frames", frames_text(frames)]
    return " ".join(parts)


def cosim(spec: BlockSpec, *, rtl: Sequence[str | Path] = (), top: str | None = None, mode: str = "bulk",
          samples: int | None = None, seed: int | None = None, gap_percent: int = DEFAULT_GAP_PERCENT,
          stall_percent: int = DEFAULT_STALL_PERCENT, sink: str = DEFAULT_SINK, waves: bool = False,
          folder: str | Path | None = None, force: bool = False, simulator: str = DEFAULT_SIMULATOR,
          frames=None, keep_on_failure: bool = True, build_root: str | Path | None = None) -> CosimResult:
    """Generate a testbench folder for ``spec``, build it and run one mode.

    Parameters
    ----------
    spec : BlockSpec
    rtl, top : optional
        The RTL under test and its top module (default: the reference core).
    mode : {"bulk", "interactive", "verilog"}
    samples : int, optional
        Samples to stream, rounded up to a whole frame (the vector set is
        made at least that long); default: the whole vector set.
    seed : int, optional
        Seed of the vector set and of the gaps and backpressure.
    gap_percent, stall_percent : int
        Input gaps and output backpressure, percent of cycles (0..95).
    sink : {"independent", "waits-for-valid"}
        Output sink: TREADY drawn every cycle, or raised only after TVALID
        was seen high.
    waves : bool
        Write a waveform.
    folder : path, optional
        Where to write the testbench folder and keep it (``--keep``).
        Default: a temporary folder, removed afterwards unless ``waves`` is
        set or the run fails (and ``keep_on_failure``).
    force : bool
        Replace a non-empty ``folder``.
    simulator : {"icarus", "verilator"}
    frames : str or sequence of int, optional
        Stream only these frames of the vector set (a rerun of failing frames).
    keep_on_failure : bool
        Keep the temporary folder of a failing run (its path is in the result).
    build_root : path, optional
        Share the build with other runs of the same design and parameter set
        (see :func:`run_folder`).

    Returns
    -------
    CosimResult
        With ``rerun``, the command that reruns just the failing frames.

    Raises
    ------
    SpecError
        For every kind of bad input (see :func:`write_testbench` and :func:`run_folder`).
    """
    require(mode in MODES, "--mode", f"got {mode!r}", ", ".join(MODES))
    check_simulator(simulator)
    from .vhdl_bench import check_folder_run, rtl_language  # mode and simulator fit the RTL's language

    check_folder_run({"language": rtl_language(rtl)}, mode, simulator)
    find_simulator(simulator)
    chosen = parse_frames(frames) if frames is not None else None
    keep = folder is not None or waves
    if folder is None:
        base = Path(tempfile.mkdtemp(prefix="cfarvec-cosim-"))
        target = base / "bench"
    else:
        base, target = None, Path(folder)
    result = None
    try:
        bench = write_testbench(spec, target, rtl=rtl, top=top, force=force, seed=seed, samples=samples,
                                gap_percent=gap_percent, stall_percent=stall_percent, sink=sink,
                                output_field="--keep", simulator=simulator)
        result = run_folder(target, mode, waves=waves, simulator=simulator, frames=chosen,
                            build_root=build_root)
        keep = keep or (keep_on_failure and not result.passed)
        failing = (result.report or {}).get("failing_frames") if not result.passed else None
        rerun = None
        if failing:
            rerun = rerun_command(spec, rtl=rtl, top=top, mode=mode, simulator=simulator,
                                  seed=int(bench.config["seed"]), gap_percent=gap_percent,
                                  stall_percent=stall_percent, sink=sink, samples=samples, frames=failing)
        result = dataclasses.replace(result, kept=keep, rerun=rerun)
        write_summary(result)
        return result
    finally:
        if base is not None and not keep:
            shutil.rmtree(base, ignore_errors=True)


def format_summary(result: CosimResult) -> str:
    """One screen: verdict, words compared, mismatches, the mismatch report, speed, where the results are."""
    verdict = "PASS" if result.passed else "FAIL"
    lines = [
        f"{verdict}  {result.mode} co-simulation of {result.module} on {LABELS.get(result.simulator, result.simulator)}",
        f"  seed             {result.seed} (gaps {result.gap_percent}%, stalls {result.stall_percent}%)",
        f"  words compared   {result.words_compared:,} of {result.words_expected:,}"
        + (f" (frames {frames_text(result.frames)})" if result.frames else ""),
        f"  mismatches       {result.mismatches:,}",
        f"  missing / extra  {result.missing_words:,} / {result.extra_words:,}",
        f"  first mismatch   {result.first_mismatch or '-'}",
    ]
    if result.sink:
        lines.append(f"  output sink      {result.sink}")
    stream_rate = result.words_expected / result.stream_seconds if result.stream_seconds > 0 else 0.0
    if result.mode in ("verilog", "vhdl"):
        lines.append(f"  simulation       {result.sim_seconds:.2f} s, {result.samples_per_second:,.0f} samples/s")
    else:
        lines.append(f"  simulation       {result.stream_seconds:.2f} s streaming, {stream_rate:,.0f} samples/s; "
                     f"{result.sim_seconds:.2f} s with simulator start-up ({result.samples_per_second:,.0f} samples/s)")
    for p in result.problems:
        if not (result.first_mismatch and result.first_mismatch in p):
            lines.append(f"  problem          {p}")
    if result.report:
        lines += mismatch_report.format_report(result.report)
    if result.rerun:
        lines.append(f"  rerun failing    {result.rerun}")
    if result.kept:
        if result.results_xml is not None:
            lines.append(f"  results          {result.results_xml}")
        if result.summary_file is not None:
            lines.append(f"  summary          {result.summary_file}")
        if result.waves is not None:
            lines.append(f"  waveform         {result.waves}")
        lines.append(f"  testbench        {result.folder}" + ("" if result.passed else " (kept: the run failed)"))
    return "\n".join(lines)
