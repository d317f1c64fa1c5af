"""``cfarvec regression``: specs x seeds x simulators x modes, one JUnit file, reproducible runs.

Checked against the outside:

- JUnit XML as CI servers read it (Apache Ant layout; common practice, no
  source): one ``testcase`` per run with ``classname`` and ``name``, a
  ``failure`` child for a failing run, the counts on ``testsuite``.
- A seeded bug (one guard cell too many, see tests/test_cosim_reports.py)
  must fail its runs and be explained; the printed command must reproduce
  the same result.

The example specs are invented scenarios; sizes are small for CI.
"""

from __future__ import annotations

import json
import shlex
import shutil
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from cfarvec.cli import main
from hdl_tb.core_params import CORE_SOURCES

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
# The example specs the reference core builds (channel_os.toml is an order-statistic detector).
SPECS = [EXAMPLES / "harbour_ca.toml", EXAMPLES / "breakwater_go.toml"]


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
