"""Mutation check: do the golden vectors catch seeded bugs in the reference core?

Each :class:`Mutant` is one deliberate bug, written as data: a name, the rule
of ``docs/bit-true.md`` or of the AXI4-Stream handshake (ARM IHI 0051A) that it
breaks, and one exact text substitution on ``hdl_tb/rtl/cfar_stream.v``. The
substitution must match the core source exactly once; when the core has
changed so that it does not, :func:`apply_mutant` raises
:class:`StaleMutantError` rather than letting a mutant silently become the
unmodified core.

:func:`run_mutation_check` writes a vector set for each check spec
(:func:`vectors.vector_set.write_vector_set`), first requires the unmodified
core to pass every bench run (so that a kill cannot come from a broken
harness), then compiles each mutant from a modified copy of the core in a
work folder and runs it through the pure-Verilog bench
(:func:`hdl_tb.verilog_bench.run_bench`) with input gaps and output
backpressure, once with a sink that raises TREADY without looking at TVALID
and once with a sink that waits for TVALID (ARM IHI 0051A 2.2.1 allows a
sink either). A mutant is *killed* when a run fails, and *survives* when
every run passes. The kill rate is the share killed.

The check specs (:data:`CHECK_SPECS`) are chosen so that every mutant can show:
ties between the CUT and the threshold for the ``>``/``>=`` mutants, exact
rounding ties for half-even, a threshold width too narrow for full scale for
saturate and wrap, a truncated multiplier with a negative digit, each edge
policy, several pipeline depths.

Run it from the command line::

    python -m hdl_tb.mutation            # the built-in check specs
    python -m hdl_tb.mutation SPEC.toml  # one block spec (its [vectors] section sets the vectors)

It prints one line per mutant and ends with ``killed K of N mutants (P %)``;
the exit status is 0 when every mutant is killed, 1 when one survives, 2 on
bad input.

Notes
-----
A killed run costs about what a passing one does: the bench keeps the frame
and sample index of the next expected word as counters, prints the first few
errors in full and only counts the rest, and a deadlocked run ends after the
watchdog's bound (about a thousand cycles). The built-in sets hold about
1 900 words; a spec with a large ``[vectors]`` section costs time in
proportion to its word count.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping, Sequence

from refmodel.block_spec import BlockSpec, load_spec, spec_from_dict
from refmodel.errors import SpecError
from vectors.vector_set import write_vector_set

from .core_params import CORE_SOURCES, core_parameters
from .verilog_bench import BenchResult, run_bench


class StaleMutantError(RuntimeError):
    """A mutant's text no longer occurs exactly once in the core source."""


class HarnessError(RuntimeError):
    """The unmodified core fails a bench run, so a kill would prove nothing."""


@dataclass(frozen=True)
class Mutant:
    """One seeded bug of the reference core.

    Attributes
    ----------
    name : str
        Short identifier.
    breaks : str
        The rule the bug breaks (a section of ``docs/bit-true.md`` or the
        AXI4-Stream handshake).
    find : str
        Text of ``cfar_stream.v`` to replace; must occur exactly once.
    replace : str
        Its replacement.
    """

    name: str
    breaks: str
    find: str
    replace: str


