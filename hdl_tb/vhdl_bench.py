"""Testbench folders for a user's VHDL-2008 entity, and the pure-VHDL bench run on GHDL.

:func:`hdl_tb.tb_generator.write_testbench` hands a spec whose ``--rtl``
files are VHDL (``.vhd``, ``.vhdl``) to :func:`write_vhdl_testbench`, which
writes the same folder as for Verilog RTL, with VHDL bench files:

``bench/cfarvec_bench_pkg.vhd``
    the widths and field positions of the spec, shared by the files below;
``bench/cfarvec_port_adapter.vhd``
    the entity under test behind the reference core's port names, reset
    level and output word layout (the ``[ports]`` map);
``bench/cfarvec_bulk_top.vhd``
    the VHDL-2008 driver with the ports of the Verilog ``cfarvec_bulk_top``,
    so the same cocotb test module (bulk and interactive) runs on it
    unchanged: it reads the stimulus with ``std.textio``, applies the gap
    and stall pattern files of :mod:`hdl_tb.pause_pattern`, writes the
    received words;
``bench/cfarvec_vhdl_tb.vhd``
    the pure-VHDL self-checking bench (mode ``vhdl``): the same driver,
    told the expected file, compares every word as it arrives and prints
    ``PASS``/``FAIL`` like the pure-Verilog bench.

The cocotb modes run through :func:`hdl_tb.cosim.run_folder` like the
Verilog ones (``cocotb_tools.runner`` for GHDL); the ``vhdl`` mode runs
:func:`run_vhdl_bench`. Range-line (1D) specs only for now: a map spec is
refused naming ``map``. Generics are VHDL integers (IEEE Std 1076-2008,
5.2.3.1 guarantees -2147483647 .. 2147483647), so a larger value (the
constant A of a very wide spec) is refused naming its field.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path
from types import MappingProxyType
from typing import Mapping, Sequence

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError, require
from refmodel.fixedpoint.word_format import output_field_offsets
from refmodel.output_folder import staged_folder
from vectors.manifest import tool_version
from vectors.vector_set import vector_settings

from . import ghdl
from .pause_pattern import file_name as pattern_file_name
from .pause_pattern import write_pattern
from .port_map import CORE_PARAMETER_NAMES, PortMap, port_map_from_spec
from .vhdl_names import is_vhdl_file, same_name

#: Simulators that run the VHDL benches.
VHDL_SIMULATORS = ("ghdl",)
#: Modes of a VHDL folder.
VHDL_MODES = ("bulk", "interactive", "vhdl")
VHDL_TB = "cfarvec_vhdl_tb"
PACKAGE = "cfarvec_bench_pkg"
#: Design unit names the generated VHDL uses itself (and library names an entity cannot take).
RESERVED_UNITS = ("cfarvec_port_adapter", "cfarvec_bulk_top", VHDL_TB, PACKAGE, "cfarvec_port_probe",
                  "cfar_stream_tb", "ieee", "std", "work")
#: VHDL integer range every implementation supports (IEEE Std 1076-2008, 5.2.3.1).
VHDL_INTEGER_MIN, VHDL_INTEGER_MAX = -(2**31 - 1), 2**31 - 1
_SAFE_FILE_NAME = re.compile(r"[A-Za-z0-9_][A-Za-z0-9_.+-]*")
_SAFE_PATH = re.compile(r"/?([A-Za-z0-9_.+-]+/)*[A-Za-z0-9_.+-]+")
_SUMMARY_LINE = re.compile(r"^(PASS|FAIL) (\d+)(?: first=(.*))?$", re.MULTILINE)


# --------------------------------------------------------------------------
# Dispatch hooks (called from tb_generator and cosim)
# --------------------------------------------------------------------------


def wants_vhdl_folder(rtl: Sequence[str | Path], simulator: str) -> bool:
    """True when ``rtl`` is VHDL (the folder is written here); refuse a simulator that cannot run it.

    Raises
    ------
    SpecError
        ``--rtl`` for VHDL and Verilog files mixed; ``--simulator`` for
        VHDL RTL on a Verilog simulator, or GHDL without VHDL RTL.
    """
    vhdl = [f for f in rtl if is_vhdl_file(f)]
    if not vhdl:
        require(simulator not in VHDL_SIMULATORS, "--simulator",
                f"got {simulator!r}, which simulates VHDL, but the RTL is Verilog"
                + ("" if rtl else " (the reference core cfar_stream)"),
                "icarus or verilator for Verilog RTL, or --rtl with VHDL files")
        return False
    require(len(vhdl) == len(rtl), "--rtl", "VHDL and Verilog files mixed",
            "only VHDL (.vhd, .vhdl) or only Verilog/SystemVerilog files")
    require(simulator in VHDL_SIMULATORS, "--simulator",
            f"got {simulator!r}, which does not simulate VHDL (the --rtl files are VHDL)", " or ".join(VHDL_SIMULATORS))
    return True


def rtl_language(rtl: Sequence[str | Path]) -> str:
    """``"vhdl"`` when any ``--rtl`` file is VHDL, else ``"verilog"`` (no files: the reference core)."""
    return "vhdl" if any(is_vhdl_file(f) for f in rtl) else "verilog"


def check_folder_run(config: Mapping, mode: str, simulator: str) -> None:
    """Refuse a mode or simulator that does not fit the folder's language (``--mode``, ``--simulator``)."""
    if config.get("language") == "vhdl":
        require(simulator in VHDL_SIMULATORS, "--simulator",
                f"got {simulator!r}, but the folder's RTL is VHDL", " or ".join(VHDL_SIMULATORS))
        require(mode in VHDL_MODES, "--mode", f"got {mode!r}: the pure-Verilog bench needs Verilog RTL, and this "
                "folder's RTL is VHDL", ", ".join(VHDL_MODES))
    else:
        require(simulator not in VHDL_SIMULATORS, "--simulator",
                f"got {simulator!r}, which simulates VHDL, but the folder's RTL is Verilog", "icarus or verilator")
        require(mode != "vhdl", "--mode", "got 'vhdl', but the folder's RTL is Verilog",
                "bulk, interactive or verilog")


