"""The ``[ports]`` table: identifier rules, defaults, layout checks, and the check against real RTL.

Sources beside each check:

- IEEE Std 1364-2005, section 3.7 (simple identifiers, case sensitive, the
  examples ``shiftreg_a``, ``busa_index``, ``error_condition``, ``merge_ab``,
  ``_bus3``, ``n$657``; the length limit of at least 1024 characters),
  section 3.7.1 (escaped identifiers, the examples ``\\busa+index``,
  ``\\-clock``), section 3.7.2 and Annex B (keywords, lowercase);
- IEEE Std 1800-2012, Annex B (SystemVerilog keywords; the cocotb runner
  compiles with ``-g2012``);
- ``docs/bit-true.md`` section 8 (the standard output word layout);
- ``hdl_tb/rtl/cfar_stream.v`` (the reference core's port names, read from the file).
"""

from __future__ import annotations

import re
import shutil

import pytest

from hdl_tb.core_params import RTL_DIR
from hdl_tb.port_map import (CORE_PARAMETER_NAMES, REFERENCE_MODULE, SIGNAL_DEFAULTS, check_against_rtl,
                             check_identifier, port_map_from_spec)
from hdl_tb.tb_generator import bench_parameters, module_parameters
from refmodel.block_spec import spec_from_dict
from refmodel.errors import SpecError

needs_iverilog = pytest.mark.skipif(shutil.which("iverilog") is None, reason="Icarus Verilog is not installed")


def _spec(ports=None, input_bits=10, threshold_bits=12):
    data = {"detector": {"kind": "ca", "ref_cells_per_side": 4, "guard_cells_per_side": 1, "alpha": 5.0},
            "fixed": {"input_bits": input_bits, "threshold_bits": threshold_bits}}
    if ports is not None:
        data["ports"] = ports
    return spec_from_dict(data)


def _error(ports, **kw) -> SpecError:
    with pytest.raises(SpecError) as err:
        port_map_from_spec(_spec(ports), **kw)
    assert "\n" not in str(err.value)
    return err.value


# ---------------------------------------------------------------- identifiers

@pytest.mark.parametrize("name", ["shiftreg_a", "busa_index", "error_condition", "merge_ab", "_bus3", "n$657"])
def test_identifier_examples_of_the_standard_are_accepted(name):
    # IEEE Std 1364-2005, 3.7: these six are the standard's own examples of legal identifiers.
    assert check_identifier("ports.clock", name) == name


@pytest.mark.parametrize("name", ["1bus", "$bus", "bus-a", "bus a", "bus.a", "ünï", "a\nb", ""])
def test_names_breaking_the_identifier_rule_are_refused(name):
    # IEEE Std 1364-2005, 3.7: first character a letter or underscore, then letters, digits, $ and _.
    with pytest.raises(SpecError) as err:
        check_identifier("ports.in_data", name)
    assert err.value.field == "ports.in_data"


@pytest.mark.parametrize("name", ["\\busa+index", "\\-clock"])
def test_escaped_identifiers_are_refused(name):
    # IEEE Std 1364-2005, 3.7.1 examples of escaped identifiers; this tool does not accept them.
    with pytest.raises(SpecError) as err:
        check_identifier("ports.reset", name)
    assert "escaped" in str(err.value)


@pytest.mark.parametrize("word", ["module", "wire", "reg", "always", "endgenerate", "pulsestyle_onevent",
                                  "uwire", "localparam", "cell", "xnor"])
def test_verilog_keywords_are_refused(word):
    # IEEE Std 1364-2005, Annex B (uwire is new in the 2005 edition).
    with pytest.raises(SpecError) as err:
        check_identifier("ports.out_data", word)
    assert "1364-2005" in str(err.value)


@pytest.mark.parametrize("word", ["logic", "bit", "interface", "always_ff", "int", "string"])
def test_systemverilog_keywords_are_refused(word):
    # IEEE Std 1800-2012, Annex B.
    with pytest.raises(SpecError) as err:
        check_identifier("ports.out_data", word)
    assert "1800-2012" in str(err.value)


def test_keywords_are_lowercase_only():
    # IEEE Std 1364-2005, 3.7.2: keywords are lowercase; identifiers are case sensitive (3.7).
    assert check_identifier("ports.clock", "Wire") == "Wire"
    assert check_identifier("ports.clock", "MODULE") == "MODULE"


def test_identifier_length_limit_is_the_standards_minimum():
    # IEEE Std 1364-2005, 3.7: a length limit, if any, shall be at least 1024 characters.
    assert check_identifier("ports.clock", "a" * 1024) == "a" * 1024
    with pytest.raises(SpecError):
        check_identifier("ports.clock", "a" * 1025)


def test_non_strings_are_refused():
    for value in (3, None, ["clk"], True):
        with pytest.raises(SpecError):
            check_identifier("ports.clock", value)


