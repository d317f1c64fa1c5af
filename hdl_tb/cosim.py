"""Co-simulation: generate a testbench folder, build, run on Icarus Verilog, summarise.

:func:`cosim` does the whole chain for a block spec (the ``cfarvec cosim``
command); :func:`run_folder` runs one mode of a folder written by
:func:`hdl_tb.tb_generator.write_testbench`:

``bulk``
    the cocotb bench whose Verilog driver streams the vector file (fast);
``interactive``
    the cocotb bench in which Python drives and checks word by word;
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
import shutil
import subprocess
import sys
import tempfile
import time
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Mapping, Sequence

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError, require

from .tb_generator import (COCOTB_MODULE, DEFAULT_GAP_PERCENT, DEFAULT_SINK, DEFAULT_STALL_PERCENT, MODES,
                           VERILOG_TOP, check_sink, read_config, read_stimulus, whole_frames, write_testbench)
from .verilog_bench import find_tools

RUN_FILE = "cfarvec_run.json"
SUMMARY_FILE = "cfarvec_summary.json"
RESULTS_FILE = "results.xml"
_SUMMARY_LINE = re.compile(r"^(PASS|FAIL) (\d+)(?: first=(.*))?$", re.MULTILINE)
_ERROR_LINE = re.compile(r"(?i)\berror\b|syntax error|I give up")


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
    results_xml : pathlib.Path or None
        JUnit XML results.
    waves : pathlib.Path or None
        Waveform file, when requested.
    log_file : pathlib.Path
        The simulator's output.
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


# --------------------------------------------------------------------------
# Helpers
# --------------------------------------------------------------------------


def build_dir(folder: Path, config: Mapping, mode: str, waves: bool) -> Path:
    """The build folder of one mode: one per toplevel, source list, parameter set and waveform flag.

    The same rule as the folder's own ``test_cfarvec_cosim.py``, so both share builds.
    """
    m = config["modes"][mode]
    key = json.dumps([m["toplevel"], m["sources"], m["parameters"], waves], sort_keys=True)
    return Path(folder) / "sim_build" / f"{mode}-{hashlib.sha256(key.encode()).hexdigest()[:12]}"


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


def _first_error(text: str) -> str:
    for line in text.splitlines():
        if _ERROR_LINE.search(line):
            return line.strip()
    lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
    return lines[-1] if lines else "no output"


def _words_for_run(folder: Path, config: Mapping, samples: int | None) -> int:
    if samples is None:
        return int(config["words"])
    require(isinstance(samples, int) and not isinstance(samples, bool) and samples >= 1, "--samples",
            f"got {samples!r}", "an integer >= 1")
    total = int(config["total_words"])
    require(samples <= total, "--samples", f"got {samples}, but the folder's vector set has {total} samples",
            f"an integer 1..{total} (or regenerate the folder with more samples)")
    return whole_frames(read_stimulus(folder, config), int(config["input_bits"]), samples)


def _write_junit(path: Path, name: str, seconds: float, failure: str | None) -> None:
    suites = ET.Element("testsuites")
    suite = ET.SubElement(suites, "testsuite", name="cfarvec", tests="1", failures="1" if failure else "0",
                          errors="0", skipped="0", time=f"{seconds:.3f}")
    case = ET.SubElement(suite, "testcase", classname="cfarvec.verilog", name=name, time=f"{seconds:.3f}")
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


# --------------------------------------------------------------------------
# Running a folder
# --------------------------------------------------------------------------


def run_folder(folder: str | Path, mode: str = "bulk", *, samples: int | None = None,
               gap_percent: int | None = None, stall_percent: int | None = None, seed: int | None = None,
               sink: str | None = None, waves: bool = False) -> CosimResult:
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
        Write a waveform (FST for the cocotb modes, VCD for ``verilog``).

    Returns
    -------
    CosimResult

    Raises
    ------
    SpecError
        Missing simulator, bad mode or option, a folder that is not a
        testbench folder, RTL that does not compile with the bench.
    """
    require(mode in MODES, "--mode", f"got {mode!r}", ", ".join(MODES))
    folder = Path(folder).resolve()
    config = read_config(folder)
    iverilog, vvp = find_tools()
    words = _words_for_run(folder, config, samples)
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
    where = build_dir(folder, config, mode, waves)
    where.mkdir(parents=True, exist_ok=True)
    if mode == "verilog":
        return _run_verilog(folder, config, where, words, settings, waves, iverilog, vvp)
    return _run_cocotb(folder, config, mode, where, words, settings, waves)