#: The seeded bugs, each against the core source as it is.
MUTANTS: tuple[Mutant, ...] = (
    Mutant("leading_sum_wrong_tap",
           "bit-true 2: the leading reference cells are x[n+G+1] .. x[n+H] (the leading sum keeps R+1 cells)",
           "lead_leave = win_reg[(REF_CELLS-1)*IB +: IB] & {IB{fill[REF_CELLS-1]}};",
           "lead_leave = win_reg[REF_CELLS*IB +: IB] & {IB{fill[REF_CELLS]}};"),
    Mutant("lagging_guard_one_short",
           "bit-true 2: G guard cells on each side take no part (the lagging side has G-1 and sums R+1 cells)",
           "lag_enter  = win_reg[(HALF+GUARD_CELLS)*IB +: IB] & {IB{fill[HALF+GUARD_CELLS]}};",
           "lag_enter  = win_reg[(HALF+GUARD_CELLS-1)*IB +: IB] & {IB{fill[HALF+GUARD_CELLS-1]}};"),
    Mutant("ge_decides_as_gt",
           "bit-true 7: compare \">=\" gives det = (C >= T) (the mutant misses C = T)",
           "((c_cmp << THRESHOLD_FRAC_BITS) >= t)",
           "((c_cmp << THRESHOLD_FRAC_BITS) > t)"),
    Mutant("gt_decides_as_ge",
           "bit-true 7: compare \">\" gives det = (C > T) (the mutant also detects C = T)",
           ": ((c_cmp << THRESHOLD_FRAC_BITS) > t);",
           ": ((c_cmp << THRESHOLD_FRAC_BITS) >= t);"),
    Mutant("saturate_wraps",
           "bit-true 6: saturate gives T = min(T0, 2^W_T - 1) (the mutant wraps modulo 2^W_T)",
           "if (OVERFLOW == 0 && t0 > T_MAX)",
           "if (OVERFLOW == 1 && t0 > T_MAX)"),
    Mutant("rounds_by_floor",
           "bit-true 5: half-up and half-even add 2^(d-1) before the shift (the mutant drops the bits)",
           "t0  = (rnd + RND_HALF) >> ROUND_DROP;",
           "t0  = rnd >> ROUND_DROP;"),
    Mutant("half_even_as_half_up",
           "bit-true 5: half-even takes one off an exact tie that rounded up to an odd q (the mutant keeps q)",
           "if (ROUNDING == 2 && ROUND_DROP > 0) begin",
           "if (ROUNDING == 9 && ROUND_DROP > 0) begin"),
    Mutant("go_takes_smaller_side",
           "bit-true 3: go takes S = max(S_lag, S_lead) (the mutant takes the min)",
           "noise_statistic = (lag_e >= lead_e) ? lag_e : lead_e;",
           "noise_statistic = (lag_e <= lead_e) ? lag_e : lead_e;"),
    Mutant("leading_sum_one_bit_narrow",
           "bit-true 3: each running sum is W_S bits wide (the leading sum has W_S - 1 and wraps at full scale)",
           "reg  [SUM_BITS-1:0] sum_lead_reg;",
           "reg  [SUM_BITS-2:0] sum_lead_reg;"),
    Mutant("ca_statistic_loses_carry",
           "bit-true 3: for ca S = S_lag + S_lead is W_S + 1 bits wide (the mutant drops the carry)",
           "localparam integer STAT_BITS = (KIND == 0) ? SUM_BITS + 1 : (KIND == 3) ? IB : SUM_BITS;",
           "localparam integer STAT_BITS = (KIND == 0) ? SUM_BITS : (KIND == 3) ? IB : SUM_BITS;"),
    Mutant("last_marker_one_early",
           "bit-true 8: the last marker is set on the frame's last CUT (the mutant sets it one word early)",
           "assign f_side      = {last_reg[HALF], body_reg[2*HALF] & body_reg[0]",
           "assign f_side      = {last_reg[HALF-1], body_reg[2*HALF] & body_reg[0]"),
    Mutant("valid_flag_one_early",
           "bit-true 2: v = 1 exactly when H <= n <= L-1-H (the mutant also at n = H-1)",
           "body_reg[2*HALF] & body_reg[0], win_reg[HALF*IB +: IB]};",
           "body_reg[2*HALF-1] & body_reg[0], win_reg[HALF*IB +: IB]};"),
    Mutant("skip_keeps_threshold",
           "bit-true 7: under skip, T = 0 where v = 0 (the mutant outputs the computed T there)",
           "                    t   = {THRESHOLD_BITS{1'b0}};\n",
           ""),
    Mutant("one_sided_uses_wrong_side",
           "bit-true 3: one-sided uses the complete side (the mutant uses the incomplete leading side "
           "at a frame's end)",
           "noise_statistic = (KIND == 0) ? (lag_e << 1) : lag_e;",
           "noise_statistic = (KIND == 0) ? (lead_e << 1) : lead_e;"),
    Mutant("ca_one_sided_not_doubled",
           "bit-true 3: ca one-sided uses S = 2 * S_side (the mutant omits the doubling at a frame's start)",
           "noise_statistic = (KIND == 0) ? (lead_e << 1) : lead_e;",
           "noise_statistic = (KIND == 0) ? lead_e : lead_e;"),
    Mutant("negative_digits_added",
           "bit-true 5: truncated partials are sign_i * ((S << p_i) >> d) (the mutant adds the negative digits)",
           "scaled_product = pos - neg;",
           "scaled_product = pos + neg;"),
    Mutant("reset_keeps_sums",
           "bit-true 9: after reset the window holds zeros, so both running sums are 0 (the mutant does not "
           "clear them)",
           "            sum_lead_reg <= {SUM_BITS{1'b0}};\n            sum_lag_reg  <= {SUM_BITS{1'b0}};\n",
           ""),
    Mutant("drain_one_step_short",
           "bit-true 9: after a last marker the block shifts in H = R + G drain zeros (the mutant H - 1)",
           "DRAIN_LOAD = HALF;",
           "DRAIN_LOAD = HALF - 1;"),
    Mutant("input_taken_while_stalled",
           "bit-true 9: input is accepted only while the pipeline moves (the mutant takes a sample while the "
           "output waits, and its word is lost)",
           "assign s_axis_tready = advance & ~draining & ~replaying & ~rst;",
           "assign s_axis_tready = ~draining & ~replaying & ~rst;"),
    Mutant("output_word_changes_while_stalled",
           "AXI4-Stream: TDATA stays stable while TVALID is high and TREADY low (the mutant reloads the "
           "output register every cycle)",
           "                if (advance) begin\n                    out_word_reg <= output_word(scaled_product(",
           "                if (1'b1) begin\n                    out_word_reg <= output_word(scaled_product("),
    Mutant("valid_moves_while_stalled",
           "AXI4-Stream: a transfer needs TVALID and TREADY both high, and TVALID once high stays high until "
           "it (the mutant shifts the valid bits on while the sink is not ready)",
           "end else if (advance) begin\n            valid_pipe_reg <=",
           "end else begin\n            valid_pipe_reg <="),
    # ---- OS: the sorted arrays and the selection of the k-th smallest cell
    Mutant("os_removes_the_cell_above",
           "bit-true 3: OS sorts the 2R reference cells with multiplicity (the mutant's array removes the cell "
           "after the run of cells equal to the leaving one, so a wrong cell stays)",
           "if (here < leave) lt_leave",
           "if (here <= leave) lt_leave"),
    Mutant("os_insert_ignores_the_removed_cell",
           "bit-true 3: OS sorts the current reference cells (the mutant places the entering cell as if the "
           "leaving cell were still in the array)",
           "before_q = (lt_enter & lt_leave) | ((lt_enter >> CELL_BITS) & ~lt_leave);",
           "before_q = lt_enter;"),
    Mutant("os_array_not_reset",
           "bit-true 9: after reset the window holds zeros (the mutant's sorted arrays keep what they held)",
           "            sorted_reg <= {VB{1'b0}};\n",
           ""),
    Mutant("os_lag_array_loses_the_lead_cell",
           "bit-true 2: the lagging reference cells are x[n-H] .. x[n-G-1] (the mutant's lagging array drops the "
           "cell leaving the leading side instead of its own)",
           ".enter_cell(lag_enter), .leave_cell(lag_leave),",
           ".enter_cell(lag_enter), .leave_cell(lead_leave),"),
    Mutant("os_split_max_as_min",
           "bit-true 3: OS takes the k-th smallest of both sides, the least max(lag_i, lead_j) over i + j = k "
           "(the mutant takes the min of each pair)",
           "c = (x >= y) ? x : y;",
           "c = (x <= y) ? x : y;"),
    Mutant("os_split_all_lagging_missing",
           "bit-true 3: OS counts every split of the k smallest cells between the sides (the mutant never takes "
           "all k, or all R, from the lagging side)",
           "localparam integer OS_SPLIT_HI = (OS_RANK < REF_CELLS) ? OS_RANK : REF_CELLS;",
           "localparam integer OS_SPLIT_HI = (OS_RANK < REF_CELLS) ? OS_RANK - 1 : REF_CELLS - 1;"),
    Mutant("os_one_sided_rank_floor",
           "bit-true 3: one-sided OS takes the ceil(k/2)-th smallest of the complete side (the mutant floor(k/2), "
           "at least 1)",
           "localparam integer OS_SIDE_RANK = (OS_RANK + 1) / 2;",
           "localparam integer OS_SIDE_RANK = (OS_RANK > 1) ? OS_RANK / 2 : 1;"),
    Mutant("os_split_all_leading_missing",
           "bit-true 3: OS counts every split of the k smallest cells between the sides (the mutant never takes "
           "all k, or all R, from the leading side)",
           "localparam integer OS_SPLIT_LO = (OS_RANK > REF_CELLS) ? OS_RANK - REF_CELLS : 0;",
           "localparam integer OS_SPLIT_LO = (OS_RANK > REF_CELLS) ? OS_RANK - REF_CELLS + 1 : 1;"),
    # ---- circular: the frame store and its replay
    Mutant("circular_replay_starts_at_frame_start",
           "bit-true 2: under circular the cells before the frame are x[L-H..L-1] (the mutant replays x[0..H-1])",
           "rd_addr_next = start_replay ? wr_addr_reg + ADDR_ONE - ADDR_HALF",
           "rd_addr_next = start_replay ? {FRAME_ADDR_BITS{1'b0}}"),
    Mutant("circular_read_does_not_wrap",
           "bit-true 2: under circular the cell at index i >= L is x[i mod L] (the mutant reads on past the "
           "frame's end)",
           "(rd_addr_reg == last_addr_reg) ? {FRAME_ADDR_BITS{1'b0}}",
           "(1'b0) ? {FRAME_ADDR_BITS{1'b0}}"),
    Mutant("circular_wrapped_cells_count_as_zero",
           "bit-true 2: under circular the wrapped cells hold x[i mod L] (the mutant masks them to 0 like drain "
           "zeros, i.e. zero-pad)",
           "wire [WIN-1:0] fill = (CIRC != 0) ? fill_reg : body_reg;",
           "wire [WIN-1:0] fill = body_reg;"),
    Mutant("circular_body_one_cell_long",
           "bit-true 8: one output word per input sample (the mutant also emits a word for the first wrapped "
           "cell after the frame)",
           "assign enter_body  = (replay_left_reg <= body_top_reg) & (replay_left_reg > LEFT_HALF);",
           "assign enter_body  = (replay_left_reg <= body_top_reg) & (replay_left_reg >= LEFT_HALF);"),
    Mutant("circular_last_marker_one_early",
           "bit-true 8: the last marker is set on the frame's last CUT (under circular the mutant sets it one "
           "word early)",
           "assign enter_last  = (replay_left_reg == LEFT_HALF + LEFT_ONE);",
           "assign enter_last  = (replay_left_reg == LEFT_HALF + LEFT_ONE + LEFT_ONE);"),
    Mutant("circular_replay_without_tail",
           "bit-true 9: the stored frame is fed as x[L-H..L-1], x[0..L-1], x[0..H-1] (the mutant stops after "
           "x[L-1], so the frame's last H words are formed from the next frame)",
           "replay_left_reg <= frame_len + LEFT_HALF + LEFT_HALF;",
           "replay_left_reg <= frame_len + LEFT_HALF;"),
    Mutant("circular_input_taken_during_replay",
           "bit-true 9: under circular new input is refused while the stored frame is replayed (the mutant "
           "overwrites the store)",
           "assign s_axis_tready = advance & ~draining & ~replaying & ~rst;",
           "assign s_axis_tready = advance & ~draining & ~rst;"),
    Mutant("valid_waits_for_ready",
           "AXI4-Stream: a source must not wait for TREADY before asserting TVALID (the mutant offers a word only "
           "while TREADY is high; every word still arrives at a sink that raises TREADY on its own, a sink that "
           "waits for TVALID deadlocks)",
           "assign m_axis_tvalid = out_valid;",
           "assign m_axis_tvalid = out_valid & m_axis_tready;"),
)


