"""``cfarvec regression``: specs x seeds x simulators x modes, one JUnit file, reproducible runs.

Checked against the outside:

- JUnit XML as CI servers read it (Apache Ant layout; common practice, no
  source): one ``testcase`` per run with ``classname`` and ``name``, a
  ``failure`` child for a failing run, the counts on ``testsuite``.
- A seeded bug (one guard cell too many, see tests/test_cosim_reports.py)
  must fail its runs and be explained, on both simulators; the printed
  command must reproduce the same result.
- Shared builds (``docs/testbench.md``, "Regressions"): seeds are run-time
  inputs, so every parameter set is built once per simulator and bench;
  counted from the builds' log and the runs' summaries, never timed.

The example specs are invented scenarios; sizes are small for CI. With
``CFARVEC_LONG=1`` the example specs also run over 3 seeds, both simulators
and every mode on their whole vector sets.
"""

from __future__ import annotations

import json
import os
import shlex
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from cfarvec.cli import main
from hdl_tb.core_params import CORE_SOURCES
from hdl_tb.simulators import verilator_root
from refmodel.errors import SpecError

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
# The example specs the reference core builds (channel_os.toml is an order-statistic detector).
SPECS = [EXAMPLES / "harbour_ca.toml", EXAMPLES / "breakwater_go.toml"]
# Every 1D example spec (lagoon_map_ca.toml is a map block, which has no RTL core yet).
EXAMPLES_1D = [EXAMPLES / "harbour_ca.toml", EXAMPLES / "breakwater_go.toml", EXAMPLES / "channel_os.toml"]
LONG = bool(os.environ.get("CFARVEC_LONG"))


def _have_verilator() -> bool:
    try:
        verilator_root()
    except SpecError:
        return False
    return shutil.which("g++") is not None and shutil.which("make") is not None


needs_verilator = pytest.mark.skipif(not _have_verilator(), reason="Verilator (the verilator package), g++ or make "
                                     "is missing")


def _cases(junit: Path) -> list[ET.Element]:
    return list(ET.parse(junit).getroot().iter("testcase"))


def test_regression_over_the_example_specs(tmp_path, capsys):
    out = tmp_path / "reg"
    code = main(["regression", *map(str, SPECS), "--seeds", "1:2", "--modes", "verilog,bulk", "--samples", "400",
                 "-j", "2", "-o", str(out)])
    printed = capsys.readouterr().out
    assert code == 0, printed
    assert "8 of 8 runs passed" in printed
    cases = _cases(out / "junit.xml")
    names = sorted((c.get("classname"), c.get("name")) for c in cases)
    assert names == sorted((f"cfarvec.{s.stem}", f"{m}[icarus,seed={seed}]") for s in SPECS
                           for m in ("verilog", "bulk") for seed in (1, 2))
    assert not any(c.find("failure") is not None for c in cases)
    suite = next(ET.parse(out / "junit.xml").getroot().iter("testsuite"))
    assert (suite.get("tests"), suite.get("failures"), suite.get("errors")) == ("8", "0", "0")
    assert not [p for p in out.iterdir() if p.is_dir()]  # passing runs leave no folder


def test_a_failing_run_is_reported_and_reproducible(tmp_path, capsys):
    from test_cosim_reports import _core, _spec_data, _write_toml

    spec = _write_toml(tmp_path / "seeded.toml", _spec_data("seeded_core"))
    rtl = [str(f) for f in _core(tmp_path, guard=1)]
    plan = tmp_path / "plan.toml"
    plan.write_text(f"specs = [{json.dumps(str(spec))}]\nseeds = [3]\nmodes = [\"verilog\"]\nsamples = 600\n"
                    f"rtl = {json.dumps(rtl)}\n", encoding="utf-8")
    out = tmp_path / "reg"
    assert main(["regression", "--plan", str(plan), "-o", str(out), "--junit", str(tmp_path / "j.xml")]) == 1
    printed = capsys.readouterr().out
    assert "0 of 1 runs passed" in printed and "window off by one cell" in printed
    (case,) = _cases(tmp_path / "j.xml")
    assert (case.get("classname"), case.get("name")) == ("cfarvec.seeded", "verilog[icarus,seed=3]")
    failure = case.find("failure")
    assert failure is not None and "window off by one cell: 3 guard cells per side" in failure.text
    command = next(line for line in failure.text.splitlines() if line.startswith("reproduce: "))
    argv = shlex.split(command[len("reproduce: "):])[1:]
    assert "--seed" in argv and "3" in argv
    folder = next(line for line in failure.text.splitlines() if line.startswith("folder: ")).split(": ", 1)[1]
    assert Path(folder).is_dir()  # kept on failure
    summary = json.loads(next(Path(folder).glob("sim_build/verilog-*/cfarvec_summary.json")).read_text())
    assert main(argv + ["--json"]) == 1
    again = json.loads(capsys.readouterr().out)
    assert again["mismatches"] == summary["mismatches"] > 0 and again["seed"] == summary["seed"] == 3
    assert again["report"]["table"] == summary["report"]["table"]
    shutil.rmtree(Path(again["folder"]).parent, ignore_errors=True)
    assert CORE_SOURCES[0].name in " ".join(rtl)


