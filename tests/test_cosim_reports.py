"""Co-simulation reports that lead to the bug, summaries, reruns, folders and the user's RTL.

Every check is made against what the test itself knows from outside the code
under test:

- Seeded bugs: a user core that wraps the reference core with one change
  made on purpose (one guard cell too many on each side; ``>=`` instead of
  ``>``), so the test knows which hypothesis must explain the received words.
- ``docs/bit-true.md`` section 1 (frames end on a last marker), section 2
  (reference cells ``x[n-H] .. x[n-G-1]`` and ``x[n+G+1] .. x[n+H]``,
  zero outside the frame under ``zero-pad``), section 3 (CA: ``S = S_lag +
  S_lead``), section 8 (output word layout): the frame, cell, fields and
  reference-cell sums of the mismatch table are recomputed here from the
  vector files alone.
- The vector set's manifest (``docs/vectors.md``): each frame's source and
  directed-case label.
- JUnit XML as CI servers read it (Apache Ant layout; common practice, no
  source): ``testcase`` with ``failure``, ``properties`` with ``property``.

The block specs are invented scenarios.
"""

from __future__ import annotations

import json
import os
import shlex
import shutil
import tempfile
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

from cfarvec.cli import main
from hdl_tb.core_params import CORE_SOURCES
from hdl_tb.cosim import cosim, run_folder, summary_dict
from hdl_tb.port_map import port_map_from_spec
from hdl_tb.tb_generator import write_testbench
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None or shutil.which("vvp") is None,
                                reason="Icarus Verilog (iverilog, vvp) is not installed; run `make tools`")

# A user core: the reference core behind its own name with one seeded change (GUARD and GE below).
WRAPPER = """\
`timescale 1ns/1ps
`default_nettype none
module seeded_core #(
    parameter integer INPUT_BITS = 16, parameter integer REF_CELLS = 16, parameter integer GUARD_CELLS = 2,
    parameter integer KIND = 0, parameter integer OS_RANK = 1, parameter integer EDGE = 0,
    parameter integer MAX_FRAME_LENGTH = 256, parameter integer SUM_BITS = 20,
    parameter [63:0] ALPHA_INT = 64'd2212, parameter integer DROP_BITS = 12,
    parameter integer THRESHOLD_FRAC_BITS = 0, parameter integer THRESHOLD_BITS = 21,
    parameter integer ROUNDING = 1, parameter integer OVERFLOW = 0, parameter integer COMPARE_GE = 0,
    parameter integer TRUNCATE_PARTIALS = 0, parameter integer PIPELINE_STAGES = 2, parameter integer SRST_LEVEL = 1
) (
    input  wire clk, input wire srst,
    input  wire [INPUT_BITS-1:0] s_axis_tdata, input wire s_axis_tvalid, output wire s_axis_tready,
    input  wire s_axis_tlast,
    output wire [INPUT_BITS+THRESHOLD_BITS+2:0] m_axis_tdata, output wire m_axis_tvalid,
    input  wire m_axis_tready, output wire m_axis_tlast
);
    cfar_stream #(.INPUT_BITS(INPUT_BITS), .REF_CELLS(REF_CELLS), .GUARD_CELLS(GUARD_CELLS + @GUARD@), .KIND(KIND),
        .OS_RANK(OS_RANK), .EDGE(EDGE), .MAX_FRAME_LENGTH(MAX_FRAME_LENGTH), .SUM_BITS(SUM_BITS), .ALPHA_INT(ALPHA_INT), .DROP_BITS(DROP_BITS),
        .THRESHOLD_FRAC_BITS(THRESHOLD_FRAC_BITS), .THRESHOLD_BITS(THRESHOLD_BITS), .ROUNDING(ROUNDING),
        .OVERFLOW(OVERFLOW), .COMPARE_GE(@GE@), .TRUNCATE_PARTIALS(TRUNCATE_PARTIALS),
        .PIPELINE_STAGES(PIPELINE_STAGES), .SRST_LEVEL(SRST_LEVEL))
      u_core (.clk(clk), .srst(srst), .s_axis_tdata(s_axis_tdata), .s_axis_tvalid(s_axis_tvalid),
              .s_axis_tready(s_axis_tready), .s_axis_tlast(s_axis_tlast), .m_axis_tdata(m_axis_tdata),
              .m_axis_tvalid(m_axis_tvalid), .m_axis_tready(m_axis_tready), .m_axis_tlast(m_axis_tlast));
endmodule
`default_nettype wire
"""

R, G = 8, 2


