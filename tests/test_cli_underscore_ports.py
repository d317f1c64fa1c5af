"""Legal port names that start with ``_`` work in every bench (issue 15, item 3).

IEEE Std 1364-2005, 3.7: a simple identifier starts with a letter or an
underscore, so ``_clk`` is a legal port name; the port map accepts it and the
bulk and Verilog benches ran, but the interactive (cocotb) bench stopped with
"'HierarchyObject' object has no attribute '_clk'" (cocotb keeps attribute
names that start with ``_`` for its own use). ``tests/data/underscore_ports.v``
wraps the reference core with such names; the reference core is checked
against the bit-accurate model elsewhere, so the wrapper must pass.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from cfarvec import cli
from hdl_tb.core_params import CORE_SOURCES

ROOT = Path(__file__).resolve().parents[1]
PORTS = """
[ports]
module = "_wrap"
clock = "_clk"
reset = "_rst"
in_data = "_din"
in_valid = "_din_valid"
in_ready = "_din_ready"
in_last = "_din_last"
out_data = "_dout"
out_valid = "_dout_valid"
out_ready = "_dout_ready"
out_last = "_dout_last"
core_parameters = true
"""

pytestmark = pytest.mark.skipif(shutil.which("iverilog") is None, reason="needs Icarus Verilog")


@pytest.mark.parametrize("mode", ["interactive", "bulk", "verilog"])
def test_underscore_port_names_in_every_mode(tmp_path, capsys, mode):
    spec = tmp_path / "spec.toml"
    spec.write_text((ROOT / "tests" / "data" / "vectors_small.toml").read_text() + PORTS)
    rtl = [str(ROOT / "tests" / "data" / "underscore_ports.v"), *map(str, CORE_SOURCES)]
    code = cli.main(["cosim", str(spec), "--rtl", *rtl, "--mode", mode, "--samples", "300",
                     "--keep", str(tmp_path / "bench")])
    out = capsys.readouterr().out
    assert code == 0, out
    assert out.startswith("PASS"), out
