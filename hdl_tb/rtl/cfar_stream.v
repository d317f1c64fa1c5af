`timescale 1ns/1ps
`default_nettype none
// Parameter check, used inside a generate branch that only an illegal
// parameter set elaborates. Verilator: an elaboration-time $fatal (IEEE Std
// 1800-2017, 20.11); it refuses, even in a branch that is never elaborated,
// the instantiation of a module that does not exist. Icarus Verilog (which
// rejects $fatal inside a generate block) and Yosys: the instantiation of a
// module that does not exist, whose name says what is wrong.
`ifdef VERILATOR
`define CFAR_STREAM_STOP(name) $fatal(1, `"name`");
`else
`define CFAR_STREAM_STOP(name) name u_stop ();
`endif
// cfar_stream: streaming one-dimensional CFAR detector (CA, GO, SO, OS), the
// reference core of cfarvec. It reproduces docs/bit-true.md word for word:
// running side sums modulo 2^SUM_BITS (CA, GO, SO) or two sorted arrays of
// the reference cells (OS, module cfar_stream_rank_side below), the noise
// statistic S, the exact product S*A (or the truncated shift-and-add of A's
// NAF digits), rounding, saturate/wrap to THRESHOLD_BITS, the `>` / `>=`
// decision, the skip, zero-pad, one-sided and circular edge policies, the
// frame drain of R+G zeros after every last marker (circular: a frame store
// replayed through the window), and AXI4-Stream style valid/ready ports on
// both sides.
//
// Output word (m_axis_tdata), LSB first: CUT [INPUT_BITS-1:0], threshold T
// [INPUT_BITS+THRESHOLD_BITS-1:INPUT_BITS], det, window-valid, last marker
// (top bit, also on m_axis_tlast).
//
// Latency: the word of CUT n is formed when cell n+R+G enters the window and
// leaves PIPELINE_STAGES register stages later (R+G+PIPELINE_STAGES cycles
// at full rate; circular: L+2(R+G)+PIPELINE_STAGES cycles for a frame of L
// samples, see docs/reference-core.md). Register placement by PIPELINE_STAGES:
//   1: output register only (the whole datapath is combinational from the
//      input port and the window registers),
//   2: + the window/sum registers feed the datapath,
//   3: + a register after the multiplier,
//   4: + a register after the statistic,
//   5..: + PIPELINE_STAGES-4 delay registers before the output register.
// The whole pipeline holds while a word waits at the output (m_axis_tready
// low); s_axis_tready is combinational from m_axis_tready.
//
// Simulation speed: each combinational segment is a function called in the
// clocked block of the register that ends it, so a simulator evaluates it
// once per clock edge instead of once per input event; the window is one
// packed vector shifted by INPUT_BITS. See docs/reference-core.md.
module cfar_stream #(
    // Sample width W_in in bits (unsigned samples), 1..32.
    parameter integer INPUT_BITS = 16,
    // Reference cells per side R, >= 1.
    parameter integer REF_CELLS = 16,
    // Guard cells per side G, >= 0.
    parameter integer GUARD_CELLS = 2,
    // Detector kind: 0 = CA (sum of both sides), 1 = GO (greater side), 2 = SO (smaller side),
    // 3 = OS (the OS_RANK-th smallest of the 2R reference cells).
    parameter integer KIND = 0,
    // OS rank k, 1..2R (used only when KIND = 3).
    parameter integer OS_RANK = 1,
    // Edge policy: 0 = skip, 1 = zero-pad, 2 = one-sided, 3 = circular.
    parameter integer EDGE = 0,
    // Circular frame store depth: the longest frame in samples, 2R+2G+1 .. 2^24 (used only when EDGE = 3).
    parameter integer MAX_FRAME_LENGTH = 1024,
    // Width W_S of each side's running-sum register, >= bitlen(R * (2^INPUT_BITS - 1)).
    parameter integer SUM_BITS = 20,
    // The constant A (unsigned integer >= 1, F_A + s fraction bits).
    parameter [63:0] ALPHA_INT = 64'd2212,
    // Fraction bits d dropped from the product to form the threshold (F_A + s - F_T).
    parameter integer DROP_BITS = 12,
    // Fraction bits F_T of the threshold; the CUT is shifted left by F_T before the comparison.
    parameter integer THRESHOLD_FRAC_BITS = 0,
    // Threshold width W_T in bits, >= 1.
    parameter integer THRESHOLD_BITS = 21,
    // Rounding of the product: 0 = floor, 1 = half-up, 2 = half-even.
    parameter integer ROUNDING = 1,
    // Threshold overflow: 0 = saturate, 1 = wrap.
    parameter integer OVERFLOW = 0,
    // Decision: 0 = (CUT > T), 1 = (CUT >= T).
    parameter integer COMPARE_GE = 0,
    // 1 = multiply as the shift-and-add of A's NAF digits, each partial floored (needs ROUNDING = 0).
    parameter integer TRUNCATE_PARTIALS = 0,
    // Register stages between the forming of an output word and m_axis_tdata, >= 1.
    parameter integer PIPELINE_STAGES = 2,
    // Level of srst that resets the core: 1 = active high, 0 = active low.
    parameter integer SRST_LEVEL = 1
) (
    input  wire                                 clk,
    // Synchronous reset (polarity set by SRST_LEVEL).
    input  wire                                 srst,
    // Input stream: one sample per transfer, s_axis_tlast on a frame's last sample.
    input  wire [INPUT_BITS-1:0]                s_axis_tdata,
    input  wire                                 s_axis_tvalid,
    output wire                                 s_axis_tready,
    input  wire                                 s_axis_tlast,
    // Output stream: one word per input sample, in input order.
    output wire [INPUT_BITS+THRESHOLD_BITS+2:0] m_axis_tdata,
    output wire                                 m_axis_tvalid,
    input  wire                                 m_axis_tready,
    output wire                                 m_axis_tlast
);

    // ------------------------------------------------------------------
    // Derived parameters
    // ------------------------------------------------------------------
    // Cells from the CUT to either end of the window (R + G).
    localparam integer HALF = REF_CELLS + GUARD_CELLS;
    // Window length W = 2R + 2G + 1.
    localparam integer WIN = 2 * HALF + 1;
    // Short name for the sample width.
    localparam integer IB = INPUT_BITS;
    // Largest value of one side's sum, R * (2^W_in - 1), and the bits it needs.
    localparam [63:0] SIDE_MAX = REF_CELLS * ((64'd1 << INPUT_BITS) - 64'd1);
    localparam integer SIDE_BITS = $clog2(SIDE_MAX + 64'd1);
    // Width of the statistic S (CA: W_S + 1, GO/SO: W_S, OS: W_in).
    localparam integer STAT_BITS = (KIND == 0) ? SUM_BITS + 1 : (KIND == 3) ? IB : SUM_BITS;
    // OS: the rank used on one side alone under the one-sided policy, ceil(k/2).
    localparam integer OS_SIDE_RANK = (OS_RANK + 1) / 2;
    // OS: the splits i + j = k of the rank between the sides, i from max(0, k-R) to min(k, R).
    localparam integer OS_SPLIT_LO = (OS_RANK > REF_CELLS) ? OS_RANK - REF_CELLS : 0;
    localparam integer OS_SPLIT_HI = (OS_RANK < REF_CELLS) ? OS_RANK : REF_CELLS;
    // 1 = the circular policy: a frame store replayed through the window instead of the drain.
    localparam integer CIRC = (EDGE == 3) ? 1 : 0;
    // Longest frame the circular store takes, and the widths of its address and replay counter.
    localparam [63:0] FRAME_CAP = (1 << 24);
    localparam integer FRAME_ADDR_BITS = (MAX_FRAME_LENGTH > 2) ? $clog2(MAX_FRAME_LENGTH) : 1;
    localparam integer REPLAY_BITS = $clog2(MAX_FRAME_LENGTH + 2 * HALF + 1);
    // Width of A.
    localparam integer ALPHA_BITS = $clog2(ALPHA_INT + 64'd1);
    // Width of the multiplier result register (one spare bit: the truncated
    // shift-and-add sums its positive digits first, up to 4/3 A).
    localparam integer MUL_BITS = STAT_BITS + ALPHA_BITS + 1;
    // Fraction bits the rounding stage drops (the truncated multiplier has already dropped them).
    localparam integer ROUND_DROP = (TRUNCATE_PARTIALS != 0) ? 0 : DROP_BITS;
    // Width of the rounding adder (room for the carry and for 2^ROUND_DROP).
    localparam integer RB = ((MUL_BITS > ROUND_DROP) ? MUL_BITS : ROUND_DROP) + 2;
    // Width used for the overflow check of T0 against 2^W_T - 1.
    localparam integer XB = ((RB > THRESHOLD_BITS) ? RB : THRESHOLD_BITS) + 1;
    // Width of the CUT-versus-threshold comparison.
    localparam integer CB = ((THRESHOLD_BITS > IB + THRESHOLD_FRAC_BITS) ? THRESHOLD_BITS
                                                                        : IB + THRESHOLD_FRAC_BITS) + 1;
    // Output word width W_in + W_T + 3.
    localparam integer OUT_BITS = IB + THRESHOLD_BITS + 3;
    // Width of the drain counter (counts HALF down to 0).
    localparam integer DRAIN_BITS = $clog2(HALF + 1);
    // Rounding constants: 2^(d-1) (0 when d = 0) and the mask of the dropped bits.
    localparam [RB-1:0] RND_ONE  = 1;
    localparam [RB-1:0] RND_HALF = (ROUNDING == 0) ? {RB{1'b0}} : ((RND_ONE << ROUND_DROP) >> 1);
    localparam [RB-1:0] RND_TIE  = (RND_ONE << ROUND_DROP) >> 1;
    localparam [RB-1:0] RND_MASK = (RND_ONE << ROUND_DROP) - RND_ONE;
    // Largest threshold word, 2^W_T - 1.
    localparam [XB-1:0] T_ONE = 1;
    localparam [XB-1:0] T_MAX = (T_ONE << THRESHOLD_BITS) - T_ONE;
    // NAF digits of A as masks of positive and negative powers [Prodinger 2000].
    localparam [64:0] A_EXT    = ALPHA_INT;
    localparam [64:0] NAF_X3   = A_EXT + (A_EXT >> 1);
    localparam [64:0] NAF_NZ   = (A_EXT >> 1) ^ NAF_X3;
    localparam [64:0] NAF_POS  = NAF_X3 & NAF_NZ;
    localparam [64:0] NAF_NEG  = (A_EXT >> 1) & NAF_NZ;
    // Delay registers before the output register (PIPELINE_STAGES >= 5), at least 1 for the declaration.
    localparam integer PAD_STAGES = (PIPELINE_STAGES > 4) ? PIPELINE_STAGES - 4 : 1;
    // Fields travelling beside the datapath: {last, window-valid, cut}.
    localparam integer SIDE_W = IB + 2;
    // A at the multiplier width.
    localparam [MUL_BITS-1:0] ALPHA_MUL = ALPHA_INT;

    // ------------------------------------------------------------------
    // Illegal parameter combinations stop elaboration with a message that
    // names what is wrong (`CFAR_STREAM_STOP, defined above the module; see
    // docs/reference-core.md "Parameter checks").
    // ------------------------------------------------------------------
    generate
        if (KIND < 0 || KIND > 3) begin : g_err_kind
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__KIND_must_be_0_ca_1_go_2_so_or_3_os)
        end
        if (KIND == 3 && (OS_RANK < 1 || OS_RANK > 2 * REF_CELLS)) begin : g_err_os_rank
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__OS_RANK_must_be_1_to_2_times_REF_CELLS)
        end
        if (EDGE < 0 || EDGE > 3) begin : g_err_edge
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__EDGE_must_be_0_skip_1_zero_pad_2_one_sided_or_3_circular)
        end
        if (EDGE == 3 && MAX_FRAME_LENGTH < WIN) begin : g_err_max_frame_short
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__MAX_FRAME_LENGTH_below_the_window_length_2R_2G_1)
        end
        if (EDGE == 3 && MAX_FRAME_LENGTH > FRAME_CAP) begin : g_err_max_frame_long
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__MAX_FRAME_LENGTH_above_2_to_the_24)
        end
        if (INPUT_BITS < 1 || INPUT_BITS > 32) begin : g_err_input_bits
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__INPUT_BITS_must_be_1_to_32)
        end
        if (REF_CELLS < 1) begin : g_err_ref_cells
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__REF_CELLS_must_be_at_least_1)
        end
        if (GUARD_CELLS < 0) begin : g_err_guard_cells
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__GUARD_CELLS_must_be_at_least_0)
        end
        if (SUM_BITS < SIDE_BITS) begin : g_err_sum_bits
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__SUM_BITS_below_bitlen_of_R_times_max_sample)
        end
        if (ALPHA_INT == 64'd0) begin : g_err_alpha
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__ALPHA_INT_must_be_at_least_1)
        end
        if (DROP_BITS < 0) begin : g_err_drop_bits
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__DROP_BITS_must_be_at_least_0)
        end
        if (THRESHOLD_FRAC_BITS < 0) begin : g_err_threshold_frac_bits
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__THRESHOLD_FRAC_BITS_must_be_at_least_0)
        end
        if (THRESHOLD_BITS < 1) begin : g_err_threshold_bits
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__THRESHOLD_BITS_must_be_at_least_1)
        end
        if (ROUNDING < 0 || ROUNDING > 2) begin : g_err_rounding
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__ROUNDING_must_be_0_floor_1_half_up_or_2_half_even)
        end
        if (OVERFLOW < 0 || OVERFLOW > 1) begin : g_err_overflow
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__OVERFLOW_must_be_0_saturate_or_1_wrap)
        end
        if (COMPARE_GE < 0 || COMPARE_GE > 1) begin : g_err_compare
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__COMPARE_GE_must_be_0_or_1)
        end
        if (TRUNCATE_PARTIALS < 0 || TRUNCATE_PARTIALS > 1) begin : g_err_truncate
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__TRUNCATE_PARTIALS_must_be_0_or_1)
        end
        if (TRUNCATE_PARTIALS == 1 && ROUNDING != 0) begin : g_err_truncate_rounding
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__TRUNCATE_PARTIALS_needs_ROUNDING_0_floor)
        end
        if (PIPELINE_STAGES < 1) begin : g_err_stages
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__PIPELINE_STAGES_must_be_at_least_1)
        end
        if (SRST_LEVEL < 0 || SRST_LEVEL > 1) begin : g_err_srst_level
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__SRST_LEVEL_must_be_0_or_1)
        end
    endgenerate

    // ------------------------------------------------------------------
    // Handshake, step and drain
    // ------------------------------------------------------------------
    wire rst = (SRST_LEVEL != 0) ? srst : ~srst;

    // valid_pipe_reg[k]: pipeline stage k+1 holds a word; the top bit is m_axis_tvalid.
    reg  [PIPELINE_STAGES-1:0] valid_pipe_reg;
    reg  [OUT_BITS-1:0]        out_word_reg;
    reg  [DRAIN_BITS-1:0]      drain_cnt_reg;
    wire [DRAIN_BITS-1:0]      drain_cnt_next;

    wire out_valid = valid_pipe_reg[PIPELINE_STAGES-1];
    // The whole pipeline moves unless a word waits at the output.
    wire advance   = ~out_valid | m_axis_tready;
    wire draining  = (drain_cnt_reg != {DRAIN_BITS{1'b0}});
    // Circular: the stored frame is being fed through the window (no input meanwhile).
    wire replaying;
    assign s_axis_tready = advance & ~draining & ~replaying & ~rst;
    wire accept    = s_axis_tvalid & s_axis_tready;
    // A step shifts one cell into the window: an accepted sample or a drain
    // zero, or under the circular policy a cell of the stored frame.
    wire step      = (CIRC != 0) ? (advance & replaying) : (accept | (advance & draining));

    localparam [DRAIN_BITS-1:0] DRAIN_LOAD = HALF;
    localparam [DRAIN_BITS-1:0] DRAIN_ONE  = 1;
    assign drain_cnt_next = (accept & s_axis_tlast & (CIRC == 0)) ? DRAIN_LOAD
                          : (step & draining)                   ? drain_cnt_reg - DRAIN_ONE
                          :                                       drain_cnt_reg;

    always @(posedge clk) begin
        if (rst) begin
            drain_cnt_reg <= {DRAIN_BITS{1'b0}};
        end else begin
            drain_cnt_reg <= drain_cnt_next;
        end
    end

    // The cell entering at a step: its value and its tags (body: a frame
    // sample at its own place; last: the frame's last sample; fill: the cell
    // holds data, a frame sample or under circular a wrapped copy, rather
    // than a reset or drain zero).
    wire [IB-1:0] enter_value;
    wire          enter_body;
    wire          enter_last;
    wire          enter_fill;

    // ------------------------------------------------------------------
    // Circular policy: frame store and replay (docs/bit-true.md section 9).
    // Samples are written to frame_mem as they are accepted; after the last
    // marker the frame is fed through the window as x[L-H..L-1], x[0..L-1],
    // x[0..H-1], i.e. L + 2H consecutive addresses modulo L starting at L-H,
    // one per step. Only the middle run is `body`. Input is refused meanwhile.
    // ------------------------------------------------------------------
    generate
        if (CIRC != 0) begin : g_circular
            reg [IB-1:0]              frame_mem [0:MAX_FRAME_LENGTH-1];
            reg [FRAME_ADDR_BITS-1:0] wr_addr_reg;      // next write address = samples stored so far
            reg [FRAME_ADDR_BITS-1:0] last_addr_reg;    // L - 1 of the frame being replayed
            reg [FRAME_ADDR_BITS-1:0] rd_addr_reg;      // address of the cell in rd_data_reg
            reg [IB-1:0]              rd_data_reg;      // the cell entering at the next replay step
            reg [REPLAY_BITS-1:0]     replay_left_reg;  // replay steps still to go, L + 2H down to 0
            reg [REPLAY_BITS-1:0]     body_top_reg;     // L + H: replay_left_reg at the first body cell

            localparam [FRAME_ADDR_BITS-1:0] ADDR_ONE  = 1;
            localparam [FRAME_ADDR_BITS-1:0] ADDR_HALF = HALF;
            localparam [REPLAY_BITS-1:0]     LEFT_ONE  = 1;
            localparam [REPLAY_BITS-1:0]     LEFT_HALF = HALF;

            wire start_replay = accept & s_axis_tlast;
            wire [FRAME_ADDR_BITS-1:0] rd_addr_step = (rd_addr_reg == last_addr_reg) ? {FRAME_ADDR_BITS{1'b0}}
                                                                                      : rd_addr_reg + ADDR_ONE;
            // x[L-H] first: L = wr_addr_reg + 1 at the last sample, and L >= 2H+1.
            wire [FRAME_ADDR_BITS-1:0] rd_addr_next = start_replay ? wr_addr_reg + ADDR_ONE - ADDR_HALF
                                                                   : rd_addr_step;
            wire [REPLAY_BITS-1:0]     frame_len    = {{(REPLAY_BITS-FRAME_ADDR_BITS){1'b0}}, wr_addr_reg} + LEFT_ONE;

            assign replaying   = (replay_left_reg != {REPLAY_BITS{1'b0}});
            assign enter_value = rd_data_reg;
            assign enter_body  = (replay_left_reg <= body_top_reg) & (replay_left_reg > LEFT_HALF);
            assign enter_last  = (replay_left_reg == LEFT_HALF + LEFT_ONE);
            assign enter_fill  = 1'b1;

            // The store (no reset: a frame is written before it is read).
            always @(posedge clk) begin
                if (accept) begin
                    frame_mem[wr_addr_reg] <= s_axis_tdata;
                end
                if (start_replay | step) begin
                    rd_data_reg <= frame_mem[rd_addr_next];
                    rd_addr_reg <= rd_addr_next;
                end
                if (start_replay) begin
                    last_addr_reg <= wr_addr_reg;
                    body_top_reg  <= frame_len + LEFT_HALF;
                end
            end

            always @(posedge clk) begin
                if (rst) begin
                    wr_addr_reg     <= {FRAME_ADDR_BITS{1'b0}};
                    replay_left_reg <= {REPLAY_BITS{1'b0}};
                end else begin
                    if (accept) begin
                        wr_addr_reg <= s_axis_tlast ? {FRAME_ADDR_BITS{1'b0}} : wr_addr_reg + ADDR_ONE;
                    end
                    if (start_replay) begin
                        replay_left_reg <= frame_len + LEFT_HALF + LEFT_HALF;
                    end else if (step) begin
                        replay_left_reg <= replay_left_reg - LEFT_ONE;
                    end
                end
            end
        end else begin : g_stream
            assign replaying   = 1'b0;
            // A step that is not a drain step is an accepted sample.
            assign enter_value = draining ? {IB{1'b0}} : s_axis_tdata;
            assign enter_body  = accept;
            assign enter_last  = accept & s_axis_tlast;
            assign enter_fill  = accept;
        end
    endgenerate

    // ------------------------------------------------------------------
    // Window: packed shift register, newest cell at position 0 (LSBs), the
    // CUT at position HALF, the oldest at 2*HALF. Each cell has a `body` tag
    // (a frame sample at its own place, not a reset or drain zero or a
    // wrapped copy), a `fill` tag under circular (the cell holds data) and,
    // up to the CUT, a `last` tag. Cell values are not reset: every tap is
    // masked by its fill tag, so a reset or drain cell counts as 0 exactly
    // as the contract says.
    // ------------------------------------------------------------------
    reg  [WIN*IB-1:0]   win_reg;
    reg  [WIN-1:0]      body_reg;
    reg  [WIN-1:0]      fill_reg;
    reg  [HALF:0]       last_reg;
    reg  [SUM_BITS-1:0] sum_lead_reg;
    reg  [SUM_BITS-1:0] sum_lag_reg;

    // Without the circular policy a cell holds data exactly when it is a frame sample.
    wire [WIN-1:0] fill = (CIRC != 0) ? fill_reg : body_reg;

    // Reference-cell taps: the cells about to cross a region boundary.
    wire [IB-1:0] lead_leave = win_reg[(REF_CELLS-1)*IB +: IB] & {IB{fill[REF_CELLS-1]}};
    wire [IB-1:0] lag_enter  = win_reg[(HALF+GUARD_CELLS)*IB +: IB] & {IB{fill[HALF+GUARD_CELLS]}};
    wire [IB-1:0] lag_leave  = win_reg[(WIN-1)*IB +: IB] & {IB{fill[WIN-1]}};

    // The shift and the sums are written in the clocked blocks so a
    // simulator evaluates them once per step, not once per input event.
    always @(posedge clk) begin
        if (step) begin
            win_reg <= {win_reg[(WIN-1)*IB-1:0], enter_value};
        end
    end

    always @(posedge clk) begin
        if (rst) begin
            body_reg     <= {WIN{1'b0}};
            fill_reg     <= {WIN{1'b0}};
            last_reg     <= {(HALF+1){1'b0}};
            sum_lead_reg <= {SUM_BITS{1'b0}};
            sum_lag_reg  <= {SUM_BITS{1'b0}};
        end else if (step) begin
            body_reg     <= {body_reg[WIN-2:0], enter_body};
            fill_reg     <= {fill_reg[WIN-2:0], enter_fill};
            last_reg     <= {last_reg[HALF-1:0], enter_last};
            // Modulo 2^SUM_BITS (the expression has the register's width), docs/bit-true.md section 3.
            sum_lead_reg <= sum_lead_reg + enter_value - lead_leave;
            sum_lag_reg  <= sum_lag_reg + lag_enter - lag_leave;
        end
    end

    // ------------------------------------------------------------------
    // OS: each side's R reference cells kept sorted (cfar_stream_rank_side:
    // one cell removed and one inserted per step), then the k-th smallest of
    // both sides from the two sorted arrays: the minimum over the splits
    // i + j = k of max(lag_i, lead_j), lag_i the i-th smallest lagging cell
    // (lag_0 = lead_0 = -infinity). The one-sided policy takes the
    // ceil(k/2)-th smallest of the complete side straight from its array.
    // ------------------------------------------------------------------
    // Both sorted arrays as the forming step sees them, and each side's ceil(k/2)-th smallest cell.
    wire [REF_CELLS*IB-1:0] lag_cells;
    wire [REF_CELLS*IB-1:0] lead_cells;
    wire [IB-1:0]           os_lag_side;
    wire [IB-1:0]           os_lead_side;

    generate
        if (KIND == 3) begin : g_os
            wire [REF_CELLS*IB-1:0] lag_sorted;
            wire [REF_CELLS*IB-1:0] lag_sorted_next;
            wire [REF_CELLS*IB-1:0] lead_sorted;
            wire [REF_CELLS*IB-1:0] lead_sorted_next;

            cfar_stream_rank_side #(.CELL_BITS(IB), .CELLS(REF_CELLS), .NEXT_OUT(PIPELINE_STAGES == 1)) u_lead (
                .clk(clk), .rst(rst), .step(step), .enter_cell(enter_value), .leave_cell(lead_leave),
                .sorted(lead_sorted), .sorted_next(lead_sorted_next));
            cfar_stream_rank_side #(.CELL_BITS(IB), .CELLS(REF_CELLS), .NEXT_OUT(PIPELINE_STAGES == 1)) u_lag (
                .clk(clk), .rst(rst), .step(step), .enter_cell(lag_enter), .leave_cell(lag_leave),
                .sorted(lag_sorted), .sorted_next(lag_sorted_next));

            // With one pipeline stage the word is formed from the arrays after this step.
            assign lag_cells    = (PIPELINE_STAGES == 1) ? lag_sorted_next : lag_sorted;
            assign lead_cells   = (PIPELINE_STAGES == 1) ? lead_sorted_next : lead_sorted;
            assign os_lag_side  = lag_cells[(OS_SIDE_RANK-1)*IB +: IB];
            assign os_lead_side = lead_cells[(OS_SIDE_RANK-1)*IB +: IB];
        end else begin : g_no_os
            assign lag_cells    = {(REF_CELLS*IB){1'b0}};
            assign lead_cells   = {(REF_CELLS*IB){1'b0}};
            assign os_lag_side  = {IB{1'b0}};
            assign os_lead_side = {IB{1'b0}};
        end
    endgenerate

    // ------------------------------------------------------------------
    // Datapath functions, one per step of the contract
    // ------------------------------------------------------------------
    // OS: the k-th smallest of both sides from the two sorted arrays, the
    // minimum over the splits i + j = k (i from max(0, k-R) to min(k, R)) of
    // max(lag_i, lead_j), lag_i the i-th smallest lagging cell (lag_0 = lead_0
    // = 0, below every cell). Unrolled: one comparator per max (none where i
    // or j is 0) and a chain of minima.
    function [IB-1:0] os_select;
        input [REF_CELLS*IB-1:0] lag;
        input [REF_CELLS*IB-1:0] lead;
        reg   [IB-1:0]           x;
        reg   [IB-1:0]           y;
        reg   [IB-1:0]           c;
        integer                  i;
        begin
            os_select = {IB{1'b1}};
            if (KIND == 3) begin
                for (i = OS_SPLIT_LO; i <= OS_SPLIT_HI; i = i + 1) begin
                    x = (i == 0) ? {IB{1'b0}} : lag[(i-1)*IB +: IB];
                    y = (i == OS_RANK) ? {IB{1'b0}} : lead[(OS_RANK-i-1)*IB +: IB];
                    c = (x >= y) ? x : y;
                    if (c < os_select) os_select = c;
                end
            end
        end
    endfunction

    // Noise statistic S (docs/bit-true.md section 3): lag and lead are the
    // side sums (OS: each side's ceil(k/2)-th smallest cell), both is the
    // OS statistic of both sides. The parameter tests come first so a
    // simulator skips the code of the other modes.
    function [STAT_BITS-1:0] noise_statistic;
        input [SUM_BITS-1:0] lag;
        input [SUM_BITS-1:0] lead;
        input [IB-1:0]       both;
        input                lag_full;
        input                lead_full;
        reg   [STAT_BITS-1:0] lag_e;
        reg   [STAT_BITS-1:0] lead_e;
        begin
            lag_e  = lag;
            lead_e = lead;
            if (KIND == 0) begin
                noise_statistic = lag_e + lead_e;
            end else if (KIND == 1) begin
                noise_statistic = (lag_e >= lead_e) ? lag_e : lead_e;
            end else if (KIND == 2) begin
                noise_statistic = (lag_e <= lead_e) ? lag_e : lead_e;
            end else begin
                // OS: the k-th smallest of both sides' reference cells.
                noise_statistic = both;
            end
            // One-sided policy at a frame edge: only the complete side counts
            // (at most one side is incomplete since frames are >= W long).
            if (EDGE == 2) begin
                if (!lead_full) begin
                    noise_statistic = (KIND == 0) ? (lag_e << 1) : lag_e;
                end else if (!lag_full) begin
                    noise_statistic = (KIND == 0) ? (lead_e << 1) : lead_e;
                end
            end
        end
    endfunction

    // Product S * A, or the truncated shift-and-add of A's NAF digits (section 5).
    function [MUL_BITS-1:0] scaled_product;
        input [STAT_BITS-1:0] stat;
        reg   [MUL_BITS-1:0]  stat_e;
        reg   [MUL_BITS-1:0]  pos;
        reg   [MUL_BITS-1:0]  neg;
        integer               k;
        begin
            stat_e = stat;
            if (TRUNCATE_PARTIALS == 0) begin
                scaled_product = stat_e * ALPHA_MUL;
            end else begin
                // T0 = sum_i sign_i * ((S << p_i) >> d); positive and negative digits summed apart.
                pos = {MUL_BITS{1'b0}};
                neg = {MUL_BITS{1'b0}};
                for (k = 0; k <= ALPHA_BITS; k = k + 1) begin
                    if (NAF_POS[k]) pos = pos + ((stat_e << k) >> DROP_BITS);
                    if (NAF_NEG[k]) neg = neg + ((stat_e << k) >> DROP_BITS);
                end
                scaled_product = pos - neg;
            end
        end
    endfunction

    // Rounding, overflow, decision and word packing (sections 5 to 8).
    // side = {last, window-valid, cut}.
    function [OUT_BITS-1:0] output_word;
        input [MUL_BITS-1:0] prod;
        input [SIDE_W-1:0]   side;
        reg   [RB-1:0]             rnd;
        reg   [XB-1:0]             t0;
        reg   [THRESHOLD_BITS-1:0] t;
        reg   [CB-1:0]             c_cmp;
        reg                        det;
        begin
            // Rounding (section 5): floor, half-up, half-even.
            rnd = prod;
            t0  = (rnd + RND_HALF) >> ROUND_DROP;
            if (ROUNDING == 2 && ROUND_DROP > 0) begin
                // An exact tie rounded up to an odd value goes back down to the even one.
                if ((rnd & RND_MASK) == RND_TIE && t0[0]) t0 = t0 - T_ONE;
            end
            // Overflow (section 6).
            if (OVERFLOW == 0 && t0 > T_MAX) t = T_MAX[THRESHOLD_BITS-1:0];
            else                             t = t0[THRESHOLD_BITS-1:0];
            // Decision (section 7): C = x << F_T against T.
            c_cmp = side[IB-1:0];
            det   = (COMPARE_GE != 0) ? ((c_cmp << THRESHOLD_FRAC_BITS) >= t)
                                      : ((c_cmp << THRESHOLD_FRAC_BITS) > t);
            // Skip policy: no decision where the window is not valid.
            if (EDGE == 0) begin
                if (!side[IB]) begin
                    t   = {THRESHOLD_BITS{1'b0}};
                    det = 1'b0;
                end
            end
            output_word = {side[IB+1:IB], det, t, side[IB-1:0]};
        end
    endfunction

    // ------------------------------------------------------------------
    // Forming: the fields of the word whose CUT sits at position HALF after
    // the step. With one pipeline stage they are the values the registers
    // are about to take; otherwise the window registers are the first stage.
    // For OS, f_lag and f_lead carry each side's ceil(k/2)-th smallest cell
    // (the one-sided statistic) and os_both the k-th smallest of both.
    // ------------------------------------------------------------------
    wire                form_valid_next = step & body_reg[HALF-1];
    wire [SUM_BITS-1:0] f_lag;
    wire [SUM_BITS-1:0] f_lead;
    wire                f_lag_full;
    wire                f_lead_full;
    wire [SIDE_W-1:0]   f_side;

    generate
        if (PIPELINE_STAGES == 1) begin : g_form_next
            // The sums after this step, modulo 2^SUM_BITS as in the clocked block above.
            wire [SUM_BITS-1:0] sum_lag_next  = sum_lag_reg + lag_enter - lag_leave;
            wire [SUM_BITS-1:0] sum_lead_next = sum_lead_reg + enter_value - lead_leave;
            assign f_lag       = (KIND == 3) ? os_lag_side : sum_lag_next;
            assign f_lead      = (KIND == 3) ? os_lead_side : sum_lead_next;
            assign f_lag_full  = body_reg[2*HALF-1];
            assign f_lead_full = enter_body;
            assign f_side      = {last_reg[HALF-1], body_reg[2*HALF-1] & enter_body, win_reg[(HALF-1)*IB +: IB]};
        end else begin : g_form_reg
            assign f_lag       = (KIND == 3) ? os_lag_side : sum_lag_reg;
            assign f_lead      = (KIND == 3) ? os_lead_side : sum_lead_reg;
            assign f_lag_full  = body_reg[2*HALF];
            assign f_lead_full = body_reg[0];
            assign f_side      = {last_reg[HALF], body_reg[2*HALF] & body_reg[0], win_reg[HALF*IB +: IB]};
        end
    endgenerate

    // Valid bits of all stages, one packed shift register.
    wire [PIPELINE_STAGES-1:0] valid_in_ext = form_valid_next;

    always @(posedge clk) begin
        if (rst) begin
            valid_pipe_reg <= {PIPELINE_STAGES{1'b0}};
        end else if (advance) begin
            valid_pipe_reg <= (valid_pipe_reg << 1) | valid_in_ext;
        end
    end

    // ------------------------------------------------------------------
    // Data stages: each register loads the function of the one before it.
    // ------------------------------------------------------------------
    reg [STAT_BITS-1:0]         stat_reg;       // after the statistic (PIPELINE_STAGES >= 4)
    reg [SIDE_W-1:0]            stat_side_reg;
    reg [MUL_BITS-1:0]          mul_reg;        // after the product (PIPELINE_STAGES >= 3)
    reg [SIDE_W-1:0]            mul_side_reg;
    reg [PAD_STAGES*OUT_BITS-1:0] pad_reg;      // delay words (PIPELINE_STAGES >= 5), newest at the LSBs

    generate
        if (PIPELINE_STAGES <= 2) begin : g_out_direct
            always @(posedge clk) begin
                if (advance) begin
                    out_word_reg <= output_word(scaled_product(noise_statistic(f_lag, f_lead, os_select(lag_cells, lead_cells),
                                                                               f_lag_full, f_lead_full)), f_side);
                end
            end
        end else begin : g_out_staged
            if (PIPELINE_STAGES == 3) begin : g_mul_from_sums
                always @(posedge clk) begin
                    if (advance) begin
                        mul_reg      <= scaled_product(noise_statistic(f_lag, f_lead, os_select(lag_cells, lead_cells), f_lag_full, f_lead_full));
                        mul_side_reg <= f_side;
                    end
                end
            end else begin : g_stat_then_mul
                always @(posedge clk) begin
                    if (advance) begin
                        stat_reg      <= noise_statistic(f_lag, f_lead, os_select(lag_cells, lead_cells), f_lag_full, f_lead_full);
                        stat_side_reg <= f_side;
                        mul_reg       <= scaled_product(stat_reg);
                        mul_side_reg  <= stat_side_reg;
                    end
                end
            end

            if (PIPELINE_STAGES <= 4) begin : g_out_from_mul
                always @(posedge clk) begin
                    if (advance) begin
                        out_word_reg <= output_word(mul_reg, mul_side_reg);
                    end
                end
            end else begin : g_out_from_pads
                always @(posedge clk) begin
                    if (advance) begin
                        pad_reg      <= (pad_reg << OUT_BITS) | output_word(mul_reg, mul_side_reg);
                        out_word_reg <= pad_reg[PAD_STAGES*OUT_BITS-1 -: OUT_BITS];
                    end
                end
            end
        end
    endgenerate

    assign m_axis_tvalid = out_valid;
    assign m_axis_tdata  = out_word_reg;
    assign m_axis_tlast  = out_word_reg[OUT_BITS-1];

endmodule

// cfar_stream_rank_side: the CELLS reference cells of one side of the OS
// window, kept sorted ascending in one packed register (smallest at the
// LSBs). At each step one cell leaves (leave_cell, the value of a cell that
// is in the array) and one enters (enter_cell):
//   p = number of cells < leave_cell     (the leaving cell's place),
//   b = the array without cell p          (cells above p move down one),
//   q = number of cells of b < enter_cell (the entering cell's place),
//   new[j] = b[j] (j < q), enter_cell (j = q), b[j-1] (j > q).
// Every cell is compared with both values at once (2*CELLS comparators, each
// CELL_BITS wide, no longer carry chain), and each cell of the result is a
// 4:1 choice among a[j-1], a[j], a[j+1] and enter_cell: one step per clock
// for any CELLS. The array resets to zeros, the value of a window after reset.
//
// Simulation speed: the update is one function of packed vectors called in
// the clocked block, so a simulator evaluates it once per step (comparators
// written as separate nets cost Icarus several times more). With
// NEXT_OUT = 1 the same function also drives sorted_next.
module cfar_stream_rank_side #(
    // Width of one cell in bits, >= 1.
    parameter integer CELL_BITS = 16,
    // Cells on the side (R), >= 1.
    parameter integer CELLS = 16,
    // 1 = drive sorted_next (the array after a step now), 0 = leave it 0.
    parameter integer NEXT_OUT = 0
) (
    input  wire                       clk,
    // Synchronous reset, active high.
    input  wire                       rst,
    // Remove leave_cell and insert enter_cell at this clock edge.
    input  wire                       step,
    input  wire [CELL_BITS-1:0]       enter_cell,
    input  wire [CELL_BITS-1:0]       leave_cell,
    // The array now, ascending, cell j in [j*CELL_BITS +: CELL_BITS].
    output wire [CELLS*CELL_BITS-1:0] sorted,
    // The array after a step with the present enter_cell and leave_cell (NEXT_OUT = 1).
    output wire [CELLS*CELL_BITS-1:0] sorted_next
);

    // Width of the packed array.
    localparam integer VB = CELLS * CELL_BITS;
    // Mask of cell 0.
    localparam [VB-1:0] CELL0 = {CELL_BITS{1'b1}};

    // Illegal parameter combinations stop elaboration (see cfar_stream).
    generate
        if (CELL_BITS < 1 || CELLS < 1) begin : g_err_size
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__rank_side_needs_CELL_BITS_and_CELLS_at_least_1)
        end
    endgenerate

    reg  [VB-1:0] sorted_reg;

    // The array after removing leave and inserting enter. The loop unrolls
    // into 2*CELLS comparators working in parallel.
    function [VB-1:0] rank_update;
        input [VB-1:0]        a;
        input [CELL_BITS-1:0] enter;
        input [CELL_BITS-1:0] leave;
        reg   [VB-1:0]        lt_leave;
        reg   [VB-1:0]        lt_enter;
        reg   [VB-1:0]        b;
        reg   [VB-1:0]        before_q;
        reg   [VB-1:0]        upto_q;
        reg   [CELL_BITS-1:0] here;
        integer               k;
        begin
            // All bits of cell k set when cell k < leave (cells 0 .. p-1) / < enter.
            lt_leave = {VB{1'b0}};
            lt_enter = {VB{1'b0}};
            for (k = 0; k < CELLS; k = k + 1) begin
                here = a[k*CELL_BITS +: CELL_BITS];
                if (here < leave) lt_leave[k*CELL_BITS +: CELL_BITS] = {CELL_BITS{1'b1}};
                if (here < enter) lt_enter[k*CELL_BITS +: CELL_BITS] = {CELL_BITS{1'b1}};
            end
            // b[j] = a[j] below p, a[j+1] from p on.
            b        = (a & lt_leave) | ((a >> CELL_BITS) & ~lt_leave);
            // j < q exactly when b[j] < enter: a[j] < enter below p, a[j+1] < enter from p on.
            before_q = (lt_enter & lt_leave) | ((lt_enter >> CELL_BITS) & ~lt_leave);
            // j <= q.
            upto_q   = (before_q << CELL_BITS) | CELL0;
            rank_update = (b & before_q) | ({CELLS{enter}} & upto_q & ~before_q) | ((b << CELL_BITS) & ~upto_q);
        end
    endfunction

    always @(posedge clk) begin
        if (rst) begin
            sorted_reg <= {VB{1'b0}};
        end else if (step) begin
            sorted_reg <= rank_update(sorted_reg, enter_cell, leave_cell);
        end
    end

    assign sorted      = sorted_reg;
    assign sorted_next = (NEXT_OUT != 0) ? rank_update(sorted_reg, enter_cell, leave_cell)
                                         : {VB{1'b0}};

endmodule
`undef CFAR_STREAM_STOP
`default_nettype wire
