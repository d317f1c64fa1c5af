"""Co-simulation speed: the benches on Icarus Verilog and on Verilator.

One vector set of 200,000 samples (INVENTED SCENARIO, benchmark data, not a
real system: a CA detector with 16 reference and 2 guard cells a side,
16-bit samples, 512-cell frames and random frames) is generated once; the
reference core is then run on it with Icarus Verilog, in this process and
with the same input gaps (20 %), output backpressure (30 %) and seed, by

- the pure-Verilog self-checking testbench (``iverilog`` + ``vvp``);
- the bulk cocotb bench (Verilog-side driver, comparison at the end);
- the interactive cocotb bench (Python feeds frame batches, checks each output frame as it arrives).

The three alternate, twice each, and the faster run of each counts (the
machines are shared and noisy).

Building is not timed there. The headline rates are samples per second of
the whole simulator run, start-up included (what a user waits for); the rates
of the streaming alone (from the release of reset to the last word, measured
inside the simulation) are printed too.

Then, on the same vector set and settings:

- the pure-Verilog bench with its gap and stall draws made in the simulator
  (xorshift32) against the same bench reading the precomputed pattern files
  (both on Icarus);
- the pure-Verilog bench on Verilator against Icarus (simulator run, build
  excluded; two more runs of each, alternating, the fastest of each counts;
  target >= 10).

Then the bulk cocotb bench at regression scale: one parameter set streamed
over ``REGRESSION_SAMPLES`` (5,000,000) samples, as a regression streams many
words per parameter set (say 25 seeds of 200,000 words on one build,
``hdl_tb.shared_build``), on Icarus and on Verilator, each for the whole
process: a fresh build of the bench, the simulator's start-up, the stream and
the comparison (target >= 3). Verilator's build is measured twice:

- cold: an empty ccache folder, so Verilator's and cocotb's C++ run-time
  library is compiled too (what the first build on a machine costs;
  ``cosim_bulk_verilator_over_icarus_with_build``);
- with the run-time library cached: the ccache folder primed by a build of
  another parameter set (the OS core below), so only this design's model is
  compiled (every later build of a regression;
  ``cosim_bulk_verilator_over_icarus_with_cached_runtime``).

At the 200,000 samples of the other figures a fresh Verilator build is most
of the time (the ratio with a cold build was about 0.2 there): Verilator pays
off from roughly a million words per build.

Then the OS core (rank 24 of 32 reference cells, otherwise the same spec)
runs in the pure-Verilog bench on its own vector set of the same length,
twice, alternating with the CA runs above; the faster run counts, and
``cosim_verilog_os_over_ca`` is its rate over the CA pure-Verilog rate of the
same process (target 0.3, issue 12).

Output: JSON lines ``{"metric", "value", "unit", "target", "better"}``.
"""

from __future__ import annotations

import functools
import os
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

import subprocess  # noqa: E402
import time  # noqa: E402

from measure import emit as _emit  # noqa: E402

emit = functools.partial(_emit, digits=4)
from hdl_tb.cosim import build_dir, run_folder  # noqa: E402
from hdl_tb.simulators import find_simulator  # noqa: E402
from hdl_tb.tb_generator import read_config  # noqa: E402
from hdl_tb.tb_generator import write_testbench  # noqa: E402
from refmodel.block_spec import spec_from_dict  # noqa: E402

SAMPLES = 200_000
#: Samples of the regression-scale bulk comparison (one parameter set, one build per simulator).
REGRESSION_SAMPLES = 5_000_000
SPEC = {
    "detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 17.28,
                 "edge": "zero-pad"},
    "fixed": {"input_bits": 16, "rounding": "half-up", "overflow": "saturate"},
    "stream": {"frame_length": 512, "pipeline_stages": 2},
    "vectors": {"seed": 2026, "scenario_frames": 8, "random_frames": 16, "random_length_max": 1024},
}


