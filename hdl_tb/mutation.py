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

The map core ``hdl_tb/rtl/cfar_map.v`` has its own campaign
(:data:`MAP_MUTANTS`, :data:`MAP_CHECK_SPECS`, :data:`MAP_RUNS`, one of which
resets the core in the middle of a map; :func:`run_map_mutation_check`),
whose mutants name sections of ``docs/bit-true-2d.md``.

Run it from the command line::

    python -m hdl_tb.mutation            # the built-in check specs
    python -m hdl_tb.mutation --map      # the map core and its check specs
    python -m hdl_tb.mutation SPEC.toml  # one block spec (its [vectors] section sets the vectors; a map spec
                                         # runs the map campaign)

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

from .core_params import CORE_SOURCES, MAP_CORE_SOURCES, core_parameters, is_map_spec
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
    #: Map blocks: pulse the reset in the middle of the second map (the bench expects the words from the
    #: third map on, which the core must find by its start-of-map marker).
    reset_mid_map: bool = False

    def describe(self) -> str:
        """``gap G stall S seed N`` and, for the waiting sink, ``sink waits-for-valid``."""
        text = f"gap {self.gap_percent} stall {self.stall_percent} seed {self.seed}"
        text = text if self.sink == "independent" else f"{text} sink {self.sink}"
        return f"{text} reset mid-map" if self.reset_mid_map else text


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
    reset_at = (3 * check.spec.map_cells) // 2 if run.reset_mid_map else None
    return run_bench(check.spec, check.folder, gap_percent=run.gap_percent, stall_percent=run.stall_percent,
                     seed=run.seed, build_root=build_root, core_sources=sources, sink=run.sink, max_reports=1,
                     reset_at=reset_at)


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
               work_dir: str | Path, core_source: Path = CORE_SOURCES[0]) -> MutantResult:
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
    source = folder / core_source.name
    source.write_text(apply_mutant(core_source.read_text(encoding="ascii"), mutant), encoding="ascii")
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
                       jobs: int = 2, core_source: Path | None = None) -> MutationReport:
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
    core_source : path, optional
        The core the mutants apply to (default ``hdl_tb/rtl/cfar_stream.v``; the map campaign,
        :func:`run_map_mutation_check`, passes ``hdl_tb/rtl/cfar_map.v``).

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
    core_source = CORE_SOURCES[0] if core_source is None else Path(core_source)
    for m in mutants:
        apply_mutant(core_source.read_text(encoding="ascii"), m)  # all stale mutants fail before any work
    with tempfile.TemporaryDirectory(prefix="cfarvec-mutation-") as tmp:
        root = Path(work_dir) if work_dir is not None else Path(tmp)
        sets = write_check_sets(specs, root)
        check_unmodified_core(sets, runs, root / "reference-build")
        with ThreadPoolExecutor(max_workers=max(1, jobs)) as pool:
            results = list(pool.map(lambda m: run_mutant(m, sets, runs, root, core_source), mutants))
    return MutationReport(tuple(results))


# ---------------------------------------------------------------------------------------------------------
# The map core hdl_tb/rtl/cfar_map.v (docs/bit-true-2d.md)
# ---------------------------------------------------------------------------------------------------------

