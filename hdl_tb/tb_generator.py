"""Write a self-contained co-simulation testbench folder for a block spec.

:func:`write_testbench` puts into one folder everything needed to check a
streaming CFAR module against the project's bit-accurate model on Icarus
Verilog:

``vectors/``
    the golden vector set (:func:`vectors.vector_set.write_vector_set`);
``rtl/``
    a copy of the reference core (your own RTL is referred to where it is,
    so every run builds the current files);
``bench/``
    ``cfarvec_port_adapter.v`` (the module seen through the reference core's
    interface, per the port map), ``cfarvec_bulk_top.v`` (Verilog-side bulk
    driver), ``cfar_stream_tb.v`` (the pure-Verilog self-checking testbench,
    instantiating the adapter when the port map is not the reference core's)
    and ``timescale.f``;
``cfarvec_cocotb_bench.py``, ``test_cfarvec_cosim.py``
    the cocotb test module (bulk and interactive tests) and its pytest runner;
``bench_config.json``, ``Makefile``, ``README.md``
    the settings every bench reads, the commands, a short description.

For a map (range-Doppler) spec the reference core is ``cfar_map``, the
pure-Verilog bench ``cfar_map_tb.v``, the adapter presents the module with
the map core's interface (TUSER at each map's start, TLAST at each line's
end), and ``bench/cfarvec_map_shim.v`` stands between the bulk driver and
the adapter (``docs/testbench.md``, "Map (range-Doppler) blocks").

Generated text comes from ``hdl_tb/templates/`` through
:class:`string.Template` with ``@@`` as the delimiter (so Verilog's ``$``
system tasks and braces need no escaping). Only validated values are
substituted: Verilog identifiers checked by :mod:`hdl_tb.port_map`,
integers, and file names chosen here, so nothing can be injected.

The folder is written into a temporary folder beside the target and renamed
into place only when complete; a non-empty target is refused unless
``force``.
"""

from __future__ import annotations

import dataclasses
import json
import math
import re
import shutil
import string
import sys
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import Mapping, Sequence

import numpy as np

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError, require
from refmodel.output_folder import staged_folder
from refmodel.fixedpoint.word_format import output_field_offsets
from vectors.manifest import tool_version
from vectors.vector_set import vector_settings, write_vector_set
from vectors.writers import parse_fixed

from .core_params import BENCH_SOURCE, MAP_BENCH_SOURCE, MAP_BENCH_TOP, core_files, core_parameters
from .core_params import is_map_spec
from .pause_pattern import write_pattern
from .simulators import DEFAULT_SIMULATOR, VERILATOR_FLAGS, check_simulator
from .port_map import PortMap, check_against_rtl, port_map_from_spec, verilog_literal

TEMPLATE_DIR = Path(__file__).resolve().parent / "templates"
CONFIG_NAME = "bench_config.json"
CONFIG_FORMAT = "cfarvec-testbench"
CONFIG_FORMAT_VERSION = 1
COCOTB_MODULE = "cfarvec_cocotb_bench"
PYTEST_FILE = "test_cfarvec_cosim.py"
ADAPTER_TOP = "cfarvec_port_adapter"
BULK_TOP = "cfarvec_bulk_top"
VERILOG_TOP = "cfar_stream_tb"
#: Map blocks: the pure-Verilog bench, and the shim between the bulk driver and the map adapter.
MAP_VERILOG_TOP = MAP_BENCH_TOP
MAP_SHIM_TOP = "cfarvec_map_shim"
MODES = ("bulk", "interactive", "verilog", "vhdl")  # vhdl: the pure-VHDL bench (hdl_tb.vhdl_bench)
DEFAULT_GAP_PERCENT = 20
DEFAULT_STALL_PERCENT = 30
#: Output sinks: TREADY drawn every cycle without looking at TVALID, or raised only for a word seen waiting
#: (ARM IHI 0051A 2.2.1 allows a sink either).
SINK_MODES = ("independent", "waits-for-valid")
DEFAULT_SINK = "independent"

