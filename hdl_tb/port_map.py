"""The port map: how a testbench reaches the ports of the module under test.

A block spec may carry a ``[ports]`` table naming the top module of the
user's own RTL, its clock, its reset and the reset's active level, the eight
stream signals, where each field of the output word sits when the user's
word differs from ``docs/bit-true.md`` section 8, and extra Verilog
parameters. Every field is optional; the defaults are the names of the
reference core ``hdl_tb/rtl/cfar_stream.v``. :func:`port_map_from_spec`
validates the table and returns a frozen :class:`PortMap`.

Every name is checked against the identifier rule of IEEE Std 1364-2005,
section 3.7 (``[a-zA-Z_][a-zA-Z0-9_$]*``, at most 1024 characters; escaped
identifiers are not accepted) and refused when it is a keyword of IEEE Std
1364-2005 Annex B. Names that are keywords of SystemVerilog (IEEE Std
1800-2012 Annex B) are refused too, because the cocotb runner compiles with
Icarus Verilog's ``-g2012``. A validated name can therefore be pasted into
generated Verilog and Python without quoting: no code can be injected
through the port map.

Example ``[ports]`` table (all values are the defaults except where noted)::

    [ports]
    module = "my_cfar"          # default "cfar_stream"
    clock = "clk"
    reset = "rst_n"             # default "srst"
    reset_active = "low"        # "high" (default) or "low"
    in_data = "s_axis_tdata"
    in_valid = "s_axis_tvalid"
    in_ready = "s_axis_tready"
    in_last = "s_axis_tlast"
    out_data = "m_axis_tdata"
    out_valid = "m_axis_tvalid"
    out_ready = "m_axis_tready"
    out_last = "m_axis_tlast"   # "" when the module has no separate last output
    core_parameters = false     # pass the reference core's parameters (default: true only for "cfar_stream")
    out_data_bits = 40          # width of out_data (default: just wide enough for the fields)

    [ports.out_fields]          # LSB of each output field in out_data (default: docs/bit-true.md section 8)
    last = 0
    valid = 1
    det = 2
    threshold = 3
    cut = 24

    [ports.parameters]          # extra parameters given to the module: an integer, or the name of a
    FIFO_DEPTH = 4              # quantity of the spec (DERIVED_QUANTITIES), so that a change of the spec
    MY_ALPHA = "alpha_int"      # (Pfa, widths) reaches the module: "alpha_int", "threshold_bits", ...
"""

from __future__ import annotations

import re
import subprocess
import tempfile
from dataclasses import dataclass, field
from types import MappingProxyType
from pathlib import Path
from typing import Any, Mapping, Sequence

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError, require
from refmodel.spec_fields import choice, integer
from refmodel.fixedpoint.word_format import output_field_offsets

#: Top module of the reference core.
REFERENCE_MODULE = "cfar_stream"

#: Stream signal roles, in port order, with the reference core's names.
SIGNAL_DEFAULTS = {
    "in_data": "s_axis_tdata",
    "in_valid": "s_axis_tvalid",
    "in_ready": "s_axis_tready",
    "in_last": "s_axis_tlast",
    "out_data": "m_axis_tdata",
    "out_valid": "m_axis_tvalid",
    "out_ready": "m_axis_tready",
    "out_last": "m_axis_tlast",
}
#: Roles that may be mapped to ``""`` (not present on the module).
OPTIONAL_SIGNALS = ("out_last",)
#: Map (range-Doppler) blocks: the map reference core ``hdl_tb/rtl/cfar_map.v`` and its stream signals, with
#: the start-of-map markers on TUSER (``in_last`` / ``out_last`` mark the end of each fast-axis line there).
MAP_REFERENCE_MODULE = "cfar_map"
MAP_SIGNAL_DEFAULTS = {**SIGNAL_DEFAULTS, "in_user": "s_axis_tuser", "out_user": "m_axis_tuser"}
#: Map roles that may be ``""``: the module has no such port (the bench then does not drive or check it).
MAP_OPTIONAL_SIGNALS = ("in_last", "out_last", "in_user", "out_user")
#: Output word fields (``docs/bit-true.md`` section 8).
OUTPUT_FIELDS = ("cut", "threshold", "det", "valid", "last")
#: Module names the generated testbench uses itself.
RESERVED_MODULES = ("cfarvec_port_adapter", "cfarvec_bulk_top", "cfarvec_port_probe", "cfar_stream_tb",
                    "cocotb_iverilog_dump", "cfar_map_tb", "cfarvec_map_shim")
