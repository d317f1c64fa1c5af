"""Regressions: many co-simulation runs (specs x seeds x simulators x modes), in parallel, one JUnit file.

A :class:`Plan` lists the block specs, seeds, simulators and modes (and the
RTL, sizes and handshake knobs shared by every run); :func:`run_plan` runs
every combination with :func:`hdl_tb.cosim.cosim`, each in its own folder
under the output folder, ``jobs`` at a time in worker processes, and
returns one :class:`RunOutcome` per run. :func:`write_junit` writes them as
one JUnit XML file with one test case per run, named
``<mode>[<simulator>,seed=<seed>]`` in class ``cfarvec.<spec name>``;
:func:`format_table` prints the summary table. Every run's folder is kept
when it fails (and removed when it passes, unless asked), and every outcome
carries the ``cfarvec cosim`` command that repeats it exactly.

A plan can be read from a small TOML file (:func:`load_plan`)::

    specs = ["examples/harbour_ca.toml", "examples/breakwater_go.toml"]
    seeds = [1, 2, 3]                  # or "1:3"
    simulators = ["icarus", "verilator"]
    modes = ["bulk", "verilog"]
    samples = 20000                    # optional: samples per run (whole frames)
    gaps = 20                          # optional, percent
    stalls = 30                        # optional, percent
    sink = "independent"               # optional
    rtl = ["rtl/my_cfar.sv"]           # optional: your RTL (paths relative to the plan file)
    top = "my_cfar"                    # optional
    jobs = 2                           # optional: runs at a time

Notes
-----
The JUnit XML layout (``testsuites`` / ``testsuite`` / ``testcase`` with
``failure``, ``error`` and ``system-out``) is the one read by common CI
servers; there is no formal standard, the element and attribute names
follow the Apache Ant JUnit report format (common practice, no source).
"""

from __future__ import annotations

import concurrent.futures
import dataclasses
import multiprocessing
import shutil
import time
import tomllib
import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping, Sequence

from refmodel.errors import SpecError, require
from refmodel.spec_fields import choice_list, integer, integer_list

from .simulators import DEFAULT_SIMULATOR, SIMULATORS
from .tb_generator import DEFAULT_GAP_PERCENT, DEFAULT_SINK, DEFAULT_STALL_PERCENT, MODES, SINK_MODES

#: The folder of the shared builds under a regression's output folder.
BUILDS_FOLDER = "builds"
_PLAN_KEYS = ("specs", "seeds", "simulators", "modes", "samples", "gaps", "stalls", "sink", "rtl", "top", "jobs")


@dataclass(frozen=True)
class Plan:
    """What a regression runs: every combination of ``specs``, ``seeds``, ``simulators`` and ``modes``."""

    specs: tuple[Path, ...]
    seeds: tuple[int, ...] = (1,)
    simulators: tuple[str, ...] = (DEFAULT_SIMULATOR,)
    modes: tuple[str, ...] = ("bulk",)
    samples: int | None = None
    gaps: int = DEFAULT_GAP_PERCENT
    stalls: int = DEFAULT_STALL_PERCENT
    sink: str = DEFAULT_SINK
    rtl: tuple[Path, ...] = ()
    top: str | None = None
    jobs: int = 1

    def runs(self) -> list["Run"]:
        """Every run of the plan, in a fixed order (spec, simulator, mode, seed)."""
        return [Run(spec, seed, sim, mode) for spec in self.specs for sim in self.simulators
                for mode in self.modes for seed in self.seeds]


@dataclass(frozen=True)
class Run:
    """One run of a plan."""

    spec: Path
    seed: int
    simulator: str
    mode: str

    @property
    def name(self) -> str:
        """The test case name: ``<mode>[<simulator>,seed=<seed>]``."""
        return f"{self.mode}[{self.simulator},seed={self.seed}]"

    @property
    def classname(self) -> str:
        """The test class: ``cfarvec.<spec file name without .toml>``."""
        return f"cfarvec.{self.spec.stem}"

    @property
    def folder_name(self) -> str:
        return f"{self.spec.stem}-{self.mode}-{self.simulator}-seed{self.seed}"


@dataclass(frozen=True)
class RunOutcome:
    """What one run gave.

    Attributes
    ----------
    run : Run
    status : {"pass", "fail", "error"}
        ``error``: bad input (the one-line error is in ``message``).
    seconds : float
        Wall-clock time of the whole run, building included.
    message : str
        The first problem (fail) or the error line (error); "" on a pass.
    summary : mapping
        The run's summary JSON (:func:`hdl_tb.cosim.summary_dict`), {} on an error.
    command : str
        The ``cfarvec cosim`` command that repeats this run exactly.
    """

    run: Run
    status: str
    seconds: float
    message: str
    summary: Mapping = field(default_factory=dict)
    command: str = ""


def _path_list(name: str, value, base: Path) -> tuple[Path, ...]:
    if isinstance(value, str):
        value = [value]
    require(isinstance(value, list) and all(isinstance(v, str) and v for v in value), name, f"got {value!r}",
            "a list of file paths")
    return tuple((base / v) if not Path(v).is_absolute() else Path(v) for v in value)