_PARAMETER_COMMENTS = {
    "INPUT_BITS": "Sample width W_in in bits.",
    "REF_CELLS": "Reference cells per side R.",
    "GUARD_CELLS": "Guard cells per side G.",
    "KIND": "Detector kind: 0 = CA, 1 = GO, 2 = SO, 3 = OS.",
    "OS_RANK": "OS rank k, 1..2R (KIND = 3).",
    "EDGE": "Edge policy: 0 = skip, 1 = zero-pad, 2 = one-sided, 3 = circular.",
    "MAX_FRAME_LENGTH": "Circular frame store depth: the longest frame (EDGE = 3).",
    "SUM_BITS": "Running-sum width W_S.",
    "ALPHA_INT": "The constant A.",
    "DROP_BITS": "Product fraction bits dropped, d.",
    "THRESHOLD_FRAC_BITS": "Threshold fraction bits F_T.",
    "THRESHOLD_BITS": "Threshold width W_T.",
    "ROUNDING": "Rounding: 0 = floor, 1 = half-up, 2 = half-even.",
    "OVERFLOW": "Threshold overflow: 0 = saturate, 1 = wrap.",
    "COMPARE_GE": "Decision: 0 = CUT > T, 1 = CUT >= T.",
    "TRUNCATE_PARTIALS": "1 = truncated shift-and-add multiplier.",
    "PIPELINE_STAGES": "Register stages after the window.",
    "SRST_LEVEL": "Level of srst that resets: 1 = high, 0 = low.",
    "RANGE_CELLS": "Range cells of a map.",
    "DOPPLER_BINS": "Doppler bins of a map.",
    "ORDER": "Streaming order: 0 = doppler-fast, 1 = range-fast.",
    "WINDOW": "Window shape: 0 = ring, 1 = cross.",
    "REF_RANGE": "Reference cells along range, each side.",
    "REF_DOPPLER": "Reference cells along Doppler, each side.",
    "GUARD_RANGE": "Guard cells along range, each side.",
    "GUARD_DOPPLER": "Guard cells along Doppler, each side.",
    "RANGE_EDGE": "Edge policy along range: 0 = skip, 1 = zero-pad, 3 = circular.",
    "DOPPLER_EDGE": "Edge policy along Doppler: 0 = skip, 1 = zero-pad, 3 = circular.",
}


class _Template(string.Template):
    delimiter = "@@"


def render(name: str, **values) -> str:
    """Fill the template ``hdl_tb/templates/<name>``; every placeholder must be given."""
    text = (TEMPLATE_DIR / name).read_text(encoding="utf-8")
    return _Template(text).substitute({k: str(v) for k, v in values.items()})


@dataclass(frozen=True)
class BenchFolder:
    """A generated testbench folder.

    Attributes
    ----------
    path : pathlib.Path
        The folder.
    config : mapping
        The content of its ``bench_config.json``.
    ports_checked : bool
        False when Icarus Verilog was missing and the port map could not be
        checked against the RTL.
    """

    path: Path
    config: Mapping
    ports_checked: bool


# --------------------------------------------------------------------------
# Parameters
# --------------------------------------------------------------------------


def bench_parameters(spec: BlockSpec) -> dict[str, int]:
    """The core parameters for ``spec``, as the testbenches pass them.

    :func:`hdl_tb.core_params.core_parameters` without the reference core's
    refusals, since a core of the user's own may implement the order-statistic
    kind and the circular policy (code 3). ``SRST_LEVEL`` is 1: the benches
    drive an active-high reset (the adapter converts it to the module's level).
    """
    return core_parameters(spec, reference_core=False)


def module_parameters(pm: PortMap, bench: Mapping[str, int]) -> dict[str, int]:
    """Parameters given to the module under test itself."""
    params = {}
    if pm.core_parameters:
        params.update(bench)
        params["SRST_LEVEL"] = 1 if pm.reset_active_high else 0
    params.update(pm.parameters)
    return params


# --------------------------------------------------------------------------
# Generated Verilog
# --------------------------------------------------------------------------


def _parameter_block(params: Mapping[str, int], trailing_comma: bool) -> str:
    lines = []
    items = list(params.items())
    for k, (name, value) in enumerate(items):
        comma = "," if trailing_comma or k < len(items) - 1 else ""
        lines.append(f"    // {_PARAMETER_COMMENTS.get(name, name)}")
        if name == "ALPHA_INT":
            lines.append(f"    parameter [63:0] ALPHA_INT = 64'd{value}{comma}")
        else:
            lines.append(f"    parameter integer {name} = {value}{comma}")
    return "\n".join(lines)


def _bits(lsb: int, width: int) -> str:
    return f"[{lsb}]" if width == 1 else f"[{lsb + width - 1}:{lsb}]"