#: Quantities of the spec a ``[ports.parameters]`` value may name (``BlockSpec`` attributes, the names of the
#: manifest's ``derived`` table and of the spec fields): the constant A, the widths, the window.
DERIVED_QUANTITIES = ("alpha_int", "alpha_bits", "drop_bits", "threshold_bits", "threshold_frac_bits", "sum_bits",
                      "side_sum_bits", "statistic_bits", "product_bits", "input_bits", "output_bits",
                      "window_length", "half_window", "ref_per_side", "guard_per_side", "n_ref",
                      "pipeline_stages", "latency_cycles", "drain_cycles", "mean_shift", "frame_length")

#: Reference-core parameters (passed when ``core_parameters`` is true).
CORE_PARAMETER_NAMES = ("INPUT_BITS", "REF_CELLS", "GUARD_CELLS", "KIND", "OS_RANK", "EDGE", "MAX_FRAME_LENGTH",
                        "SUM_BITS", "ALPHA_INT", "DROP_BITS", "THRESHOLD_FRAC_BITS", "THRESHOLD_BITS", "ROUNDING",
                        "OVERFLOW", "COMPARE_GE", "TRUNCATE_PARTIALS", "PIPELINE_STAGES", "SRST_LEVEL")
#: Map reference-core parameters (``hdl_tb.core_params.map_core_parameters``).
MAP_CORE_PARAMETER_NAMES = ("INPUT_BITS", "RANGE_CELLS", "DOPPLER_BINS", "ORDER", "WINDOW", "REF_RANGE",
                            "REF_DOPPLER", "GUARD_RANGE", "GUARD_DOPPLER", "KIND", "RANGE_EDGE", "DOPPLER_EDGE",
                            "SUM_BITS", "ALPHA_INT", "DROP_BITS", "THRESHOLD_FRAC_BITS", "THRESHOLD_BITS",
                            "ROUNDING", "OVERFLOW", "COMPARE_GE", "TRUNCATE_PARTIALS", "PIPELINE_STAGES",
                            "SRST_LEVEL")

_KEYS = ("module", "clock", "reset", "reset_active", *SIGNAL_DEFAULTS, "core_parameters", "out_data_bits",
         "out_fields", "parameters")
MAX_IDENTIFIER_LENGTH = 1024
MAX_OUT_DATA_BITS = 4096

#: IEEE Std 1364-2005, section 3.7: simple identifiers.
IDENTIFIER = re.compile(r"[a-zA-Z_][a-zA-Z0-9_$]*\Z")

#: Reserved keywords of IEEE Std 1364-2005, Annex B.
VERILOG_2005_KEYWORDS = frozenset("""
always and assign automatic begin buf bufif0 bufif1 case casex casez cell cmos config deassign default
defparam design disable edge else end endcase endconfig endfunction endgenerate endmodule endprimitive
endspecify endtable endtask event for force forever fork function generate genvar highz0 highz1 if ifnone
incdir include initial inout input instance integer join large liblist library localparam macromodule
medium module nand negedge nmos nor noshowcancelled not notif0 notif1 or output parameter pmos posedge
primitive pull0 pull1 pulldown pullup pulsestyle_ondetect pulsestyle_onevent rcmos real realtime reg
release repeat rnmos rpmos rtran rtranif0 rtranif1 scalared showcancelled signed small specify specparam
strong0 strong1 supply0 supply1 table task time tran tranif0 tranif1 tri tri0 tri1 triand trior trireg
unsigned use uwire vectored wait wand weak0 weak1 while wire wor xnor xor
""".split())