#: Seeded bugs of the map core, each one substitution on ``hdl_tb/rtl/cfar_map.v``; ``breaks`` names a
#: section of ``docs/bit-true-2d.md`` (``bit-true-2d N``), of ``docs/bit-true.md`` (``bit-true N``, the
#: arithmetic after the statistic) or the AXI4-Stream handshake and sideband signals.
MAP_MUTANTS: tuple[Mutant, ...] = (
    Mutant("map_guard_rectangle_one_row_short",
           "bit-true-2d 2: the guard rectangle is 2Gd+1 Doppler bins (the mutant counts a guard row as reference)",
           "localparam integer R1_ND = RING ? GDD : 1;",
           "localparam integer R1_ND = RING ? GDD - 1 : 1;"),
    Mutant("map_ring_one_range_column_short",
           "bit-true-2d 2: the ring spans W_r = 2Hr+1 range cells (the mutant drops the last column)",
           "localparam integer R0_NR = RING ? (CA ? WR : HR) : REF_RANGE;",
           "localparam integer R0_NR = RING ? (CA ? WR - 1 : HR) : REF_RANGE;"),
    Mutant("map_leading_half_takes_the_cut_column",
           "bit-true-2d 2: the leading half has range offset > 0 (the mutant starts it at offset 0)",
           "localparam integer R2_R0 = RING ? HR + 1 : (CA ? HR : HR + GUARD_RANGE + 1);",
           "localparam integer R2_R0 = RING ? HR : (CA ? HR : HR + GUARD_RANGE + 1);"),
    Mutant("map_cross_lower_doppler_arm_on_the_guard",
           "bit-true-2d 2: the cross's Doppler arms lie beyond the guard cells (the mutant moves one arm in)",
           "localparam integer R3_D0 = RING ? REF_DOPPLER : HD + GUARD_DOPPLER + 1;",
           "localparam integer R3_D0 = RING ? REF_DOPPLER : HD + GUARD_DOPPLER;"),
    Mutant("map_go_takes_the_smaller_half",
           "bit-true-2d 4: GO is max(S_lag, S_lead) (the mutant takes the minimum)",
           "else if (KIND == 1) noise_statistic = (pa >= pb) ? pa : pb;",
           "else if (KIND == 1) noise_statistic = (pa >= pb) ? pb : pa;"),
    Mutant("map_sums_not_cleared_at_a_line_start",
           "bit-true-2d 3: a rectangle sums the columns of the CUT's own padded line (the mutant keeps the "
           "line before)",
           "box_reg <= (COL0 + NCOLS == COLS) ? cs_in : {SB{1'b0}};",
           "box_reg <= box_reg + cs_in - cs_reg[LEAVE_POS*SB +: SB];"),
    Mutant("map_column_sum_misses_a_first_line",
           "bit-true-2d 3: a column sum adds the rectangle's n_s rows (the mutant, forming it line by line, "
           "starts counting the new row one line late)",
           "localparam integer ADD_FROM = ROWS - ROW0 - NROWS;",
           "localparam integer ADD_FROM = ROWS - ROW0 - NROWS + 1;"),
    Mutant("map_running_column_sum_keeps_the_top_row",
           "bit-true-2d 3: a column sum adds the rectangle's rows of the entering column (the mutant, forming it "
           "from the line before, keeps that line's top row)",
           "vs_mem[q] <= cs_in - cs_top;",
           "vs_mem[q] <= cs_in;"),
    Mutant("map_leaving_column_off_by_one",
           "bit-true-2d 3: the column sum leaving is the one now left of the rectangle (the mutant takes the "
           "next one)",
           "localparam integer LEAVE_POS = COLS - COL0 - 1;",
           "localparam integer LEAVE_POS = COLS - COL0;"),
    Mutant("map_line_buffers_never_written",
           "bit-true-2d 3: each line buffer hands on the cell it took P_f steps earlier (the mutant keeps its "
           "first contents)",
           "lb_mem[q_reg] <= column[WS*IB-1:IB];",
           "lb_mem[q_reg] <= lb_word;"),
    Mutant("map_pad_cells_not_zero",
           "bit-true-2d 2: a pad cell off a zero-pad or skip axis is 0 (the mutant takes the input bus)",
           "assign enter_value = body ? s_axis_tdata : {IB{1'b0}};",
           "assign enter_value = s_axis_tdata;"),
    Mutant("map_fast_wrap_one_cell_late",
           "bit-true-2d 2: under circular the padded cell at q < H_f is map cell q - H_f + L_f (the mutant "
           "is one cell on)",
           "if (q < HF)           fast_index = q + LF - HF;",
           "if (q < HF)           fast_index = q + LF - HF + 1;"),
    Mutant("map_slow_wrap_one_line_early",
           "bit-true-2d 2: under circular the padded line p < H_s is map line p - H_s + L_s (the mutant is one "
           "line early)",
           "if (p < HS)           slow_index = p + LS - HS;",
           "if (p < HS)           slow_index = p + LS - HS - 1;"),
    Mutant("map_slow_fit_one_line_late",
           "bit-true-2d 7: the window fits along the slow axis from map index H_s on (the mutant from H_s+1)",
           "fits_s       = (p_n >= 3 * HS) && (p_n <= LS - 1 + HS);",
           "fits_s       = (p_n >= 3 * HS + 1) && (p_n <= LS - 1 + HS);"),
    Mutant("map_skip_ignores_doppler",
           "bit-true-2d 7: skip along Doppler zeroes T and det where the window does not fit along Doppler",
           "| ((DOPPLER_EDGE == 0) & ~doppler_fits),",
           ","),
    Mutant("map_circular_doppler_not_valid",
           "bit-true-2d 7: a circular Doppler axis always counts as fitting for window-valid",
           "range_fits & (doppler_fits | (DOPPLER_EDGE == 3))};",
           "range_fits & doppler_fits};"),
    Mutant("map_saturate_wraps",
           "bit-true 6: saturate gives T = min(T0, 2^W_T - 1) (the mutant wraps modulo 2^W_T)",
           "if (OVERFLOW == 0 && t0 > T_MAX)",
           "if (OVERFLOW == 1 && t0 > T_MAX)"),
    Mutant("map_half_even_rounds_half_up",
           "bit-true 5: half-even rounds an exact tie to the even value (the mutant rounds it up)",
           "if ((rnd & RND_MASK) == RND_TIE && t0[0]) t0 = t0 - T_ONE;",
           ";"),
    Mutant("map_ge_decides_as_gt",
           "bit-true 7: compare \">=\" gives det = (C >= T) (the mutant misses C = T)",
           "((c_cmp << THRESHOLD_FRAC_BITS) >= t)",
           "((c_cmp << THRESHOLD_FRAC_BITS) > t)"),
    Mutant("map_line_end_tlast_one_early",
           "AXI4-Stream: m_axis_tlast marks the word of each line's last cell (the mutant marks the one before)",
           "cut_line_end = (q_n == 2 * HF + LF - 1);",
           "cut_line_end = (q_n == 2 * HF + LF - 2);"),
    Mutant("map_tuser_on_the_second_cell",
           "AXI4-Stream: m_axis_tuser marks the word of each map's first cell (the mutant marks the second)",
           "(p_n == 2 * HS) && (q_n == 2 * HF), cut_line_end",
           "(p_n == 2 * HS) && (q_n == 2 * HF + 1), cut_line_end"),
    Mutant("map_start_marker_ignored_without_store",
           "AXI4-Stream: a map starts at the cell with s_axis_tuser (the mutant takes any cell after a reset)",
           "assign step = advance & ~rst & (~body | (s_axis_tvalid & (~at_first | s_axis_tuser)));",
           "assign step = advance & ~rst & (~body | s_axis_tvalid);"),
    Mutant("map_start_marker_ignored_with_store",
           "AXI4-Stream: a map starts at the cell with s_axis_tuser (the mutant stores any cell after a reset)",
           "assign w_take = s_axis_tvalid & s_axis_tready & (~w_first | s_axis_tuser);",
           "assign w_take = s_axis_tvalid & s_axis_tready;"),
    Mutant("map_line_store_overrun",
           "bit-true-2d 9: the two line stores hold the line being read and the next (the mutant writes on)",
           "assign write_ok = (ahead != 2'd2);",
           "assign write_ok = 1'b1;"),
    Mutant("map_advance_ignores_tready",
           "AXI4-Stream: a word stays offered until TREADY takes it (the mutant moves on regardless)",
           "wire advance   = ~out_valid | m_axis_tready;",
           "wire advance   = 1'b1;"),
    Mutant("map_valid_waits_for_ready",
           "AXI4-Stream: TVALID must not wait for TREADY (ARM IHI 0051A 2.2.1)",
           "assign m_axis_tvalid = out_valid;",
           "assign m_axis_tvalid = out_valid & m_axis_tready;"),
)

