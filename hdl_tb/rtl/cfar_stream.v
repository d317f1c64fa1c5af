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
// cfar_stream: streaming one-dimensional CFAR detector (CA, GO, SO), the
// reference core of cfarvec. It reproduces docs/bit-true.md word for word:
// running side sums modulo 2^SUM_BITS, the noise statistic S, the exact
// product S*A (or the truncated shift-and-add of A's NAF digits), rounding,
// saturate/wrap to THRESHOLD_BITS, the `>` / `>=` decision, the skip,
// zero-pad and one-sided edge policies, the frame drain of R+G zeros after
// every last marker, and AXI4-Stream style valid/ready ports on both sides.
//
// Output word (m_axis_tdata), LSB first: CUT [INPUT_BITS-1:0], threshold T
// [INPUT_BITS+THRESHOLD_BITS-1:INPUT_BITS], det, window-valid, last marker
// (top bit, also on m_axis_tlast).
//
// Latency: the word of CUT n is formed when cell n+R+G enters the window and
// leaves PIPELINE_STAGES register stages later (R+G+PIPELINE_STAGES cycles
// at full rate). Register placement by PIPELINE_STAGES:
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
    // Detector kind: 0 = CA (sum of both sides), 1 = GO (greater side), 2 = SO (smaller side); OS is not supported.
    parameter integer KIND = 0,
    // Edge policy: 0 = skip, 1 = zero-pad, 2 = one-sided; circular is not supported.
    parameter integer EDGE = 0,
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
    // Width of the statistic S (CA: W_S + 1, GO/SO: W_S).
    localparam integer STAT_BITS = (KIND == 0) ? SUM_BITS + 1 : SUM_BITS;
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
        if (KIND == 3) begin : g_err_kind_os
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__KIND_3_os_is_not_supported_by_this_core)
        end else if (KIND < 0 || KIND > 3) begin : g_err_kind
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__KIND_must_be_0_ca_1_go_or_2_so)
        end
        if (EDGE == 3) begin : g_err_edge_circular
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__EDGE_3_circular_is_not_supported_by_this_core)
        end else if (EDGE < 0 || EDGE > 3) begin : g_err_edge
            `CFAR_STREAM_STOP(cfar_stream_PARAMETER_ERROR__EDGE_must_be_0_skip_1_zero_pad_or_2_one_sided)
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
    assign s_axis_tready = advance & ~draining & ~rst;
    wire accept    = s_axis_tvalid & s_axis_tready;
    // A step shifts one cell into the window: an accepted sample or a drain zero.
    wire step      = accept | (advance & draining);

    localparam [DRAIN_BITS-1:0] DRAIN_LOAD = HALF;
    localparam [DRAIN_BITS-1:0] DRAIN_ONE  = 1;
    assign drain_cnt_next = (accept & s_axis_tlast) ? DRAIN_LOAD
                          : (step & draining)       ? drain_cnt_reg - DRAIN_ONE
                          :                           drain_cnt_reg;

    always @(posedge clk) begin
        if (rst) begin
            drain_cnt_reg <= {DRAIN_BITS{1'b0}};
        end else begin
            drain_cnt_reg <= drain_cnt_next;
        end
    end

    // ------------------------------------------------------------------
    // Window: packed shift register, newest cell at position 0 (LSBs), the
    // CUT at position HALF, the oldest at 2*HALF. Each cell has a `body` tag
    // (a frame sample, not a reset or drain zero) and, up to the CUT, a
    // `last` tag. Cell values are not reset: every tap is masked by its body
    // tag, so a reset or drain cell counts as 0 exactly as the contract says.
    // ------------------------------------------------------------------
    reg  [WIN*IB-1:0]   win_reg;
    reg  [WIN-1:0]      body_reg;
    reg  [HALF:0]       last_reg;
    reg  [SUM_BITS-1:0] sum_lead_reg;
    reg  [SUM_BITS-1:0] sum_lag_reg;

    // The cell entering at a step: the accepted sample, or a drain zero (a
    // step that is not a drain step is an accepted sample).
    wire [IB-1:0] enter_value = draining ? {IB{1'b0}} : s_axis_tdata;

    // Running-sum taps: the cells about to cross a region boundary.
    wire [IB-1:0] lead_leave = win_reg[(REF_CELLS-1)*IB +: IB] & {IB{body_reg[REF_CELLS-1]}};
    wire [IB-1:0] lag_enter  = win_reg[(HALF+GUARD_CELLS)*IB +: IB] & {IB{body_reg[HALF+GUARD_CELLS]}};
    wire [IB-1:0] lag_leave  = win_reg[(WIN-1)*IB +: IB] & {IB{body_reg[WIN-1]}};

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
            last_reg     <= {(HALF+1){1'b0}};
            sum_lead_reg <= {SUM_BITS{1'b0}};
            sum_lag_reg  <= {SUM_BITS{1'b0}};
        end else if (step) begin
            body_reg     <= {body_reg[WIN-2:0], accept};
            last_reg     <= {last_reg[HALF-1:0], accept & s_axis_tlast};
            // Modulo 2^SUM_BITS (the expression has the register's width), docs/bit-true.md section 3.
            sum_lead_reg <= sum_lead_reg + enter_value - lead_leave;
            sum_lag_reg  <= sum_lag_reg + lag_enter - lag_leave;
        end
    end

    // ------------------------------------------------------------------
    // Datapath functions, one per step of the contract
    // ------------------------------------------------------------------
    // Noise statistic S (docs/bit-true.md section 3). The parameter tests
    // come first so a simulator skips the code of the other modes.
    function [STAT_BITS-1:0] noise_statistic;
        input [SUM_BITS-1:0] lag;
        input [SUM_BITS-1:0] lead;
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
            end else begin
                noise_statistic = (lag_e <= lead_e) ? lag_e : lead_e;
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
            assign f_lag       = sum_lag_next;
            assign f_lead      = sum_lead_next;
            assign f_lag_full  = body_reg[2*HALF-1];
            assign f_lead_full = accept;
            assign f_side      = {last_reg[HALF-1], body_reg[2*HALF-1] & accept, win_reg[(HALF-1)*IB +: IB]};
        end else begin : g_form_reg
            assign f_lag       = sum_lag_reg;
            assign f_lead      = sum_lead_reg;
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
                    out_word_reg <= output_word(scaled_product(noise_statistic(f_lag, f_lead, f_lag_full,
                                                                               f_lead_full)), f_side);
                end
            end
        end else begin : g_out_staged
            if (PIPELINE_STAGES == 3) begin : g_mul_from_sums
                always @(posedge clk) begin
                    if (advance) begin
                        mul_reg      <= scaled_product(noise_statistic(f_lag, f_lead, f_lag_full, f_lead_full));
                        mul_side_reg <= f_side;
                    end
                end
            end else begin : g_stat_then_mul
                always @(posedge clk) begin
                    if (advance) begin
                        stat_reg      <= noise_statistic(f_lag, f_lead, f_lag_full, f_lead_full);
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
`undef CFAR_STREAM_STOP
`default_nettype wire