def _adapter_parts(pm: PortMap, bench: Mapping[str, int]) -> tuple[str, str, list[str]]:
    """What the 1D and the map Verilog adapters share: the module's parameter override, its port
    connections and the assigns that move its output fields into the standard layout."""
    user = {}
    if pm.core_parameters:
        user.update({name: name for name in bench})
        user["SRST_LEVEL"] = "1" if pm.reset_active_high else "0"
    user.update({k: verilog_literal(v) for k, v in pm.parameters.items()})
    override = ""
    if user:
        inner = ",\n".join(f"        .{k}({v})" for k, v in user.items())
        override = f"#(\n{inner}\n    ) "
    connections = ",\n".join(f"        .{port}({wire})" for port, wire in pm.adapter_connections())
    assigns = []
    for name, (lsb, width) in pm.out_fields.items():
        std_lsb, _ = pm.standard_fields[name]
        assigns.append(f"    // {name}")
        assigns.append(f"    assign m_axis_tdata{_bits(std_lsb, width)} = dut_out_data{_bits(lsb, width)};")
    return override, connections, assigns


def adapter_source(pm: PortMap, bench: Mapping[str, int]) -> str:
    """``cfarvec_port_adapter.v``: the module under test behind the reference core's interface."""
    override, connections, assigns = _adapter_parts(pm, bench)
    sig = pm.signals
    last_lsb = pm.out_fields["last"][0]
    if sig["out_last"] is not None:
        assigns.append("    // The module's own last output.")
        assigns.append("    assign m_axis_tlast = dut_out_last;")
    else:
        assigns.append("    // No separate last output: the word's last-marker bit.")
        assigns.append(f"    assign m_axis_tlast = dut_out_data[{last_lsb}];")
    return render(
        "port_adapter.v.tmpl", version=tool_version(), module=pm.module, clock=pm.clock, reset=pm.reset,
        reset_level="high" if pm.reset_active_high else "low", out_data_bits=pm.out_data_bits,
        parameter_block=_parameter_block(bench, trailing_comma=False),
        reset_expr="bench_reset" if pm.reset_active_high else "~bench_reset",
        out_data_msb=pm.out_data_bits - 1,
        last_wire="    wire dut_out_last;" if sig["out_last"] is not None else "",
        parameter_override=override, connections=connections, field_assigns="\n".join(assigns),
    )


def bulk_top_source(bench: Mapping[str, int], max_words: int) -> str:
    """``cfarvec_bulk_top.v``: the Verilog-side driver of the bulk cocotb bench."""
    passing = ",\n".join(f"        .{name}({name})" for name in bench)
    return render("bulk_top.v.tmpl", version=tool_version(), parameter_block=_parameter_block(bench, True),
                  max_words=max_words, parameter_pass=passing)


def map_adapter_source(pm: PortMap, bench: Mapping[str, int]) -> str:
    """``cfarvec_port_adapter.v`` of a map block: the module under test behind ``cfar_map``'s interface."""
    override, connections, assigns = _adapter_parts(pm, bench)
    sig = pm.signals
    extra = []
    for role, port, made in (("out_last", "m_axis_tlast", "(out_j_reg == LF - 1)"),
                             ("out_user", "m_axis_tuser", "out_first_reg")):
        wire = "dut_out_last" if role == "out_last" else "dut_out_user"
        if sig[role] is not None:
            extra.append(f"    assign {port} = {wire};")
        else:
            extra.append(f"    // The module has no {role} port: made from the count of output transfers.")
            extra.append(f"    assign {wire} = 1'b0;")
            extra.append(f"    assign {port} = {made};")
    counter = ""
    if sig["out_last"] is None or sig["out_user"] is None:
        counter = """\
    // Cells of a fast-axis line, the bits of the output position counter, the output word width.
    localparam integer LF = (ORDER == 1) ? RANGE_CELLS : DOPPLER_BINS;
    localparam integer JB = (LF > 1) ? $clog2(LF) : 1;
    localparam integer OUT_W = INPUT_BITS + THRESHOLD_BITS + 3;

    // Position of the next output word in its line, and whether it starts a map (from the transfers).
    reg [JB-1:0] out_j_reg;
    reg          out_first_reg;
    always @(posedge clk) begin
        if (bench_reset) begin
            out_j_reg     <= {JB{1'b0}};
            out_first_reg <= 1'b1;
        end else if (m_axis_tvalid && m_axis_tready) begin
            out_j_reg     <= (out_j_reg == LF - 1 || m_axis_tdata[OUT_W-1]) ? {JB{1'b0}} : out_j_reg + 1'b1;
            out_first_reg <= m_axis_tdata[OUT_W-1];
        end
    end
"""
    return render(
        "port_adapter_map.v.tmpl", version=tool_version(), module=pm.module, clock=pm.clock, reset=pm.reset,
        counter_block=counter,
        reset_level="high" if pm.reset_active_high else "low", out_data_bits=pm.out_data_bits,
        parameter_block=_parameter_block(bench, trailing_comma=False),
        reset_expr="bench_reset" if pm.reset_active_high else "~bench_reset",
        out_data_msb=pm.out_data_bits - 1, parameter_override=override, connections=connections,
        field_assigns="\n".join(assigns), last_user_assigns="\n".join(extra),
    )