# --------------------------------------------------------------------------
# Checks of the spec and port map for VHDL
# --------------------------------------------------------------------------


def resolve_vhdl_rtl(rtl: Sequence[str | Path]) -> list[Path]:
    """Check the ``--rtl`` files: they exist, are VHDL, and their paths can be written into a Makefile."""
    files = []
    names: set[str] = set()
    for f in rtl:
        p = Path(f)
        require(p.is_file(), "--rtl", f"no file {str(p)!r}", "existing VHDL files")
        require(_SAFE_FILE_NAME.fullmatch(p.name) is not None, "--rtl", f"file name {p.name!r}",
                "a file name of letters, digits and _ . + - (it is written into the generated Makefile)")
        require(p.name not in names, "--rtl", f"two files named {p.name!r}", "files with distinct names")
        names.add(p.name)
        files.append(p)
    return files


def _check_integer(field: str, value: int) -> int:
    require(VHDL_INTEGER_MIN <= value <= VHDL_INTEGER_MAX, field,
            f"the value {value} does not fit a VHDL integer generic",
            f"{VHDL_INTEGER_MIN}..{VHDL_INTEGER_MAX} (IEEE Std 1076-2008, 5.2.3.1)")
    return value


def vhdl_port_map(spec: BlockSpec, top: str | None) -> PortMap:
    """The ``[ports]`` map under the VHDL rules: names (IEEE Std 1076-2008, 15.4), case, integer generics."""
    pm = port_map_from_spec(spec, top=top, language="vhdl")
    field = "--top" if top is not None else "ports.module"
    for unit in RESERVED_UNITS:
        require(not same_name(pm.module, unit), field, f"got {pm.module!r}, a name the generated testbench uses",
                f"any other name than {', '.join(RESERVED_UNITS)} (in any case)")
    seen: dict[str, str] = {}
    names = (list(CORE_PARAMETER_NAMES) if pm.core_parameters else []) + list(pm.parameters)
    for name in names:
        key = name.casefold()
        require(key not in seen, f"ports.parameters.{name}",
                f"the same VHDL generic as {seen.get(key)!r} (VHDL names ignore case)", "distinct generic names")
        seen[key] = name
    for name, value in pm.parameters.items():
        _check_integer(f"ports.parameters.{name}", value)
    return pm


