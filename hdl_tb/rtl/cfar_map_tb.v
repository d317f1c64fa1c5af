`timescale 1ns/1ps
`default_nettype none
// cfar_map_tb: self-checking, file-driven testbench of cfar_map (the
// range-Doppler reference core) in plain Verilog-2005, the map sibling of
// cfar_stream_tb.v with the same files, knobs and summary line.
//
// Reads the stimulus words (cell in [INPUT_BITS-1:0], last-of-map marker in
// bit INPUT_BITS) and the expected output words (docs/bit-true-2d.md
// section 8) with $readmemh (IEEE Std 1364-2005, 17.2.9), drives the input
// with seeded gaps and the output with seeded backpressure (or the pause
// pattern files of hdl_tb/pause_pattern.py), compares every output
// transfer with the next expected word, writes every received word to
// OUT_FILE in hex, and ends with
//   PASS <n_words>
//   FAIL <n_errors> first=<description of the first error>
// The source drives s_axis_tuser on each map's first cell and s_axis_tlast
// on each line's last cell (fast axis, from the map size).
//
// It also checks, as errors:
// - m_axis_tlast against the end of a line and m_axis_tuser against the
//   start of a map, for every word;
// - the output handshake (ARM IHI 0051A 2.2.1);
// - neither axis circular, STALL_PERCENT = 0, the sink not waiting for
//   TVALID: s_axis_tready low for exactly the pad steps after each cell
//   (0 inside a line, 2 H_f after a line's last cell, 2 H_s P_f + 2 H_f
//   after a map's last cell), high otherwise;
// - the same and GAP_PERCENT = 0: the latency of every word,
//   H_s P_f + H_f + PIPELINE_STAGES cycles;
// - with the waiting sink: a deadlock (watchdog);
// - word counts and the timeout.
// RESET_AT >= 0 pulses srst for 3 cycles after the input transfer of that
// stimulus word (mid-map): the words of that map not yet received are not
// expected, the source goes on with the next stimulus word, and checking
// resumes at the next map's first word, which the core must find by its
// s_axis_tuser (the timing checks are off in such a run).
//
// Every file name and knob is a parameter and a plusarg of the same name.
module cfar_map_tb;

    // ---------------- core parameters (see cfar_map.v) ----------------
    // Sample width W_in.
    parameter integer INPUT_BITS = 16;
    // Map size: range cells and Doppler bins.
    parameter integer RANGE_CELLS = 64;
    parameter integer DOPPLER_BINS = 32;
    // Streaming order: 0 = doppler-fast, 1 = range-fast.
    parameter integer ORDER = 0;
    // Window shape: 0 = ring, 1 = cross.
    parameter integer WINDOW = 0;
    // Reference and guard extents per side along range and Doppler.
    parameter integer REF_RANGE = 2;
    parameter integer REF_DOPPLER = 2;
    parameter integer GUARD_RANGE = 1;
    parameter integer GUARD_DOPPLER = 1;
    // Detector kind: 0 = CA, 1 = GO, 2 = SO.
    parameter integer KIND = 0;
    // Edge policies: 0 = skip, 1 = zero-pad, 3 = circular.
    parameter integer RANGE_EDGE = 1;
    parameter integer DOPPLER_EDGE = 3;
    // Sum width W_S.
    parameter integer SUM_BITS = 22;
    // The constant A.
    parameter [63:0] ALPHA_INT = 64'd2212;
    // Product fraction bits dropped, d.
    parameter integer DROP_BITS = 12;
    // Threshold fraction bits F_T.
    parameter integer THRESHOLD_FRAC_BITS = 0;
    // Threshold width W_T.
    parameter integer THRESHOLD_BITS = 21;
    // Rounding: 0 = floor, 1 = half-up, 2 = half-even.
    parameter integer ROUNDING = 1;
    // Overflow: 0 = saturate, 1 = wrap.
    parameter integer OVERFLOW = 0;
    // Decision: 0 = '>', 1 = '>='.
    parameter integer COMPARE_GE = 0;
    // Truncated shift-and-add multiplier (0/1).
    parameter integer TRUNCATE_PARTIALS = 0;
    // Register stages from the sums to the output.
    parameter integer PIPELINE_STAGES = 2;
    // Reset level of the core's srst (the bench drives it accordingly).
    parameter integer SRST_LEVEL = 1;

    // ---------------- bench parameters ----------------
    // Stimulus hex file, one word per line.
    parameter STIM_FILE = "stimulus.hex";
    // Expected output hex file, one word per line.
    parameter EXPECT_FILE = "expected.hex";
    // File receiving every output word in hex, one per line.
    parameter OUT_FILE = "received.hex";
    // Words in the stimulus and expected files (> 0; +N_WORDS at run time). The bench is told the count
    // rather than looking for unwritten (x) entries, which a two-state simulator such as Verilator lacks.
    parameter integer N_WORDS = 0;
    // Words in the expected file; 0 = N_WORDS. A different count is reported as an error.
    parameter integer N_EXPECT = 0;
    // Depth of the word memories (at least the number of words in the files).
    parameter integer MAX_WORDS = 65536;
    // Percent of cycles the source leaves s_axis_tvalid low when it has a word.
    parameter integer GAP_PERCENT = 0;
    // Percent of cycles the sink holds m_axis_tready low.
    parameter integer STALL_PERCENT = 0;
    // Seed of the pseudo-random gap and stall sequences (used when no pattern file is given).
    parameter integer SEED = 1;
    // Gap and stall patterns, one binary digit per line ($readmemb), entry k for the k-th draw, repeating after
    // PATTERN_LENGTH entries (hdl_tb/pause_pattern.py writes them from the seed). "" = draw with xorshift32.
    parameter GAP_FILE = "";
    parameter STALL_FILE = "";
    // 1 = dump waveforms to DUMP_FILE.
    parameter integer DUMP = 0;
    // Waveform file name (VCD unless the simulator is told otherwise).
    parameter DUMP_FILE = "cfar_map_tb.vcd";
    // Cycles before the bench gives up; 0 = automatic from the word count and the percentages.
    parameter integer TIMEOUT_CYCLES = 0;
    // Error lines printed in full (all errors are counted).
    parameter integer MAX_REPORTS = 10;
    // Sink: 0 = m_axis_tready drawn every cycle, 1 = raised only after m_axis_tvalid was seen high.
    parameter integer SINK_WAITS_FOR_VALID = 0;
    // Cycles without a transfer on either port, while the sink waits for TVALID, before the bench reports a
    // deadlock; 0 = automatic (1000 + 4 * (P_s P_f + H_s P_f + H_f + PIPELINE_STAGES)).
    parameter integer WATCHDOG_CYCLES = 0;
    // Stimulus word after whose input transfer srst is pulsed (mid-map reset); -1 = none.
    parameter integer RESET_AT = -1;

    // ---------------- derived ----------------
    // Stream axes of the map (as cfar_map.v): line length L_f, lines L_s, half extents, padded line P_f.
    localparam integer HD = REF_DOPPLER + GUARD_DOPPLER;
    localparam integer HR = REF_RANGE + GUARD_RANGE;
    localparam integer LS = (ORDER == 1) ? DOPPLER_BINS : RANGE_CELLS;
    localparam integer LF = (ORDER == 1) ? RANGE_CELLS : DOPPLER_BINS;
    localparam integer HS = (ORDER == 1) ? HD : HR;
    localparam integer HF = (ORDER == 1) ? HR : HD;
    localparam integer PF = LF + 2 * HF;
    localparam integer PS = LS + 2 * HS;
    localparam integer MAP_CELLS = LS * LF;
    // Window-stream steps from a cell to the step that completes its window.
    localparam integer WINDOW_DELAY = HS * PF + HF;
    // 1 = an axis is circular (the core stores lines or the map; no fixed timing to check).
    localparam integer STORED = (RANGE_EDGE == 3 || DOPPLER_EDGE == 3) ? 1 : 0;
    // Clock cycles per map at full rate, at most (a stored map is replayed after it is written).
    localparam integer MAP_CYCLES = PS * PF + STORED * MAP_CELLS;
    // Stimulus word width.
    localparam integer IN_W = INPUT_BITS + 1;
    // Output word width.
    localparam integer OUT_W = INPUT_BITS + THRESHOLD_BITS + 3;
    // Output field positions (docs/bit-true.md section 8).
    localparam integer T_LSB = INPUT_BITS;
    localparam integer DET_BIT = INPUT_BITS + THRESHOLD_BITS;
    localparam integer V_BIT = DET_BIT + 1;
    localparam integer LAST_BIT = DET_BIT + 2;
    // Clock period in ns.
    localparam integer CLK_PERIOD = 10;
    // Entries of a pause pattern (a power of two).
    localparam integer PATTERN_LENGTH = 65536;

    // ---------------- DUT ----------------
    reg                  clk = 1'b0;
    reg                  srst = (SRST_LEVEL != 0) ? 1'b1 : 1'b0;
    reg  [INPUT_BITS-1:0] s_tdata = {INPUT_BITS{1'b0}};
    reg                  s_tvalid = 1'b0;
    reg                  s_tlast = 1'b0;
    wire                 s_tready;
    wire [OUT_W-1:0]     m_tdata;
    wire                 m_tvalid;
    reg                  m_tready = 1'b0;
    wire                 m_tlast;

    reg                  s_tuser = 1'b0;
    wire                 m_tuser;

    cfar_map #(
        .INPUT_BITS         (INPUT_BITS),
        .RANGE_CELLS        (RANGE_CELLS),
        .DOPPLER_BINS       (DOPPLER_BINS),
        .ORDER              (ORDER),
        .WINDOW             (WINDOW),
        .REF_RANGE          (REF_RANGE),
        .REF_DOPPLER        (REF_DOPPLER),
        .GUARD_RANGE        (GUARD_RANGE),
        .GUARD_DOPPLER      (GUARD_DOPPLER),
        .KIND               (KIND),
        .RANGE_EDGE         (RANGE_EDGE),
        .DOPPLER_EDGE       (DOPPLER_EDGE),
        .SUM_BITS           (SUM_BITS),
        .ALPHA_INT          (ALPHA_INT),
        .DROP_BITS          (DROP_BITS),
        .THRESHOLD_FRAC_BITS(THRESHOLD_FRAC_BITS),
        .THRESHOLD_BITS     (THRESHOLD_BITS),
        .ROUNDING           (ROUNDING),
        .OVERFLOW           (OVERFLOW),
        .COMPARE_GE         (COMPARE_GE),
        .TRUNCATE_PARTIALS  (TRUNCATE_PARTIALS),
        .PIPELINE_STAGES    (PIPELINE_STAGES),
        .SRST_LEVEL         (SRST_LEVEL)
    ) dut (
        .clk          (clk),
        .srst         (srst),
        .s_axis_tdata (s_tdata),
        .s_axis_tvalid(s_tvalid),
        .s_axis_tready(s_tready),
        .s_axis_tlast (s_tlast),
        .s_axis_tuser (s_tuser),
        .m_axis_tdata (m_tdata),
        .m_axis_tvalid(m_tvalid),
        .m_axis_tready(m_tready),
        .m_axis_tlast (m_tlast),
        .m_axis_tuser (m_tuser)
    );

    always #(CLK_PERIOD / 2) clk = ~clk;

    // ---------------- files and run-time settings ----------------
    reg [IN_W-1:0]  stim_mem   [0:MAX_WORDS-1];
    reg [OUT_W-1:0] expect_mem [0:MAX_WORDS-1];
    integer         in_cycle   [0:MAX_WORDS-1];

    reg [8*1024-1:0] stim_name;
    reg [8*1024-1:0] expect_name;
    reg [8*1024-1:0] out_name;
    reg [8*1024-1:0] dump_name;
    reg [8*1024-1:0] gap_name;
    reg [8*1024-1:0] stall_name;
    reg             gap_mem   [0:PATTERN_LENGTH-1];
    reg             stall_mem [0:PATTERN_LENGTH-1];
    reg             gap_from_file;
    reg             stall_from_file;
    integer         gap_k   = 0;
    integer         stall_k = 0;
    reg             gap_now;
    reg             stall_now;
    integer gap_pct;
    integer stall_pct;
    integer seed;
    integer n_words;
    integer n_expect;
    integer timeout;
    integer max_reports;
    integer sink_wait;
    integer watchdog;
    integer out_fd;
    integer i;

    // ---------------- bench state ----------------
    integer cycle      = 0;
    integer in_idx     = 0;   // next stimulus word to offer
    integer out_idx    = 0;   // next expected word
    integer exp_frame  = 0;   // frame of the next expected word (expected last markers before it)
    integer exp_sample = 0;   // its sample index within that frame
    integer idle       = 0;   // cycles without a transfer while the sink waits for TVALID
    integer n_errors   = 0;
    integer drain_left = -1;  // cycles of s_axis_tready low still expected (-1: not in a drain)
    integer in_pos     = 0;   // map position of the next stimulus word to offer
    integer in_j       = 0;   // its position in its line (fast axis)
    integer in_j_taken = 0;   // line position of the word just taken
    integer exp_j      = 0;   // line position of the next expected word
    integer in_map_pos = 0;   // map position of the word just taken
    integer reset_at;         // RESET_AT (plusarg)
    integer reset_left = 0;   // reset cycles still to go
    reg     s_first_now;      // the word on offer starts a map
    reg     active     = 1'b0; // between reset release and the last expected word
    reg     done       = 1'b0;
    reg     have_first = 1'b0;
    reg     check_drain;       // STALL_PERCENT = 0: drain timing is exact
    reg     check_latency;     // GAP_PERCENT = 0 and STALL_PERCENT = 0: latency is exact
    reg [8*400-1:0] first_error;
    reg             prev_hold = 1'b0;       // last cycle: m_tvalid high, not taken
    reg [OUT_W-1:0] prev_word;
    reg [IN_W-1:0]  stim_word;
    reg [OUT_W:0]   exp_word;               // {last marker again (for m_axis_tlast), expected word}

    task note_error;
        input [8*400-1:0] text;
        begin
            if (!have_first) begin
                first_error = text;
                have_first  = 1'b1;
            end
            n_errors = n_errors + 1;
        end
    endtask

    // Describe a wrong word: its frame and sample index (exp_frame and
    // exp_sample, advanced word by word from the expected last markers), CUT
    // and the expected and received fields.
    task report_mismatch;
        input [OUT_W-1:0] expected;
        input [OUT_W-1:0] got;
        input             got_tlast;
        input             got_tuser;
        begin
            if (n_errors < max_reports) begin
                $display("MISMATCH word %0d map %0d cell %0d (line %0d, position %0d) cut %0d: expected T=%0d det=%0d valid=%0d last=%0d, got cut %0d T=%0d det=%0d valid=%0d last=%0d (tlast %0d expected %0d, tuser %0d expected %0d) [exp %h got %h]",
                    out_idx, exp_frame, exp_sample, exp_sample / LF, exp_sample % LF, expected[INPUT_BITS-1:0],
                    expected[T_LSB +: THRESHOLD_BITS], expected[DET_BIT], expected[V_BIT], expected[LAST_BIT],
                    got[INPUT_BITS-1:0], got[T_LSB +: THRESHOLD_BITS], got[DET_BIT], got[V_BIT], got[LAST_BIT],
                    got_tlast, (exp_sample % LF == LF - 1), got_tuser, (exp_sample == 0), expected, got);
            end
            if (!have_first) begin
                $sformat(first_error,
                    "word %0d map %0d cell %0d (line %0d, position %0d) cut %0d: expected T=%0d det=%0d valid=%0d last=%0d, got cut %0d T=%0d det=%0d valid=%0d last=%0d tlast=%0d tuser=%0d",
                    out_idx, exp_frame, exp_sample, exp_sample / LF, exp_sample % LF, expected[INPUT_BITS-1:0],
                    expected[T_LSB +: THRESHOLD_BITS], expected[DET_BIT], expected[V_BIT], expected[LAST_BIT],
                    got[INPUT_BITS-1:0], got[T_LSB +: THRESHOLD_BITS], got[DET_BIT], got[V_BIT], got[LAST_BIT],
                    got_tlast, got_tuser);
                have_first = 1'b1;
            end
            n_errors = n_errors + 1;
        end
    endtask

    task finish_run;
        begin
            if (out_fd != 0) $fclose(out_fd);
            if (n_errors > max_reports)
                $display("... %0d more errors not printed (MAX_REPORTS=%0d)", n_errors - max_reports, max_reports);
            if (n_errors == 0) $display("PASS %0d", out_idx);
            else               $display("FAIL %0d first=%0s", n_errors, first_error);
            $finish;
        end
    endtask

    // Pseudo-random percentage draws in 0..99 from two xorshift32 sequences
    // (G. Marsaglia, "Xorshift RNGs", J. Statistical Software 8(14), 2003,
    // shifts 13, 17, 5), one for the source and one for the sink. Plain
    // Verilog arithmetic: the same seed gives the same run on any simulator.
    reg [31:0] gap_state;
    reg [31:0] stall_state;

    function [31:0] xorshift32;
        input [31:0] x;
        reg   [31:0] y;
        begin
            y = x ^ (x << 13);
            y = y ^ (y >> 17);
            xorshift32 = y ^ (y << 5);
        end
    endfunction

    // The sink's next stall draw: the pattern file's next entry, or xorshift32.
    task draw_stall;
        begin
            stall_now = 1'b0;
            if (stall_from_file) begin
                stall_now = stall_mem[stall_k];
                stall_k   = (stall_k + 1) % PATTERN_LENGTH;
            end else if (stall_pct > 0) begin
                stall_state = xorshift32(stall_state);
                stall_now   = (stall_state % 100) < stall_pct;
            end
        end
    endtask

    initial begin
        stim_name   = STIM_FILE;
        expect_name = EXPECT_FILE;
        out_name    = OUT_FILE;
        dump_name   = DUMP_FILE;
        gap_name    = GAP_FILE;
        stall_name  = STALL_FILE;
        gap_pct     = GAP_PERCENT;
        stall_pct   = STALL_PERCENT;
        seed        = SEED;
        n_words     = N_WORDS;
        n_expect    = N_EXPECT;
        timeout     = TIMEOUT_CYCLES;
        max_reports = MAX_REPORTS;
        sink_wait   = SINK_WAITS_FOR_VALID;
        watchdog    = WATCHDOG_CYCLES;
        first_error = "none";
        if ($value$plusargs("STIM_FILE=%s", stim_name)) ;
        if ($value$plusargs("EXPECT_FILE=%s", expect_name)) ;
        if ($value$plusargs("OUT_FILE=%s", out_name)) ;
        if ($value$plusargs("DUMP_FILE=%s", dump_name)) ;
        if ($value$plusargs("GAP_FILE=%s", gap_name)) ;
        if ($value$plusargs("STALL_FILE=%s", stall_name)) ;
        if ($value$plusargs("GAP_PERCENT=%d", gap_pct)) ;
        if ($value$plusargs("STALL_PERCENT=%d", stall_pct)) ;
        if ($value$plusargs("SEED=%d", seed)) ;
        if ($value$plusargs("N_WORDS=%d", n_words)) ;
        if ($value$plusargs("N_EXPECT=%d", n_expect)) ;
        if ($value$plusargs("TIMEOUT_CYCLES=%d", timeout)) ;
        if ($value$plusargs("MAX_REPORTS=%d", max_reports)) ;
        if ($value$plusargs("SINK_WAITS_FOR_VALID=%d", sink_wait)) ;
        if ($value$plusargs("WATCHDOG_CYCLES=%d", watchdog)) ;
        reset_at = RESET_AT;
        if ($value$plusargs("RESET_AT=%d", reset_at)) ;
        if (max_reports < 0) max_reports = 0;
        if (watchdog <= 0) watchdog = 1000 + 4 * (MAP_CYCLES + WINDOW_DELAY + PIPELINE_STAGES);
        // xorshift32 needs a non-zero state.
        gap_state   = (seed == 0) ? 32'h2545_F491 : seed;
        stall_state = ((seed ^ 32'h5A5A_3C3C) == 0) ? 32'h2545_F491 : (seed ^ 32'h5A5A_3C3C);

        gap_from_file   = (gap_name != 0) && gap_pct > 0;
        stall_from_file = (stall_name != 0) && stall_pct > 0;
        if (gap_from_file) $readmemb(gap_name, gap_mem);
        if (stall_from_file) $readmemb(stall_name, stall_mem);

        if (DUMP != 0 || $test$plusargs("DUMP")) begin
            $dumpfile(dump_name);
            $dumpvars(0, cfar_map_tb);
        end

        if (n_words > MAX_WORDS) begin
            $display("ERROR: N_WORDS=%0d exceeds MAX_WORDS=%0d", n_words, MAX_WORDS);
            note_error("N_WORDS exceeds MAX_WORDS");
            n_words = MAX_WORDS;
        end
        if (n_words <= 0) begin
            $display("ERROR: N_WORDS=%0d: give the number of words in the files (+N_WORDS=...)", n_words);
            note_error("N_WORDS not given");
            n_words = 0;
        end else begin
            $readmemh(stim_name, stim_mem, 0, n_words - 1);
        end
        if (n_expect <= 0) n_expect = n_words;
        if (n_expect != n_words) begin
            $display("ERROR: %0d stimulus words but %0d expected words", n_words, n_expect);
            note_error("stimulus and expected word counts differ");
        end
        if (n_expect > MAX_WORDS) n_expect = MAX_WORDS;
        if (n_expect > 0) $readmemh(expect_name, expect_mem, 0, n_expect - 1);
        if (n_words > 0 && stim_mem[n_words-1][INPUT_BITS] !== 1'b1) begin
            $display("ERROR: the last stimulus word does not carry the last marker");
            note_error("last stimulus word without last marker");
        end
        if (timeout <= 0) begin
            // Generous: every word delayed by the worst gap and stall rates, plus drains.
            // Generous: frames are at least one window long, so drains add less
            // than one cycle per word; gaps and stalls slow the rest down.
            // A sink that waits for TVALID takes at least two cycles a word.
            timeout = 1000 + 4 * (MAP_CYCLES + WINDOW_DELAY + PIPELINE_STAGES)
                      + 4 * n_words * ((MAP_CYCLES + MAP_CELLS - 1) / MAP_CELLS)
                                    * (100 / (100 - (gap_pct > 95 ? 95 : gap_pct)) + 1)
                                    * (100 / (100 - (stall_pct > 95 ? 95 : stall_pct)) + 1)
                                    * (sink_wait != 0 ? 2 : 1);
        end

        out_fd = $fopen(out_name, "w");
        if (out_fd == 0) begin
            $display("ERROR: cannot open %0s", out_name);
            note_error("cannot open the output file");
        end
        $display("cfar_map_tb: %0d words, GAP_PERCENT=%0d STALL_PERCENT=%0d SEED=%0d SINK_WAITS_FOR_VALID=%0d",
                 n_words, gap_pct, stall_pct, seed, sink_wait != 0);

        // Synchronous reset for a few cycles. A sink that waits for TVALID starts not ready.
        check_drain   = (stall_pct == 0 && sink_wait == 0 && STORED == 0 && reset_at < 0);
        check_latency = (gap_pct == 0 && stall_pct == 0 && sink_wait == 0 && STORED == 0 && reset_at < 0);
        m_tready      = (sink_wait == 0);
        repeat (4) @(posedge clk);
        srst   <= (SRST_LEVEL != 0) ? 1'b0 : 1'b1;
        active <= (n_words > 0);
        if (n_words == 0) begin
            @(posedge clk);
            finish_run;
        end
    end

    // ---------------- source, sink and checks ----------------
    // One clocked process (a simulator wakes it once per cycle). The source
    // keeps s_tvalid high with the same word until it is taken; the sink
    // draws m_tready each cycle.
    integer next_idx;
    integer latency;
    always @(posedge clk) begin
        if (active) begin
            // Drain check (exact only without backpressure).
            if (drain_left >= 0) begin
                if (check_drain) begin
                    if (drain_left > 0 && s_tready) begin
                        if (n_errors < max_reports)
                            $display("ERROR: cycle %0d: s_axis_tready high during pad steps", cycle);
                        note_error("s_axis_tready high during pad steps");
                    end else if (drain_left == 0 && !s_tready) begin
                        if (n_errors < max_reports)
                            $display("ERROR: cycle %0d: s_axis_tready still low after the pad steps", cycle);
                        note_error("s_axis_tready still low after the pad steps");
                    end
                end
                drain_left = drain_left - 1;
            end

            // Source.
            next_idx = in_idx;
            if (s_tvalid) begin
                if (s_tready) begin
                    if (check_latency) in_cycle[in_idx] = cycle;
                    next_idx = in_idx + 1;
                    // Map position of the taken word, and of the next one (0 after a last-of-map marker).
                    in_map_pos = in_pos;
                    in_j_taken = in_j;
                    if (stim_mem[in_idx][INPUT_BITS] === 1'b1) begin
                        in_pos = 0;
                        in_j   = 0;
                    end else begin
                        in_pos = in_pos + 1;
                        in_j   = (in_j == LF - 1) ? 0 : in_j + 1;
                    end
                    // Pad steps after this cell: none inside a line, 2 H_f after a line, 2 H_s P_f + 2 H_f after a map.
                    if (in_map_pos == MAP_CELLS - 1)   drain_left = 2 * HS * PF + 2 * HF;
                    else if (in_j_taken == LF - 1)     drain_left = 2 * HF;
                    else                                drain_left = 0;
                    if (in_idx == reset_at) begin
                        // Mid-map reset: srst for 3 cycles; checking resumes at the next map.
                        reset_left = 3;
                        srst <= (SRST_LEVEL != 0) ? 1'b1 : 1'b0;
                    end
                end
            end
            if (!s_tvalid || s_tready) begin
                gap_now = 1'b0;
                if (gap_from_file) begin
                    gap_now = gap_mem[gap_k];
                    gap_k   = (gap_k + 1) % PATTERN_LENGTH;
                end else if (gap_pct > 0) begin
                    gap_state = xorshift32(gap_state);
                    gap_now   = (gap_state % 100) < gap_pct;
                end
                if (next_idx < n_words && !gap_now) begin
                    stim_word = stim_mem[next_idx];
                    s_tvalid <= 1'b1;
                    s_tdata  <= stim_word[INPUT_BITS-1:0];
                    s_tlast  <= (in_j == LF - 1);
                    s_tuser  <= (in_pos == 0);
                end else begin
                    s_tvalid <= 1'b0;
                    s_tdata  <= {INPUT_BITS{1'bx}};
                    s_tlast  <= 1'bx;
                    s_tuser  <= 1'bx;
                end
            end
            in_idx = next_idx;

            // Output handshake rule (ARM IHI 0051A, 2.2.1): a word offered and
            // not taken stays offered, unchanged.
            if (prev_hold && reset_left == 0) begin
                if (!m_tvalid || m_tdata !== prev_word) begin
                    if (n_errors < max_reports)
                        $display("ERROR: cycle %0d: m_axis_tvalid dropped or m_axis_tdata changed before the transfer",
                                 cycle);
                    note_error("m_axis_tvalid dropped or m_axis_tdata changed before the transfer");
                end
            end

            // Sink.
            if (m_tvalid) begin
                if (m_tready) begin
                    prev_hold = 1'b0;
                    $fwrite(out_fd, "%h\n", m_tdata);
                    // tlast: the line's last cell (fast axis); tuser: the map's first cell.
                    exp_word = {(exp_j == LF - 1), expect_mem[out_idx]};
                    if ({m_tlast, m_tdata} !== exp_word || m_tuser !== (exp_sample == 0))
                        report_mismatch(exp_word[OUT_W-1:0], m_tdata, m_tlast, m_tuser);
                    if (check_latency) begin
                        latency = cycle - in_cycle[out_idx];
                        if (latency != WINDOW_DELAY + PIPELINE_STAGES) begin
                            if (n_errors < max_reports)
                                $display("ERROR: word %0d: latency %0d cycles, expected H_s P_f + H_f + PIPELINE_STAGES = %0d",
                                         out_idx, latency, WINDOW_DELAY + PIPELINE_STAGES);
                            note_error("latency differs from H_s P_f + H_f + PIPELINE_STAGES at full rate");
                        end
                    end
                    // Frame and sample index of the next expected word.
                    if (expect_mem[out_idx][LAST_BIT] === 1'b1) begin
                        exp_frame  = exp_frame + 1;
                        exp_sample = 0;
                        exp_j      = 0;
                    end else begin
                        exp_sample = exp_sample + 1;
                        exp_j      = (exp_j == LF - 1) ? 0 : exp_j + 1;
                    end
                    out_idx = out_idx + 1;
                    if (out_idx == n_words) begin
                        // Stop checking; from the next cycle the tail process counts any extra word.
                        active = 1'b0;
                        done  <= 1'b1;
                    end
                end else begin
                    prev_hold = 1'b1;
                    prev_word = m_tdata;
                end
            end else begin
                prev_hold = 1'b0;
            end

            // TREADY for the next cycle.
            if (sink_wait != 0) begin
                // ARM IHI 0051A 2.2.1: a sink may wait for TVALID before raising TREADY. Only a word seen
                // waiting (TVALID high, TREADY low) is made ready, after the stall draw; after a transfer
                // TREADY falls until the next word is seen.
                if (m_tvalid === 1'b1 && !m_tready) begin
                    draw_stall;
                    m_tready <= !stall_now;
                end else begin
                    m_tready <= 1'b0;
                end
            end else if (stall_pct > 0) begin
                draw_stall;
                m_tready <= !stall_now;
            end

            // Deadlock watchdog of the waiting sink: no word offered at the output and no input transfer.
            if (sink_wait != 0) begin
                if (m_tvalid === 1'b1 || (s_tvalid && s_tready === 1'b1)) idle = 0;
                else idle = idle + 1;
                if (active && idle >= watchdog) begin
                    $display("ERROR: cycle %0d: output never became valid while the sink waited for TVALID: no transfer on either port for %0d cycles, %0d of %0d words received (ARM IHI 0051A 2.2.1: a source must not wait for TREADY before asserting TVALID)",
                             cycle, idle, out_idx, n_words);
                    if (!have_first) begin
                        $sformat(first_error, "deadlock: output never became valid while the sink waited for TVALID (%0d cycles without a transfer, %0d of %0d words received)",
                                 idle, out_idx, n_words);
                        have_first = 1'b1;
                    end
                    n_errors = n_errors + 1;
                    finish_run;
                end
            end

            // Mid-map reset: release srst after 3 cycles; expect the next map's words from here on.
            if (reset_left > 0) begin
                reset_left = reset_left - 1;
                if (reset_left == 0) begin
                    srst <= (SRST_LEVEL != 0) ? 1'b0 : 1'b1;
                    if (out_idx < (reset_at / MAP_CELLS + 1) * MAP_CELLS) begin
                        out_idx    = (reset_at / MAP_CELLS + 1) * MAP_CELLS;
                        exp_frame  = reset_at / MAP_CELLS + 1;
                        exp_sample = 0;
                        exp_j      = 0;
                    end
                    if (out_idx >= n_words) begin
                        active = 1'b0;
                        done  <= 1'b1;
                    end
                end
            end

            cycle = cycle + 1;
            if (cycle >= timeout) begin
                $display("ERROR: timeout after %0d cycles, %0d of %0d words received", cycle, out_idx, n_words);
                if (!have_first) begin
                    $sformat(first_error, "timeout after %0d cycles, %0d of %0d words received",
                             cycle, out_idx, n_words);
                    have_first = 1'b1;
                end
                n_errors = n_errors + 1;
                finish_run;
            end
        end
    end

    // After the last expected word: keep the sink ready (a waiting sink: for
    // every word it sees) for a few cycles and count anything more the core
    // emits, then report.
    always @(posedge clk) begin
        if (done) begin
            m_tready <= (sink_wait == 0) || (m_tvalid === 1'b1 && !m_tready);
            if (m_tvalid && m_tready) begin
                $fwrite(out_fd, "%h\n", m_tdata);
                if (n_errors < max_reports) $display("ERROR: extra output word %h", m_tdata);
                note_error("more output words than input words");
            end
        end
    end

    initial begin
        wait (done);
        repeat (MAP_CYCLES + WINDOW_DELAY + PIPELINE_STAGES + 8) @(posedge clk);
        finish_run;
    end

endmodule
`default_nettype wire