def map_shim_source(bench: Mapping[str, int]) -> str:
    """``cfarvec_map_shim.v``: the one-dimensional interface of the bulk driver around the map adapter."""
    passing = ",\n".join(f"        .{name}({name})" for name in bench)
    return render("map_shim.v.tmpl", version=tool_version(), parameter_block=_parameter_block(bench, False),
                  parameter_pass=passing)


_TB_INSTANCE = re.compile(r"\bcfar_stream(\s*#\s*\()")
_MAP_TB_INSTANCE = re.compile(r"\bcfar_map(\s*#\s*\()")


def map_verilog_bench_source(through_adapter: bool) -> str:
    """``cfar_map_tb.v``, instantiating the adapter instead of ``cfar_map`` when asked."""
    text = MAP_BENCH_SOURCE.read_text(encoding="utf-8")
    if not through_adapter:
        return text
    found = _MAP_TB_INSTANCE.findall(text)
    if len(found) != 1:
        raise RuntimeError(f"{MAP_BENCH_SOURCE.name} instantiates cfar_map {len(found)} times; expected once")
    note = ("// Generated by cfarvec: a copy of hdl_tb/rtl/cfar_map_tb.v whose device under test is\n"
            "// cfarvec_port_adapter (the module under test behind the map reference core's interface).\n")
    return note + _MAP_TB_INSTANCE.sub(rf"{ADAPTER_TOP}\1", text, count=1)


def verilog_bench_source(through_adapter: bool) -> str:
    """The pure-Verilog testbench, instantiating the adapter instead of ``cfar_stream`` when asked.

    Raises
    ------
    RuntimeError
        When ``hdl_tb/rtl/cfar_stream_tb.v`` does not instantiate
        ``cfar_stream`` exactly once (it has changed beyond what this
        generator knows).
    """
    text = BENCH_SOURCE.read_text(encoding="utf-8")
    if not through_adapter:
        return text
    found = _TB_INSTANCE.findall(text)
    if len(found) != 1:
        raise RuntimeError(f"{BENCH_SOURCE.name} instantiates cfar_stream {len(found)} times; expected once")
    note = ("// Generated by cfarvec: a copy of hdl_tb/rtl/cfar_stream_tb.v whose device under test is\n"
            "// cfarvec_port_adapter (the module under test behind the reference core's interface).\n")
    return note + _TB_INSTANCE.sub(rf"{ADAPTER_TOP}\1", text, count=1)


# --------------------------------------------------------------------------
# Vector set
# --------------------------------------------------------------------------


def _with_vectors(spec: BlockSpec, **changes) -> BlockSpec:
    sections = dict(spec.sections)
    sections["vectors"] = {**sections.get("vectors", {}), **changes}
    return dataclasses.replace(spec, sections=MappingProxyType(sections))


def _write_vectors(spec: BlockSpec, folder: Path, seed: int | None, samples: int | None) -> dict:
    """Write the set; with ``samples``, add random frames until it holds at least that many samples."""
    if is_map_spec(spec):
        return _write_map_vectors(spec, folder, seed, samples)
    vspec = spec
    for _ in range(8):
        manifest = write_vector_set(vspec, folder, seed=seed, force=True)
        total = manifest["totals"]["samples"]
        if samples is None or total >= samples:
            return manifest
        settings = vector_settings(vspec, seed=seed)
        mean = (spec.window_length + settings.random_length_max) / 2.0
        more = math.ceil((samples - total) / mean * 1.05) + 1
        vspec = _with_vectors(vspec, random_frames=settings.random_frames + more)
    raise SpecError("--samples", f"could not make a vector set of {samples} samples", "a smaller number")


def _write_map_vectors(spec, folder: Path, seed: int | None, samples: int | None) -> dict:
    """The vector set of a map block; with ``samples``, random maps are added until it holds that many cells."""
    manifest = write_vector_set(spec, folder, seed=seed, force=True)
    total = manifest["totals"]["samples"]
    if samples is None or total >= samples:
        return manifest
    settings = vector_settings(spec, seed=seed)
    more = math.ceil((samples - total) / spec.map_cells)
    require(settings.random_maps + more <= 1 << 20, "--samples", f"{samples} cells need too many maps",
            "a smaller number")
    return write_vector_set(_with_vectors(spec, random_maps=settings.random_maps + more), folder, seed=seed,
                            force=True)