def entity_generics(pm: PortMap, bench: Mapping[str, int]) -> dict[str, int]:
    """Generics given to the entity under test (the reference core's, when asked, and the map's own)."""
    params: dict[str, int] = {}
    if pm.core_parameters:
        params.update(bench)
        params["SRST_LEVEL"] = 1 if pm.reset_active_high else 0
        for name, value in params.items():
            _check_integer("ports.core_parameters", value)
    params.update(pm.parameters)
    return params


# --------------------------------------------------------------------------
# Generated VHDL
# --------------------------------------------------------------------------


def _render(name: str, **values) -> str:
    from .tb_generator import render

    return render(name, version=tool_version(), **values)


def _range(lsb: int, width: int) -> str:
    return f"({lsb})" if width == 1 else f"({lsb + width - 1} downto {lsb})"


def package_source(spec: BlockSpec) -> str:
    """``cfarvec_bench_pkg.vhd``: the widths and sizes of the spec."""
    return _render("vhdl_bench_pkg.vhd.tmpl", input_bits=spec.input_bits, threshold_bits=spec.threshold_bits,
                   half_window=spec.half_window, pipeline_stages=spec.pipeline_stages)


def adapter_source(pm: PortMap, generics: Mapping[str, int]) -> str:
    """``cfarvec_port_adapter.vhd``: the entity under test behind the reference core's interface."""
    generic_map = ""
    if generics:
        items = list(generics.items())
        inner = ",\n".join(f"            {k} => {v}" for k, v in items)
        generic_map = f"        generic map (\n{inner}\n        )"
    sig = pm.signals
    port_map = ",\n".join(f"            {port} => {wire}" for port, wire in pm.adapter_connections())
    assigns = []
    for name, (lsb, width) in pm.out_fields.items():
        std_lsb, _ = pm.standard_fields[name]
        assigns.append(f"    -- {name}")
        assigns.append(f"    m_axis_tdata{_range(std_lsb, width)} <= dut_out_data{_range(lsb, width)};")
    if sig["out_last"] is not None:
        assigns += ["    -- The entity's own last output.", "    m_axis_tlast <= dut_out_last;"]
    else:
        assigns += ["    -- No separate last output: the word's last-marker bit.",
                    f"    m_axis_tlast <= dut_out_data({pm.out_fields['last'][0]});"]
    return _render("vhdl_port_adapter.vhd.tmpl", module=pm.module, clock=pm.clock, reset=pm.reset,
                   reset_level="high" if pm.reset_active_high else "low", out_data_bits=pm.out_data_bits,
                   out_data_msb=pm.out_data_bits - 1,
                   last_signal="    signal dut_out_last : std_logic;" if sig["out_last"] is not None else "",
                   reset_expr="srst" if pm.reset_active_high else "not srst", generic_map=generic_map,
                   port_map=port_map, field_assigns="\n".join(assigns))


def vhdl_tb_source(config: Mapping) -> str:
    """``cfarvec_vhdl_tb.vhd``: the pure-VHDL bench, its generics defaulting to the folder's settings."""
    return _render("vhdl_tb.vhd.tmpl", stimulus=config["stimulus"], expected=config["expected"],
                   gap_file=f"patterns/{pattern_file_name('gaps', config['gap_percent'], config['seed'])}",
                   stall_file=f"patterns/{pattern_file_name('stalls', config['stall_percent'], config['seed'])}",
                   words=config["words"], gap_percent=config["gap_percent"], stall_percent=config["stall_percent"],
                   sink_waits=int(config["sink"] == "waits-for-valid"))


# --------------------------------------------------------------------------
# The folder
# --------------------------------------------------------------------------


