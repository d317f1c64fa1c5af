"""Compile and run the pure-Verilog testbench of the reference core with Icarus Verilog.

The testbench ``hdl_tb/rtl/cfar_stream_tb.v`` reads a stimulus and an
expected-output hex file with ``$readmemh``, drives the core with optional
seeded input gaps and output backpressure, compares every output word and
prints one summary line (``PASS n`` or ``FAIL n first=...``). This module
builds it for a block spec (one compiled image per parameter set, cached),
runs it with ``vvp`` and returns a :class:`BenchResult`. For a map
(range-Doppler) spec it builds and runs ``hdl_tb/rtl/cfar_map_tb.v`` around
the map core ``cfar_map`` instead (the same knobs, plus ``reset_at``, a
reset in the middle of a map).

The output sink has two modes (:data:`SINK_MODES`): ``"independent"`` draws
``m_axis_tready`` every cycle without looking at ``m_axis_tvalid``;
``"waits-for-valid"`` raises it only for a word it has seen waiting, as ARM
IHI 0051A 2.2.1 allows a sink to do, so that a core whose TVALID waits for
TREADY deadlocks and the bench's watchdog fails the run.

Typical use::

    from hdl_tb.verilog_bench import run_bench
    result = run_bench(spec, "vectors/out/ca_default", stall_percent=30)
    assert result.passed, result.first_mismatch
"""

from __future__ import annotations

import hashlib
import os
import re
import subprocess
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError

from .core_params import (BENCH_SOURCE, BENCH_TOP, CORE_SOURCES, MAP_BENCH_SOURCE, MAP_BENCH_TOP, MAP_CORE_SOURCES,
                          core_parameters)
from .simulators import icarus_tools

#: Default file names inside a vector folder.
STIMULUS_FILE = "stimulus.hex"
EXPECTED_FILE = "expected.hex"
RECEIVED_FILE = "received.hex"
#: Output sink modes: TREADY drawn every cycle regardless of TVALID, or raised only after TVALID was seen high.
SINK_MODES = ("independent", "waits-for-valid")

_SUMMARY = re.compile(r"^(PASS|FAIL) (\d+)(?: first=(.*))?$", re.MULTILINE)
_PARAM_ERROR = re.compile(r"(\w+)_PARAMETER_ERROR__(\w+)")
_HEX_WORD = re.compile(r"^[0-9a-fA-FxXzZ_]+$")


class BenchCompileError(RuntimeError):
    """The testbench did not compile or elaborate (for example an illegal parameter combination).

    Attributes
    ----------
    output : str
        Everything the compiler printed.
    """

    def __init__(self, message: str, output: str):
        super().__init__(message)
        self.output = output


@dataclass(frozen=True)
class BenchResult:
    """Outcome of one testbench run.

    Attributes
    ----------
    passed : bool
        True when the bench printed ``PASS``.
    n_words : int
        Output words received and compared.
    n_mismatches : int
        Errors the bench counted: words that differ from the expected ones,
        plus handshake, drain, latency, word-count and timeout errors (0 on a pass).
    first_mismatch : str or None
        The bench's description of the first error (frame, sample, CUT,
        expected and received fields), None on a pass.
    received_file : pathlib.Path
        Hex file holding every received word, one per line.
    log : str
        Everything ``vvp`` printed.
    """

    passed: bool
    n_words: int
    n_mismatches: int
    first_mismatch: str | None
    received_file: Path
    log: str


def find_tools() -> tuple[str, str]:
    """Paths of ``iverilog`` and ``vvp`` (:func:`hdl_tb.simulators.icarus_tools`).

    Raises
    ------
    SpecError
        Field ``"simulator"`` when either program is not on ``PATH``.
    """
    return icarus_tools()


def count_hex_words(path: str | Path) -> int | None:
    """Words in a ``$readmemh`` file, or None when it uses ``@address`` jumps.

    Comments (``//`` and ``/* */``) and white space separate words as in
    IEEE Std 1364-2005, 17.2.9.
    """
    text = Path(path).read_text(encoding="ascii", errors="replace")
    text = re.sub(r"/\*.*?\*/", " ", text, flags=re.DOTALL)
    text = re.sub(r"//[^\n]*", " ", text)
    tokens = text.split()
    if any(t.startswith("@") for t in tokens):
        return None
    return sum(1 for t in tokens if _HEX_WORD.match(t))


def _default_build_root() -> Path:
    return Path(tempfile.gettempdir()) / f"cfarvec-verilog-bench-{os.getuid() if hasattr(os, 'getuid') else 0}"


def _source_digest(sources: Sequence[Path]) -> str:
    h = hashlib.sha256()
    for src in sources:
        h.update(src.read_bytes())
    return h.hexdigest()