def read_stimulus(folder: str | Path, config: Mapping) -> np.ndarray:
    """All stimulus words of a generated folder (sample and last marker)."""
    data = (Path(folder) / config["stimulus"]).read_bytes()
    return parse_fixed(data, "hex", config["input_bits"] + 1)


def whole_frames(stimulus: np.ndarray, input_bits: int, samples: int) -> int:
    """``samples`` rounded up to the end of the frame it falls in (at most the whole stream)."""
    ends = np.flatnonzero((stimulus >> np.uint64(input_bits)) & np.uint64(1))
    if samples <= 0 or ends.size == 0:
        return int(stimulus.shape[0])
    k = int(np.searchsorted(ends, samples - 1, side="left"))
    return int(ends[k]) + 1 if k < ends.size else int(stimulus.shape[0])


# --------------------------------------------------------------------------
# Folder
# --------------------------------------------------------------------------


def _check_percent(name: str, value) -> int:
    ok = isinstance(value, int) and not isinstance(value, bool) and 0 <= value <= 95
    require(ok, name, f"got {value!r}", "an integer 0..95")
    return value


def check_sink(sink) -> str:
    """``sink`` if it names an output sink mode (:data:`SINK_MODES`), else SpecError ``--sink``."""
    require(sink in SINK_MODES, "--sink", f"got {sink!r}", " or ".join(SINK_MODES))
    return sink


_SAFE_FILE_NAME = re.compile(r"[A-Za-z0-9_][A-Za-z0-9_.+-]*")
_SAFE_PATH = re.compile(r"/?([A-Za-z0-9_.+-]+/)*[A-Za-z0-9_.+-]+")


def resolve_rtl(rtl: Sequence[str | Path]) -> list[Path]:
    """Check the ``--rtl`` files: they exist, are Verilog, and their paths can be written into a Makefile."""
    files = []
    names: set[str] = set()
    for f in rtl:
        p = Path(f)
        require(p.is_file(), "--rtl", f"no file {str(p)!r}", "existing Verilog or SystemVerilog files")
        require(_SAFE_FILE_NAME.fullmatch(p.name) is not None, "--rtl", f"file name {p.name!r}",
                "a file name of letters, digits and _ . + - (it is written into the generated Makefile)")
        require(p.name not in names, "--rtl", f"two files named {p.name!r}", "files with distinct names")
        require(p.suffix in (".v", ".sv", ".vh", ".svh"), "--rtl", f"{p.name!r} is not a .v or .sv file",
                "Verilog (.v, .vh) or SystemVerilog (.sv, .svh) files")
        names.add(p.name)
        files.append(p)
    return files