#: Keywords IEEE Std 1800-2012 (SystemVerilog), Annex B, adds to those of IEEE Std 1364-2005.
SYSTEMVERILOG_2012_KEYWORDS = frozenset("""
accept_on alias always_comb always_ff always_latch assert assume before bind bins binsof bit break byte
chandle checker class clocking const constraint context continue cover covergroup coverpoint cross dist
do endchecker endclass endclocking endgroup endinterface endpackage endprogram endproperty endsequence
enum eventually expect export extends extern final first_match foreach forkjoin global iff ignore_bins
illegal_bins implements implies import inside int interconnect interface intersect join_any join_none let
local logic longint matches modport new nettype nexttime null package packed priority program property
protected pure rand randc randcase randsequence ref reject_on restrict return s_always s_eventually
s_nexttime s_until s_until_with sequence shortint shortreal soft solve static string strong struct super
sync_accept_on sync_reject_on tagged this throughout timeprecision timeunit type typedef union unique
unique0 until until_with untyped var virtual void wait_order weak wildcard with within
""".split())

_IDENT_ALLOWED = ("a Verilog simple identifier: a letter or _, then letters, digits, _ or $ "
                  "(IEEE Std 1364-2005, 3.7), not a keyword")


def check_identifier(field_name: str, name: Any) -> str:
    """Return ``name`` when it is a usable Verilog simple identifier, else raise.

    Parameters
    ----------
    field_name : str
        The spec field or option the name came from (for the error).
    name : any
        The value to check.

    Returns
    -------
    str
        ``name`` unchanged.

    Raises
    ------
    SpecError
        When ``name`` is not a string, breaks the identifier rule of IEEE
        Std 1364-2005 section 3.7 (escaped identifiers, section 3.7.1, such
        as ``\\bus+a`` are refused too), is longer than 1024 characters, or is a keyword of IEEE
        Std 1364-2005 or IEEE Std 1800-2012.
    """
    require(isinstance(name, str), field_name, f"got {name!r}", _IDENT_ALLOWED)
    require(name != "", field_name, "got an empty name", _IDENT_ALLOWED)
    require(len(name) <= MAX_IDENTIFIER_LENGTH, field_name, f"got a name of {len(name)} characters",
            f"at most {MAX_IDENTIFIER_LENGTH} characters")
    if name.startswith("\\"):
        raise SpecError(field_name, f"got the escaped identifier {name!r}", "a simple identifier (escaped "
                        "identifiers are not accepted)")
    require(IDENTIFIER.match(name) is not None, field_name, f"got {name!r}", _IDENT_ALLOWED)
    require(name not in VERILOG_2005_KEYWORDS, field_name,
            f"got {name!r}, a Verilog keyword (IEEE Std 1364-2005, Annex B)", "a name that is not a keyword")
    require(name not in SYSTEMVERILOG_2012_KEYWORDS, field_name,
            f"got {name!r}, a SystemVerilog keyword (IEEE Std 1800-2012, Annex B; the simulator compiles "
            "with -g2012)", "a name that is not a keyword")
    return name


