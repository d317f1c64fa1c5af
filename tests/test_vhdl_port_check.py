"""The port-map check against a VHDL entity, and the refusals of the VHDL flow (issue 16, items 1 and 3).

Each bad port map or option must end ``cfarvec testbench`` (or ``cosim``)
with one line naming the field, exit code 2, and no output folder (the
project's bad-input rule, docs/testbench.md). The entity is
``tests/vhdl/ca_line_cfar.vhd``; the widths it declares follow from its
generics (IEEE Std 1076-2008, 6.5.6.3: a port's subtype is fixed at
elaboration), so a generic of another value gives a port of another width.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from cfarvec import cli
from hdl_tb.core_params import CORE_SOURCES

ROOT = Path(__file__).resolve().parents[1]
SPEC = ROOT / "tests" / "vhdl" / "ca_line.toml"
CORE = ROOT / "tests" / "vhdl" / "ca_line_cfar.vhd"
GHDL = ["--simulator", "ghdl"]

needs_ghdl = pytest.mark.skipif(shutil.which("ghdl") is None, reason="needs GHDL (make tools)")


def run(tmp_path, capsys, spec_text: str, rtl=(CORE,), extra=()) -> tuple[int, str]:
    spec = tmp_path / "spec.toml"
    spec.write_text(spec_text)
    out = tmp_path / "out"
    code = cli.main(["testbench", str(spec), "--rtl", *map(str, rtl), "-o", str(out), *extra])
    err = capsys.readouterr().err.strip()
    assert not out.exists()
    return code, err


def one_line(code: int, err: str, field: str) -> str:
    assert code == 2, err
    assert len(err.splitlines()) == 1, err
    assert err.startswith(f"cfarvec: {field}:") or f" {field}:" in err.split(";")[0], err
    return err


BASE = SPEC.read_text()

BAD_MAPS = {
    # a port the entity lacks
    "missing port": (BASE.replace('in_last = "din_last"', 'in_last = "din_lust"'), "ports.in_last", "no port"),
    # the entity's Dout is 12 + 16 + 3 = 31 bits with G_TBITS = 16; the bench drives the 32-bit word
    "out_data width": (BASE.replace('G_TBITS = "threshold_bits"', "G_TBITS = 16"), "ports.out_data", "32 bits"),
    # Din is 11 bits with G_INPUT_BITS = 11; the samples are 12 bits
    "in_data width": (BASE.replace('G_INPUT_BITS = "input_bits"', "G_INPUT_BITS = 11"), "ports.in_data", "12 bits"),
    # a generic the entity lacks
    "missing generic": (BASE + "G_NOPE = 3\n", "ports.parameters.G_NOPE", "no generic"),
    # a vector port where the bench drives one bit, and the reverse
    "port type": (BASE.replace('in_data = "din"', 'in_data = "din_tmp"').replace('in_valid = "din_valid"',
                                                                               'in_valid = "din"')
                  .replace('in_data = "din_tmp"', 'in_data = "din_valid"'), "ports.in_data", "type"),
    # the reference core's generics, which this entity does not declare
    "core parameters": (BASE.replace("[ports.out_fields]", "core_parameters = true\n\n[ports.out_fields]"),
                        "ports.core_parameters", "no generic"),
}


@needs_ghdl
@pytest.mark.parametrize("case", sorted(BAD_MAPS))
def test_a_port_map_that_does_not_fit_the_entity_is_refused_naming_the_field(tmp_path, capsys, case):
    text, field, words = BAD_MAPS[case]
    err = one_line(*run(tmp_path, capsys, text, extra=GHDL), field)
    assert words in err, err


@needs_ghdl
def test_an_entity_that_is_not_there(tmp_path, capsys):
    err = one_line(*run(tmp_path, capsys, BASE, extra=[*GHDL, "--top", "no_such_cfar"]), "--top")
    assert "not defined" in err


@needs_ghdl
def test_rtl_that_does_not_analyse(tmp_path, capsys):
    bad = tmp_path / "broken.vhd"
    bad.write_text(CORE.read_text().replace("end entity ca_line_cfar;", "end entity ca_line_cfar"))
    err = one_line(*run(tmp_path, capsys, BASE, rtl=[bad], extra=GHDL), "--rtl")
    assert "broken.vhd:" in err


WRAPPER = """
library ieee;
use ieee.std_logic_1164.all;
entity {name} is
    generic (DEPTH : positive{default}; G_INPUT_BITS, G_REF, G_GUARD, G_SUM_BITS, G_ALPHA, G_DROP, G_TFRAC,
             G_TBITS, G_ROUNDING, G_WRAP, G_COMPARE_GE, G_EDGE : natural := 1);
    port (clock, reset_n, din_valid, din_last, dout_ready{enable} : in std_logic;
          din : in std_logic_vector(11 downto 0);
          din_ready, dout_valid : out std_logic;
          dout : out std_logic_vector(31 downto 0));