def write_testbench(spec: BlockSpec, output: str | Path, *, rtl: Sequence[str | Path] = (), top: str | None = None,
                    force: bool = False, seed: int | None = None, samples: int | None = None,
                    gap_percent: int = DEFAULT_GAP_PERCENT, stall_percent: int = DEFAULT_STALL_PERCENT,
                    sink: str = DEFAULT_SINK, check_ports: bool = True, simulator: str = DEFAULT_SIMULATOR,
                    output_field: str = "--output") -> BenchFolder:
    """Generate a co-simulation testbench folder.

    Parameters
    ----------
    spec : BlockSpec
        The block. Its ``[vectors]`` section shapes the vector set, its
        ``[ports]`` section (:mod:`hdl_tb.port_map`) names the module's ports.
    output : str or pathlib.Path
        Folder to create; must be new or empty unless ``force``.
    rtl : sequence of path, optional
        The RTL under test. Empty: the reference core ``cfar_stream``.
    top : str, optional
        Top module of ``rtl`` (overrides ``ports.module``).
    force : bool
        Replace a non-empty ``output`` (once the new folder is complete).
    seed : int, optional
        Seed of the vector set (overrides ``vectors.seed``) and of the
        benches' gaps and backpressure (default: the vector set's seed).
    samples : int, optional
        Stream this many samples by default, rounded up to a whole frame;
        the vector set gets more random frames when it is shorter.
    gap_percent, stall_percent : int
        Percent of cycles with no input offered / with the output not ready, 0..95.
    sink : {"independent", "waits-for-valid"}
        The benches' default output sink: TREADY drawn every cycle, or raised
        only after TVALID was seen high (a module whose TVALID waits for
        TREADY then deadlocks and fails).
    check_ports : bool
        Elaborate the module with the port map first (needs Icarus Verilog;
        skipped, with ``ports_checked = False``, when it is missing).
    simulator : {"icarus", "verilator"}
        The default simulator of the folder's Makefile and pytest runner.
    output_field : str
        The option that named ``output``, for errors (``--output``, ``--keep``).

    Returns
    -------
    BenchFolder

    Raises
    ------
    SpecError
        Bad spec, port map or option; a spec the reference core does not
        implement (without ``rtl``); missing or clashing RTL files; RTL that
        does not compile; a port map naming ports or parameters the module
        lacks (see :func:`hdl_tb.port_map.check_against_rtl`). Nothing is
        written then.
    """
    from .vhdl_bench import wants_vhdl_folder, write_vhdl_testbench

    if wants_vhdl_folder(rtl, simulator):  # VHDL RTL: the VHDL benches, on GHDL
        return write_vhdl_testbench(spec, output, rtl=rtl, top=top, force=force, seed=seed, samples=samples,
                                    gap_percent=gap_percent, stall_percent=stall_percent, sink=sink,
                                    check_ports=check_ports, simulator=simulator, output_field=output_field)
    pm = port_map_from_spec(spec, top=top)
    rtl_files = resolve_rtl(rtl)
    reference = not rtl_files
    if reference:
        core_parameters(spec)  # refuses what the reference core lacks, naming the field
        rtl_files = list(core_files(spec)["sources"])
    bench = bench_parameters(spec)
    dut_params = module_parameters(pm, bench)
    gap_percent = _check_percent("--gaps", gap_percent)
    stall_percent = _check_percent("--stalls", stall_percent)
    check_sink(sink)
    check_simulator(simulator)
    if samples is not None:
        require(isinstance(samples, int) and not isinstance(samples, bool) and samples >= 1, "--samples",
                f"got {samples!r}", "an integer >= 1")
    settings = vector_settings(spec, seed=seed)  # validates [vectors] before anything is written
    require(spec.output_bits <= 64, "fixed.threshold_bits",
            f"the output word would be {spec.output_bits} bits", "an output word of at most 64 bits "
            "(input_bits + threshold_bits + 3)")

    ports_checked = False
    if check_ports:
        try:
            from .verilog_bench import find_tools

            find_tools()
            have_sim = True
        except SpecError:
            have_sim = False
        if have_sim:
            check_against_rtl(pm, rtl_files, parameters=dut_params, input_bits=spec.input_bits,
                              module_field="--top" if top is not None else "ports.module")
            ports_checked = True

    holds = tuple(f for f in (spec.source, *rtl) if f)
    out = Path(output).absolute()
    with staged_folder(output, force, output_field, protect=holds) as tmp:
        config = _generate(tmp, spec, pm, rtl_files, reference, bench, dut_params, seed, samples,
                           settings.seed if seed is None else seed, gap_percent, stall_percent, sink, simulator)
    return BenchFolder(out, MappingProxyType(config), ports_checked)


