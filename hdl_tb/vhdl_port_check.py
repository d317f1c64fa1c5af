"""The port-map check against a VHDL entity: a GHDL elaboration of a small probe.

Before a VHDL testbench folder is written, a probe architecture instantiates
the user's entity with every mapped port associated, by name, with a signal
of the type and width the benches drive (``std_logic``, or
``std_logic_vector`` of the sample or output-word width), and with every
generic the port map gives. GHDL analyses the user's files and the probe
(VHDL-2008) and elaborates it; nothing is simulated. Each association sits
on its own line of the probe, so GHDL's ``file:line:column`` message names
the port map field that does not fit.

Refused, with one line naming the field: RTL that does not analyse
(``--rtl``), an entity that is not there (``ports.module`` or ``--top``), a
port the entity lacks or of another type (``ports.<role>``), a port of
another width (``ports.<role>``, found at elaboration), a generic the entity
lacks (``ports.parameters.<NAME>`` or ``ports.core_parameters``), a generic
without a default that the port map does not give, and an input port
without a default that the port map does not name.
"""

from __future__ import annotations

import re
import subprocess
import tempfile
from pathlib import Path
from typing import Mapping, Sequence

from refmodel.errors import SpecError

from . import ghdl
from .port_map import PortMap, port_widths

PROBE = "cfarvec_port_probe"
_QUOTED = re.compile(r'"([^"]+)"')


def probe_source(port_map: PortMap, parameters: Mapping[str, int],
                 widths: Mapping[str, int]) -> tuple[str, dict[int, str], int]:
    """The probe architecture; the port map field of each association line; the instance line.

    Returns
    -------
    (str, dict of int to str, int)
        VHDL text, ``{line number: field}`` and the line of the instance.
    """
    names = port_map.port_names()
    lines = ["library ieee;", "use ieee.std_logic_1164.all;", f"entity {PROBE} is", f"end entity {PROBE};",
             f"architecture probe of {PROBE} is"]
    for role in names:
        kind = "std_logic" if role not in ("in_data", "out_data") else f"std_logic_vector({widths[role] - 1} downto 0)"
        lines.append(f"    signal w_{role} : {kind};")
    lines += ["begin", f"    u_dut : entity work.{port_map.module}"]
    instance = len(lines)
    fields: dict[int, str] = {}
    if parameters:
        lines.append("        generic map (")
        items = list(parameters.items())
        for k, (name, value) in enumerate(items):
            lines.append(f"            {name} => {value}{',' if k < len(items) - 1 else ''}")
            in_map = any(name == p for p in port_map.parameters)
            fields[len(lines)] = f"ports.parameters.{name}" if in_map else "ports.core_parameters"
        lines.append("        )")
    lines.append("        port map (")
    items = list(names.items())
    for k, (role, name) in enumerate(items):
        lines.append(f"            {name} => w_{role}{',' if k < len(items) - 1 else ''}")
        fields[len(lines)] = f"ports.{role}"
    lines += ["        );", "end architecture probe;"]
    return "\n".join(lines) + "\n", fields, instance