def _spec_data(module: str | None = None, alpha: float = 6.0) -> dict:
    data = {"detector": {"kind": "ca", "ref_cells_per_side": R, "guard_cells_per_side": G, "alpha": alpha,
                         "edge": "zero-pad"},
            "fixed": {"input_bits": 12}, "stream": {"frame_length": 64}}
    if module:
        data["ports"] = {"module": module, "core_parameters": True}
    return data


def _write_toml(path: Path, data: dict) -> Path:
    lines = []
    for section, values in data.items():
        lines.append(f"[{section}]")
        lines += [f"{k} = {json.dumps(v)}" for k, v in values.items() if not isinstance(v, dict)]
        for k, v in values.items():
            if isinstance(v, dict):
                lines.append(f"[{section}.{k}]")
                lines += [f"{kk} = {json.dumps(vv)}" for kk, vv in v.items()]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _core(tmp_path: Path, guard: int = 0, ge: str = "COMPARE_GE") -> list[Path]:
    f = tmp_path / "seeded_core.v"
    f.write_text(WRAPPER.replace("@GUARD@", str(guard)).replace("@GE@", ge), encoding="ascii")
    return [f, *CORE_SOURCES]


def _hex(path: Path) -> np.ndarray:
    return np.array([int(t, 16) for t in path.read_text().split()], dtype=np.int64)


def test_an_off_by_one_window_is_explained_by_the_hypothesis_line(tmp_path, capsys):
    spec_file = _write_toml(tmp_path / "spec.toml", _spec_data("seeded_core"))
    rtl = [str(f) for f in _core(tmp_path, guard=1)]
    keep = tmp_path / "kept"
    assert main(["cosim", str(spec_file), "--rtl", *rtl, "--mode", "verilog", "--samples", "1500",
                 "--keep", str(keep)]) == 1
    out = capsys.readouterr().out
    # The seeded bug: G + 1 guard cells on each side, so the window sits one cell further out.
    assert f"hypothesis       explains every mismatch: window off by one cell: {G + 1} guard cells per side" in out
    summary = json.loads(next(keep.glob("sim_build/verilog-*/cfarvec_summary.json")).read_text())
    report = summary["report"]
    assert f"window off by one cell: {G + 1} guard cells per side instead of {G}" in report["explained"]
    assert not any("compare" in h for h in report["explained"])

    # The table, recomputed from the vector files (docs/bit-true.md sections 1, 2, 3, 8).
    stim = _hex(keep / "vectors" / "stimulus.hex")
    exp = _hex(keep / "vectors" / "expected.hex")
    got = _hex(next(keep.glob("sim_build/verilog-*/received.hex")))
    n = summary["words_expected"]
    stim, exp = stim[:n], exp[:n]
    w_in, w_t = 12, spec_from_dict(_spec_data()).threshold_bits
    last = (stim >> w_in) & 1
    x = stim & ((1 << w_in) - 1)
    starts = np.concatenate([[0], np.flatnonzero(last) + 1])
    bad = np.flatnonzero(exp != got[:n])
    assert report["mismatching_words"] == bad.size > 10
    manifest = json.loads((keep / "vectors" / "manifest.json").read_text())
    rows = report["table"]
    assert len(rows) >= 10
    h = R + G
    for row, i in zip(rows, bad):
        frame = int(np.searchsorted(starts, i, side="right") - 1)
        cell = int(i - starts[frame])
        assert (row["word"], row["frame"], row["cell"]) == (int(i), frame, cell)
        assert row["threshold_expected"] == (exp[i] >> w_in) & ((1 << w_t) - 1)
        assert row["threshold_received"] == (got[i] >> w_in) & ((1 << w_t) - 1)
        assert row["valid_expected"] == (exp[i] >> (w_in + w_t + 1)) & 1
        assert row["cut_expected"] == row["cut_received"] == x[i]
        f = x[starts[frame]:starts[frame + 1]]
        ref = sum(int(f[j]) for j in list(range(cell - h, cell - G)) + list(range(cell + G + 1, cell + h + 1))
                  if 0 <= j < f.size)  # zero-pad: zero outside the frame
        assert row["reference_sum"] == row["statistic"] == ref  # CA: S = S_lag + S_lead
        src = [s["name"] for s in manifest["sources"] if s["first_frame"] <= frame < s["first_frame"] + s["frames"]]
        assert row["source"] == src[0]
        case = [c["label"] for c in manifest.get("corner_cases", [])
                if c["first_frame"] <= frame < c["first_frame"] + c["frames"]]
        assert row["case"] == (case[0] if case else "")
    widths = {"cut": (0, w_in), "threshold": (w_in, w_t), "det": (w_in + w_t, 1), "valid": (w_in + w_t + 1, 1),
              "last": (w_in + w_t + 2, 1)}
    for name, (lsb, width) in widths.items():
        mask = (1 << width) - 1
        assert report["field_counts"][name] == int(np.count_nonzero(((exp >> lsb) & mask) != ((got[:n] >> lsb) & mask)))
    failing = sorted({int(np.searchsorted(starts, i, side="right") - 1) for i in bad})
    assert report["failing_frames"] == failing

    # The rerun command streams just the failing frames and finds the same mismatches there.
    rerun = summary["rerun"]
    assert rerun and "--frames" in rerun and "--seed 1" in rerun
    argv = shlex.split(rerun)[1:] + ["--json"]
    assert main(argv) == 1
    again = json.loads(capsys.readouterr().out)
    assert again["frames"] == failing
    assert again["words_expected"] == sum(int(starts[f + 1] - starts[f]) for f in failing)
    assert again["report"]["mismatching_words"] == bad.size
    assert again["report"]["failing_frames"] == failing
    assert again["report"]["explained"] == report["explained"]
    assert again["kept"] and Path(again["folder"]).is_dir()  # kept on failure without --keep
    shutil.rmtree(Path(again["folder"]).parent, ignore_errors=True)


