"""Yosys synthesis sanity of the reference core, and the ``stat`` report parser.

The default configuration (CA, R = 16, G = 2, 16-bit input) must synthesise
under the generic ``synth`` flow and the Xilinx 7-series ``synth_xilinx``
flow with no latch and no error; the cell counts must hold the storage the
bit-true contract asks for (``docs/bit-true.md`` sections 3 and 9: a window
of ``W = 2R + 2G + 1`` cells of ``W_in`` bits and two ``W_S``-bit running
sums).
"""

from __future__ import annotations

import shutil

import pytest

from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

pytestmark = pytest.mark.skipif(shutil.which("yosys") is None, reason="Yosys is not installed; run `make tools`")

from hdl_tb.core_params import core_parameters  # noqa: E402
from hdl_tb.synthesis import SynthesisError, classify, parse_stat, synthesize  # noqa: E402

DEFAULT = {"detector": {"kind": "ca", "ref_cells_per_side": 16, "guard_cells_per_side": 2, "alpha": 17.28},
           "fixed": {"input_bits": 16}}

# Verbatim from a Yosys 0.23 run of `synth -flatten -top cfar_stream; check -assert; stat` on this core
# (default configuration).
YOSYS_023_STAT = """
20. Printing statistics.

=== cfar_stream ===

   Number of wires:               1267
   Number of wire bits:           2223
   Number of public wires:          31
   Number of public wire bits:     887
   Number of memories:               0
   Number of memory bits:            0
   Number of processes:              0
   Number of cells:               2052
     $_ANDNOT_                     417
     $_AND_                         67
     $_DFFE_PN_                    592
     $_DFFE_PP_                     18
     $_NAND_                        64
     $_NOR_                        147
     $_NOT_                         59
     $_ORNOT_                       57
     $_OR_                         116
     $_SDFFCE_PN0P_                 22
     $_SDFFE_PP0N_                  96
     $_SDFFE_PP0P_                   7
     $_XNOR_                       151
     $_XOR_                        239

End of script. Logfile hash: 7dbd1de2e4, CPU: user 2.04s system 0.02s, MEM: 28.67 MB peak
"""


@pytest.fixture(scope="module")
def default_spec():
    return spec_from_dict(DEFAULT)


@pytest.fixture(scope="module")
def generic_report(default_spec):
    return synthesize(default_spec, "generic")


@pytest.fixture(scope="module")
def xilinx_report(default_spec):
    return synthesize(default_spec, "xilinx")


def test_parser_reads_a_yosys_stat_report():
    n_cells, cells = parse_stat(YOSYS_023_STAT)
    assert n_cells == 2052
    assert cells["$_DFFE_PN_"] == 592 and cells["$_XOR_"] == 239
    assert sum(cells.values()) == n_cells
    counts = classify(cells)
    assert counts["flip_flops"] == 592 + 18 + 22 + 96 + 7
    assert counts["gates"] == 417 + 67 + 64 + 147 + 59 + 57 + 116 + 151 + 239
    assert counts["latches"] == 0


def test_parser_rejects_text_without_statistics():
    with pytest.raises(ValueError):
        parse_stat("nothing here\n")


def _window_bits(spec):
    return spec.window_length * spec.input_bits


def test_generic_flow_has_no_latch_and_holds_the_window(generic_report, default_spec):
    r = generic_report
    assert r.latches == ()
    assert sum(r.cells.values()) == r.n_cells          # the parser saw every cell type of the real report
    assert r.gates > 0
    # Window cells and the two running sums must be stored somewhere.
    assert r.flip_flops >= _window_bits(default_spec) + 2 * default_spec.sum_bits


def test_xilinx_flow_has_no_latch_and_maps_the_product_to_a_dsp(xilinx_report, default_spec):
    r = xilinx_report
    assert r.latches == ()
    assert sum(r.cells.values()) == r.n_cells
    assert r.luts > 0 and r.carries > 0
    # The product S * A of the default spec: S is statistic_bits = W_S + 1 = 21 bits (W_S = bitlen(16 * 65535)
    # = 20, docs/bit-true.md section 3) and A = floor(17.28 * 2^12 / 32 + 1/2) = 2212 is 12 bits (section 4):
    # a 21 x 12 unsigned product, 22 x 13 as two's complement, which fits the 25 x 18 two's-complement
    # multiplier of one DSP48E1 slice (Xilinx, "7 Series DSP48E1 Slice User Guide", UG479, ch. 2, from memory),
    # so one DSP48E1 is expected.
    assert default_spec.statistic_bits == 21 and default_spec.alpha_int.bit_length() == 12
    assert r.dsps == 1
    # Shift-register LUTs hold up to 16 (SRL16E) or 32 (SRLC32E) bits each.
    srl_bits = 16 * r.cells.get("SRL16E", 0) + 32 * r.cells.get("SRLC32E", 0)
    assert r.flip_flops + srl_bits >= _window_bits(default_spec)


def test_latches_are_detected(tmp_path):
    src = tmp_path / "latchy.v"
    src.write_text("module latchy (input wire en, input wire d, output reg q);\n"
                   "  always @* if (en) q = d;\nendmodule\n", encoding="ascii")
    with pytest.raises(SynthesisError, match="latches"):
        synthesize({}, "generic", sources=[src], top="latchy")
    report = synthesize({}, "generic", sources=[src], top="latchy", allow_latches=True)
    assert any("Latch inferred" in x for x in report.latches)
    assert any(x.startswith("$_DLATCH") for x in report.latches)


def test_illegal_parameters_fail_synthesis_readably(default_spec):
    params = {**core_parameters(default_spec), "KIND": 3, "OS_RANK": 0}
    with pytest.raises(SynthesisError,
                       match="illegal parameter combination for cfar_stream: OS RANK must be 1 to 2 times REF CELLS"):
        synthesize(params, "generic")


def test_unknown_flow_is_a_spec_error(default_spec):
    with pytest.raises(SpecError) as err:
        synthesize(default_spec, "asic")
    assert err.value.field == "flow"