#: Block specs (as :func:`~refmodel.block_spec.spec_from_dict` mappings, without ``[vectors]``) the
#: mutants run against. Windows of 9 cells keep the directed corner cases short.
CHECK_SPECS: dict[str, dict] = {
    # CA under skip with ">=": A = 3 and d = 1, so every odd S is an exact half-even tie; a 10-bit
    # threshold saturates at full scale (T0 up to 2295); G = 1 so a guard cell can go missing.
    "ca-skip-ge-half-even-saturate": {
        "detector": {"kind": "ca", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "alpha": 9.0,
                     "edge": "skip", "compare": ">="},
        "fixed": {"input_bits": 8, "alpha_frac_bits": 1, "rounding": "half-even", "overflow": "saturate",
                  "threshold_bits": 10},
        "stream": {"frame_length": 40, "pipeline_stages": 2},
    },
    # CA one-sided with ">": truncated partials of A = 15 = 16 - 1 (a negative digit); a 7-bit
    # threshold wraps at full scale (T0 up to 504); the multiplier register stage.
    "ca-one-sided-gt-truncated-wrap": {
        "detector": {"kind": "ca", "ref_cells_per_side": 2, "guard_cells_per_side": 2, "alpha": 3.75,
                     "edge": "one-sided", "compare": ">"},
        "fixed": {"input_bits": 6, "alpha_frac_bits": 4, "alpha_csd_digits": 2, "truncate_partials": True,
                  "rounding": "floor", "overflow": "wrap", "threshold_bits": 7, "threshold_frac_bits": 1},
        "stream": {"frame_length": 40, "pipeline_stages": 3},
    },
    # GO under zero-pad with ">", half-up with a threshold fraction bit, five stages (a delay word).
    "go-zero-pad-gt-half-up": {
        "detector": {"kind": "go", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "alpha": 6.3,
                     "edge": "zero-pad", "compare": ">"},
        "fixed": {"input_bits": 10, "alpha_frac_bits": 6, "rounding": "half-up", "threshold_frac_bits": 1},
        "stream": {"frame_length": 40, "pipeline_stages": 5},
    },
    # OS one-sided with an odd rank k = 3 (ceil(k/2) = 2 differs from floor), 4-bit samples so that
    # equal cells are common, the statistic register stage.
    "os-one-sided-k3": {
        "detector": {"kind": "os", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "rank": 3, "alpha": 2.5,
                     "edge": "one-sided", "compare": ">"},
        "fixed": {"input_bits": 4, "alpha_frac_bits": 4, "rounding": "half-up"},
        "stream": {"frame_length": 40, "pipeline_stages": 4},
    },
    # OS under circular with k = 2 of 2R = 6 (splits with all cells from one side), 6-bit samples;
    # circular frames of several lengths so that a stale store shows.
    "os-circular-k2": {
        "detector": {"kind": "os", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "rank": 2, "alpha": 3.5,
                     "edge": "circular", "compare": ">="},
        "fixed": {"input_bits": 6, "alpha_frac_bits": 4, "rounding": "floor"},
        "stream": {"frame_length": 40, "pipeline_stages": 2},
    },
    # OS under zero-pad with k = 5 of 6 (the large ranks), one pipeline stage (the arrays' next values).
    "os-zero-pad-k5": {
        "detector": {"kind": "os", "ref_cells_per_side": 3, "guard_cells_per_side": 1, "rank": 5, "alpha": 2.0,
                     "edge": "zero-pad", "compare": ">"},
        "fixed": {"input_bits": 5, "alpha_frac_bits": 3, "rounding": "half-even"},
        "stream": {"frame_length": 40, "pipeline_stages": 1},
    },
}