def compile_bench(params: Mapping[str, int], *, max_words: int = 65536, generation: str = "2005",
                  build_root: str | Path | None = None, core_sources: Sequence[str | Path] | None = None,
                  bench_source: str | Path | None = None, bench_top: str | None = None) -> Path:
    """Compile the testbench for one set of core parameters; return the ``vvp`` image.

    Parameters
    ----------
    params : mapping of str to int
        Core parameters (see :func:`hdl_tb.core_params.core_parameters`);
        values are passed to ``iverilog -P`` unchecked, so an illegal
        combination shows up as an elaboration error.
    max_words : int, optional
        Depth of the bench's word memories.
    generation : {"2005", "2012"}, optional
        Language generation flag for ``iverilog -g``.
    build_root : path, optional
        Folder for the cached images (default: a folder in the system temp
        directory). Each parameter set gets its own sub-folder.
    core_sources, bench_source : optional
        Verilog files to use instead of the reference core and the
        testbench (for example a modified copy of either).
    bench_top : str, optional
        Top module of the bench. Default: ``cfar_map_tb`` with the map core's sources when
        ``params`` are those of the map core (they hold ``RANGE_CELLS``), else ``cfar_stream_tb``.

    Returns
    -------
    pathlib.Path
        The compiled image, reused when the sources and parameters are unchanged.

    Raises
    ------
    SpecError
        When Icarus Verilog is missing, or for a bad ``generation``.
    BenchCompileError
        When compilation or elaboration fails; an illegal parameter
        combination is named in the message.
    """
    iverilog, _ = find_tools()
    if generation not in ("2005", "2012"):
        raise SpecError("generation", f"got {generation!r}", '"2005" or "2012"')
    all_params = {**{k: int(v) for k, v in params.items()}, "MAX_WORDS": max(1, int(max_words))}
    is_map = "RANGE_CELLS" in all_params
    if bench_top is None:
        bench_top = MAP_BENCH_TOP if is_map else BENCH_TOP
    if core_sources is None:
        core_sources = MAP_CORE_SOURCES if is_map else CORE_SOURCES
    if bench_source is None:
        bench_source = MAP_BENCH_SOURCE if is_map else BENCH_SOURCE
    sources = [Path(p).resolve() for p in core_sources]
    sources.append(Path(bench_source).resolve())
    key = hashlib.sha256(repr((sorted(all_params.items()), generation, bench_top, [str(p) for p in sources],
                               _source_digest(sources))).encode()).hexdigest()[:16]
    root = Path(build_root) if build_root is not None else _default_build_root()
    out_dir = root / key
    image = out_dir / "bench.vvp"
    if image.is_file():
        return image
    out_dir.mkdir(parents=True, exist_ok=True)
    tmp = out_dir / f"bench.{os.getpid()}.tmp"
    cmd = [iverilog, f"-g{generation}", "-o", str(tmp), "-s", bench_top]
    cmd += [f"-P{bench_top}.{name}={value}" for name, value in all_params.items()]
    cmd += [str(src) for src in sources]
    proc = subprocess.run(cmd, capture_output=True, text=True)
    output = proc.stdout + proc.stderr
    if proc.returncode != 0 or not tmp.is_file():
        tmp.unlink(missing_ok=True)
        m = _PARAM_ERROR.search(output)
        if m:
            msg = f"illegal parameter combination for {m.group(1)}: {m.group(2).replace('_', ' ')}"
        else:
            msg = "iverilog failed to compile the testbench"
        raise BenchCompileError(f"{msg}\n{output.strip()}", output)
    os.replace(tmp, image)
    (out_dir / "command.txt").write_text(" ".join(cmd) + "\n", encoding="utf-8")
    return image


