"""The whole cfarvec flow on the bundled example (an invented harbour radar).

Run with ``make demo``. Writes ``demo_out/``:

- ``vectors/``   golden vector set with its manifest (``cfarvec vectors``)
- ``testbench/`` the generated testbench folder the co-simulation ran in
- ``frame.png``  one scenario frame: samples, float and fixed thresholds, detections
- ``study/``     quantisation study of the example's word widths (CSV, plots, summary.md)

Steps: threshold design with the fixed-point report (``cfarvec design
--spec``), vectors, their self-check (``cfarvec check``), co-simulation of
the reference Verilog core against the vectors, the plot, and the
quantisation study (``cfarvec study``).
"""

from __future__ import annotations

import sys
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from cfarvec.cli import main as cfarvec  # noqa: E402
from refmodel.block_spec import load_spec  # noqa: E402
from refmodel.floatmodel.float_cfar import cfar_1d  # noqa: E402
from refmodel.fixedpoint.word_format import unpack_input, unpack_output  # noqa: E402
from vectors.manifest import read_manifest  # noqa: E402
from vectors.writers import parse_fixed  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
SPEC = ROOT / "examples" / "harbour_ca.toml"
OUT = ROOT / "demo_out"


def step(title: str, argv: list[str], ok_codes=(0,)) -> None:
    print(f"\n=== {title}: cfarvec {' '.join(argv)}", flush=True)
    code = cfarvec(argv)
    if code not in ok_codes:
        sys.exit(f"demo: step '{title}' failed with exit code {code}")


def read_words(folder: Path, name: str, bits: int) -> np.ndarray:
    return parse_fixed((folder / name).read_bytes(), "hex", bits)


def plot_frame(spec_path: Path, folder: Path, png: Path) -> int:
    """Plot the first scenario frame of the set; return its detection count."""
    spec = load_spec(spec_path)
    manifest = read_manifest(folder)
    files = {f["name"]: f for f in manifest["files"]}
    samples, last = unpack_input(spec, read_words(folder, "stimulus.hex", files["stimulus.hex"]["word_bits"]))
    out = unpack_output(spec, read_words(folder, "expected.hex", files["expected.hex"]["word_bits"]))
    scen = next(s for s in manifest["sources"] if s["name"] == "scenario")
    start = scen["first_line"] - 1
    sl = slice(start, start + spec.frame_length)
    x = samples[sl]
    assert last[sl][-1], "scenario frame boundary"
    flt = cfar_1d(x.astype(float), spec.kind, spec.ref_per_side, spec.guard_per_side, spec.alpha,
                  rank=spec.rank, compare=spec.compare, edge=spec.edge)
    t_fixed = out.threshold[sl] / 2.0 ** spec.threshold_frac_bits
    det = out.det[sl]
    cells = np.arange(len(x))
    fig, ax = plt.subplots(figsize=(10, 4.5))
    ax.semilogy(cells, np.maximum(x, 0.5), color="0.55", lw=0.8, label="samples (CUT power)")
    ax.semilogy(cells, np.maximum(flt.threshold, 0.5), color="tab:blue", lw=1.4, label="float threshold")
    ax.step(cells, np.maximum(t_fixed, 0.5), where="mid", color="tab:orange", lw=1.0, ls="--",
            label="fixed-point threshold")
    ax.semilogy(cells[det], np.maximum(x[det], 0.5), "v", color="tab:red", ms=7, label="detections (fixed)")
    ax.set_xlabel("range cell")
    ax.set_ylabel("power (input LSB)")
    ax.set_title(f"Invented scenario, one range line: {spec.kind.upper()}-CFAR, R={spec.ref_per_side}, "
                 f"G={spec.guard_per_side}, Pfa={spec.design_pfa:g}")
    ax.legend(loc="upper right", fontsize=8)
    ax.grid(True, which="both", alpha=0.3)
    fig.tight_layout()
    fig.savefig(png, dpi=110)
    plt.close(fig)
    return int(det.sum())


def main() -> int:
    OUT.mkdir(exist_ok=True)
    vec = OUT / "vectors"
    print("cfarvec demo on an invented scenario (examples/harbour_ca.toml)")
    step("threshold design", ["design", "--spec", str(SPEC)])
    step("golden vectors", ["vectors", str(SPEC), "-o", str(vec), "--force"])
    step("self-check of the set", ["check", str(vec)])
    step("co-simulation of the reference core (cocotb bulk bench, Icarus Verilog, gaps and backpressure)",
         ["cosim", str(SPEC), "--mode", "bulk", "--keep", str(OUT / "testbench"), "--force"])
    n = plot_frame(SPEC, vec, OUT / "frame.png")
    print(f"\n=== plot: {OUT / 'frame.png'} ({n} detections on the plotted frame)")
    step("quantisation study (what each word width costs)",
         ["study", str(SPEC), "-o", str(OUT / "study"), "--force", "--no-progress"])
    print("demo finished")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