@dataclass(frozen=True)
class PortMap:
    """A validated port map.

    Attributes
    ----------
    module : str
        Top module of the RTL under test.
    clock : str
        Clock input (rising edge).
    reset : str
        Synchronous reset input.
    reset_active_high : bool
        True when ``reset`` resets the module at level 1.
    signals : mapping of str to str or None
        Role (``in_data``, ``in_valid``, ``in_ready``, ``in_last``,
        ``out_data``, ``out_valid``, ``out_ready``, ``out_last``) to port
        name; ``out_last`` may be None (no separate last output).
    out_data_bits : int
        Width of the module's output data port.
    out_fields : mapping of str to tuple of (int, int)
        ``(lsb, width)`` of each output field in the module's output word.
    core_parameters : bool
        Give the module the reference core's parameters (``INPUT_BITS``, ...).
    parameters : mapping of str to int
        Extra Verilog parameters for the module.
    standard_fields : mapping of str to tuple of (int, int)
        ``(lsb, width)`` of each field in the standard word (``docs/bit-true.md`` section 8).
    """

    module: str
    clock: str
    reset: str
    reset_active_high: bool
    signals: Mapping[str, str | None]
    out_data_bits: int
    out_fields: Mapping[str, tuple[int, int]]
    core_parameters: bool
    parameters: Mapping[str, int] = field(default_factory=dict)
    standard_fields: Mapping[str, tuple[int, int]] = field(default_factory=dict)
    #: True for a map block (reference module ``cfar_map``, the TUSER roles ``in_user`` and ``out_user``).
    map_block: bool = False

    @property
    def standard_layout(self) -> bool:
        """True when the module's output word is laid out as ``docs/bit-true.md`` section 8."""
        std_bits = sum(w for _, w in self.standard_fields.values())
        return dict(self.out_fields) == dict(self.standard_fields) and self.out_data_bits == std_bits

    @property
    def is_reference(self) -> bool:
        """True when this is exactly the reference core's interface (no adapter is needed)."""
        module, defaults = (MAP_REFERENCE_MODULE, MAP_SIGNAL_DEFAULTS) if self.map_block else (REFERENCE_MODULE,
                                                                                                 SIGNAL_DEFAULTS)
        return (self.module == module and self.clock == "clk" and self.reset == "srst"
                and self.reset_active_high and dict(self.signals) == defaults and self.standard_layout
                and self.core_parameters and not self.parameters)

    def port_names(self) -> dict[str, str]:
        """Role to port name for every port the module has: ``clock``, ``reset`` and the stream signals."""
        names = {"clock": self.clock, "reset": self.reset}
        names.update({role: name for role, name in self.signals.items() if name is not None})
        return names

    def adapter_connections(self) -> list[tuple[str, str]]:
        """(module port, adapter wire) for every port the module has, as every port adapter (Verilog or VHDL,
        1D or map) wires them: the inputs straight from the bench, the outputs to ``dut_*`` wires."""
        sig = self.signals
        wires = [(self.clock, "clk"), (self.reset, "dut_reset"), (sig["in_data"], "s_axis_tdata"),
                 (sig["in_valid"], "s_axis_tvalid"), (sig["in_ready"], "s_axis_tready"),
                 (sig["in_last"], "s_axis_tlast"), (sig.get("in_user"), "s_axis_tuser"),
                 (sig["out_data"], "dut_out_data"), (sig["out_valid"], "m_axis_tvalid"),
                 (sig["out_ready"], "m_axis_tready"), (sig["out_last"], "dut_out_last"),
                 (sig.get("out_user"), "dut_out_user")]
        return [(port, wire) for port, wire in wires if port is not None]

    def to_standard(self, word: int) -> int:
        """Rearrange one output word of the module into the standard layout."""
        out = 0
        for name, (lsb, width) in self.out_fields.items():
            out |= ((word >> lsb) & ((1 << width) - 1)) << self.standard_fields[name][0]
        return out

    def to_dict(self) -> dict:
        """Plain JSON-able form (for the generated testbench's configuration file)."""
        return {
            "module": self.module,
            "clock": self.clock,
            "reset": self.reset,
            "reset_active_high": self.reset_active_high,
            "signals": dict(self.signals),
            "out_data_bits": self.out_data_bits,
            "out_fields": {k: list(v) for k, v in self.out_fields.items()},
            "standard_fields": {k: list(v) for k, v in self.standard_fields.items()},
            "core_parameters": self.core_parameters,
            "parameters": dict(self.parameters),
            "map_block": self.map_block,
        }


def _identifier_check(language: str):
    """The name rule of the RTL's language: Verilog (here) or VHDL (:mod:`hdl_tb.vhdl_names`)."""
    if language == "vhdl":
        from .vhdl_names import check_identifier as vhdl_identifier

        return vhdl_identifier
    return check_identifier