def run_bench(spec: BlockSpec | Mapping[str, int], folder: str | Path, *,
              stimulus: str = STIMULUS_FILE, expected: str = EXPECTED_FILE,
              received: str | Path | None = None, gap_percent: int = 0, stall_percent: int = 0,
              seed: int = 1, dump: str | Path | None = None, generation: str = "2005",
              build_root: str | Path | None = None, timeout_cycles: int = 0,
              core_sources: Sequence[str | Path] | None = None,
              bench_source: str | Path | None = None, sink: str = "independent",
              max_reports: int = 10, watchdog_cycles: int = 0, reset_at: int | None = None) -> BenchResult:
    """Run the pure-Verilog testbench on a folder of stimulus and expected hex files.

    Parameters
    ----------
    spec : BlockSpec or mapping of str to int
        The block spec (mapped by :func:`~hdl_tb.core_params.core_parameters`)
        or the core parameters themselves.
    folder : path
        Folder holding the two hex files.
    stimulus, expected : str, optional
        File names inside ``folder`` (stimulus words as
        :func:`refmodel.fixedpoint.word_format.pack_input`, expected words as
        :func:`refmodel.fixedpoint.word_format.pack_output`, one hex word per line).
    received : path, optional
        Where the bench writes the received words (default:
        ``received.hex`` in the compiled image's folder, overwritten by the
        next run of the same parameters).
    gap_percent, stall_percent : int, optional
        Percent of cycles with the input held back (``s_axis_tvalid`` low)
        and with the output not ready (``m_axis_tready`` low), 0..95.
    seed : int, optional
        Seed of the bench's ``$random`` sequences.
    dump : path, optional
        Write a VCD waveform to this file.
    generation : {"2005", "2012"}, optional
        ``iverilog -g`` flag.
    build_root : path, optional
        See :func:`compile_bench`.
    timeout_cycles : int, optional
        Cycles before the bench gives up; 0 = its automatic bound.
    core_sources, bench_source : optional
        See :func:`compile_bench`.
    sink : {"independent", "waits-for-valid"}, optional
        ``"independent"``: ``m_axis_tready`` is drawn every cycle
        (``stall_percent`` low) without looking at ``m_axis_tvalid``.
        ``"waits-for-valid"``: it is raised, after the same stall draw, only
        for a word seen waiting, and falls after each transfer; the drain and
        latency checks are then off (the pipeline waits for the sink), and a
        run in which no word is offered and nothing moves for
        ``watchdog_cycles`` fails as a deadlock.
    max_reports : int, optional
        Error lines the bench prints in full; every error is counted.
    watchdog_cycles : int, optional
        Deadlock bound of the waiting sink; 0 = the bench's automatic bound.
    reset_at : int, optional
        Map blocks only: pulse the reset after the input transfer of this stimulus word (a
        mid-map reset); the bench then expects the words from the next map on.

    Returns
    -------
    BenchResult

    Raises
    ------
    SpecError
        Missing simulator, unsupported spec (see ``core_parameters``), a
        missing hex file, percentages out of range, an unknown sink mode, a
        negative report count or watchdog bound.
    BenchCompileError
        When the bench does not compile.
    RuntimeError
        When the simulation ends without its summary line.
    """
    params = dict(spec) if isinstance(spec, Mapping) else core_parameters(spec)
    is_map = "RANGE_CELLS" in params
    if reset_at is not None and not (is_map and isinstance(reset_at, int) and not isinstance(reset_at, bool)
                                     and 0 <= reset_at < 2**31):
        raise SpecError("reset_at", f"got {reset_at!r}", "an integer >= 0, for a map block")
    for name, pct in (("gap_percent", gap_percent), ("stall_percent", stall_percent)):
        if not (isinstance(pct, int) and 0 <= pct <= 95):
            raise SpecError(name, f"got {pct!r}", "an integer 0..95")
    if sink not in SINK_MODES:
        raise SpecError("sink", f"got {sink!r}", " or ".join(f'"{m}"' for m in SINK_MODES))
    for name, value in (("max_reports", max_reports), ("watchdog_cycles", watchdog_cycles)):
        if not (isinstance(value, int) and not isinstance(value, bool) and 0 <= value < 2**31):
            raise SpecError(name, f"got {value!r}", "an integer 0..2147483647")
    folder = Path(folder)
    stim_path, exp_path = folder / stimulus, folder / expected
    for what, path in (("stimulus", stim_path), ("expected", exp_path)):
        if not path.is_file():
            raise SpecError(what, f"no file {str(path)!r}", "an existing hex file")
    n_stim = count_hex_words(stim_path)
    n_exp = count_hex_words(exp_path)
    # The bench is told the word count (it does not look for unwritten x entries: Verilator has none).
    if n_stim is None or n_exp is None:
        raise SpecError("stimulus", "a hex file with @address jumps", "one word per line, no @address")
    max_words = 1 << max(0, (max(n_stim, n_exp, 1) - 1).bit_length())
    image = compile_bench(params, max_words=max_words, generation=generation, build_root=build_root,
                          core_sources=core_sources, bench_source=bench_source)
    _, vvp = find_tools()
    received_path = Path(received) if received is not None else image.parent / RECEIVED_FILE
    args = [vvp, "-n", str(image),
            f"+STIM_FILE={stim_path.resolve()}", f"+EXPECT_FILE={exp_path.resolve()}",
            f"+OUT_FILE={received_path.resolve()}", f"+GAP_PERCENT={gap_percent}",
            f"+STALL_PERCENT={stall_percent}", f"+SEED={int(seed)}", f"+TIMEOUT_CYCLES={int(timeout_cycles)}",
            f"+SINK_WAITS_FOR_VALID={int(sink == 'waits-for-valid')}", f"+MAX_REPORTS={max_reports}",
            f"+WATCHDOG_CYCLES={watchdog_cycles}"]
    args += [f"+N_WORDS={n_stim}", f"+N_EXPECT={n_exp}"]
    if reset_at is not None:
        args.append(f"+RESET_AT={reset_at}")
    if dump is not None:
        args += ["+DUMP", f"+DUMP_FILE={Path(dump).resolve()}"]
    proc = subprocess.run(args, capture_output=True, text=True, cwd=image.parent)
    log = proc.stdout + proc.stderr
    found = _SUMMARY.findall(log)
    if not found:
        raise RuntimeError(f"the testbench ended without a summary line (exit code {proc.returncode}):\n"
                           + log[-4000:])
    verdict, count, first = found[-1]
    if verdict == "PASS":
        return BenchResult(True, int(count), 0, None, received_path, log)
    n_received = count_hex_words(received_path) if received_path.is_file() else 0
    return BenchResult(False, n_received or 0, int(count), first or None, received_path, log)
