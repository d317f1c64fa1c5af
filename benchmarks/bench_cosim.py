"""Co-simulation speed: the two cocotb benches against the pure-Verilog testbench.

One vector set of 200,000 samples (INVENTED SCENARIO, benchmark data, not a
real system: a CA detector with 16 reference and 2 guard cells a side,
16-bit samples, 512-cell frames and random frames) is generated once; the
reference core is then run on it with Icarus Verilog, in this process and
with the same input gaps (20 %), output backpressure (30 %) and seed, by

- the pure-Verilog self-checking testbench (``iverilog`` + ``vvp``);
- the bulk cocotb bench (Verilog-side driver, comparison at the end);
- the interactive cocotb bench (cocotbext-axi source and sink, word-by-word checks).

The pure-Verilog and bulk runs alternate, twice each, and the faster run of
each counts (the machines are shared and noisy); the interactive run, much
longer, runs once between them.

Building is not timed. The headline rates are samples per second of the
whole simulator run, start-up included (what a user waits for); the rates of
the streaming alone (from the release of reset to the last word, measured
inside the simulation) are printed too.

Then the OS core (rank 24 of 32 reference cells, otherwise the same spec)
runs in the pure-Verilog bench on its own vector set of the same length,
twice, alternating with the CA runs above; the faster run counts, and
``cosim_verilog_os_over_ca`` is its rate over the CA pure-Verilog rate of the
same process (target 0.3, issue 12).

Output: JSON lines ``{"metric", "value", "unit", "target", "better"}``.
"""

from __future__ import annotations

import json
import shutil
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from hdl_tb.cosim import run_folder  # noqa: E402
from hdl_tb.tb_generator import write_testbench  # noqa: E402
from refmodel.block_spec import spec_from_dict  # noqa: E402

SAMPLES = 200_000
SPEC = {
    "detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 17.28,
                 "edge": "zero-pad"},
    "fixed": {"input_bits": 16, "rounding": "half-up", "overflow": "saturate"},
    "stream": {"frame_length": 512, "pipeline_stages": 2},
    "vectors": {"seed": 2026, "scenario_frames": 8, "random_frames": 16, "random_length_max": 1024},
}


#: The OS core at R = 16: rank 24 of 2R = 32 (INVENTED SCENARIO, benchmark data).
OS_SPEC = {**SPEC, "detector": {**SPEC["detector"], "kind": "os", "rank": 24, "alpha": 5.0}}


def emit(metric: str, value: float, unit: str, target: float | None, better: str) -> None:
    print(json.dumps({"metric": metric, "value": round(value, 4), "unit": unit, "target": target,
                      "better": better}), flush=True)


def main() -> int:
    spec = spec_from_dict(SPEC)
    work = Path(tempfile.mkdtemp(prefix="cfarvec-bench-cosim-"))
    try:
        folder = work / "bench"
        write_testbench(spec, folder, samples=SAMPLES, gap_percent=20, stall_percent=30)
        runs: dict[str, list] = {"verilog": [], "bulk": [], "interactive": []}
        for mode in ("verilog", "bulk", "interactive", "verilog", "bulk"):
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
        emit("cosim_interactive_over_verilog", inter / verilog, "ratio", 0.25, "higher")
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
        return 0
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    raise SystemExit(main())