def test_bad_plan_input_is_one_line(tmp_path, capsys):
    plan = tmp_path / "plan.toml"
    plan.write_text('specs = ["x.toml"]\nspeed = 3\n', encoding="utf-8")
    assert main(["regression", "--plan", str(plan), "-o", str(tmp_path / "r")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("cfarvec regression: error: speed") and err.count("\n") == 1
    assert main(["regression", str(SPECS[0]), "--modes", "fast", "-o", str(tmp_path / "r")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("cfarvec regression: error: --modes") and err.count("\n") == 1


def test_each_parameter_set_is_built_once(tmp_path, capsys):
    out = tmp_path / "reg"
    code = main(["regression", str(SPECS[0]), "--seeds", "1:3", "--modes", "bulk,interactive,verilog", "--samples",
                 "400", "-j", "2", "-o", str(out), "--keep-passing"])
    printed = capsys.readouterr().out
    assert code == 0, printed
    # One build of the cocotb toplevel (bulk and interactive share it), one of the pure-Verilog bench.
    assert "9 of 9 runs passed; 2 simulator builds" in printed
    log = [json.loads(line) for line in (out / "builds" / "builds.log").read_text().splitlines()]
    assert sorted(entry["build"].split("-")[0] for entry in log) == ["cfar_stream_tb", "cfarvec_bulk_top"]
    builds = {entry["build"].split("-")[0]: out / "builds" / entry["build"] for entry in log}
    seeds, stimuli = set(), set()
    for mode in ("bulk", "interactive", "verilog"):
        for seed in (1, 2, 3):
            run = out / f"{SPECS[0].stem}-{mode}-icarus-seed{seed}"
            (summary_file,) = run.glob("sim_build/*/cfarvec_summary.json")
            summary = json.loads(summary_file.read_text())
            top = "cfar_stream_tb" if mode == "verilog" else "cfarvec_bulk_top"
            assert summary["passed"] and Path(summary["bench"]["shared_build"]) == builds[top]
            assert not list(run.glob("sim_build/*/*.vvp"))  # nothing built in the run's own folder
            seeds.add(summary["seed"])
            stimuli.add((run / "vectors" / "stimulus.hex").read_bytes())
    assert seeds == {1, 2, 3}
    assert len(stimuli) == 3  # each seed ran its own vector set on the shared build


@needs_verilator
def test_example_specs_over_three_seeds_and_both_simulators(tmp_path, capsys):
    out = tmp_path / "reg"
    junit = tmp_path / "ci.xml"
    code = main(["regression", *map(str, EXAMPLES_1D), "--seeds", "1:3", "--simulators", "icarus,verilator",
                 "--modes", "bulk", "--samples", "400", "-j", "2", "-o", str(out), "--junit", str(junit)])
    printed = capsys.readouterr().out
    assert code == 0, printed
    # 3 specs x 3 seeds x 2 simulators in one JUnit file; each spec built once per simulator.
    assert "18 of 18 runs passed; 6 simulator builds" in printed
    names = sorted((c.get("classname"), c.get("name")) for c in _cases(junit))
    assert names == sorted((f"cfarvec.{s.stem}", f"bulk[{sim},seed={seed}]") for s in EXAMPLES_1D
                           for sim in ("icarus", "verilator") for seed in (1, 2, 3))
    suite = next(ET.parse(junit).getroot().iter("testsuite"))
    assert (suite.get("tests"), suite.get("failures"), suite.get("errors")) == ("18", "0", "0")


@needs_verilator
@pytest.mark.skipif(not LONG, reason="long co-simulation; set CFARVEC_LONG=1")
def test_long_example_specs_every_mode(tmp_path, capsys):
    out = tmp_path / "reg"
    code = main(["regression", *map(str, EXAMPLES_1D), "--seeds", "1:3", "--simulators", "icarus,verilator",
                 "--modes", "bulk,interactive,verilog", "-j", "2", "-o", str(out)])
    printed = capsys.readouterr().out
    assert code == 0, printed
    assert "54 of 54 runs passed; 12 simulator builds" in printed
    suite = next(ET.parse(out / "junit.xml").getroot().iter("testsuite"))
    assert (suite.get("tests"), suite.get("failures"), suite.get("errors")) == ("54", "0", "0")


@needs_verilator
def test_a_seeded_off_by_one_is_explained_on_both_simulators(tmp_path, capsys):
    from test_cosim_reports import G, _core, _spec_data, _write_toml

    spec = _write_toml(tmp_path / "seeded.toml", _spec_data("seeded_core"))
    rtl = [str(f) for f in _core(tmp_path, guard=1)]  # one guard cell too many on each side
    out = tmp_path / "reg"
    junit = tmp_path / "j.xml"
    assert main(["regression", str(spec), "--rtl", *rtl, "--seeds", "3", "--simulators", "icarus,verilator",
                 "--modes", "verilog,bulk", "--samples", "600", "-o", str(out), "--junit", str(junit)]) == 1
    printed = capsys.readouterr().out
    assert "0 of 4 runs passed" in printed
    cases = _cases(junit)
    assert sorted(c.get("name") for c in cases) == sorted(f"{m}[{sim},seed=3]" for m in ("verilog", "bulk")
                                                          for sim in ("icarus", "verilator"))
    for case in cases:
        failure = case.find("failure")
        assert failure is not None
        (line,) = [ln for ln in failure.text.splitlines() if ln.startswith("hypothesis")]
        assert f"explains every mismatch: window off by one cell: {G + 1} guard cells per side instead of {G}" in line