#: ``[vectors]`` settings of the check specs: the directed corner cases and a few random and scenario
#: frames (normal runs), or many more (``CFARVEC_LONG=1``).
CHECK_VECTORS = {"seed": 20261203, "scenario_frames": 2, "random_frames": 6}
CHECK_VECTORS_LONG = {"seed": 20261204, "scenario_frames": 32, "random_frames": 64}


@dataclass(frozen=True)
class BenchRun:
    """Handshake settings of one bench run (see :func:`hdl_tb.verilog_bench.run_bench`)."""

    gap_percent: int
    stall_percent: int
    seed: int
    #: ``"independent"`` or ``"waits-for-valid"`` (:data:`hdl_tb.verilog_bench.SINK_MODES`).
    sink: str = "independent"

    def describe(self) -> str:
        """``gap G stall S seed N`` and, for the waiting sink, ``sink waits-for-valid``."""
        text = f"gap {self.gap_percent} stall {self.stall_percent} seed {self.seed}"
        return text if self.sink == "independent" else f"{text} sink {self.sink}"


#: The runs every mutant gets on every set: input gaps and output backpressure on, once with a sink that
#: raises TREADY on its own and once with a sink that waits for TVALID.
DEFAULT_RUNS: tuple[BenchRun, ...] = (BenchRun(20, 30, 7), BenchRun(20, 30, 8, "waits-for-valid"))
#: Long runs (``CFARVEC_LONG=1``) add a full-rate run, where the bench also checks the drain and the
#: latency, a run with heavy gaps and backpressure, and one with a waiting sink and no stalls.
LONG_RUNS: tuple[BenchRun, ...] = DEFAULT_RUNS + (BenchRun(0, 0, 1), BenchRun(50, 60, 11),
                                                  BenchRun(0, 0, 3, "waits-for-valid"))


