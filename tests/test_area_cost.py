"""Area of the reference core per study point: Yosys counts, the cache, the weights, memory classes.

Outside checks: the area columns equal a direct ``yosys`` run whose script is
written out here, independently of :mod:`hdl_tb.synthesis` (its ``stat``
output is parsed by the regular expression below, not by the code under
test); the memory capacities are the vendors' (cited beside each check,
from memory).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

pytestmark = pytest.mark.skipif(shutil.which("yosys") is None, reason="Yosys is not installed; run `make tools`")

from hdl_tb.area_cost import DEFAULT_WEIGHTS, AreaCoster, MapAreaCoster, parse_weights, weighted_area  # noqa: E402
from hdl_tb.core_params import CORE_SOURCES, core_parameters  # noqa: E402
from hdl_tb.synthesis import synthesize  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]


def _spec(input_bits=8, alpha_frac_bits=8, edge="skip", frame=64, **fixed):
    return spec_from_dict({
        "detector": {"kind": "ca", "ref_cells_per_side": 4, "guard_cells_per_side": 1, "alpha": 5.0, "edge": edge},
        "fixed": {"input_bits": input_bits, "alpha_frac_bits": alpha_frac_bits, **fixed},
        "stream": {"frame_length": frame},
    })


def _direct_yosys(params: dict, tmp: Path, command: str) -> dict:
    """Cell counts of the core by a script written here: read, one chparam, the flow, stat."""
    sets = " ".join(f"-set {k} {v}" for k, v in params.items())
    script = (f"read_verilog -defer {CORE_SOURCES[0]}\n"
              f"chparam {sets} cfar_stream\n"
              f"{command}\n"
              "tee -o direct_stat.txt stat\n")
    (tmp / "direct.ys").write_text(script, encoding="utf-8")
    subprocess.run(["yosys", "-q", "-s", "direct.ys"], cwd=tmp, check=True, capture_output=True)
    text = (tmp / "direct_stat.txt").read_text(encoding="utf-8")
    return {m.group(1): int(m.group(2)) for m in re.finditer(r"^\s+(SB_\w+|\$\S+|[A-Z]\w+)\s+(\d+)\s*$", text,
                                                                 flags=re.MULTILINE)}


@pytest.mark.parametrize("bits,frac", [(8, 8), (10, 12)])
def test_area_of_points_equals_a_direct_yosys_run(tmp_path, bits, frac):
    """Yosys 0.23 ``synth_ice40`` (common practice: the iCE40 cell names SB_LUT4, SB_DFF*, SB_CARRY)."""
    spec = _spec(bits, frac)
    coster = AreaCoster(flow="ice40", cache_dir=tmp_path / "cache", workers=1)
    row = coster.cost_many([spec])[0]
    cells = _direct_yosys(core_parameters(spec), tmp_path, "synth_ice40 -flatten -top cfar_stream")
    assert row["area_luts"] == cells.get("SB_LUT4", 0)
    assert row["area_carries"] == cells.get("SB_CARRY", 0)
    assert row["area_flip_flops"] == sum(n for k, n in cells.items() if k.startswith("SB_DFF"))
    assert row["area_dsps"] == cells.get("SB_MAC16", 0) and row["area_memory_bits"] == 0
    # Equation (1) of hdl_tb/area_cost.py with the default weights, by hand.
    assert row["area_luteq"] == pytest.approx(row["area_luts"] + 0.5 * row["area_flip_flops"])


def test_xilinx_area_equals_a_direct_yosys_run(tmp_path):
    """Yosys 0.23 ``synth_xilinx`` 7-series cells (LUT1..LUT6, FDRE, CARRY4, DSP48E1, SRL16E); an INV
    primitive is counted as a LUT (it is placed in one; common practice, no source)."""
    spec = _spec(10, 10)
    row = AreaCoster(flow="xilinx", cache_dir=tmp_path / "cache", workers=1).cost_many([spec])[0]
    cells = _direct_yosys(core_parameters(spec), tmp_path, "synth_xilinx -flatten -noiopad -noclkbuf -top cfar_stream")
    assert row["area_luts"] == sum(n for k, n in cells.items() if re.fullmatch(r"LUT[1-6]|INV", k))
    assert row["area_flip_flops"] == sum(n for k, n in cells.items() if re.fullmatch(r"FD[RSCP]E", k))
    assert row["area_carries"] == cells.get("CARRY4", 0) and row["area_dsps"] == cells.get("DSP48E1", 0)
    assert row["area_srls"] == cells.get("SRL16E", 0) + cells.get("SRLC32E", 0)
    assert row["area_luteq"] == pytest.approx(row["area_luts"] + 0.5 * row["area_flip_flops"] + row["area_srls"]
                                              + 100 * row["area_dsps"])


def test_cache_is_reused_and_keyed_by_parameters(tmp_path):
    specs = [_spec(8, 8), _spec(8, 8), _spec(10, 8)]
    first = AreaCoster(flow="ice40", cache_dir=tmp_path, workers=2)
    a = first.cost_many(specs)
    assert first.misses == 2 and first.hits == 0          # two distinct parameter sets, the repeat costs nothing
    again = AreaCoster(flow="ice40", cache_dir=tmp_path, workers=2)
    b = again.cost_many(specs)
    assert again.misses == 0 and again.hits == 2
    assert a == b and a[0] == a[1] and a[0]["area_key"] != a[2]["area_key"]
    # Another flow or other RTL bytes give another key.
    x = AreaCoster(flow="xilinx", cache_dir=tmp_path, workers=1)
    assert x.key(core_parameters(specs[0])) != first.key(core_parameters(specs[0]))


def test_changed_rtl_bytes_change_the_key(tmp_path):
    rtl = tmp_path / "cfar_stream.v"
    rtl.write_bytes(CORE_SOURCES[0].read_bytes())
    p = core_parameters(_spec())
    k1 = AreaCoster(flow="ice40", cache_dir=tmp_path, sources=[rtl]).key(p)
    rtl.write_bytes(CORE_SOURCES[0].read_bytes() + b"\n// changed\n")
    assert AreaCoster(flow="ice40", cache_dir=tmp_path, sources=[rtl]).key(p) != k1


@pytest.mark.parametrize("text", ["lut", "lut=x", "lut=-1", "luts=1", ""])
def test_bad_weights_name_the_option(text):
    with pytest.raises(SpecError) as exc:
        parse_weights(text)
    assert exc.value.field == "--area-weights"


def test_weights_override_only_what_is_named():
    w = parse_weights("dsp=10,ff=1")
    assert w == {**DEFAULT_WEIGHTS, "dsp": 10.0, "ff": 1.0}
    counts = {"luts": 3, "flip_flops": 4, "carries": 5, "srls": 6, "dsps": 1, "memory_bits": 64}
    assert weighted_area(counts, w) == 3 + 4 + 0 + 6 + 10 + 1


def test_non_area_flow_is_refused(tmp_path):
    with pytest.raises(SpecError) as exc:
        AreaCoster(flow="generic", cache_dir=tmp_path)
    assert exc.value.field == "--area-flow"


def test_circular_frame_store_counts_block_ram_bits():
    """The circular frame store of 1000 words of 8 bits (8000 bits) maps to block RAM.

    iCE40: SB_RAM40_4K holds 4096 bits (Lattice, "Memory Usage Guide for iCE40 Devices", TN1250, from
    memory), so at least 2 blocks; 7 series: a RAMB18E1 holds 18 Kib (Xilinx UG473, "7 Series FPGAs
    Memory Resources", from memory).
    """
    spec = _spec(8, 8, edge="circular", frame=1000)
    params = core_parameters(spec, max_frame_length=1000)
    ice = synthesize(params, "ice40")
    assert ice.brams == ice.cells["SB_RAM40_4K"] >= 2
    assert ice.memory_bits == 4096 * ice.brams >= 8000
    xil = synthesize(params, "xilinx")
    n18, n36 = xil.cells.get("RAMB18E1", 0), xil.cells.get("RAMB36E1", 0)
    assert xil.brams == n18 + n36 >= 1
    assert xil.memory_bits == 18 * 1024 * n18 + 36 * 1024 * n36 >= 8000


def test_systemverilog_files_are_read_as_systemverilog(tmp_path):
    """``logic`` and ``always_ff`` are SystemVerilog only (IEEE Std 1800-2017, 6.11 and 9.2.2.4)."""
    src = tmp_path / "reg8.sv"
    src.write_text("module reg8 (input logic clk, input logic [7:0] d, output logic [7:0] q);\n"
                   "  always_ff @(posedge clk) q <= d;\nendmodule\n", encoding="ascii")
    report = synthesize({}, "ice40", sources=[src], top="reg8")
    assert report.flip_flops == 8


def test_a_map_block_is_costed_on_the_map_core(tmp_path, capsys):
    """A map block's study point (its 1D arithmetic twin) is put back into the map spec and costed on cfar_map:
    at the example's own arithmetic the area columns equal what `cfarvec synth` reports for the example."""
    import json

    from cfarvec.cli import main
    from refmodel.block_spec import load_spec
    from refmodel.map_spec import interior_twin

    lagoon = ROOT / "examples" / "lagoon_map_ca.toml"
    spec = load_spec(lagoon)
    coster = MapAreaCoster(spec, flow="ice40", cache_dir=tmp_path / "cache", workers=1)
    twin = interior_twin(spec)
    assert coster.map_point(twin).to_dict(resolved=True) == spec.to_dict(resolved=True)
    [row] = coster([twin])
    assert main(["synth", str(lagoon), "--flow", "ice40", "--json"]) == 0
    direct = json.loads(capsys.readouterr().out)
    assert direct["top"] == "cfar_map"
    for key in ("luts", "flip_flops", "carries", "brams", "memory_bits"):
        assert row[f"area_{key}"] == direct[key], key
    assert row["area_brams"] >= 1  # the line buffers are block RAM (the 1D twin's core has none)