#: Check specs of the map core: between them every mutant can show (ties for ">=", half-even ties
#: with d = 1, a narrow threshold for saturate, guard cells on both axes, both window shapes, GO,
#: circular on the fast axis (line stores) and on the slow axis (map store), skip, zero-pad without a store).
MAP_CHECK_SPECS: dict[str, dict] = {
    # CA ring, doppler-fast, zero-pad range, circular Doppler (two line stores); ">=" and half-even with
    # A odd and d = 1 (every odd S a tie); a 9-bit threshold saturates at full scale.
    "map-ca-ring-lines-ge-half-even-saturate": {
        "detector": {"kind": "ca", "alpha": 39.0, "compare": ">="},
        "fixed": {"input_bits": 6, "alpha_frac_bits": 1, "rounding": "half-even", "overflow": "saturate",
                  "threshold_bits": 9},
        "stream": {"pipeline_stages": 2},
        "map": {"range_cells": 11, "doppler_bins": 9, "order": "doppler-fast", "window": "ring", "ref_range": 2,
                "ref_doppler": 1, "guard_range": 1, "guard_doppler": 1, "range_edge": "zero-pad",
                "doppler_edge": "circular"},
    },
    # GO ring, range-fast, zero-pad along range and skip along Doppler (no store: pad cells made by the
    # core), three stages.
    "map-go-ring-zero-pad-skip": {
        "detector": {"kind": "go", "alpha": 3.3, "compare": ">"},
        "fixed": {"input_bits": 8, "alpha_frac_bits": 5, "rounding": "half-up"},
        "stream": {"pipeline_stages": 3},
        "map": {"range_cells": 12, "doppler_bins": 8, "order": "range-fast", "window": "ring", "ref_range": 2,
                "ref_doppler": 1, "guard_range": 1, "guard_doppler": 1, "range_edge": "zero-pad",
                "doppler_edge": "skip"},
    },
    # CA cross, doppler-fast, circular range (the map store), zero-pad Doppler, four stages.
    "map-ca-cross-map-store": {
        "detector": {"kind": "ca", "alpha": 2.1, "compare": ">"},
        "fixed": {"input_bits": 7, "alpha_frac_bits": 6, "rounding": "half-up"},
        "stream": {"pipeline_stages": 4},
        "map": {"range_cells": 10, "doppler_bins": 9, "order": "doppler-fast", "window": "cross", "ref_range": 2,
                "ref_doppler": 2, "guard_range": 1, "guard_doppler": 1, "range_edge": "circular",
                "doppler_edge": "zero-pad"},
    },
}
#: ``[vectors]`` of the map check specs (normal and ``CFARVEC_LONG=1`` runs).
MAP_CHECK_VECTORS = {"seed": 20261205, "scenario_maps": 1, "random_maps": 3}
MAP_CHECK_VECTORS_LONG = {"seed": 20261206, "scenario_maps": 8, "random_maps": 24}
#: The map runs: gaps and backpressure with both sinks, and a reset in the middle of a map.
MAP_RUNS: tuple[BenchRun, ...] = (BenchRun(20, 30, 7), BenchRun(20, 30, 8, "waits-for-valid"),
                                  BenchRun(10, 10, 9, reset_mid_map=True))