#: The OS core at R = 16: rank 24 of 2R = 32 (INVENTED SCENARIO, benchmark data).
OS_SPEC = {**SPEC, "detector": {**SPEC["detector"], "kind": "os", "rank": 24, "alpha": 5.0}}


def main() -> int:
    spec = spec_from_dict(SPEC)
    work = Path(tempfile.mkdtemp(prefix="cfarvec-bench-cosim-"))
    try:
        folder = work / "bench"
        write_testbench(spec, folder, samples=SAMPLES, gap_percent=20, stall_percent=30)
        runs: dict[str, list] = {"verilog": [], "bulk": [], "interactive": []}
        for mode in ("verilog", "bulk", "interactive") * 2:
            r = run_folder(folder, mode, samples=SAMPLES)
            if not r.passed:
                print(f"{mode} run failed: {r.problems}", file=sys.stderr)
                return 1
            runs[mode].append(r)
        best = {mode: min(rs, key=lambda r: r.sim_seconds) for mode, rs in runs.items()}
        words = best["bulk"].words_expected
        verilog = best["verilog"].samples_per_second
        bulk = best["bulk"].samples_per_second
        inter = best["interactive"].samples_per_second
        emit("cosim_verilog_samples_per_s", verilog, "samples/s", None, "higher")
        emit("cosim_bulk_samples_per_s", bulk, "samples/s", None, "higher")
        emit("cosim_interactive_samples_per_s", inter, "samples/s", None, "higher")
        emit("cosim_bulk_stream_samples_per_s", words / best["bulk"].stream_seconds, "samples/s", None, "higher")
        emit("cosim_interactive_stream_samples_per_s", words / best["interactive"].stream_seconds, "samples/s",
             None, "higher")
        emit("cosim_bulk_over_verilog", bulk / verilog, "ratio", 0.8, "higher")
        emit("cosim_interactive_over_verilog", inter / verilog, "ratio", 0.5, "higher")
        emit("cosim_verilog_patterns_over_draws", _draws_seconds(folder, best["verilog"]) /
             best["verilog"].sim_seconds, "ratio", 1.2, "higher")
        os_folder = work / "bench-os"
        write_testbench(spec_from_dict(OS_SPEC), os_folder, samples=SAMPLES, gap_percent=20, stall_percent=30)
        os_runs, ca_runs = [], [best["verilog"]]
        for _ in range(2):
            for target, folder_ in ((os_runs, os_folder), (ca_runs, folder)):
                r = run_folder(folder_, "verilog", samples=SAMPLES)
                if not r.passed:
                    print(f"verilog run failed: {r.problems}", file=sys.stderr)
                    return 1
                target.append(r)
        os_rate = max(r.samples_per_second for r in os_runs)
        ca_rate = max(r.samples_per_second for r in ca_runs)
        emit("cosim_verilog_os_samples_per_s", os_rate, "samples/s", None, "higher")
        emit("cosim_verilog_os_over_ca", os_rate / ca_rate, "ratio", 0.3, "higher")
        try:
            find_simulator("verilator")
        except Exception as exc:  # noqa: BLE001 - a benchmark reports what it cannot measure
            print(f"Verilator not available, its figures are skipped: {exc}", file=sys.stderr)
            return 0
        fast, slow = [], [best["verilog"]]
        for _ in range(2):  # alternating, so that both see the same load of the shared machine
            slow.append(run_folder(folder, "verilog", samples=SAMPLES))
            fast.append(run_folder(folder, "verilog", samples=SAMPLES, simulator="verilator"))
        if not all(r.passed for r in fast + slow):
            print(f"verilog run failed: {[r.problems for r in fast + slow if not r.passed][0]}", file=sys.stderr)
            return 1
        v_best = min(fast, key=lambda r: r.sim_seconds)
        i_best = min(slow, key=lambda r: r.sim_seconds)
        emit("cosim_verilog_verilator_samples_per_s", v_best.samples_per_second, "samples/s", None, "higher")
        emit("cosim_verilog_verilator_over_icarus", i_best.sim_seconds / v_best.sim_seconds, "ratio", 10, "higher")
        _regression_scale(spec, os_folder, work)
        return 0
    finally:
        shutil.rmtree(work, ignore_errors=True)