def port_map_from_spec(spec: BlockSpec, *, top: str | None = None, language: str = "verilog") -> PortMap:
    """Validate the spec's ``[ports]`` table and resolve its defaults.

    Parameters
    ----------
    spec : BlockSpec
        The block; ``spec.sections["ports"]`` is the raw table (absent: all defaults).
    top : str, optional
        Top module name from the command line (``--top``); overrides ``ports.module``.

    Returns
    -------
    PortMap

    Raises
    ------
    SpecError
        Naming the first bad field: an unknown key, a name that is not a
        usable Verilog identifier, two roles sharing one port, a reserved
        module name, ``reset_active`` other than ``"high"``/``"low"``,
        overlapping or out-of-range output fields, a bad parameter.
    """
    check_identifier = _identifier_check(language)  # noqa: F811 (VHDL names for a VHDL entity)
    raw = spec.sections.get("ports", {})
    require(isinstance(raw, Mapping), "ports", f"got {type(raw).__name__}", "a table")
    map_block = bool(getattr(type(spec), "is_map", False))
    reference, defaults, optional, core_names = ((MAP_REFERENCE_MODULE, MAP_SIGNAL_DEFAULTS, MAP_OPTIONAL_SIGNALS,
                                                  MAP_CORE_PARAMETER_NAMES) if map_block else
                                                 (REFERENCE_MODULE, SIGNAL_DEFAULTS, OPTIONAL_SIGNALS,
                                                  CORE_PARAMETER_NAMES))
    keys = _KEYS + (("in_user", "out_user") if map_block else ())
    unknown = sorted(set(raw) - set(keys))
    require(not unknown, f"ports.{unknown[0] if unknown else ''}", "unknown field", ", ".join(keys))

    if top is not None:
        module = check_identifier("--top", top)
    else:
        module = check_identifier("ports.module", raw.get("module", reference))
    require(module not in RESERVED_MODULES, "--top" if top is not None else "ports.module",
            f"got {module!r}, a module name the generated testbench uses itself",
            f"any other name than {', '.join(RESERVED_MODULES)}")
    clock = check_identifier("ports.clock", raw.get("clock", "clk"))
    reset = check_identifier("ports.reset", raw.get("reset", "srst"))
    level = raw.get("reset_active", "high")
    require(level in ("high", "low"), "ports.reset_active", f"got {level!r}", '"high" or "low"')

    signals: dict[str, str | None] = {}
    for role, default in defaults.items():
        value = raw.get(role, default)
        if role in optional and value == "":
            signals[role] = None
            continue
        signals[role] = check_identifier(f"ports.{role}", value)
    seen: dict[str, str] = {}
    for role, name in [("clock", clock), ("reset", reset), *signals.items()]:
        if name is None:
            continue
        key = name.casefold() if language == "vhdl" else name  # VHDL names ignore case
        require(key not in seen, f"ports.{role}", f"got {name!r}, already the {seen.get(key)} port",
                "a different port for each role")
        seen[key] = role

    core = raw.get("core_parameters", module == reference)
    require(isinstance(core, bool), "ports.core_parameters", f"got {core!r}", "true or false")

    params_raw = raw.get("parameters", {})
    require(isinstance(params_raw, Mapping), "ports.parameters", f"got {params_raw!r}",
            "a table of NAME = integer or NAME = \"<quantity of the spec>\"")
    params: dict[str, int] = {}
    for name, value in params_raw.items():
        check_identifier(f"ports.parameters.{name}", name)
        require(not (core and name in core_names), f"ports.parameters.{name}",
                "is already given by core_parameters = true", "another name, or core_parameters = false")
        if isinstance(value, str):
            quantity = choice(f"ports.parameters.{name}", value, DERIVED_QUANTITIES)
            value = getattr(spec, quantity)
            params[name] = integer(f"ports.parameters.{name}", int(value), 0, 2**64 - 1)
        else:
            params[name] = integer(f"ports.parameters.{name}", value, -(2**31), 2**31 - 1)

    standard = output_field_offsets(spec)
    fields_raw = raw.get("out_fields", {})
    require(isinstance(fields_raw, Mapping), "ports.out_fields", f"got {fields_raw!r}",
            "a table of field = LSB position")
    bad = sorted(set(fields_raw) - set(OUTPUT_FIELDS))
    require(not bad, f"ports.out_fields.{bad[0] if bad else ''}", "unknown field", ", ".join(OUTPUT_FIELDS))
    out_fields: dict[str, tuple[int, int]] = {}
    for name in OUTPUT_FIELDS:
        lsb, width = standard[name]
        if name in fields_raw:
            lsb = integer(f"ports.out_fields.{name}", fields_raw[name], 0, MAX_OUT_DATA_BITS - 1)
        out_fields[name] = (lsb, width)
    span = max(lsb + width for lsb, width in out_fields.values())
    bits = raw.get("out_data_bits", span)
    bits = integer("ports.out_data_bits", bits, 1, MAX_OUT_DATA_BITS)
    for name, (lsb, width) in out_fields.items():
        require(lsb + width <= bits, f"ports.out_fields.{name}",
                f"bits {lsb + width - 1}..{lsb} do not fit the {bits}-bit out_data", f"LSB 0..{bits - width}")
    order = sorted(out_fields.items(), key=lambda kv: kv[1][0])
    for (n1, (l1, w1)), (n2, (l2, _)) in zip(order, order[1:]):
        require(l1 + w1 <= l2, f"ports.out_fields.{n2}",
                f"bit {l2} overlaps {n1} (bits {l1 + w1 - 1}..{l1})", "fields that do not overlap")

    return PortMap(
        module=module, clock=clock, reset=reset, reset_active_high=(level == "high"),
        signals=MappingProxyType(signals), out_data_bits=bits, out_fields=MappingProxyType(out_fields),
        core_parameters=core, parameters=MappingProxyType(params), standard_fields=MappingProxyType(dict(standard)),
        map_block=map_block,
    )