def make_plan(specs, *, seeds="1", simulators=DEFAULT_SIMULATOR, modes="bulk", samples=None,
              gaps=DEFAULT_GAP_PERCENT, stalls=DEFAULT_STALL_PERCENT, sink=DEFAULT_SINK, rtl=(), top=None,
              jobs=1, base: Path = Path("."), prefix: str = "--") -> Plan:
    """Check every value and build a :class:`Plan` (``prefix`` names the fields: ``--seeds`` or ``seeds``)."""
    spec_paths = _path_list(f"{prefix}specs" if prefix != "--" else "SPEC", specs, base)
    require(bool(spec_paths), "SPEC", "no block spec given", "one or more spec files (or specs = [...] in --plan)")
    for p in spec_paths:
        require(p.is_file(), "SPEC", f"no file {str(p)!r}", "existing block spec files")
    seed_values = integer_list(f"{prefix}seeds", seeds, 0, 2**31 - 1)
    sims = choice_list(f"{prefix}simulators", simulators, SIMULATORS)
    mode_values = choice_list(f"{prefix}modes", modes, MODES)
    n = None if samples is None else integer(f"{prefix}samples", samples, 1, 10**9)
    g = integer(f"{prefix}gaps", gaps, 0, 95)
    s = integer(f"{prefix}stalls", stalls, 0, 95)
    require(sink in SINK_MODES, f"{prefix}sink", f"got {sink!r}", " or ".join(SINK_MODES))
    rtl_paths = _path_list(f"{prefix}rtl", list(rtl), base) if rtl else ()
    require(top is None or isinstance(top, str), f"{prefix}top", f"got {top!r}", "a module name")
    j = integer(f"{prefix}jobs" if prefix != "--" else "-j", jobs, 1, 64)
    return Plan(spec_paths, tuple(seed_values), tuple(sims), tuple(mode_values), n, g, s, sink, rtl_paths, top, j)


def load_plan(path: str | Path) -> Plan:
    """Read a plan from a TOML file (keys in the module docstring; paths relative to the file).

    Raises
    ------
    SpecError
        Field ``--plan`` for a file that cannot be read, or the key that is wrong.
    """
    p = Path(path)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise SpecError("--plan", f"cannot read {str(p)!r} ({exc})", "a TOML file") from None
    unknown = sorted(set(data) - set(_PLAN_KEYS))
    require(not unknown, unknown[0] if unknown else "", "unknown key", ", ".join(_PLAN_KEYS))
    require("specs" in data, "specs", "missing", "a list of block spec files")
    args = {k: data[k] for k in _PLAN_KEYS if k in data}
    return make_plan(args.pop("specs"), base=p.parent, prefix="", **args)


def _one(run: Run, plan: Plan, folder: Path, keep_passing: bool, builds: Path | None = None) -> RunOutcome:
    """Run one combination (in a worker process)."""
    from refmodel.block_spec import load_spec

    from .cosim import cosim, rerun_command, summary_dict

    t0 = time.perf_counter()
    command = ""
    try:
        spec = load_spec(run.spec)
        command = rerun_command(spec, rtl=plan.rtl, top=plan.top, mode=run.mode, simulator=run.simulator,
                                seed=run.seed, gap_percent=plan.gaps, stall_percent=plan.stalls, sink=plan.sink,
                                samples=plan.samples)
        result = cosim(spec, rtl=plan.rtl, top=plan.top, mode=run.mode, samples=plan.samples, seed=run.seed,
                       gap_percent=plan.gaps, stall_percent=plan.stalls, sink=plan.sink, folder=folder,
                       force=True, simulator=run.simulator, build_root=builds)
    except SpecError as exc:
        shutil.rmtree(folder, ignore_errors=True)
        return RunOutcome(run, "error", time.perf_counter() - t0, str(exc), {}, command)
    if result.passed and not keep_passing:
        shutil.rmtree(folder, ignore_errors=True)
        result = dataclasses.replace(result, kept=False)
    summary = summary_dict(result)
    message = "" if result.passed else (result.problems[0] if result.problems else "failed")
    return RunOutcome(run, "pass" if result.passed else "fail", time.perf_counter() - t0, message, summary, command)