def _regression_scale(spec, os_folder: Path, work: Path) -> None:
    """The bulk bench on Icarus and on Verilator over REGRESSION_SAMPLES samples, whole process, build included."""
    big = work / "bench-regression"
    write_testbench(spec, big, samples=REGRESSION_SAMPLES, gap_percent=20, stall_percent=30)
    config = read_config(big)
    have_ccache = shutil.which("ccache") is not None
    if not have_ccache:
        print("ccache is not installed (`make tools`): both Verilator builds compile everything", file=sys.stderr)
    saved = os.environ.get("CCACHE_DIR")
    try:
        whole = {}
        for label, sim in (("icarus", "icarus"), ("cold", "verilator"), ("cached", "verilator")):
            os.environ["CCACHE_DIR"] = str(work / f"ccache-{label}")  # a cache of its own, empty
            if label == "cached":  # primed by another parameter set: only the run-time library is found there
                run_folder(os_folder, "bulk", samples=2000, simulator="verilator")
            shutil.rmtree(build_dir(big, config, "bulk", False, sim), ignore_errors=True)
            t0 = time.perf_counter()
            r = run_folder(big, "bulk", simulator=sim)
            whole[label] = (time.perf_counter() - t0, r)
            if not r.passed:
                raise RuntimeError(f"bulk run on {sim} failed: {r.problems}")
    finally:
        if saved is None:
            os.environ.pop("CCACHE_DIR", None)
        else:
            os.environ["CCACHE_DIR"] = saved
    icarus, cold, cached = (whole[k][0] for k in ("icarus", "cold", "cached"))
    emit("cosim_bulk_regression_words", whole["icarus"][1].words_expected, "words", None, "higher")
    emit("cosim_bulk_icarus_whole_process_s", icarus, "s", None, "lower")
    emit("cosim_bulk_verilator_whole_process_s", cold, "s", None, "lower")
    emit("cosim_bulk_verilator_cached_runtime_whole_process_s", cached, "s", None, "lower")
    emit("cosim_bulk_verilator_over_icarus_with_build", icarus / cold, "ratio", 3, "higher")
    emit("cosim_bulk_verilator_over_icarus_with_cached_runtime", icarus / cached, "ratio", 3, "higher")
    emit("cosim_bulk_verilator_over_icarus_without_build",
         whole["icarus"][1].sim_seconds / min(whole["cold"][1].sim_seconds, whole["cached"][1].sim_seconds),
         "ratio", 3, "higher")


def _draws_seconds(folder: Path, run) -> float:
    """The same pure-Verilog run with the gap and stall draws made in the simulator (no pattern files)."""
    args = ["vvp", "-n", "bench.vvp"]
    rel = Path("..") / ".."
    config = read_config(folder)
    args += [f"+STIM_FILE={rel / config['stimulus']}", f"+EXPECT_FILE={rel / config['expected']}",
             "+OUT_FILE=received-draws.hex", f"+GAP_PERCENT={run.gap_percent}",
             f"+STALL_PERCENT={run.stall_percent}", f"+SEED={run.seed}", f"+N_WORDS={run.words_expected}"]
    best = float("inf")
    for _ in range(2):
        t0 = time.perf_counter()
        proc = subprocess.run(args, capture_output=True, text=True, cwd=run.build_dir)
        best = min(best, time.perf_counter() - t0)
        if "PASS" not in proc.stdout:
            raise RuntimeError(f"the run with in-simulator draws failed: {proc.stdout[-500:]}")
    return best


if __name__ == "__main__":
    raise SystemExit(main())
