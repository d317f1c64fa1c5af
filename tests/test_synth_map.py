"""``cfarvec synth`` on map (range-Doppler) specs: the map core through Yosys (direct tool runs).

The memory the core holds is checked against the formulas of
``docs/bit-true-2d.md`` section 9 written out here from the spec fields
(line buffers ``2 H_s P_f W_in`` bits; input store ``2 L_f W_in`` bits with
a circular fast axis only, ``L_s L_f W_in`` with a circular slow axis) and
of ``docs/reference-core-2d.md`` (the column sums of the line before, ``P_f``
words of ``W_S`` bits per rectangle), and
the netlist must hold RAM primitives (Xilinx UG473, 7-series block RAM;
UG474, distributed RAM) rather than no memory at all, since the core writes
its line buffers and store as inferred RAMs.
"""

from __future__ import annotations

import json
import shutil

import pytest

from cfarvec.cli import main

pytestmark = pytest.mark.skipif(shutil.which("yosys") is None, reason="Yosys is not installed; run `make tools`")

SPEC = """\
# Invented example: a small range-Doppler block.
[detector]
kind = "{kind}"
alpha = 2.5
[fixed]
input_bits = 12
alpha_frac_bits = 8
[map]
range_cells = 24
doppler_bins = 16
order = "doppler-fast"
window = "ring"
ref_range = 2
ref_doppler = 1
guard_range = 1
guard_doppler = 1
range_edge = "{range_edge}"
doppler_edge = "circular"
"""


@pytest.mark.parametrize("range_edge", ["zero-pad", "circular"])
def test_synth_map_core_xilinx(tmp_path, capsys, range_edge):
    path = tmp_path / "m.toml"
    path.write_text(SPEC.format(kind="ca", range_edge=range_edge), encoding="utf-8")
    assert main(["synth", str(path), "--flow", "xilinx", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["top"] == "cfar_map"
    # doppler-fast: slow axis range (H_s = 2 + 1), fast axis Doppler (H_f = 1 + 1, L_f = 16, P_f = 20).
    lines = 2 * 3 * 20 * 12
    store = 24 * 16 * 12 if range_edge == "circular" else 2 * 16 * 12
    # Column sums of the line before: CA ring, two rectangles (window, guard rectangle), P_f words of
    # W_S = bitlen(N (2^12 - 1)) bits, N = 5 x 7 - 3 x 3 = 26 (docs/reference-core-2d.md, Memory).
    sums = 2 * 20 * (26 * 4095).bit_length()
    assert out["design_memory_bits"] == lines + store + sums
    assert out["brams"] + out["lutrams"] >= 1
    # Capacity of the block RAMs: 18 Kib and 36 Kib (Xilinx UG473, "7 Series FPGAs Memory Resources", from memory).
    assert out["memory_bits"] >= sum(n * {"RAMB18E1": 18432, "RAMB36E1": 36864}.get(k, 0)
                                     for k, n in out["cell_types"].items())
    assert out["luts"] > 0 and out["flip_flops"] > 0 and out["dsps"] == 1
    assert not any(k.startswith("$mem") for k in out["cell_types"])


def test_synth_refuses_os_on_the_map_core(tmp_path, capsys):
    path = tmp_path / "m.toml"
    path.write_text(SPEC.format(kind="os", range_edge="zero-pad").replace("[fixed]", "[fixed]").replace(
        'kind = "os"', 'kind = "os"\nrank = 10'), encoding="utf-8")
    assert main(["synth", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "detector.kind" in err[0]