def write_vhdl_testbench(spec: BlockSpec, output: str | Path, *, rtl: Sequence[str | Path], top: str | None,
                         force: bool, seed: int | None, samples: int | None, gap_percent: int,
                         stall_percent: int, sink: str, check_ports: bool, simulator: str,
                         output_field: str):
    """Write a testbench folder for VHDL RTL (the arguments of :func:`hdl_tb.tb_generator.write_testbench`).

    Returns
    -------
    hdl_tb.tb_generator.BenchFolder

    Raises
    ------
    SpecError
        A map spec (``map``), bad port map under the VHDL rules, bad files,
        options or generics; RTL that does not analyse or does not fit the
        port map (:func:`hdl_tb.vhdl_port_check.check_against_vhdl`, when
        ``check_ports`` and GHDL is installed). Nothing is written then.
    """
    from . import tb_generator as tb
    from .core_params import is_map_spec

    require(not is_map_spec(spec), "map", "the VHDL benches take range-line (1D) specs only for now",
            "a spec without a [map] section")
    pm = vhdl_port_map(spec, top)
    rtl_files = resolve_vhdl_rtl(rtl)
    bench = tb.bench_parameters(spec)
    generics = entity_generics(pm, bench)
    gap_percent = tb._check_percent("--gaps", gap_percent)
    stall_percent = tb._check_percent("--stalls", stall_percent)
    tb.check_sink(sink)
    if samples is not None:
        require(isinstance(samples, int) and not isinstance(samples, bool) and samples >= 1, "--samples",
                f"got {samples!r}", "an integer >= 1")
    settings = vector_settings(spec, seed=seed)
    require(spec.output_bits <= 64, "fixed.threshold_bits", f"the output word would be {spec.output_bits} bits",
            "an output word of at most 64 bits (input_bits + threshold_bits + 3)")
    ports_checked = False
    if check_ports:
        try:
            ghdl.ghdl_tool()
            have_sim = True
        except SpecError:
            have_sim = False
        if have_sim:
            from .vhdl_port_check import check_against_vhdl

            check_against_vhdl(pm, rtl_files, parameters=generics, input_bits=spec.input_bits,
                               module_field="--top" if top is not None else "ports.module")
            ports_checked = True
    holds = tuple(f for f in (spec.source, *rtl) if f)
    out = Path(output).absolute()
    bench_seed = settings.seed if seed is None else seed
    with staged_folder(output, force, output_field, protect=holds) as tmp:
        config = _generate(tmp, spec, pm, rtl_files, bench, generics, seed, samples, bench_seed, gap_percent,
                           stall_percent, sink, simulator)
    return tb.BenchFolder(out, MappingProxyType(config), ports_checked)