def map_check_specs(vectors: Mapping | None = None) -> dict[str, BlockSpec]:
    """The :data:`MAP_CHECK_SPECS` as map block specs, each with the ``[vectors]`` section ``vectors``."""
    vec = dict(MAP_CHECK_VECTORS if vectors is None else vectors)
    return {name: spec_from_dict({**d, "vectors": vec}, source=f"map mutation check spec {name}")
            for name, d in MAP_CHECK_SPECS.items()}


def run_map_mutation_check(specs: Mapping[str, BlockSpec] | None = None, *,
                           mutants: Sequence[Mutant] = MAP_MUTANTS, runs: Sequence[BenchRun] = MAP_RUNS,
                           work_dir: str | Path | None = None, jobs: int = 2) -> MutationReport:
    """:func:`run_mutation_check` on the map core ``hdl_tb/rtl/cfar_map.v`` with :data:`MAP_MUTANTS`
    (default specs :data:`MAP_CHECK_SPECS`)."""
    specs = map_check_specs() if specs is None else specs
    return run_mutation_check(specs, mutants=mutants, runs=runs, work_dir=work_dir, jobs=jobs,
                              core_source=MAP_CORE_SOURCES[0])


def main(argv: list[str] | None = None) -> int:
    """``python -m hdl_tb.mutation [SPEC]``: print each mutant's result and the kill rate."""
    parser = argparse.ArgumentParser(prog="python -m hdl_tb.mutation",
                                     description="Run seeded bugs of the reference core against golden vectors.")
    parser.add_argument("spec", nargs="?", metavar="SPEC",
                        help="block spec (TOML) to check against; default: the built-in check specs")
    parser.add_argument("--jobs", type=int, default=2, metavar="N", help="mutants simulated at once (default 2)")
    parser.add_argument("--map", action="store_true",
                        help="the map core cfar_map and its check specs (a map SPEC selects it too)")
    args = parser.parse_args(argv)
    try:
        specs = {Path(args.spec).stem: load_spec(args.spec)} if args.spec else None
        if args.map or (specs is not None and all(is_map_spec(v) for v in specs.values())):
            report = run_map_mutation_check(specs, jobs=args.jobs)
        else:
            report = run_mutation_check(specs, jobs=args.jobs)
    except (SpecError, StaleMutantError, HarnessError) as exc:
        print(f"mutation check: error: {str(exc).splitlines()[0]}", file=sys.stderr)
        return 2
    print("\n".join(report.lines()))
    return 0 if not report.survivors else 1


if __name__ == "__main__":
    raise SystemExit(main())