@dataclass(frozen=True)
class CheckSet:
    """A check spec with its written vector set."""

    name: str
    spec: BlockSpec
    folder: Path


@dataclass(frozen=True)
class MutantResult:
    """Outcome of one mutant.

    Attributes
    ----------
    mutant : Mutant
    killed : bool
        True when some run failed.
    killed_by : str or None
        ``"<set> gap G stall S seed N[ sink waits-for-valid]: <first error>"`` of the killing run.
    runs : int
        Bench runs made (runs stop at the first kill).
    """

    mutant: Mutant
    killed: bool
    killed_by: str | None
    runs: int


@dataclass(frozen=True)
class MutationReport:
    """All mutant results of one check."""

    results: tuple[MutantResult, ...]

    @property
    def killed(self) -> int:
        return sum(r.killed for r in self.results)

    @property
    def total(self) -> int:
        return len(self.results)

    @property
    def kill_rate(self) -> float:
        """Killed mutants in percent (100 for no mutants)."""
        return 100.0 * self.killed / self.total if self.total else 100.0

    @property
    def survivors(self) -> list[str]:
        return [r.mutant.name for r in self.results if not r.killed]

    def lines(self) -> list[str]:
        """One line per mutant, then ``killed K of N mutants (P %)``."""
        width = max((len(r.mutant.name) for r in self.results), default=0)
        out = []
        for r in self.results:
            if r.killed:
                out.append(f"killed    {r.mutant.name:<{width}}  by {r.killed_by}")
            else:
                out.append(f"SURVIVED  {r.mutant.name:<{width}}  ({r.runs} runs passed; breaks {r.mutant.breaks})")
        out.append(f"killed {self.killed} of {self.total} mutants ({self.kill_rate:.1f} %)")
        return out