def _generate(folder: Path, spec: BlockSpec, pm: PortMap, rtl_files: list[Path], reference: bool,
              bench: dict, dut_params: dict, seed: int | None, samples: int | None, bench_seed: int,
              gap_percent: int, stall_percent: int, sink: str, simulator: str) -> dict:
    manifest = _write_vectors(spec, folder / "vectors", seed, samples)
    total = int(manifest["totals"]["samples"])
    config_stub = {"stimulus": "vectors/stimulus.hex", "input_bits": spec.input_bits}
    words = total if samples is None else whole_frames(read_stimulus(folder, config_stub), spec.input_bits, samples)
    max_words = max(16, 1 << (total - 1).bit_length())

    (folder / "rtl").mkdir()
    rtl = []
    copies: dict[str, str] = {}
    for src in rtl_files:
        if reference:
            shutil.copyfile(src, folder / "rtl" / src.name)
            rtl.append(f"rtl/{src.name}")
        elif _SAFE_PATH.fullmatch(str(src.resolve())):
            # The user's files where they are: the next run builds a fix.
            rtl.append(str(src.resolve()))
        else:
            # A path a Makefile cannot hold (spaces, non-ASCII): a copy, refreshed by every cfarvec run.
            shutil.copyfile(src, folder / "rtl" / src.name)
            rtl.append(f"rtl/{src.name}")
            copies[f"rtl/{src.name}"] = str(src.resolve())
    bench_dir = folder / "bench"
    bench_dir.mkdir()
    (bench_dir / "timescale.f").write_text("+timescale+1ns/1ps\n", encoding="ascii")
    # The default gap and stall patterns, so that `make verilog` needs no Python with the default knobs.
    for stream, percent in (("gaps", gap_percent), ("stalls", stall_percent)):
        write_pattern(folder / "patterns", stream, percent, bench_seed)
    direct = pm.is_reference
    map_block = is_map_spec(spec)
    verilog_top = MAP_VERILOG_TOP if map_block else VERILOG_TOP
    if map_block:
        # The bulk driver reaches the map adapter through the shim (TUSER and line TLAST made and checked there).
        bulk = bulk_top_source(bench, max_words).replace(f"{ADAPTER_TOP} #(", f"{MAP_SHIM_TOP} #(", 1)
        (bench_dir / f"{ADAPTER_TOP}.v").write_text(map_adapter_source(pm, bench), encoding="ascii")
        (bench_dir / f"{MAP_SHIM_TOP}.v").write_text(map_shim_source(bench), encoding="ascii")
        (bench_dir / f"{BULK_TOP}.v").write_text(bulk, encoding="ascii")
        (bench_dir / f"{verilog_top}.v").write_text(map_verilog_bench_source(not direct), encoding="ascii")
        adapter = [f"bench/{ADAPTER_TOP}.v", f"bench/{MAP_SHIM_TOP}.v"]
    else:
        (bench_dir / f"{ADAPTER_TOP}.v").write_text(adapter_source(pm, bench), encoding="ascii")
        (bench_dir / f"{BULK_TOP}.v").write_text(bulk_top_source(bench, max_words), encoding="ascii")
        (bench_dir / f"{VERILOG_TOP}.v").write_text(verilog_bench_source(not direct), encoding="ascii")
        adapter = [f"bench/{ADAPTER_TOP}.v"]

    modes = {
        "bulk": {"toplevel": BULK_TOP, "sources": rtl + adapter + [f"bench/{BULK_TOP}.v"],
                 "parameters": {**bench, "MAX_WORDS": max_words}, "testcase": "bulk_stream"},
        "interactive": {"toplevel": BULK_TOP, "sources": rtl + adapter + [f"bench/{BULK_TOP}.v"],
                        "parameters": {**bench, "MAX_WORDS": max_words}, "testcase": "interactive_stream"},
        "verilog": {"toplevel": verilog_top,
                    "sources": rtl + ([] if direct else adapter[:1]) + [f"bench/{verilog_top}.v"],
                    "parameters": {**bench, "MAX_WORDS": max_words}},
    }
    config = {
        "format": CONFIG_FORMAT,
        "format_version": CONFIG_FORMAT_VERSION,
        "tool_version": tool_version(),
        "spec": spec.to_dict(resolved=True),
        "design_pfa": spec.design_pfa,
        "spec_source": spec.source,
        "reference_core": reference,
        "stimulus": "vectors/stimulus.hex",
        "expected": "vectors/expected.hex",
        "total_words": total,
        "words": words,
        "frames": int(manifest["totals"]["frames"]),
        "input_bits": spec.input_bits,
        "output_bits": spec.output_bits,
        "fields": {k: list(v) for k, v in output_field_offsets(spec).items()},
        # Map blocks: the cycles of one padded map and a window delay, which bound every stretch without a
        # transfer (the benches size their watchdog and tail from it as from R + G of a 1D block).
        "half_window": (spec.padded_lines * spec.padded_line + spec.window_delay) if map_block else spec.half_window,
        "map_block": map_block,
        "pipeline_stages": spec.pipeline_stages,
        "gap_percent": gap_percent,
        "stall_percent": stall_percent,
        "sink": sink,
        "seed": bench_seed,
        "simulator": simulator,
        "port_map": pm.to_dict(),
        "rtl": rtl,
        "rtl_copies": copies,
        "modes": modes,
    }
    (folder / CONFIG_NAME).write_text(json.dumps(config, indent=2, sort_keys=True) + "\n", encoding="utf-8")
    (folder / f"{COCOTB_MODULE}.py").write_text(render("cocotb_bench.py.tmpl", version=tool_version()),
                                                encoding="utf-8")
    (folder / PYTEST_FILE).write_text(render("test_cosim.py.tmpl", version=tool_version()), encoding="utf-8")
    (folder / "Makefile").write_text(_makefile(config), encoding="utf-8")
    (folder / "README.md").write_text(_readme(spec, pm, config, reference), encoding="utf-8")
    return config


