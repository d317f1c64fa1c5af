"""One CLI convention (issue 15, items 5 and 7): lazy command imports, list syntax, option names, --json."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from cfarvec import cli, cmd_design
from refmodel import threshold_design

ROOT = Path(__file__).resolve().parents[1]
SMALL = ROOT / "tests" / "data" / "vectors_small.toml"


def _modules_after(argv: list[str]) -> set[str]:
    code = ("import sys\nfrom cfarvec import cli\ntry:\n    cli.main(%r)\nexcept SystemExit:\n    pass\n"
            "print(' '.join(sorted(sys.modules)))" % argv)
    r = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=300)
    return set(r.stdout.split())


def test_help_imports_no_command_module_nor_numpy():
    mods = _modules_after(["--help"])
    assert "numpy" not in mods and "scipy" not in mods
    assert not [m for m in mods if m.startswith("cfarvec.cmd_")]


def test_a_command_imports_only_its_own_module():
    mods = _modules_after(["check", "--help"])
    assert [m for m in mods if m.startswith("cfarvec.cmd_")] == ["cfarvec.cmd_check"]
    assert "scipy" not in mods and "cocotb" not in mods


def test_design_kinds_agree_with_threshold_design():
    assert cmd_design.KINDS == threshold_design.KINDS


def test_ref_cells_total_counts_both_sides(capsys):
    """N = 2R: --ref-cells-total 8 is the spec's ref_cells_per_side = 4 (vectors_small.toml, alpha 5.3)."""
    assert cli.main(["design", "--ref-cells-total", "8", "--alpha", "5.3", "--json"]) == 0
    by_option = json.loads(capsys.readouterr().out)
    assert cli.main(["design", "--spec", str(SMALL), "--json"]) == 0
    by_spec = json.loads(capsys.readouterr().out)
    assert by_option["ref_cells"] == by_spec["ref_cells"] == 8
    assert by_option["pfa"] == by_spec["pfa"]


def test_list_options_take_comma_lists(tmp_path, capsys):
    assert cli.main(["design", "--ref-cells-total", "16", "--pfa", "1e-4", "--snr-db", "10,13", "--swerling",
                     "1", "--json"]) == 0
    r = json.loads(capsys.readouterr().out)
    assert [c["swerling"] for c in r["swerling"]] == [1] and len(r["swerling"][0]["pd"]) == 2
    assert cli.main(["vectors", str(SMALL), "-o", str(tmp_path / "v"), "--formats", "hex,csv", "--json"]) == 0
    m = json.loads(capsys.readouterr().out)
    assert sorted({f["format"] for f in m["files"]}) == ["csv", "hex"]
    assert cli.main(["check", str(tmp_path / "v"), "--json"]) == 0
    c = json.loads(capsys.readouterr().out)
    assert c["ok"] is True and c["findings"] == []