def _generate(folder: Path, spec: BlockSpec, pm: PortMap, rtl_files: list[Path], bench: dict, generics: dict,
              seed: int | None, samples: int | None, bench_seed: int, gap_percent: int, stall_percent: int,
              sink: str, simulator: str) -> dict:
    from . import tb_generator as tb

    manifest = tb._write_vectors(spec, folder / "vectors", seed, samples)
    total = int(manifest["totals"]["samples"])
    stub = {"stimulus": "vectors/stimulus.hex", "input_bits": spec.input_bits}
    words = total if samples is None else tb.whole_frames(tb.read_stimulus(folder, stub), spec.input_bits, samples)
    (folder / "rtl").mkdir()
    rtl: list[str] = []
    copies: dict[str, str] = {}
    for src in rtl_files:
        if _SAFE_PATH.fullmatch(str(src.resolve())):
            rtl.append(str(src.resolve()))  # where it is: the next run builds a fix
        else:
            shutil.copyfile(src, folder / "rtl" / src.name)
            rtl.append(f"rtl/{src.name}")
            copies[f"rtl/{src.name}"] = str(src.resolve())
    for stream, percent in (("gaps", gap_percent), ("stalls", stall_percent)):
        write_pattern(folder / "patterns", stream, percent, bench_seed)
    bench_dir = folder / "bench"
    bench_dir.mkdir()
    common = [f"bench/{PACKAGE}.vhd", f"bench/{tb.ADAPTER_TOP}.vhd", f"bench/{tb.BULK_TOP}.vhd"]
    (bench_dir / f"{PACKAGE}.vhd").write_text(package_source(spec), encoding="ascii")
    (bench_dir / f"{tb.ADAPTER_TOP}.vhd").write_text(adapter_source(pm, generics), encoding="ascii")
    (bench_dir / f"{tb.BULK_TOP}.vhd").write_text(_render("vhdl_bulk_top.vhd.tmpl"), encoding="ascii")
    modes = {
        "bulk": {"toplevel": tb.BULK_TOP, "sources": rtl + common, "parameters": {}, "testcase": "bulk_stream"},
        "interactive": {"toplevel": tb.BULK_TOP, "sources": rtl + common, "parameters": {},
                        "testcase": "interactive_stream"},
        "vhdl": {"toplevel": VHDL_TB, "sources": rtl + common + [f"bench/{VHDL_TB}.vhd"], "parameters": {}},
    }
    config = {
        "format": tb.CONFIG_FORMAT,
        "format_version": tb.CONFIG_FORMAT_VERSION,
        "tool_version": tool_version(),
        "language": "vhdl",
        "spec": spec.to_dict(resolved=True),
        "design_pfa": spec.design_pfa,
        "spec_source": spec.source,
        "reference_core": False,
        "stimulus": "vectors/stimulus.hex",
        "expected": "vectors/expected.hex",
        "total_words": total,
        "words": words,
        "frames": int(manifest["totals"]["frames"]),
        "input_bits": spec.input_bits,
        "output_bits": spec.output_bits,
        "fields": {k: list(v) for k, v in output_field_offsets(spec).items()},
        "half_window": spec.half_window,
        "pipeline_stages": spec.pipeline_stages,
        "gap_percent": gap_percent,
        "stall_percent": stall_percent,
        "sink": sink,
        "seed": bench_seed,
        "simulator": simulator,
        "port_map": pm.to_dict(),
        "generics": generics,
        "rtl": rtl,
        "rtl_copies": copies,
        "modes": modes,
    }
    (bench_dir / f"{VHDL_TB}.vhd").write_text(vhdl_tb_source(config), encoding="ascii")
    (folder / tb.CONFIG_NAME).write_text(json.dumps(config, indent=2, sort_keys=True) + "\n", encoding="utf-8")
    (folder / f"{tb.COCOTB_MODULE}.py").write_text(_render("cocotb_bench.py.tmpl"), encoding="utf-8")
    (folder / tb.PYTEST_FILE).write_text(_render("test_cosim.py.tmpl"), encoding="utf-8")
    python = sys.executable if sys.executable and _SAFE_PATH.fullmatch(sys.executable) else "python3"
    (folder / "Makefile").write_text(_render(
        "vhdl_Makefile.tmpl", python=python, gap_percent=gap_percent, stall_percent=stall_percent,
        seed=bench_seed, words=words, sink=sink, simulator=simulator, sources=" ".join(modes["vhdl"]["sources"]),
        stimulus=config["stimulus"], expected=config["expected"]), encoding="utf-8")
    block = (f"{spec.kind.upper()} CFAR, R = {spec.ref_per_side} reference and G = {spec.guard_per_side} guard "
             f"cells per side, edge policy {spec.edge}, {spec.input_bits}-bit samples, {spec.threshold_bits}-bit "
             f"threshold ({spec.rounding}, {spec.overflow})")
    (folder / "README.md").write_text(_render(
        "vhdl_README.md.tmpl", module=pm.module, spec_name=Path(spec.source).name if spec.source else "a block spec",
        block=block, words=words, total_words=total, frames=config["frames"], gap_percent=gap_percent,
        stall_percent=stall_percent, seed=bench_seed, rtl=", ".join(rtl)), encoding="utf-8")
    return config


# --------------------------------------------------------------------------
# Running the pure-VHDL bench
# --------------------------------------------------------------------------