# ---------------------------------------------------------------- defaults and layout

def _reference_ports() -> set[str]:
    """Port names declared in the reference core's source file."""
    text = (RTL_DIR / "cfar_stream.v").read_text()
    header = text[text.index("module cfar_stream"):text.index(");", text.index(") (")) + 2]
    return set(re.findall(r"\b(?:input|output)\s+wire\s+(?:\[[^\]]*\]\s*)?(\w+)", header))


def test_defaults_are_the_reference_core_names():
    pm = port_map_from_spec(_spec())
    ports = _reference_ports()
    assert pm.module == REFERENCE_MODULE == "cfar_stream"
    assert pm.clock in ports and pm.reset in ports
    assert set(pm.signals.values()) <= ports
    assert {pm.clock, pm.reset, *pm.signals.values()} == ports
    assert pm.reset_active_high and pm.core_parameters and not pm.parameters
    assert pm.is_reference and pm.standard_layout


def test_default_output_fields_follow_the_bit_true_spec():
    # docs/bit-true.md section 8: cut [W_in-1:0], T [W_in+W_T-1:W_in], det, valid, last above.
    pm = port_map_from_spec(_spec(input_bits=10, threshold_bits=12))
    assert dict(pm.out_fields) == {"cut": (0, 10), "threshold": (10, 12), "det": (22, 1), "valid": (23, 1),
                                   "last": (24, 1)}
    assert pm.out_data_bits == 10 + 12 + 3


def test_a_full_user_map():
    pm = port_map_from_spec(_spec({
        "module": "my_cfar", "clock": "aclk", "reset": "aresetn", "reset_active": "low",
        "in_data": "din", "in_valid": "din_vld", "in_ready": "din_rdy", "in_last": "din_eof",
        "out_data": "dout", "out_valid": "dout_vld", "out_ready": "dout_rdy", "out_last": "",
        "out_data_bits": 32, "out_fields": {"last": 0, "valid": 1, "det": 2, "threshold": 3, "cut": 20},
        "parameters": {"DEPTH": 4, "MODE": -1},
    }))
    assert pm.module == "my_cfar" and pm.clock == "aclk" and pm.reset == "aresetn"
    assert not pm.reset_active_high
    assert pm.signals["out_last"] is None
    assert not pm.core_parameters  # default false for a module that is not the reference core
    assert dict(pm.parameters) == {"DEPTH": 4, "MODE": -1}
    assert not pm.is_reference and not pm.standard_layout
    assert "out_last" not in pm.port_names()
    # A word built by hand in the user's layout, moved to docs/bit-true.md section 8.
    cut, t, det, valid, last = 0x2AB, 0x5A5, 1, 0, 1
    user = last | valid << 1 | det << 2 | t << 3 | cut << 20
    standard = cut | t << 10 | det << 22 | valid << 23 | last << 24
    assert pm.to_standard(user) == standard


def test_top_overrides_the_module_and_its_default_parameters():
    pm = port_map_from_spec(_spec({"module": "a_core"}), top="b_core")
    assert pm.module == "b_core" and not pm.core_parameters
    pm = port_map_from_spec(_spec({"core_parameters": True, "module": "copy_of_core"}))
    assert pm.core_parameters


@pytest.mark.parametrize("ports, field", [
    ({"clk": "clk"}, "ports.clk"),
    ({"clock": "wire"}, "ports.clock"),
    ({"in_data": "9lives"}, "ports.in_data"),
    ({"in_last": ""}, "ports.in_last"),
    ({"reset_active": "rising"}, "ports.reset_active"),
    ({"module": "cfarvec_bulk_top"}, "ports.module"),
    ({"module": "cfar_stream_tb"}, "ports.module"),
    ({"out_valid": "s_axis_tvalid"}, "ports.out_valid"),
    ({"reset": "clk"}, "ports.reset"),
    ({"core_parameters": "yes"}, "ports.core_parameters"),
    ({"parameters": {"DEPTH": 1.5}}, "ports.parameters.DEPTH"),
    ({"parameters": {"DEPTH": True}}, "ports.parameters.DEPTH"),
    ({"parameters": {"1X": 1}}, "ports.parameters.1X"),
    ({"parameters": {"INPUT_BITS": 8}}, "ports.parameters.INPUT_BITS"),
    ({"parameters": [1]}, "ports.parameters"),
    ({"out_fields": {"snr": 3}}, "ports.out_fields.snr"),
    ({"out_fields": {"cut": -1}}, "ports.out_fields.cut"),
    ({"out_fields": {"cut": 5}}, "ports.out_fields.threshold"),
    ({"out_data_bits": 20}, "ports.out_fields.threshold"),
    ({"out_data_bits": 0}, "ports.out_data_bits"),
])
def test_bad_port_maps_name_the_field(ports, field):
    assert _error(ports).field == field


