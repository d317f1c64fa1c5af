"""Synthesis sanity check of the reference core with Yosys.

:func:`synthesize` runs Yosys on ``hdl_tb/rtl/cfar_stream.v`` with the
parameters of a block spec, either the generic flow (``synth``, a netlist of
simple gates and flip-flops), the Lattice iCE40 flow (``synth_ice40``: LUT4s,
carries, flip-flops, SB_RAM40_4K block RAM and SB_MAC16 DSP blocks) or the
Xilinx 7-series flow (``synth_xilinx``: LUTs, carries, flip-flops,
shift-register LUTs, distributed RAM, RAMB18E1/RAMB36E1 block RAM and DSP48E1
blocks), all flattened and out of context (no I/O or clock buffers). It
parses the ``stat`` report into cell counts, counts block RAM and LUT RAM as
classes of their own with their capacity in bits (:data:`MEMORY_BITS`), and
refuses a netlist with latches. Files ending in ``.sv`` are read as
SystemVerilog (``read_verilog -sv``).

Typical use::

    from hdl_tb.synthesis import synthesize
    report = synthesize(spec, flow="xilinx")
    print(report.luts, report.flip_flops, report.dsps, report.carries)
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping, Sequence

from refmodel.block_spec import BlockSpec
from refmodel.errors import SpecError

from .core_params import CORE_SOURCES, CORE_TOP, core_parameters

#: Synthesis commands per flow (``{top}`` is replaced by the top module).
FLOWS = {
    "generic": "synth -flatten -top {top}",
    "ice40": "synth_ice40 -flatten -top {top}",
    "xilinx": "synth_xilinx -flatten -noiopad -noclkbuf -top {top}",
}

#: Storage of each memory primitive in bits (capacity, whether used or not). iCE40: SB_RAM40_4K holds
#: 4 Kib (Lattice, "Memory Usage Guide for iCE40 Devices", TN1250, from memory). Xilinx 7 series:
#: RAMB18E1 18 Kib and RAMB36E1 36 Kib with parity (UG473, "7 Series FPGAs Memory Resources", from
#: memory); LUT RAM primitives hold depth x width bits (UG953, "Vivado Design Suite 7 Series FPGA
#: Libraries Guide", from memory): RAM32M 32 x 8, RAM64M 64 x 4, RAMnnXmS/D nn x m.
MEMORY_BITS = {
    "SB_RAM40_4K": 4096, "SB_RAM40_4KNR": 4096, "SB_RAM40_4KNW": 4096, "SB_RAM40_4KNRNW": 4096,
    "SB_SPRAM256KA": 256 * 1024,
    "RAMB18E1": 18 * 1024, "RAMB36E1": 36 * 1024,
    "RAM32M": 256, "RAM64M": 256, "RAM16X1S": 16, "RAM16X1D": 16, "RAM32X1S": 32, "RAM32X1D": 32,
    "RAM64X1S": 64, "RAM64X1D": 64, "RAM128X1S": 128, "RAM128X1D": 128, "RAM256X1S": 256,
}
#: Block RAM primitives (the rest of :data:`MEMORY_BITS` is LUT RAM).
BLOCK_RAMS = frozenset(("SB_RAM40_4K", "SB_RAM40_4KNR", "SB_RAM40_4KNW", "SB_RAM40_4KNRNW", "SB_SPRAM256KA",
                        "RAMB18E1", "RAMB36E1"))

_STAT_CELLS = re.compile(r"^\s+Number of cells:\s+(\d+)\s*$")
_STAT_TYPE = re.compile(r"^\s+(\S+)\s+(\d+)\s*$")
_LATCH_MSG = re.compile(r"^.*Latch inferred for signal.*$", re.MULTILINE)
_PARAM_ERROR = re.compile(r"(\w+)_PARAMETER_ERROR__(\w+)")

# Cell-type classes. Generic Yosys cells: flip-flops are $_DFF*/$_SDFF*/$_ALDFF*/$_DFFSR*
# (and the coarse $dff family before mapping); latches are $_DLATCH*/$_SR_* and $dlatch,
# $adlatch, $dlatchsr, $sr. Xilinx 7-series primitives: FD{R,S,C,P}E flip-flops,
# LD{C,P}E latches, LUT1..LUT6, CARRY4, DSP48E1, SRL16E/SRLC32E shift registers. iCE40: SB_DFF* flip-flops,
# SB_LUT4, SB_CARRY, SB_MAC16.
_FF = re.compile(r"^(\$_(S?DFF|DFFE|SDFF|SDFFE|SDFFCE|ALDFF|ALDFFE|DFFSR|DFFSRE)_\w*|\$(s?dff|dffe|sdffe|sdffce|adff|"
                 r"adffe|aldff|aldffe|dffsr|dffsre)|FD[RSCP]E(_1)?|SB_DFF\w*)$")
_LATCH = re.compile(r"^(\$_DLATCH\w*|\$_SR_\w*|\$dlatch|\$adlatch|\$dlatchsr|\$sr|LD[CP]E(_1)?|LDCPE)$")
_LUT = re.compile(r"^(LUT[1-6]|LUT6_2|INV|\$lut|SB_LUT4)$")  # an INV primitive is placed as a LUT1
_CARRY = re.compile(r"^(CARRY4|CARRY8|\$_?alu|\$__CARRY\w*|SB_CARRY)$")
_DSP = re.compile(r"^(DSP48E1|DSP48E2|DSP48A1|MULT18X18\w*|\$__MUL\w*|SB_MAC16)$")
_SRL = re.compile(r"^(SRL16E?|SRLC16E|SRLC32E)$")


class SynthesisError(RuntimeError):
    """Yosys failed, or the netlist contains latches.

    Attributes
    ----------
    log : str
        The Yosys log.
    """

    def __init__(self, message: str, log: str):
        super().__init__(message)
        self.log = log


@dataclass(frozen=True)
class SynthReport:
    """Cell counts of one synthesis run.

    Attributes
    ----------
    flow : {"generic", "xilinx"}
        Which flow ran.
    top : str
        Top module.
    params : dict of str to int
        Core parameters used.
    cells : dict of str to int
        Count per cell type, from Yosys ``stat``.
    n_cells : int
        Total cells (as ``stat`` reports).
    luts, flip_flops, dsps, carries, srls : int
        Cells of each class (LUTs only in the iCE40 and Xilinx flows; the
        generic flow reports simple gates, counted in :attr:`gates`).
    gates : int
        Simple logic gates (``$_AND_``, ``$_XOR_``, ... in the generic flow).
    latches : tuple of str
        Latch cell types found and "Latch inferred" log lines (empty for a
        clean netlist).
    log : str
        The Yosys log.
    brams, lutrams : int
        Block RAM and LUT RAM primitives (:data:`BLOCK_RAMS`, :data:`MEMORY_BITS`).
    memory_bits : int
        Their total capacity in bits.
    """

    flow: str
    top: str
    params: dict
    cells: dict
    n_cells: int
    luts: int
    flip_flops: int
    dsps: int
    carries: int
    srls: int
    gates: int
    latches: tuple = ()
    log: str = field(default="", repr=False)
    brams: int = 0
    lutrams: int = 0
    memory_bits: int = 0

    def summary(self) -> dict:
        """The counts as a plain dict (for reports and JSON lines)."""
        return {"flow": self.flow, "cells": self.n_cells, "luts": self.luts, "flip_flops": self.flip_flops,
                "dsps": self.dsps, "carries": self.carries, "srls": self.srls, "gates": self.gates,
                "brams": self.brams, "lutrams": self.lutrams, "memory_bits": self.memory_bits}


def find_yosys() -> str:
    """Path of ``yosys``.

    Raises
    ------
    SpecError
        Field ``"synthesis"`` when Yosys is not on ``PATH``.
    """
    path = shutil.which("yosys")
    if path is None:
        raise SpecError("synthesis", "yosys not found on PATH",
                        "Yosys 0.23 or later installed (distribution package yosys; `make tools`)")
    return path


def parse_stat(text: str) -> tuple[int, dict[str, int]]:
    """Cell counts from the last module section of a Yosys ``stat`` report.

    Parameters
    ----------
    text : str
        Yosys log or ``stat`` output (a flattened design has one module).

    Returns
    -------
    n_cells : int
        The "Number of cells" line.
    cells : dict of str to int
        Count per cell type, from the indented lines under it.

    Raises
    ------
    ValueError
        When the text holds no "Number of cells" line.
    """
    lines = text.splitlines()
    starts = [i for i, line in enumerate(lines) if _STAT_CELLS.match(line)]
    if not starts:
        raise ValueError("no 'Number of cells' line in the Yosys output")
    i = starts[-1]
    n_cells = int(_STAT_CELLS.match(lines[i]).group(1))
    cells: dict[str, int] = {}
    for line in lines[i + 1:]:
        m = _STAT_TYPE.match(line)
        if not m or not line.startswith("     "):
            break
        cells[m.group(1)] = cells.get(m.group(1), 0) + int(m.group(2))
    return n_cells, cells


def classify(cells: Mapping[str, int]) -> dict[str, int]:
    """Sum cell counts into ``luts``, ``flip_flops``, ``dsps``, ``carries``, ``srls``, ``latches``, ``gates``,
    ``brams``, ``lutrams`` and ``memory_bits`` (capacity of the RAM primitives, :data:`MEMORY_BITS`)."""
    out = dict.fromkeys(("luts", "flip_flops", "dsps", "carries", "srls", "latches", "gates", "brams", "lutrams",
                         "memory_bits"), 0)
    for name, n in cells.items():
        if name in MEMORY_BITS:
            out["brams" if name in BLOCK_RAMS else "lutrams"] += n
            out["memory_bits"] += n * MEMORY_BITS[name]
        elif _FF.match(name):
            out["flip_flops"] += n
        elif _LATCH.match(name):
            out["latches"] += n
        elif _LUT.match(name):
            out["luts"] += n
        elif _CARRY.match(name):
            out["carries"] += n
        elif _DSP.match(name):
            out["dsps"] += n
        elif _SRL.match(name):
            out["srls"] += n
        elif name.startswith("$_") and name.endswith("_"):
            out["gates"] += n
    return out


def read_command(files: Sequence[str | Path]) -> list[str]:
    """Yosys commands that read the sources: ``read_verilog -defer``, with ``-sv`` for ``.sv`` files."""
    files = [Path(p) for p in files]
    plain = [p for p in files if p.suffix.lower() != ".sv"]
    sv = [p for p in files if p.suffix.lower() == ".sv"]
    out = []
    if plain:
        out.append("read_verilog -defer " + " ".join(str(p) for p in plain))
    if sv:
        out.append("read_verilog -defer -sv " + " ".join(str(p) for p in sv))
    return out


def synth_script(params: Mapping[str, int], flow: str, sources: Sequence[str | Path] | None = None,
                 top: str = CORE_TOP) -> list[str]:
    """The Yosys script of one run: read, set the parameters, synthesise, check, print statistics.

    Parameters
    ----------
    params : mapping of str to int
        Parameters of ``top`` (``chparam -set``).
    flow : {"generic", "ice40", "xilinx"}
    sources : sequence of path, optional
        Verilog / SystemVerilog files (default the reference core).
    top : str
        Top module.

    Returns
    -------
    list of str
        The script's lines.
    """
    if flow not in FLOWS:
        raise SpecError("flow", f"got {flow!r}", ", ".join(f'"{f}"' for f in FLOWS))
    files = [Path(p).resolve() for p in (sources if sources is not None else CORE_SOURCES)]
    script = read_command(files)
    if params:  # one chparam for all: each call re-elaborates the module
        script.append("chparam " + " ".join(f"-set {name} {int(value)}" for name, value in params.items()) + f" {top}")
    script += [FLOWS[flow].format(top=top), "check -assert", "stat"]
    return script


def yosys_failure(full: str) -> SynthesisError:
    """The :class:`SynthesisError` for a failed run (an illegal parameter combination is named)."""
    m = _PARAM_ERROR.search(full)
    what = (f"illegal parameter combination for {m.group(1)}: {m.group(2).replace('_', ' ')}" if m
            else "yosys failed")
    errors = [line for line in full.splitlines() if "ERROR" in line]
    return SynthesisError(f"{what}\n" + "\n".join(errors[-5:]), full)


def report_from_stat(stat: str, flow: str, top: str, params: Mapping[str, int], log: str = "",
                     allow_latches: bool = False) -> SynthReport:
    """A :class:`SynthReport` from the log of one run (its ``stat`` section and "Latch inferred" lines).

    Raises
    ------
    SynthesisError
        Latches in the netlist (unless ``allow_latches``).
    """
    n_cells, cells = parse_stat(stat)
    counts = classify(cells)
    latch_cells = tuple(f"{name} x{n}" for name, n in cells.items() if _LATCH.match(name))
    latches = latch_cells + tuple(m.group(0).strip() for m in _LATCH_MSG.finditer(stat))
    report = SynthReport(flow=flow, top=top, params=dict(params), cells=cells, n_cells=n_cells,
                         luts=counts["luts"], flip_flops=counts["flip_flops"], dsps=counts["dsps"],
                         carries=counts["carries"], srls=counts["srls"], gates=counts["gates"],
                         latches=latches, log=log, brams=counts["brams"], lutrams=counts["lutrams"],
                         memory_bits=counts["memory_bits"])
    if latches and not allow_latches:
        raise SynthesisError("latches in the netlist: " + "; ".join(latches), log)
    return report


def run_yosys(script: Sequence[str], folder: Path, name: str) -> tuple[int, str, str]:
    """Run a Yosys script in ``folder``; returns ``(exit code, log file text, log + stdout + stderr)``."""
    yosys = find_yosys()
    ys, log_path = folder / f"{name}.ys", folder / f"{name}.log"
    ys.write_text("\n".join(script) + "\n", encoding="utf-8")
    proc = subprocess.run([yosys, "-q", "-l", str(log_path), "-s", str(ys)], capture_output=True, text=True,
                          cwd=folder, env={**os.environ, "TERM": "dumb"})
    log = log_path.read_text(encoding="utf-8", errors="replace") if log_path.is_file() else ""
    return proc.returncode, log, log + proc.stdout + proc.stderr


def synthesize(spec: BlockSpec | Mapping[str, int], flow: str = "generic", *, work_dir: str | Path | None = None,
               allow_latches: bool = False, sources: Sequence[str | Path] | None = None,
               top: str = CORE_TOP) -> SynthReport:
    """Synthesise the reference core for a spec (or explicit core parameters) with Yosys.

    Parameters
    ----------
    spec : BlockSpec or mapping of str to int
        The block spec (mapped by :func:`~hdl_tb.core_params.core_parameters`)
        or the core parameters.
    flow : {"generic", "ice40", "xilinx"}, optional
        ``synth``, ``synth_ice40`` or ``synth_xilinx`` (7-series), out of context.
    work_dir : path, optional
        Folder for the script and log (default: a temporary folder, removed).
    allow_latches : bool, optional
        Return the report instead of raising when latches are found.
    sources, top : optional
        Other Verilog (``.v``) or SystemVerilog (``.sv``) files and top
        module to synthesise instead of the core (another core, or checks of
        this module itself); ``spec`` is then a mapping of that module's
        parameters.

    Returns
    -------
    SynthReport

    Raises
    ------
    SpecError
        Yosys missing, an unknown flow, or a spec the core does not implement.
    SynthesisError
        Yosys failed (an illegal parameter combination is named), or the
        netlist has latches (unless ``allow_latches``).
    """
    if flow not in FLOWS:
        raise SpecError("flow", f"got {flow!r}", ", ".join(f'"{f}"' for f in FLOWS))
    params = core_parameters(spec) if isinstance(spec, BlockSpec) else {k: int(v) for k, v in spec.items()}
    find_yosys()
    script = synth_script(params, flow, sources, top)
    with tempfile.TemporaryDirectory(prefix="cfarvec-synth-") as tmp:
        folder = Path(work_dir) if work_dir is not None else Path(tmp)
        folder.mkdir(parents=True, exist_ok=True)
        code, log, full = run_yosys(script, folder, f"synth_{flow}")
    if code != 0:
        raise yosys_failure(full)
    report = report_from_stat(log, flow, top, params, log=full, allow_latches=True)
    if report.latches and not allow_latches:
        raise SynthesisError("latches in the netlist: " + "; ".join(report.latches), full)
    return report