def _run_cocotb(folder: Path, config: Mapping, mode: str, where: Path, words: int, settings: dict,
                waves: bool) -> CosimResult:
    from cocotb_tools.runner import get_runner

    m = config["modes"][mode]
    runner = get_runner("icarus")
    runner.log.setLevel(logging.CRITICAL)
    build_log = where / "build.log"
    sim_log = where / "sim.log"
    results = where / RESULTS_FILE
    summary_path = where / SUMMARY_FILE
    with _runner_environment(folder):
        try:
            runner.build(sources=[folder / s for s in m["sources"]], hdl_toplevel=m["toplevel"],
                         parameters=m["parameters"], build_dir=where, timescale=("1ns", "1ps"), waves=waves,
                         log_file=build_log)
        except RuntimeError:
            text = build_log.read_text(errors="replace") if build_log.is_file() else ""
            raise SpecError("--rtl", f"the RTL does not compile with the {mode} bench: {_first_error(text)}",
                            "Verilog or SystemVerilog sources that Icarus Verilog (-g2012) elaborates") from None
        (where / RUN_FILE).write_text(json.dumps({"words": words, **settings}), encoding="utf-8")
        summary_path.unlink(missing_ok=True)
        t0 = time.perf_counter()
        with contextlib.suppress(SystemExit):
            runner.test(test_module=COCOTB_MODULE, hdl_toplevel=m["toplevel"], testcase=m["testcase"],
                        build_dir=where, test_dir=where, results_xml=str(results), waves=waves, log_file=sim_log)
        seconds = time.perf_counter() - t0
    wave_file = where / f"{m['toplevel']}.fst" if waves else None
    if summary_path.is_file():
        s = json.loads(summary_path.read_text(encoding="utf-8"))
    else:
        why = _junit_failure(results) or _first_error(sim_log.read_text(errors="replace") if sim_log.is_file() else "")
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
        log_file=sim_log, details=s,
    )


def _run_verilog(folder: Path, config: Mapping, where: Path, words: int, settings: dict, waves: bool,
                 iverilog: str, vvp: str) -> CosimResult:
    m = config["modes"]["verilog"]
    waits = settings["sink"] == "waits-for-valid"
    if not config["reference_core"] and int(settings["stall_percent"]) == 0 and not waits:
        raise SpecError("--stalls", "0 makes the pure-Verilog bench check the reference core's drain and latency, "
                        "which a core of your own need not share",
                        "1..95 with --rtl in verilog mode (or --sink waits-for-valid)")
    image = where / "bench.vvp"
    sources = [folder / s for s in m["sources"]]
    stale = not image.is_file() or any(s.stat().st_mtime > image.stat().st_mtime for s in sources)
    if stale:
        cmd = [iverilog, "-g2012", "-f", str(folder / "bench" / "timescale.f"), "-s", VERILOG_TOP,
               "-o", str(image)]
        cmd += [f"-P{VERILOG_TOP}.{k}={v}" for k, v in m["parameters"].items()]
        cmd += [str(s) for s in sources]
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=where)
        (where / "build.log").write_text(" ".join(cmd) + "\n" + proc.stdout + proc.stderr, encoding="utf-8")
        if proc.returncode != 0:
            image.unlink(missing_ok=True)
            raise SpecError("--rtl", "the RTL does not compile with the pure-Verilog bench: "
                            f"{_first_error(proc.stdout + proc.stderr)}",
                            "Verilog or SystemVerilog sources that Icarus Verilog (-g2012) elaborates")
    received = where / "received.hex"
    received.unlink(missing_ok=True)
    args = [vvp, "-n", str(image), f"+STIM_FILE={folder / config['stimulus']}",
            f"+EXPECT_FILE={folder / config['expected']}", f"+OUT_FILE={received}",
            f"+GAP_PERCENT={settings['gap_percent']}", f"+STALL_PERCENT={settings['stall_percent']}",
            f"+SEED={settings['seed'] & 0x7FFFFFFF}", f"+N_WORDS={words}", f"+SINK_WAITS_FOR_VALID={int(waits)}"]
    wave_file = where / f"{VERILOG_TOP}.vcd" if waves else None
    if wave_file is not None:
        args += ["+DUMP", f"+DUMP_FILE={wave_file}"]
    t0 = time.perf_counter()
    proc = subprocess.run(args, capture_output=True, text=True, cwd=where)
    seconds = time.perf_counter() - t0
    log = proc.stdout + proc.stderr
    log_file = where / "sim.log"
    log_file.write_text(log, encoding="utf-8")
    found = _SUMMARY_LINE.findall(log)
    n_received = sum(1 for _ in open(received, "rb")) if received.is_file() else 0
    if found and found[-1][0] == "PASS":
        passed, errors, first, problems = True, 0, None, ()
    else:
        passed = False
        errors = int(found[-1][1]) if found else 0
        first = (found[-1][2] or None) if found else None
        problems = (f"{errors} errors, first: {first}",) if found else (
            f"the testbench ended without a summary line (exit code {proc.returncode}): {_first_error(log)}",)
    results = where / RESULTS_FILE
    _write_junit(results, VERILOG_TOP, seconds, None if passed else problems[0])
    return CosimResult(
        mode="verilog", passed=passed, words_expected=words, words_compared=min(words, n_received),
        mismatches=errors, missing_words=max(0, words - n_received), extra_words=max(0, n_received - words),
        first_mismatch=first, problems=problems, sim_seconds=seconds,
        samples_per_second=words / seconds if seconds > 0 else 0.0, stream_seconds=seconds,
        module=config["port_map"]["module"], folder=folder, build_dir=where, results_xml=results, waves=wave_file,
        log_file=log_file,
        details={"log_tail": log[-2000:], "sink": settings["sink"]},
    )


