"""``cfarvec synth``: Yosys cell counts of the reference core for a spec, and its error lines.

Counts are checked against what the bit-true contract makes the core store
(``docs/bit-true.md`` sections 3 and 9: a window of ``W = 2R + 2G + 1`` cells
of ``W_in`` bits and two ``W_S``-bit running sums) and against Yosys's own
``stat`` total; bad input must end with one line and exit code 2.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from cfarvec import cli
from refmodel.block_spec import load_spec

ROOT = Path(__file__).resolve().parents[1]
HAVE_YOSYS = shutil.which("yosys") is not None
needs_yosys = pytest.mark.skipif(not HAVE_YOSYS, reason="Yosys is not installed; run `make tools`")

SMALL = """\
[detector]
kind = "ca"
ref_cells_per_side = 4
guard_cells_per_side = 1
alpha = 5.0
edge = "{edge}"

[fixed]
input_bits = 8
"""


def _spec_file(tmp_path, edge="skip") -> Path:
    p = tmp_path / f"small_{edge}.toml"
    p.write_text(SMALL.format(edge=edge), encoding="utf-8")
    return p


def _storage_bits(spec) -> int:
    """Window cells and the two running sums (bit-true.md sections 3 and 9)."""
    return spec.window_length * spec.input_bits + 2 * spec.sum_bits


@needs_yosys
def test_generic_table_and_json_give_the_same_counts(tmp_path, capsys):
    spec_path = _spec_file(tmp_path)
    assert cli.main(["synth", str(spec_path)]) == 0
    table = capsys.readouterr().out
    assert cli.main(["synth", str(spec_path), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    rows = dict(re.findall(r"^  (\S[\w -]*?)\s+(\d+)$", table, flags=re.MULTILINE))
    assert set(rows) == {"LUTs", "flip-flops", "DSP blocks", "carries", "SRLs", "block RAMs", "LUT RAMs",
                         "simple gates", "other", "total cells"}
    assert int(rows["total cells"]) == data["cells"] == sum(data["cell_types"].values())
    for label, key in (("LUTs", "luts"), ("flip-flops", "flip_flops"), ("DSP blocks", "dsps"),
                       ("carries", "carries"), ("SRLs", "srls"), ("block RAMs", "brams"), ("LUT RAMs", "lutrams"),
                       ("simple gates", "gates")):
        assert int(rows[label]) == data[key], label
    assert sum(int(v) for k, v in rows.items() if k != "total cells") == data["cells"]
    assert data["flow"] == "generic" and data["top"] == "cfar_stream"
    assert data["luts"] == 0 and data["gates"] > 0                    # the generic flow maps to simple gates
    assert data["flip_flops"] >= _storage_bits(load_spec(spec_path))


@needs_yosys
def test_xilinx_flow_on_the_readme_example(capsys):
    spec_path = ROOT / "examples" / "harbour_ca.toml"
    assert cli.main(["synth", str(spec_path), "--flow", "xilinx", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["flow"] == "xilinx"
    # Only 7-series primitives remain (Xilinx UG953), no generic Yosys cells.
    assert data["cell_types"] and not [t for t in data["cell_types"] if t.startswith("$")]
    assert data["luts"] > 0 and data["carries"] > 0
    # SRL16E holds 16 bits, SRLC32E 32 (Xilinx UG474).
    srl_bits = 16 * data["cell_types"].get("SRL16E", 0) + 32 * data["cell_types"].get("SRLC32E", 0)
    assert data["flip_flops"] + srl_bits >= _storage_bits(load_spec(spec_path))


@needs_yosys
def test_os_and_circular_are_reported(tmp_path, capsys):
    # OS with the circular policy (a small window, as channel_os.toml but R = 2). The frame store fits
    # block RAM: a RAMB18E1 holds 18 Kbit, a RAMB36E1 36 Kbit (Xilinx UG473, 7 Series FPGAs Memory
    # Resources, chapter 1).
    spec_path = tmp_path / "os_circular.toml"
    spec_path.write_text(SMALL.format(edge="circular").replace('kind = "ca"', 'kind = "os"\nrank = 3')
                         .replace("ref_cells_per_side = 4", "ref_cells_per_side = 2")
                         + "\n[stream]\nframe_length = 200\n")
    assert cli.main(["synth", str(spec_path), "--flow", "xilinx", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    brams = data["cell_types"].get("RAMB18E1", 0) + data["cell_types"].get("RAMB36E1", 0)
    assert brams >= 1 and data["luts"] > 0
    spec = load_spec(spec_path)
    # The window still lives in flip-flops or SRLs (SRL16E holds 16 bits, SRLC32E 32: Xilinx UG474).
    srl_bits = 16 * data["cell_types"].get("SRL16E", 0) + 32 * data["cell_types"].get("SRLC32E", 0)
    assert data["flip_flops"] + srl_bits >= spec.window_length * spec.input_bits


def test_a_spec_that_does_not_load_is_one_line_exit_2(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    bad.write_text(SMALL.format(edge="wraparound"))
    assert cli.main(["synth", str(bad)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert len(captured.err.strip().splitlines()) == 1 and "detector.edge" in captured.err


def test_missing_yosys_is_one_line_naming_it(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("PATH", str(tmp_path))
    assert cli.main(["synth", str(_spec_file(tmp_path))]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "yosys" in err


def test_error_from_a_real_process_has_no_traceback():
    proc = subprocess.run([sys.executable, "-m", "cfarvec", "synth", str(ROOT / "examples" / "missing.toml")],
                          capture_output=True, text=True, cwd=ROOT)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and len(proc.stderr.strip().splitlines()) == 1


def test_unknown_flow_is_refused(tmp_path, capsys):
    with pytest.raises(SystemExit) as exc:
        cli.main(["synth", str(_spec_file(tmp_path)), "--flow", "asic"])
    assert exc.value.code == 2
    assert "--flow" in capsys.readouterr().err