def apply_mutant(source: str, mutant: Mutant) -> str:
    """The core source with the mutant's substitution made.

    Raises
    ------
    StaleMutantError
        When ``mutant.find`` does not occur exactly once in ``source``, or
        the substitution would change nothing.
    """
    count = source.count(mutant.find)
    if count != 1 or mutant.find == mutant.replace:
        raise StaleMutantError(f"mutant {mutant.name!r}: its text occurs {count} times in the core source "
                               f"(exactly once needed); update hdl_tb/mutation.py to the changed core")
    return source.replace(mutant.find, mutant.replace)


def check_specs(vectors: Mapping | None = None) -> dict[str, BlockSpec]:
    """The :data:`CHECK_SPECS` as block specs, each with the ``[vectors]`` section ``vectors``.

    Parameters
    ----------
    vectors : mapping, optional
        The ``[vectors]`` settings (default :data:`CHECK_VECTORS`).
    """
    vec = dict(CHECK_VECTORS if vectors is None else vectors)
    return {name: spec_from_dict({**d, "vectors": vec}, source=f"mutation check spec {name}")
            for name, d in CHECK_SPECS.items()}


def write_check_sets(specs: Mapping[str, BlockSpec], folder: str | Path) -> list[CheckSet]:
    """Write one vector set per spec into ``folder/<name>``; refuse specs the core cannot build.

    Raises
    ------
    SpecError
        For a spec the core does not implement, or bad ``[vectors]`` settings.
    """
    sets = []
    for name, spec in specs.items():
        core_parameters(spec)
        out = Path(folder) / "sets" / name
        write_vector_set(spec, out, force=True)
        sets.append(CheckSet(name, spec, out))
    return sets


def _run(check: CheckSet, run: BenchRun, build_root: Path, sources: Sequence[Path] | None) -> BenchResult:
    return run_bench(check.spec, check.folder, gap_percent=run.gap_percent, stall_percent=run.stall_percent,
                     seed=run.seed, build_root=build_root, core_sources=sources, sink=run.sink, max_reports=1)