# --------------------------------------------------------------------------
# The whole chain
# --------------------------------------------------------------------------


def cosim(spec: BlockSpec, *, rtl: Sequence[str | Path] = (), top: str | None = None, mode: str = "bulk",
          samples: int | None = None, seed: int | None = None, gap_percent: int = DEFAULT_GAP_PERCENT,
          stall_percent: int = DEFAULT_STALL_PERCENT, sink: str = DEFAULT_SINK, waves: bool = False,
          folder: str | Path | None = None, force: bool = False) -> CosimResult:
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
        Where to write the testbench folder and keep it. Default: a temporary
        folder, removed afterwards unless ``waves`` is set.
    force : bool
        Replace a non-empty ``folder``.

    Returns
    -------
    CosimResult

    Raises
    ------
    SpecError
        For every kind of bad input (see :func:`write_testbench` and :func:`run_folder`).
    """
    require(mode in MODES, "--mode", f"got {mode!r}", ", ".join(MODES))
    find_tools()
    keep = folder is not None or waves
    if folder is None:
        base = Path(tempfile.mkdtemp(prefix="cfarvec-cosim-"))
        target = base / "bench"
    else:
        base, target = None, Path(folder)
    try:
        write_testbench(spec, target, rtl=rtl, top=top, force=force, seed=seed, samples=samples,
                        gap_percent=gap_percent, stall_percent=stall_percent, sink=sink)
        result = run_folder(target, mode, waves=waves)
        return dataclasses.replace(result, kept=keep)
    finally:
        if base is not None and not keep:
            shutil.rmtree(base, ignore_errors=True)


def format_summary(result: CosimResult) -> str:
    """One screen: verdict, words compared, mismatches, the first mismatch, speed, where the results are."""
    verdict = "PASS" if result.passed else "FAIL"
    lines = [
        f"{verdict}  {result.mode} co-simulation of {result.module} on Icarus Verilog",
        f"  words compared   {result.words_compared:,} of {result.words_expected:,}",
        f"  mismatches       {result.mismatches:,}",
        f"  missing / extra  {result.missing_words:,} / {result.extra_words:,}",
        f"  first mismatch   {result.first_mismatch or '-'}",
    ]
    sink = result.details.get("sink")
    if sink:
        lines.append(f"  output sink      {sink}")
    stream_rate = result.words_expected / result.stream_seconds if result.stream_seconds > 0 else 0.0
    if result.mode == "verilog":
        lines.append(f"  simulation       {result.sim_seconds:.2f} s, {result.samples_per_second:,.0f} samples/s")
    else:
        lines.append(f"  simulation       {result.stream_seconds:.2f} s streaming, {stream_rate:,.0f} samples/s; "
                     f"{result.sim_seconds:.2f} s with simulator start-up ({result.samples_per_second:,.0f} samples/s)")
    for p in result.problems:
        if not (result.first_mismatch and result.first_mismatch in p):
            lines.append(f"  problem          {p}")
    if result.kept:
        if result.results_xml is not None:
            lines.append(f"  results          {result.results_xml}")
        if result.waves is not None:
            lines.append(f"  waveform         {result.waves}")
        lines.append(f"  testbench        {result.folder}")
    return "\n".join(lines)