end entity;
architecture empty of {name} is
begin
end architecture;
"""


@needs_ghdl
def test_a_generic_without_default_that_the_map_does_not_give(tmp_path, capsys):
    rtl = tmp_path / "wrap.vhd"
    rtl.write_text(WRAPPER.format(name="CA_Line_CFAR", default="", enable=""))
    err = one_line(*run(tmp_path, capsys, BASE, rtl=[rtl], extra=GHDL), "ports.parameters")
    assert "'depth'" in err.lower() and "without a default" in err


@needs_ghdl
def test_an_input_port_without_default_that_the_map_does_not_name(tmp_path, capsys):
    rtl = tmp_path / "wrap.vhd"
    rtl.write_text(WRAPPER.format(name="CA_Line_CFAR", default=" := 4", enable=", enable"))
    err = one_line(*run(tmp_path, capsys, BASE, rtl=[rtl], extra=GHDL), "ports")
    assert "'enable'" in err.lower()


def test_vhdl_rtl_on_a_verilog_simulator_is_refused(tmp_path, capsys):
    err = one_line(*run(tmp_path, capsys, BASE, extra=["--simulator", "icarus"]), "--simulator")
    assert "ghdl" in err


def test_ghdl_without_vhdl_rtl_is_refused(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text((ROOT / "tests" / "data" / "vectors_small.toml").read_text())
    code = cli.main(["testbench", str(spec), "-o", str(tmp_path / "out"), *GHDL])
    err = one_line(code, capsys.readouterr().err.strip(), "--simulator")
    assert "reference core" in err


def test_vhdl_and_verilog_files_mixed_are_refused(tmp_path, capsys):
    one_line(*run(tmp_path, capsys, BASE, rtl=[CORE, *CORE_SOURCES], extra=GHDL), "--rtl")


def test_a_map_spec_is_refused_naming_map(tmp_path, capsys):
    text = (ROOT / "examples" / "lagoon_map_ca.toml").read_text()
    one_line(*run(tmp_path, capsys, text, extra=GHDL), "map")


def test_the_pure_verilog_bench_is_refused_for_vhdl_rtl(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text(BASE)
    code = cli.main(["cosim", str(spec), "--rtl", str(CORE), *GHDL, "--mode", "verilog"])
    err = one_line(code, capsys.readouterr().err.strip(), "--mode")
    assert "vhdl" in err


@needs_ghdl
def test_first_error_of_a_ghdl_log_is_its_first_located_message(tmp_path):
    # GHDL prints "file:line:column: message" with no "error" word (a direct run of ghdl on a broken file).
    from hdl_tb import ghdl
    from hdl_tb.simulators import first_error

    bad = tmp_path / "broken.vhd"
    bad.write_text("entity broken is\n    port (x : in bit\nend entity;\n")
    log = ghdl.analyse([bad.name], "broken", cwd=tmp_path, workdir="work").stdout
    assert "broken.vhd:3:" in first_error(log) or "broken.vhd:2:" in first_error(log)
    assert ghdl.first_error(log).startswith("broken.vhd:")


def test_a_mode_of_the_other_language_is_refused_before_anything_is_written(tmp_path, capsys):
    spec = tmp_path / "spec.toml"
    spec.write_text(BASE)
    keep = tmp_path / "kept"
    code = cli.main(["cosim", str(spec), "--rtl", str(CORE), *GHDL, "--mode", "verilog", "--keep", str(keep)])
    one_line(code, capsys.readouterr().err.strip(), "--mode")
    assert not keep.exists()
    small = tmp_path / "small.toml"
    small.write_text((ROOT / "tests" / "data" / "vectors_small.toml").read_text())
    code = cli.main(["cosim", str(small), "--mode", "vhdl", "--keep", str(keep)])
    one_line(code, capsys.readouterr().err.strip(), "--mode")
    assert not keep.exists()