# --------------------------------------------------------------------------
# Checking the port map against the RTL
# --------------------------------------------------------------------------

_UNKNOWN_MODULE = re.compile(r"Unknown module type: (\S+)")
_NOT_A_PORT = re.compile(r"port ``([^']*)'' is not a port of")
_NO_PARAMETER = re.compile(r"parameter (\S+) not found in")
_WIDTH = re.compile(r"Port \d+ \((\S+)\) of \S+ expects (\d+) bits, got (\d+)")
_ERROR_LINE = re.compile(r"(?i)\berror\b|syntax error|I give up")


def verilog_literal(value: int) -> str:
    """A parameter value as a Verilog literal (64-bit unsigned above the 32-bit signed range)."""
    if -(2**31) <= value < 2**31:
        return str(value)
    return f"64'd{value}"


def probe_source(port_map: PortMap, parameters: Mapping[str, int], widths: Mapping[str, int]) -> str:
    """A top module instantiating ``port_map.module`` with every mapped port on a wire of the needed width."""
    names = port_map.port_names()
    lines = ["`timescale 1ns/1ps", "module cfarvec_port_probe;"]
    for role in names:
        lines.append(f"    wire [{widths[role] - 1}:0] w_{role};")
    over = ""
    if parameters:
        over = "#(" + ", ".join(f".{k}({verilog_literal(v)})" for k, v in parameters.items()) + ") "
    conns = ", ".join(f".{name}(w_{role})" for role, name in names.items())
    lines.append(f"    {port_map.module} {over}u_dut ({conns});")
    lines.append("endmodule")
    return "\n".join(lines) + "\n"


def port_widths(port_map: PortMap, input_bits: int) -> dict[str, int]:
    """Bits each mapped port must have: ``in_data`` the sample, ``out_data`` the module's word, others 1."""
    w = {role: 1 for role in port_map.port_names()}
    w["in_data"] = input_bits
    w["out_data"] = port_map.out_data_bits
    return w