def test_a_flipped_comparison_is_explained(tmp_path):
    # Seeded bug: the module decides CUT >= T where the spec says CUT > T.
    spec = spec_from_dict(_spec_data("seeded_core", alpha=1.0))
    r = cosim(spec, rtl=_core(tmp_path, ge="1 - COMPARE_GE"), mode="bulk", samples=1500, folder=tmp_path / "b")
    assert not r.passed
    assert "compare CUT >= T instead of CUT > T" in r.report["explained"]
    assert r.report["field_counts"]["det"] == r.report["mismatching_words"] > 0
    assert r.report["field_counts"]["threshold"] == 0


def test_every_mode_writes_the_same_summary_and_cosim_json_prints_it(tmp_path, capsys):
    spec_file = _write_toml(tmp_path / "spec.toml", _spec_data())
    keys = None
    for mode in ("verilog", "bulk", "interactive"):
        folder = tmp_path / mode
        assert main(["cosim", str(spec_file), "--mode", mode, "--samples", "300", "--seed", "5",
                     "--keep", str(folder), "--json"]) == 0
        printed = json.loads(capsys.readouterr().out)
        on_disk = json.loads(next(folder.glob(f"sim_build/{mode}-*/cfarvec_summary.json")).read_text())
        assert printed == on_disk
        assert printed["passed"] and printed["mode"] == mode and printed["seed"] == 5
        keys = keys or set(printed)
        assert set(printed) == keys