def test_top_is_checked_too():
    assert _error({}, top="endmodule").field == "--top"
    assert _error({}, top="cfarvec_port_adapter").field == "--top"


def test_core_parameter_names_match_the_reference_core():
    # Every name passed with core_parameters = true is a parameter of hdl_tb/rtl/cfar_stream.v.
    text = (RTL_DIR / "cfar_stream.v").read_text()
    declared = set(re.findall(r"parameter\s+(?:integer\s+|\[[^\]]*\]\s*)?(\w+)\s*=", text))
    assert set(CORE_PARAMETER_NAMES) <= declared


# ---------------------------------------------------------------- against RTL (Icarus Verilog)

USER_CORE = """\
module user_core #(parameter integer W = 8, parameter integer DEPTH = 2) (
    input  wire         aclk,
    input  wire         aresetn,
    input  wire [W-1:0] din,
    input  wire         din_vld,
    output wire         din_rdy,
    input  wire         din_eof,
    output wire [23:0]  dout,
    output wire         dout_vld,
    input  wire         dout_rdy
);
    assign din_rdy = 1'b1;
    assign dout = {16'd0, din};
    assign dout_vld = din_vld;
endmodule
"""
USER_PORTS = {"module": "user_core", "clock": "aclk", "reset": "aresetn", "reset_active": "low",
              "in_data": "din", "in_valid": "din_vld", "in_ready": "din_rdy", "in_last": "din_eof",
              "out_data": "dout", "out_valid": "dout_vld", "out_ready": "dout_rdy", "out_last": "",
              "out_data_bits": 24, "out_fields": {"cut": 0, "threshold": 8, "det": 20, "valid": 21, "last": 22}}


def _check(tmp_path, ports, source=USER_CORE):
    f = tmp_path / "user_core.v"
    f.write_text(source)
    spec = _spec(ports, input_bits=8, threshold_bits=12)
    pm = port_map_from_spec(spec)
    check_against_rtl(pm, [f], parameters=module_parameters(pm, bench_parameters(spec)),
                      input_bits=spec.input_bits)


def _check_error(tmp_path, ports, **kw) -> SpecError:
    with pytest.raises(SpecError) as err:
        _check(tmp_path, ports, **kw)
    assert "\n" not in str(err.value)
    return err.value


@needs_iverilog
def test_a_matching_module_passes(tmp_path):
    _check(tmp_path, {**USER_PORTS, "parameters": {"DEPTH": 3}})


@needs_iverilog
def test_a_port_the_module_lacks_is_named(tmp_path):
    err = _check_error(tmp_path, {**USER_PORTS, "in_ready": "din_ready"})
    assert err.field == "ports.in_ready"
    assert "'din_ready'" in str(err) and "'user_core'" in str(err)


@needs_iverilog
def test_a_missing_last_output_is_named(tmp_path):
    err = _check_error(tmp_path, {**USER_PORTS, "out_last": "dout_eof"})
    assert err.field == "ports.out_last" and "'dout_eof'" in str(err)


@needs_iverilog
def test_a_module_missing_from_the_files(tmp_path):
    err = _check_error(tmp_path, {**USER_PORTS, "module": "other_core"})
    assert err.field == "ports.module" and "'other_core'" in str(err)


@needs_iverilog
def test_rtl_that_does_not_compile(tmp_path):
    broken = USER_CORE.replace("input  wire         din_vld,", "input  wire         din_vld;")
    err = _check_error(tmp_path, USER_PORTS, source=broken)
    assert err.field == "--rtl" and "does not compile" in str(err) and "user_core.v" in str(err)


@needs_iverilog
def test_a_parameter_the_module_lacks(tmp_path):
    err = _check_error(tmp_path, {**USER_PORTS, "parameters": {"FIFO": 3}})
    assert err.field == "ports.parameters.FIFO"
    err = _check_error(tmp_path, {**USER_PORTS, "core_parameters": True})
    assert err.field == "ports.core_parameters"


@needs_iverilog
def test_a_port_of_the_wrong_width(tmp_path):
    # in_data must be fixed.input_bits wide: the module's din is W = 10 bits against 8-bit samples.
    err = _check_error(tmp_path, {**USER_PORTS, "parameters": {"W": 10}})
    assert err.field == "ports.in_data" and "10 bits" in str(err) and "drives 8" in str(err)
    err = _check_error(tmp_path, {**USER_PORTS, "out_data_bits": 30})
    assert err.field == "ports.out_data"


def test_missing_simulator(tmp_path, monkeypatch):
    monkeypatch.setenv("PATH", str(tmp_path))
    err = _check_error(tmp_path, USER_PORTS)
    assert err.field == "simulator"


def test_defaults_need_no_port_map_section():
    assert port_map_from_spec(_spec()).port_names() == {"clock": "clk", "reset": "srst", **SIGNAL_DEFAULTS}