def run_plan(plan: Plan, output: str | Path, *, keep_passing: bool = False, progress=None) -> list[RunOutcome]:
    """Run every combination of ``plan``, ``plan.jobs`` at a time.

    Parameters
    ----------
    plan : Plan
    output : path
        Folder for the runs (``<spec>-<mode>-<simulator>-seed<seed>`` each); created if missing.
    keep_passing : bool
        Keep the folders of passing runs too (and the shared builds, ``builds/``).
    progress : callable, optional
        Called with each :class:`RunOutcome` as it finishes.

    Returns
    -------
    list of RunOutcome
        In the plan's order.

    Notes
    -----
    Every run of one design and parameter set on one simulator shares one
    build, in ``<output>/builds`` (:mod:`hdl_tb.shared_build`; its
    ``builds.log`` has a line per build): seeds, gaps, stalls and vector
    files are inputs of the run, not of the build. So a regression of specs
    x seeds x simulators builds each spec once per simulator and bench (the
    bulk and interactive modes share the cocotb toplevel; the pure-Verilog
    bench is another). ``builds/`` is removed at the end unless
    ``keep_passing``.
    """
    out = Path(output).absolute()
    out.mkdir(parents=True, exist_ok=True)
    runs = plan.runs()
    builds = out / BUILDS_FOLDER
    outcomes: dict[Run, RunOutcome] = {}
    try:
        if plan.jobs == 1:
            for run in runs:
                outcomes[run] = _one(run, plan, out / run.folder_name, keep_passing, builds)
                if progress:
                    progress(outcomes[run])
        else:
            ctx = multiprocessing.get_context("spawn")
            with concurrent.futures.ProcessPoolExecutor(plan.jobs, mp_context=ctx) as pool:
                # Seed by seed, so that the first runs at a time build different designs instead of waiting.
                order = sorted(runs, key=lambda r: plan.seeds.index(r.seed))
                futures = {pool.submit(_one, run, plan, out / run.folder_name, keep_passing, builds): run
                           for run in order}
                for fut in concurrent.futures.as_completed(futures):
                    outcomes[futures[fut]] = fut.result()
                    if progress:
                        progress(outcomes[futures[fut]])
    finally:
        if not keep_passing:
            shutil.rmtree(builds, ignore_errors=True)
    return [outcomes[r] for r in runs]


def _report_text(o: RunOutcome) -> str:
    from .mismatch_report import format_report

    lines = [f"reproduce: {o.command}"]
    s = o.summary
    if s:
        lines.append(f"seed {s['seed']}, gaps {s['gap_percent']}%, stalls {s['stall_percent']}%, sink {s['sink']}, "
                     f"{s['words_compared']} of {s['words_expected']} words compared")
        lines += list(s.get("problems", ()))
        if s.get("report"):
            lines += [ln.strip() for ln in format_report(s["report"])]
        if s.get("rerun"):
            lines.append(f"rerun failing frames: {s['rerun']}")
        if s.get("folder"):
            lines.append(f"folder: {s['folder']}")
    return "\n".join(lines)


def write_junit(outcomes: Sequence[RunOutcome], path: str | Path) -> Path:
    """One JUnit XML file, one test case per run (see the module notes)."""
    failures = sum(o.status == "fail" for o in outcomes)
    errors = sum(o.status == "error" for o in outcomes)
    total = sum(o.seconds for o in outcomes)
    suites = ET.Element("testsuites", name="cfarvec regression", tests=str(len(outcomes)), failures=str(failures),
                        errors=str(errors), time=f"{total:.3f}")
    suite = ET.SubElement(suites, "testsuite", name="cfarvec.regression", tests=str(len(outcomes)),
                          failures=str(failures), errors=str(errors), skipped="0", time=f"{total:.3f}")
    for o in outcomes:
        case = ET.SubElement(suite, "testcase", classname=o.run.classname, name=o.run.name, time=f"{o.seconds:.3f}")
        if o.status == "fail":
            ET.SubElement(case, "failure", message=o.message, type="mismatch").text = _report_text(o)
        elif o.status == "error":
            ET.SubElement(case, "error", message=o.message, type="bad input").text = f"reproduce: {o.command}"
        ET.SubElement(case, "system-out").text = _report_text(o)
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    ET.ElementTree(suites).write(p, encoding="utf-8", xml_declaration=True)
    return p


def builds_made(outcomes: Sequence[RunOutcome]) -> int:
    """How many simulator builds the runs made (each shared build is made by one run)."""
    return sum(bool((o.summary.get("bench") or {}).get("built_shared")) for o in outcomes)


def format_table(outcomes: Sequence[RunOutcome]) -> str:
    """The summary table: one line per run, then the totals and each failing run's repeat command."""
    head = f"{'spec':<22} {'mode':<12} {'simulator':<10} {'seed':>6}  {'result':<6} {'words':>9} {'mismatches':>10} " \
           f"{'seconds':>8}  explained by"
    lines = [head, "-" * len(head)]
    for o in outcomes:
        s = o.summary
        explained = ", ".join((s.get("report") or {}).get("explained", [])) if s else ""
        lines.append(f"{o.run.spec.stem[:22]:<22} {o.run.mode:<12} {o.run.simulator:<10} {o.run.seed:>6}  "
                     f"{o.status.upper():<6} {s.get('words_expected', 0):>9,} {s.get('mismatches', 0):>10,} "
                     f"{o.seconds:>8.1f}  {explained or ('-' if o.status != 'error' else o.message)}")
    n_pass = sum(o.status == "pass" for o in outcomes)
    lines.append(f"{n_pass} of {len(outcomes)} runs passed; {builds_made(outcomes)} simulator builds")
    for o in outcomes:
        if o.status != "pass":
            lines.append(f"  {o.status.upper()} {o.run.classname}.{o.run.name}: {o.message}")
            lines.append(f"    reproduce: {o.command}")
            if o.summary.get("folder"):
                lines.append(f"    folder:    {o.summary['folder']}")
    return "\n".join(lines)