def check_against_rtl(port_map: PortMap, rtl_files: Sequence[str | Path], *, parameters: Mapping[str, int],
                      input_bits: int, module_field: str = "ports.module") -> None:
    """Elaborate the module with the port map (Icarus Verilog) and refuse what does not fit.

    A small top module instantiates ``port_map.module`` with each mapped
    port connected by name to a wire of the width the testbench will use,
    and with ``parameters``; ``iverilog -g2012`` elaborates it with the RTL
    files. Nothing is simulated.

    Parameters
    ----------
    port_map : PortMap
    rtl_files : sequence of path
        The RTL sources (the module and everything below it).
    parameters : mapping of str to int
        Parameters given to the module.
    input_bits : int
        Sample width (``fixed.input_bits``), the width of ``in_data``.
    module_field : str
        Name of the field that chose the module (``"ports.module"`` or ``"--top"``), for errors.

    Raises
    ------
    SpecError
        ``simulator`` when iverilog is missing; ``--rtl`` when the sources do
        not compile; ``module_field`` when the module is not defined;
        ``ports.<role>`` naming the first port the module lacks, or whose
        width differs; ``ports.parameters.<NAME>`` (or ``ports.core_parameters``)
        for a parameter the module lacks.
    """
    from .verilog_bench import find_tools

    iverilog, _ = find_tools()
    widths = port_widths(port_map, input_bits)
    with tempfile.TemporaryDirectory(prefix="cfarvec-probe-") as tmp:
        probe = Path(tmp) / "cfarvec_port_probe.v"
        probe.write_text(probe_source(port_map, parameters, widths), encoding="ascii")
        cmd = [iverilog, "-g2012", "-o", str(Path(tmp) / "probe.vvp"), "-s", "cfarvec_port_probe", str(probe),
               *[str(f) for f in rtl_files]]
        proc = subprocess.run(cmd, capture_output=True, text=True)
    out = (proc.stdout + proc.stderr).replace(str(probe), "(port probe)")
    role_of = {name: role for role, name in port_map.port_names().items()}

    m = _UNKNOWN_MODULE.search(out)
    if m and m.group(1) == port_map.module:
        raise SpecError(module_field, f"module {port_map.module!r} is not defined in the RTL files",
                        "the name of the top module of the --rtl files (the reference core is cfar_stream)")
    for name in _NOT_A_PORT.findall(out):
        if name in role_of:
            raise SpecError(f"ports.{role_of[name]}", f"module {port_map.module!r} has no port {name!r}",
                            f"the name of its {role_of[name]} port")
    if proc.returncode != 0:
        first = next((ln.strip() for ln in out.splitlines() if _ERROR_LINE.search(ln)),
                     out.strip().splitlines()[0] if out.strip() else f"exit code {proc.returncode}")
        raise SpecError("--rtl", f"the RTL does not compile with iverilog -g2012: {first}",
                        "Verilog or SystemVerilog sources that Icarus Verilog elaborates")
    for name in _NO_PARAMETER.findall(out):
        if name in port_map.parameters:
            raise SpecError(f"ports.parameters.{name}", f"module {port_map.module!r} has no parameter {name!r}",
                            "a parameter the module declares")
        if port_map.core_parameters:
            raise SpecError("ports.core_parameters", f"true, but module {port_map.module!r} has no parameter "
                            f"{name!r}", "false for a module without the reference core's parameters")
    for name, expects, got in _WIDTH.findall(out):
        role = role_of.get(name)
        if role is None:
            continue
        why = {"in_data": "fixed.input_bits", "out_data": "the output word, or ports.out_data_bits"}.get(role, "1 bit")
        raise SpecError(f"ports.{role}", f"port {name!r} of {port_map.module!r} is {expects} bits wide, "
                        f"the testbench drives {got}", f"a port of {got} bits ({why})")