def _makefile(config: dict) -> str:
    m = config["modes"]["verilog"]
    top = m["toplevel"]
    params = " \\\n".join(f"\t  -P{top}.{k}={v}" for k, v in m["parameters"].items()) + " \\"
    vparams = " \\\n".join(f"\t  -G{k}={v}" for k, v in m["parameters"].items()) + " \\"
    # The interpreter that has cfarvec (and so cocotb) installed, when its path is safe to write unquoted.
    python = sys.executable if sys.executable and _SAFE_PATH.fullmatch(sys.executable) else "python3"
    return render("Makefile.tmpl", version=tool_version(), python=python, gap_percent=config["gap_percent"],
                  stall_percent=config["stall_percent"], seed=config["seed"], words=config["words"],
                  sink=config["sink"], simulator=config["simulator"],
                  verilator_flags=" ".join(f"'{f}'" if " " in f else f for f in VERILATOR_FLAGS),
                  verilog_sources=" ".join(m["sources"]), verilog_parameters=params,
                  verilator_parameters=vparams, stimulus=config["stimulus"], expected=config["expected"]
                  ).replace(VERILOG_TOP, top)


def _readme(spec: BlockSpec, pm: PortMap, config: dict, reference: bool) -> str:
    sig = pm.signals
    if is_map_spec(spec):
        w = spec.window
        block = (f"{spec.kind.upper()} range-Doppler CFAR on {spec.range_cells} x {spec.doppler_bins} maps "
                 f"({spec.order}), {w.shape} window of {w.wd} x {w.wr} cells (guard rectangle "
                 f"{2 * w.guard_doppler + 1} x {2 * w.guard_range + 1}), edges {spec.range_edge} along range and "
                 f"{spec.doppler_edge} along Doppler, {spec.input_bits}-bit cells, {spec.threshold_bits}-bit "
                 f"threshold ({spec.rounding}, {spec.overflow}); TLAST ends each fast-axis line, TUSER starts "
                 "each map")
    else:
        block = (f"{spec.kind.upper()} CFAR, R = {spec.ref_per_side} reference and G = {spec.guard_per_side} "
                 f"guard cells per side, edge policy {spec.edge}, {spec.input_bits}-bit samples, "
                 f"{spec.threshold_bits}-bit threshold ({spec.rounding}, {spec.overflow})")
    reference_top = core_files(spec)["top"]
    if reference:
        rtl_note = f"a copy of the reference core (`{reference_top}`)"
    elif config["rtl_copies"]:
        rtl_note = (f"copies of the RTL under test (top module `{pm.module}`), whose paths a Makefile cannot "
                    f"hold; every `cfarvec` run refreshes them from {', '.join(config['rtl_copies'].values())}, "
                    "`make` does not")
    else:
        rtl_note = (f"nothing: the RTL under test (top module `{pm.module}`) is used where it is "
                    f"({', '.join(config['rtl'])}), so every run builds the current files")
    text = render(
        "README.md.tmpl", version=tool_version(), module=pm.module,
        spec_name=Path(spec.source).name if spec.source else "a block spec", block=block,
        words=config["words"], total_words=config["total_words"], frames=config["frames"],
        gap_percent=config["gap_percent"], stall_percent=config["stall_percent"], seed=config["seed"],
        sink=("waits for TVALID before raising TREADY" if config["sink"] == "waits-for-valid"
              else "raises TREADY without looking at TVALID"),
        rtl_note=rtl_note, tb_note="" if pm.is_reference else " (instantiating the adapter)",
        simulator=config["simulator"],
        clock=pm.clock, reset=pm.reset, reset_level="high" if pm.reset_active_high else "low",
        in_ports=", ".join(sig[r] for r in ("in_data", "in_valid", "in_ready", "in_last")),
        out_ports=", ".join(s for s in (sig[r] for r in ("out_data", "out_valid", "out_ready", "out_last")) if s),
    )
    return text.replace(VERILOG_TOP, config["modes"]["verilog"]["toplevel"])


def read_config(folder: str | Path) -> dict:
    """The ``bench_config.json`` of a generated folder.

    Raises
    ------
    SpecError
        When the folder holds no readable configuration of this format.
    """
    path = Path(folder) / CONFIG_NAME
    try:
        config = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise SpecError("FOLDER", f"no readable {CONFIG_NAME} in {str(folder)!r} ({exc})",
                        "a folder written by cfarvec testbench") from None
    require(isinstance(config, dict) and config.get("format") == CONFIG_FORMAT, "FOLDER",
            f"{str(path)!r} is not a cfarvec testbench configuration", "a folder written by cfarvec testbench")
    return config