def test_keep_errors_name_keep(tmp_path, capsys):
    spec_file = _write_toml(tmp_path / "spec.toml", _spec_data())
    blocker = tmp_path / "file"
    blocker.write_text("x")
    assert main(["cosim", str(spec_file), "--keep", str(blocker)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("cfarvec cosim: error: --keep") and err.count("\n") == 1


@pytest.mark.parametrize("mode", ["bulk", "verilog", "interactive"])
def test_folders_with_non_ascii_names(tmp_path, monkeypatch, mode):
    # Icarus garbles non-ASCII characters in absolute paths given to $readmemh/$fopen (toolchain notes);
    # a --keep folder and TMPDIR with such names must still give a passing run.
    spec = spec_from_dict(_spec_data())
    odd = tmp_path / "Ölhafen-ß-データ"
    odd.mkdir()
    monkeypatch.setenv("TMPDIR", str(odd))
    monkeypatch.setattr(tempfile, "tempdir", None)
    r = cosim(spec, mode=mode, samples=300, folder=odd / "bench")
    assert r.passed, r.problems
    r = cosim(spec, mode=mode, samples=300)  # a temporary folder under TMPDIR
    assert r.passed, r.problems
    assert str(r.folder).startswith(str(odd))


def test_junit_and_summary_hold_the_seed_that_drove_the_run(tmp_path):
    spec = spec_from_dict(_spec_data())
    folder = tmp_path / "b"
    write_testbench(spec, folder, samples=300, seed=11)
    for mode in ("bulk", "verilog"):
        r = run_folder(folder, mode, seed=4242)
        assert r.passed and r.seed == 4242 and summary_dict(r)["seed"] == 4242
        props = {p.get("name"): p.get("value") for p in ET.parse(r.results_xml).getroot().iter("property")}
        assert "4242" in (props.get("random_seed"), props.get("seed")), props


def test_a_parameter_may_name_a_quantity_of_the_spec(tmp_path):
    # The module gets the constant A, the widths and the window only through [ports.parameters] names, so a
    # change of alpha (or of the widths) reaches it without editing the port map.
    wrapper = tmp_path / "named.v"
    wrapper.write_text(WRAPPER.replace("seeded_core #(", "named_core #(\n    parameter [63:0] A_CONST = 1,\n"
                                       "    parameter integer W_T = 1,")
                       .replace(".ALPHA_INT(ALPHA_INT)", ".ALPHA_INT(A_CONST)")
                       .replace(".THRESHOLD_BITS(THRESHOLD_BITS)", ".THRESHOLD_BITS(W_T)")
                       .replace("@GUARD@", "0").replace("@GE@", "COMPARE_GE"), encoding="ascii")
    for alpha in (4.0, 9.5):
        data = _spec_data(alpha=alpha)
        data["ports"] = {"module": "named_core", "core_parameters": False}
        base = spec_from_dict(data)
        params = {"A_CONST": "alpha_int", "W_T": "threshold_bits", "INPUT_BITS": "input_bits",
                  "REF_CELLS": "ref_per_side", "GUARD_CELLS": "guard_per_side", "SUM_BITS": "sum_bits",
                  "DROP_BITS": "drop_bits", "THRESHOLD_BITS": "threshold_bits",
                  "THRESHOLD_FRAC_BITS": "threshold_frac_bits", "PIPELINE_STAGES": "pipeline_stages",
                  "EDGE": 1, "KIND": 0, "ROUNDING": 1, "OVERFLOW": 0}  # zero-pad, CA, half-up, saturate
        data["ports"]["parameters"] = params
        spec = spec_from_dict(data)
        assert spec.alpha_int == base.alpha_int
        r = cosim(spec, rtl=[wrapper, *CORE_SOURCES], mode="verilog", samples=400, folder=tmp_path / f"a{alpha}")
        assert r.passed, r.problems
    data["ports"]["parameters"] = {"A_CONST": "alpha"}  # not a quantity the port map knows
    with pytest.raises(SpecError) as err:
        port_map_from_spec(spec_from_dict(data))
    assert err.value.field == "ports.parameters.A_CONST"


def test_the_users_rtl_is_used_where_it_is(tmp_path):
    # A fix in the user's file reaches the next run of the same folder, without regenerating it.
    spec = spec_from_dict(_spec_data("seeded_core"))
    rtl = _core(tmp_path, guard=1)
    folder = tmp_path / "b"
    write_testbench(spec, folder, rtl=rtl, samples=400)
    assert str(rtl[0].resolve()) in json.loads((folder / "bench_config.json").read_text())["rtl"]
    for mode in ("verilog", "bulk"):
        assert not run_folder(folder, mode).passed
    os.utime(rtl[0])
    rtl[0].write_text(rtl[0].read_text().replace("GUARD_CELLS + 1", "GUARD_CELLS + 0"))
    st = rtl[0].stat()
    os.utime(rtl[0], (st.st_atime, st.st_mtime + 2))  # a later time stamp, also on coarse file systems
    for mode in ("verilog", "bulk"):
        assert run_folder(folder, mode).passed


def test_synth_takes_the_users_rtl(tmp_path, capsys):
    if shutil.which("yosys") is None:
        pytest.skip("Yosys is not installed")
    spec_file = _write_toml(tmp_path / "spec.toml", _spec_data("seeded_core"))
    rtl = [str(f) for f in _core(tmp_path)]
    assert main(["synth", str(spec_file), "--rtl", *rtl, "--json"]) == 0
    counts = json.loads(capsys.readouterr().out)
    assert counts["top"] == "seeded_core" and counts["flip_flops"] > 0
    assert main(["synth", str(spec_file), "--rtl", *rtl, "--top", "not_there"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("cfarvec synth: error: --top") and err.count("\n") == 1


def test_keep_refuses_the_current_folder_and_the_folders_of_the_spec_and_rtl(tmp_path, capsys, monkeypatch):
    # Issue 15: `cosim --keep . --force` deleted the user's files. The current folder, an ancestor of it and a
    # folder holding the spec or the RTL are refused, naming --keep; nothing is deleted.
    work = tmp_path / "work"
    work.mkdir()
    spec_file = _write_toml(work / "spec.toml", _spec_data("seeded_core"))
    rtl = [str(f) for f in _core(work)]
    monkeypatch.chdir(work)
    for target in (".", str(tmp_path), str(work), ""):
        assert main(["cosim", str(spec_file), "--rtl", *rtl, "--keep", target, "--force"]) == 2
        err = capsys.readouterr().err
        assert err.startswith("cfarvec cosim: error: --keep") and err.count("\n") == 1
    assert spec_file.is_file() and all(Path(f).is_file() for f in rtl)
