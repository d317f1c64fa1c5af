"""VHDL names in the port map (issue 16, item 1): IEEE Std 1076-2008, 15.4 and 15.10.

Each check cites the rule of IEEE Std 1076-2008, IEEE Standard VHDL Language
Reference Manual, that decides it: 15.4.2 (basic identifiers: a letter, then
letters or digits each optionally preceded by a single underline; case is
not significant), 15.4.3 (extended identifiers, not accepted here) and 15.10
(reserved words).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from cfarvec import cli
from hdl_tb.port_map import port_map_from_spec
from hdl_tb.vhdl_bench import vhdl_port_map
from hdl_tb.vhdl_names import VHDL_2008_RESERVED, check_identifier, is_vhdl_file
from refmodel.block_spec import load_spec, spec_from_dict
from refmodel.errors import SpecError

ROOT = Path(__file__).resolve().parents[1]
SPEC = ROOT / "tests" / "vhdl" / "ca_line.toml"


# IEEE Std 1076-2008, 15.4.2, examples of basic identifiers (from memory of the clause's example list).
@pytest.mark.parametrize("name", ["COUNT", "X", "c_out", "FFT", "Decoder", "VHSIC", "X1", "PageCount",
                                  "STORE_NEXT_ITEM"])
def test_basic_identifiers_of_the_standard_are_accepted(name):
    assert check_identifier("ports.clock", name) == name


# 15.4.2: letter { [ underline ] letter_or_digit }: no leading digit or underline, no trailing or double
# underline, no other characters; 15.4.3: \...\ is an extended identifier.
@pytest.mark.parametrize("name", ["1clk", "_clk", "clk_", "clk__n", "clk$", "clk-n", "cl k", "\\clk\\", ""])
def test_names_outside_the_basic_identifier_rule_are_refused(name):
    with pytest.raises(SpecError) as err:
        check_identifier("ports.clock", name)
    assert err.value.field == "ports.clock"


# 15.10 lists the reserved words; 15.4.2: case is not significant, so "Signal" is the reserved word too.
# "sequence", "vunit" and "context" are reserved words of the 2008 edition (PSL and context declarations).
@pytest.mark.parametrize("name", ["signal", "Signal", "ENTITY", "sequence", "vunit", "context", "force"])
def test_reserved_words_are_refused_in_any_case(name):
    with pytest.raises(SpecError) as err:
        check_identifier("ports.in_data", name)
    assert "reserved word" in err.value.problem


def test_reserved_word_list_holds_the_2008_additions():
    # IEEE Std 1076-2008, 15.10 (from memory: 2008 adds context, force, parameter, release and the PSL words
    # to the list of 1076-2002); Verilog keywords are not VHDL reserved words.
    assert {"context", "force", "parameter", "release", "assume", "property", "strong"} <= VHDL_2008_RESERVED
    assert "logic" not in VHDL_2008_RESERVED and "reg" not in VHDL_2008_RESERVED


def _spec(ports: dict):
    data = load_spec(SPEC).to_dict(resolved=True)
    data["ports"] = ports
    det = data.get("detector", {})
    if "alpha" in det and "design_pfa" in det:
        det.pop("design_pfa")
    return spec_from_dict(data)


def test_verilog_keywords_are_fine_vhdl_names():
    # "reg" and "wire" are Verilog keywords (IEEE Std 1364-2005, Annex B) but ordinary VHDL names.
    spec = _spec({"module": "my_cfar", "clock": "wire", "reset": "reg"})
    with pytest.raises(SpecError):
        port_map_from_spec(spec)
    pm = port_map_from_spec(spec, language="vhdl")
    assert (pm.clock, pm.reset) == ("wire", "reg")


def test_two_roles_equal_but_for_case_name_one_port():
    # 15.4.2: "Clk" and "CLK" are the same identifier.
    spec = _spec({"module": "my_cfar", "clock": "Clk", "reset": "CLK"})
    assert port_map_from_spec(spec).reset == "CLK"  # distinct in Verilog
    with pytest.raises(SpecError) as err:
        port_map_from_spec(spec, language="vhdl")
    assert err.value.field == "ports.reset"


def test_generics_equal_but_for_case_are_one_generic():
    spec = _spec({"module": "my_cfar", "parameters": {"Depth": 4, "DEPTH": 5}})
    with pytest.raises(SpecError) as err:
        vhdl_port_map(spec, None)
    assert err.value.field.startswith("ports.parameters.")


def test_entity_cannot_take_a_name_of_the_generated_bench_in_any_case():
    with pytest.raises(SpecError) as err:
        vhdl_port_map(_spec({"module": "CFARVEC_BULK_TOP"}), None)
    assert err.value.field == "ports.module"


def test_generic_beyond_the_vhdl_integer_range_is_refused():
    # IEEE Std 1076-2008, 5.2.3.1: an implementation's integer range includes -2147483647 .. 2147483647
    # (the Verilog rule of the port map allows -2147483648).
    assert vhdl_port_map(_spec({"module": "my_cfar", "parameters": {"BIG": 2**31 - 1}}), None).parameters["BIG"]
    with pytest.raises(SpecError) as err:
        vhdl_port_map(_spec({"module": "my_cfar", "parameters": {"BIG": -(2**31)}}), None)
    assert err.value.field == "ports.parameters.BIG"


def test_vhdl_file_suffixes():
    assert is_vhdl_file("a/b/core.vhd") and is_vhdl_file("CORE.VHDL")
    assert not is_vhdl_file("core.v") and not is_vhdl_file("core.sv")


def test_bad_vhdl_name_on_the_command_line_is_one_line_exit_2(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC.read_text().replace('clock = "clock"', 'clock = "clock__a"'))
    code = cli.main(["testbench", str(spec), "--rtl", str(ROOT / "tests" / "vhdl" / "ca_line_cfar.vhd"),
                     "--simulator", "ghdl", "-o", str(tmp_path / "out")])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "ports.clock" in err and "15.4.2" in err
    assert not (tmp_path / "out").exists()