def run_vhdl_bench(folder: Path, config: Mapping, where: Path, words: int, settings: dict, waves: bool,
                   simulator: str, stim_rel: str, exp_rel: str):
    """Analyse and run the pure-VHDL bench of a folder on GHDL; return its :class:`hdl_tb.cosim.CosimResult`.

    Raises
    ------
    SpecError
        ``--rtl`` when the sources do not analyse, with GHDL's first error.
    """
    from .cosim import RECEIVED_FILE, RESULTS_FILE, CosimResult, _write_junit

    m = config["modes"]["vhdl"]
    sources = [ghdl.relative(folder / s, where) for s in m["sources"]]
    build = ghdl.analyse(sources, VHDL_TB, cwd=where, workdir="work")
    (where / "build.log").write_text(build.stdout, encoding="utf-8")
    if build.returncode != 0:
        raise SpecError("--rtl", f"the RTL does not analyse with the pure-VHDL bench on GHDL: "
                        f"{ghdl.first_error(build.stdout)}", "VHDL-2008 sources that GHDL analyses")
    patterns = where / "patterns"
    gap_file = write_pattern(patterns, "gaps", int(settings["gap_percent"]), int(settings["seed"]))
    stall_file = write_pattern(patterns, "stalls", int(settings["stall_percent"]), int(settings["seed"]))
    generics = {"STIM_FILE": ghdl.relative(folder / stim_rel, where),
                "EXPECT_FILE": ghdl.relative(folder / exp_rel, where), "OUT_FILE": RECEIVED_FILE,
                "GAP_FILE": ghdl.relative(gap_file, where), "STALL_FILE": ghdl.relative(stall_file, where),
                "N_WORDS": words, "GAP_PERCENT": settings["gap_percent"], "STALL_PERCENT": settings["stall_percent"],
                "SINK_WAITS_FOR_VALID": int(settings["sink"] == "waits-for-valid")}
    wave_file = where / f"{VHDL_TB}.ghw" if waves else None
    cmd = ghdl.run_command(VHDL_TB, workdir="work", generics=generics,
                           waves=wave_file.name if wave_file is not None else None)
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True, cwd=where, errors="replace")
    seconds = time.perf_counter() - t0
    log = " ".join(cmd) + "\n" + proc.stdout + proc.stderr
    log_file = where / "sim.log"
    log_file.write_text(log, encoding="utf-8")
    found = _SUMMARY_LINE.findall(proc.stdout)
    received = where / RECEIVED_FILE
    n_received = sum(1 for _ in open(received, "rb")) if received.is_file() else 0
    if found and found[-1][0] == "PASS":
        passed, errors, first, problems = True, 0, None, ()
    else:
        passed = False
        errors = int(found[-1][1]) if found else 0
        first = (found[-1][2] or None) if found else None
        problems = (f"{errors} errors, first: {first}",) if found else (
            f"the testbench ended without a summary line (exit code {proc.returncode}): "
            f"{ghdl.first_error(proc.stdout + proc.stderr)}",)
    results = where / RESULTS_FILE
    _write_junit(results, f"vhdl[{simulator},seed={settings['seed']}]", f"cfarvec.{VHDL_TB}", seconds,
                 None if passed else problems[0], {"seed": settings["seed"], "simulator": simulator,
                                                   "gap_percent": settings["gap_percent"],
                                                   "stall_percent": settings["stall_percent"],
                                                   "sink": settings["sink"]})
    return CosimResult(
        mode="vhdl", passed=passed, words_expected=words, words_compared=min(words, n_received),
        mismatches=errors, missing_words=max(0, words - n_received), extra_words=max(0, n_received - words),
        first_mismatch=first, problems=problems, sim_seconds=seconds,
        samples_per_second=words / seconds if seconds > 0 else 0.0, stream_seconds=seconds,
        module=config["port_map"]["module"], folder=folder, build_dir=where, results_xml=results, waves=wave_file,
        log_file=log_file, details={"log_tail": log[-2000:], "sink": settings["sink"]},
    )