def check_against_vhdl(port_map: PortMap, rtl_files: Sequence[str | Path], *, parameters: Mapping[str, int],
                       input_bits: int, module_field: str = "ports.module") -> None:
    """Elaborate the entity with the port map (GHDL) and refuse what does not fit.

    Parameters
    ----------
    port_map : PortMap
        Validated with the VHDL names rule (:mod:`hdl_tb.vhdl_names`).
    rtl_files : sequence of path
        The VHDL sources (the entity and everything below it).
    parameters : mapping of str to int
        Generics given to the entity.
    input_bits : int
        Sample width, the width of ``in_data``.
    module_field : str
        ``"ports.module"`` or ``"--top"``, for errors.

    Raises
    ------
    SpecError
        See the module docstring.
    """
    widths = port_widths(port_map, input_bits)
    text, fields, instance = probe_source(port_map, parameters, widths)
    role_of = {role: name for role, name in port_map.port_names().items()}
    with tempfile.TemporaryDirectory(prefix="cfarvec-vhdl-probe-") as tmp:
        where = Path(tmp)
        (where / f"{PROBE}.vhd").write_text(text, encoding="ascii")
        sources = [str(Path(f).resolve()) for f in rtl_files] + [f"{PROBE}.vhd"]
        proc = ghdl.analyse(sources, PROBE, cwd=where, workdir="work")
        out = proc.stdout
        if proc.returncode == 0:
            run = subprocess.run(ghdl.run_command(PROBE, workdir="work", extra=["--stop-time=0ns"]),
                                 capture_output=True, text=True, cwd=where, errors="replace")
            out = run.stdout + run.stderr
            if run.returncode == 0:
                return
    errors = ghdl.located_errors(out)
    for file, line, message in errors:
        if Path(file).name != f"{PROBE}.vhd":
            raise SpecError("--rtl", f"the RTL does not analyse with GHDL (VHDL-2008): {Path(file).name}:{line}: "
                            f"{message}", "VHDL-2008 sources that GHDL analyses")
        if line == instance and "not found in library" in message:
            raise SpecError(module_field, f"entity {port_map.module!r} is not defined in the RTL files",
                            "the name of the top entity of the --rtl files")
        if line in fields:
            field = fields[line]
            if field == "ports.core_parameters":
                generic = _QUOTED.search(message)
                lacks = "no declaration" in message and generic is not None
                raise SpecError(field, f"true, but entity {port_map.module!r} "
                                + (f"has no generic {generic.group(1)!r}" if lacks
                                   else f"refuses the reference core's generics: {message}"),
                                "false for an entity without the reference core's generics")
            if field.startswith("ports.parameters."):
                name = field.rsplit(".", 1)[1]
                what = f"has no generic {name!r}" if "no declaration" in message else f"refuses it: {message}"
                raise SpecError(field, f"entity {port_map.module!r} {what}", "a generic the entity declares")
            role = field.split(".", 1)[1]
            name = role_of[role]
            if "no declaration" in message:
                raise SpecError(field, f"entity {port_map.module!r} has no port {name!r}",
                                f"the name of its {role} port")
            if "associate" in message:
                kind = "std_logic" if role not in ("in_data", "out_data") else \
                    f"std_logic_vector (or std_ulogic_vector) of {widths[role]} bits"
                raise SpecError(field, f"port {name!r} of {port_map.module!r} has another type than the "
                                f"testbench's {kind}", f"a port of type {kind}")
            raise SpecError(field, f"port {name!r} of {port_map.module!r}: {message}", "a port the testbench can drive")
        if line == instance:
            quoted = _QUOTED.search(message)
            thing = quoted.group(1) if quoted else "?"
            if "generic" in message:
                raise SpecError("ports.parameters", f"entity {port_map.module!r} has the generic {thing!r} "
                                "without a default, which the port map does not give",
                                f"a [ports.parameters] entry for {thing}")
            if "port" in message:
                raise SpecError("ports", f"entity {port_map.module!r} has the port {thing!r} without a default, "
                                "which the port map does not name", "a port map naming every input port")
        raise SpecError("--rtl", f"the entity does not elaborate with the port map: {message}",
                        "VHDL-2008 sources that GHDL elaborates")
    bound = re.search(rf"bound check failure at [^\s:]*{PROBE}\.vhd:(\d+)", out)
    if bound and int(bound.group(1)) in fields and fields[int(bound.group(1))].split(".", 1)[1] in widths:
        field = fields[int(bound.group(1))]
        role = field.split(".", 1)[1]
        why = {"in_data": "fixed.input_bits", "out_data": "the output word, or ports.out_data_bits"}.get(role, "1 bit")
        raise SpecError(field, f"port {role_of[role]!r} of {port_map.module!r} is not {widths[role]} bits wide "
                        "(GHDL: bound check failure at elaboration)", f"a port of {widths[role]} bits ({why})")
    if bound and int(bound.group(1)) in fields:
        raise SpecError(fields[int(bound.group(1))], "out of the range the entity declares "
                        "(GHDL: bound check failure at elaboration)", "a value in the generic's range")
    raise SpecError("--rtl", f"the entity does not elaborate with the port map: {ghdl.first_error(out)}",
                    "VHDL-2008 sources that GHDL elaborates")
