"""Co-simulation of a user's VHDL core on GHDL (issue 16, items 2 and 4).

``tests/vhdl/ca_line_cfar.vhd`` is a small cell-averaging core written by
hand in VHDL-2008 for these tests (its own structure, port names, reset
level and word layout; not a translation of the Verilog reference core).
The outside reference is the vector set: expected words from the project's
bit-accurate model, which follows ``docs/bit-true.md`` and is checked
against the float model, scipy and the published formulas elsewhere
(``tests/test_pipeline_*.py``). Every VHDL mode must pass on the core and
fail on each seeded bug (a copy of the core with one change, common
practice of mutation testing, no source). Runs are kept short (about 1,500
samples); ``CFARVEC_LONG=1`` streams the whole vector set.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

from cfarvec import cli
from hdl_tb.cosim import cosim
from refmodel.block_spec import load_spec

ROOT = Path(__file__).resolve().parents[1]
SPEC = ROOT / "tests" / "vhdl" / "ca_line.toml"
CORE = ROOT / "tests" / "vhdl" / "ca_line_cfar.vhd"
SAMPLES = None if os.environ.get("CFARVEC_LONG") == "1" else 1500

pytestmark = pytest.mark.skipif(shutil.which("ghdl") is None, reason="needs GHDL (make tools)")

#: Seeded bugs: name -> (text of the core, its replacement).
MUTANTS = {
    "lag_side_shifted": ("win(W - 1 - k).value", "win(W - 2 - k).value"),
    "no_rounding": ("+ 2 ** (G_DROP - 1)) / 2 ** G_DROP", "+ 0) / 2 ** G_DROP"),
    "valid_late_by_one": ("lag_ok := n >= H;", "lag_ok := n > H;"),
    "drain_short": ("drain <= H;", "drain <= H - 1;"),
    "ignores_tready": ("step_ok    <= '1' when out_valid = '0' or Dout_Ready = '1' else '0';", "step_ok    <= '1';"),
    "compare_strict": ("det := cut.value * 2 ** G_TFRAC >= t_out;", "det := cut.value * 2 ** G_TFRAC > t_out;"),
}


def mutant(tmp_path: Path, name: str) -> Path:
    old, new = MUTANTS[name]
    text = CORE.read_text()
    assert text.count(old) == 1, name
    path = tmp_path / f"{name}.vhd"
    path.write_text(text.replace(old, new))
    return path


@pytest.fixture(scope="module")
def spec():
    return load_spec(SPEC)


@pytest.mark.parametrize("mode,sink", [("vhdl", "independent"), ("bulk", "independent"),
                                       ("interactive", "independent"), ("vhdl", "waits-for-valid"),
                                       ("bulk", "waits-for-valid")])
def test_the_vhdl_core_matches_the_vectors_in_every_mode(spec, mode, sink):
    result = cosim(spec, rtl=[CORE], mode=mode, simulator="ghdl", samples=SAMPLES, sink=sink)
    assert result.passed, (result.problems, result.first_mismatch)
    assert result.words_compared == result.words_expected > 0
    assert result.mismatches == result.missing_words == result.extra_words == 0


@pytest.mark.parametrize("name", sorted(MUTANTS))
def test_each_seeded_bug_is_caught_by_the_pure_vhdl_bench(spec, tmp_path, name):
    result = cosim(spec, rtl=[mutant(tmp_path, name)], mode="vhdl", simulator="ghdl", samples=SAMPLES,
                   keep_on_failure=False)
    assert not result.passed, name
    assert result.problems


def test_a_seeded_bug_fails_the_cocotb_bench_with_the_mismatch_report(tmp_path, capsys):
    # The "done when" of issue 16: cfarvec cosim ... --simulator ghdl passes on a correct core, fails with the
    # mismatch report on a broken one.
    top = ["--top", "ca_line_cfar", "--simulator", "ghdl", "--samples", str(SAMPLES or 20000)]
    assert cli.main(["cosim", str(SPEC), "--rtl", str(CORE), *top]) == 0
    assert capsys.readouterr().out.startswith("PASS  bulk co-simulation of ca_line_cfar on GHDL")
    broken = mutant(tmp_path, "valid_late_by_one")
    assert cli.main(["cosim", str(SPEC), "--rtl", str(broken), *top, "--keep", str(tmp_path / "kept")]) == 1
    out = capsys.readouterr().out
    assert out.startswith("FAIL  bulk co-simulation of ca_line_cfar on GHDL")
    assert "mismatches (first" in out and "per field" in out and "rerun failing" in out
    assert "--simulator ghdl" in out


def test_the_folder_runs_its_benches_with_make(spec, tmp_path):
    if shutil.which("make") is None:
        pytest.skip("needs make")
    from hdl_tb.tb_generator import write_testbench

    folder = tmp_path / "tb"
    bench = write_testbench(spec, folder, rtl=[CORE], simulator="ghdl", samples=SAMPLES)
    assert bench.ports_checked and bench.config["language"] == "vhdl"
    for name in ("cfarvec_bench_pkg.vhd", "cfarvec_port_adapter.vhd", "cfarvec_bulk_top.vhd", "cfarvec_vhdl_tb.vhd"):
        assert (folder / "bench" / name).is_file()
    proc = subprocess.run(["make", "-s", "vhdl"], cwd=folder, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert f"PASS {bench.config['words']}" in proc.stdout
    # The folder's own pytest runner (cocotb_tools.runner for GHDL), as `make bulk` starts it.
    proc = subprocess.run(["make", "-s", "bulk"], cwd=folder, capture_output=True, text=True, timeout=600)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "1 passed" in proc.stdout


def test_a_regression_runs_the_vhdl_modes_on_ghdl(tmp_path, capsys):
    import xml.etree.ElementTree as ET

    out = tmp_path / "reg"
    code = cli.main(["regression", str(SPEC), "--rtl", str(CORE), "--simulators", "ghdl", "--modes",
                     "bulk,vhdl", "--seeds", "1,2", "--samples", "800", "-o", str(out)])
    text = capsys.readouterr().out
    assert code == 0, text
    names = sorted(c.get("name") for c in ET.parse(out / "junit.xml").getroot().iter("testcase"))
    assert names == ["bulk[ghdl,seed=1]", "bulk[ghdl,seed=2]", "vhdl[ghdl,seed=1]", "vhdl[ghdl,seed=2]"]


@pytest.mark.parametrize("mode", ["vhdl", "interactive"])
def test_words_whose_width_is_not_a_multiple_of_four(tmp_path, mode):
    # 11-bit samples: the output word is not a whole number of hex digits, so the driver's hex reads and
    # writes pad it (IEEE Std 1076-2008, 16.4 HREAD/HWRITE via to_hstring); the interactive reader expects
    # lines of exactly ceil(bits / 4) digits.
    text = SPEC.read_text().replace("input_bits = 12", "input_bits = 11")
    draft = tmp_path / "draft.toml"
    draft.write_text(text.replace("cut = 20", "cut = 40"))
    t_bits = load_spec(draft).threshold_bits
    spec_file = tmp_path / "spec.toml"
    spec_file.write_text(text.replace("cut = 20", f"cut = {3 + t_bits}"))
    spec = load_spec(spec_file)
    assert spec.output_bits % 4 != 0
    result = cosim(spec, rtl=[CORE], mode=mode, simulator="ghdl", samples=SAMPLES)
    assert result.passed, (result.problems, result.first_mismatch)