def check_unmodified_core(sets: Sequence[CheckSet], runs: Sequence[BenchRun], build_root: str | Path) -> None:
    """Require the unmodified core to pass every run.

    Raises
    ------
    HarnessError
        Naming the first set and run that failed.
    """
    for check in sets:
        for run in runs:
            r = _run(check, run, Path(build_root), None)
            if not r.passed:
                raise HarnessError(f"the unmodified core fails {check.name} {run}: {r.first_mismatch}")


def run_mutant(mutant: Mutant, sets: Sequence[CheckSet], runs: Sequence[BenchRun],
               work_dir: str | Path) -> MutantResult:
    """Apply one mutant to a copy of the core and run it until a run fails.

    Raises
    ------
    StaleMutantError
        See :func:`apply_mutant`.
    hdl_tb.verilog_bench.BenchCompileError
        When the mutated copy does not compile (a broken mutant, not a kill).
    """
    folder = Path(work_dir) / "mutants" / mutant.name
    folder.mkdir(parents=True, exist_ok=True)
    source = folder / CORE_SOURCES[0].name
    source.write_text(apply_mutant(CORE_SOURCES[0].read_text(encoding="ascii"), mutant), encoding="ascii")
    n = 0
    for check in sets:
        for run in runs:
            n += 1
            r = _run(check, run, folder / "build", [source])
            if not r.passed:
                how = f"{check.name} {run.describe()}: {r.first_mismatch}"
                return MutantResult(mutant, True, how, n)
    return MutantResult(mutant, False, None, n)


def run_mutation_check(specs: Mapping[str, BlockSpec] | None = None, *, mutants: Sequence[Mutant] = MUTANTS,
                       runs: Sequence[BenchRun] = DEFAULT_RUNS, work_dir: str | Path | None = None,
                       jobs: int = 2) -> MutationReport:
    """Write the vector sets, check the unmodified core, then run every mutant.

    Parameters
    ----------
    specs : mapping of str to BlockSpec, optional
        Named specs to check against (default: :data:`CHECK_SPECS`).
    mutants : sequence of Mutant, optional
    runs : sequence of BenchRun, optional
        Bench settings; each mutant runs set by set, run by run, until one fails.
    work_dir : path, optional
        Folder for the vector sets, the mutated copies and the compiled
        images (default: a temporary folder, removed afterwards).
    jobs : int, optional
        Mutants simulated at the same time.

    Returns
    -------
    MutationReport

    Raises
    ------
    SpecError
        A spec the core cannot build, or bad vector settings.
    HarnessError
        The unmodified core fails a run.
    StaleMutantError
        A mutant no longer applies to the core source.
    """
    specs = check_specs() if specs is None else specs
    for m in mutants:
        apply_mutant(CORE_SOURCES[0].read_text(encoding="ascii"), m)  # all stale mutants fail before any work
    with tempfile.TemporaryDirectory(prefix="cfarvec-mutation-") as tmp:
        root = Path(work_dir) if work_dir is not None else Path(tmp)
        sets = write_check_sets(specs, root)
        check_unmodified_core(sets, runs, root / "reference-build")
        with ThreadPoolExecutor(max_workers=max(1, jobs)) as pool:
            results = list(pool.map(lambda m: run_mutant(m, sets, runs, root), mutants))
    return MutationReport(tuple(results))


def main(argv: list[str] | None = None) -> int:
    """``python -m hdl_tb.mutation [SPEC]``: print each mutant's result and the kill rate."""
    parser = argparse.ArgumentParser(prog="python -m hdl_tb.mutation",
                                     description="Run seeded bugs of the reference core against golden vectors.")
    parser.add_argument("spec", nargs="?", metavar="SPEC",
                        help="block spec (TOML) to check against; default: the built-in check specs")
    parser.add_argument("--jobs", type=int, default=2, metavar="N", help="mutants simulated at once (default 2)")
    args = parser.parse_args(argv)
    try:
        specs = {Path(args.spec).stem: load_spec(args.spec)} if args.spec else None
        report = run_mutation_check(specs, jobs=args.jobs)
    except (SpecError, StaleMutantError, HarnessError) as exc:
        print(f"mutation check: error: {str(exc).splitlines()[0]}", file=sys.stderr)
        return 2
    print("\n".join(report.lines()))
    return 0 if not report.survivors else 1


if __name__ == "__main__":
    raise SystemExit(main())
