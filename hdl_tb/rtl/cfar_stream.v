`timescale 1ns/1ps
`default_nettype none
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
// See docs/reference-core.md.
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
    // Optional register stages (see the header comment).
    localparam integer USE_STAT_REG = (PIPELINE_STAGES >= 4) ? 1 : 0;
    localparam integer USE_MUL_REG  = (PIPELINE_STAGES >= 3) ? 1 : 0;
    localparam integer PAD_STAGES   = (PIPELINE_STAGES > 4) ? PIPELINE_STAGES - 4 : 0;

    // ------------------------------------------------------------------
    // Illegal parameter combinations stop elaboration: the instantiated
    // module does not exist and its name says what is wrong.
    // ------------------------------------------------------------------
    generate
        if (KIND == 3) begin : g_err_kind_os
            cfar_stream_PARAMETER_ERROR__KIND_3_os_is_not_supported_by_this_core u_stop ();
        end else if (KIND < 0 || KIND > 3) begin : g_err_kind
            cfar_stream_PARAMETER_ERROR__KIND_must_be_0_ca_1_go_or_2_so u_stop ();
        end
        if (EDGE == 3) begin : g_err_edge_circular
            cfar_stream_PARAMETER_ERROR__EDGE_3_circular_is_not_supported_by_this_core u_stop ();
        end else if (EDGE < 0 || EDGE > 3) begin : g_err_edge
            cfar_stream_PARAMETER_ERROR__EDGE_must_be_0_skip_1_zero_pad_or_2_one_sided u_stop ();
        end
        if (INPUT_BITS < 1 || INPUT_BITS > 32) begin : g_err_input_bits
            cfar_stream_PARAMETER_ERROR__INPUT_BITS_must_be_1_to_32 u_stop ();
        end
        if (REF_CELLS < 1) begin : g_err_ref_cells
            cfar_stream_PARAMETER_ERROR__REF_CELLS_must_be_at_least_1 u_stop ();
        end
        if (GUARD_CELLS < 0) begin : g_err_guard_cells
            cfar_stream_PARAMETER_ERROR__GUARD_CELLS_must_be_at_least_0 u_stop ();
        end
        if (SUM_BITS < SIDE_BITS) begin : g_err_sum_bits
            cfar_stream_PARAMETER_ERROR__SUM_BITS_below_bitlen_of_R_times_max_sample u_stop ();
        end
        if (ALPHA_INT == 64'd0) begin : g_err_alpha
            cfar_stream_PARAMETER_ERROR__ALPHA_INT_must_be_at_least_1 u_stop ();
        end
        if (DROP_BITS < 0) begin : g_err_drop_bits
            cfar_stream_PARAMETER_ERROR__DROP_BITS_must_be_at_least_0 u_stop ();
        end
        if (THRESHOLD_FRAC_BITS < 0) begin : g_err_threshold_frac_bits
            cfar_stream_PARAMETER_ERROR__THRESHOLD_FRAC_BITS_must_be_at_least_0 u_stop ();
        end
        if (THRESHOLD_BITS < 1) begin : g_err_threshold_bits
            cfar_stream_PARAMETER_ERROR__THRESHOLD_BITS_must_be_at_least_1 u_stop ();
        end
        if (ROUNDING < 0 || ROUNDING > 2) begin : g_err_rounding
            cfar_stream_PARAMETER_ERROR__ROUNDING_must_be_0_floor_1_half_up_or_2_half_even u_stop ();
        end
        if (OVERFLOW < 0 || OVERFLOW > 1) begin : g_err_overflow
            cfar_stream_PARAMETER_ERROR__OVERFLOW_must_be_0_saturate_or_1_wrap u_stop ();
        end
        if (COMPARE_GE < 0 || COMPARE_GE > 1) begin : g_err_compare
            cfar_stream_PARAMETER_ERROR__COMPARE_GE_must_be_0_or_1 u_stop ();
        end
        if (TRUNCATE_PARTIALS < 0 || TRUNCATE_PARTIALS > 1) begin : g_err_truncate
            cfar_stream_PARAMETER_ERROR__TRUNCATE_PARTIALS_must_be_0_or_1 u_stop ();
        end
        if (TRUNCATE_PARTIALS == 1 && ROUNDING != 0) begin : g_err_truncate_rounding
            cfar_stream_PARAMETER_ERROR__TRUNCATE_PARTIALS_needs_ROUNDING_0_floor u_stop ();
        end
        if (PIPELINE_STAGES < 1) begin : g_err_stages
            cfar_stream_PARAMETER_ERROR__PIPELINE_STAGES_must_be_at_least_1 u_stop ();
        end
        if (SRST_LEVEL < 0 || SRST_LEVEL > 1) begin : g_err_srst_level
            cfar_stream_PARAMETER_ERROR__SRST_LEVEL_must_be_0_or_1 u_stop ();
        end
    endgenerate

    // ------------------------------------------------------------------
    // Handshake, step and drain
    // ------------------------------------------------------------------
    wire rst = (SRST_LEVEL != 0) ? srst : ~srst;

    reg                  out_valid_reg;
    reg  [OUT_BITS-1:0]  out_word_reg;
    reg  [DRAIN_BITS-1:0] drain_cnt_reg;
    wire [DRAIN_BITS-1:0] drain_cnt_next;

    // The whole pipeline moves unless a word waits at the output.
    wire advance  = ~out_valid_reg | m_axis_tready;
    wire draining = (drain_cnt_reg != {DRAIN_BITS{1'b0}});
    assign s_axis_tready = advance & ~draining & ~rst;
    wire accept   = s_axis_tvalid & s_axis_tready;
    // A step shifts one cell into the window: an accepted sample or a drain zero.
    wire step     = accept | (advance & draining);

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
    reg  [WIN*IB-1:0] win_reg;
    reg  [WIN-1:0]    body_reg;
    reg  [HALF:0]     last_reg;
    reg  [SUM_BITS-1:0] sum_lead_reg;
    reg  [SUM_BITS-1:0] sum_lag_reg;

    wire [IB-1:0]     enter_value = accept ? s_axis_tdata : {IB{1'b0}};
    wire [WIN*IB-1:0] win_in_ext  = enter_value;
    wire [WIN-1:0]    body_in_ext = accept;
    wire [HALF:0]     last_in_ext = accept & s_axis_tlast;
    wire [WIN*IB-1:0] win_next    = (win_reg << IB) | win_in_ext;
    wire [WIN-1:0]    body_next   = (body_reg << 1) | body_in_ext;
    wire [HALF:0]     last_next   = (last_reg << 1) | last_in_ext;

    // Running-sum taps (cells about to move across a region boundary).
    wire [IB-1:0] lead_leave = win_reg[(REF_CELLS-1)*IB +: IB] & {IB{body_reg[REF_CELLS-1]}};
    wire [IB-1:0] lag_enter  = win_reg[(HALF+GUARD_CELLS)*IB +: IB] & {IB{body_reg[HALF+GUARD_CELLS]}};
    wire [IB-1:0] lag_leave  = win_reg[(WIN-1)*IB +: IB] & {IB{body_reg[WIN-1]}};
    wire [SUM_BITS-1:0] enter_ext      = enter_value;
    wire [SUM_BITS-1:0] lead_leave_ext = lead_leave;
    wire [SUM_BITS-1:0] lag_enter_ext  = lag_enter;
    wire [SUM_BITS-1:0] lag_leave_ext  = lag_leave;
    // Modulo 2^SUM_BITS, as docs/bit-true.md section 3.
    wire [SUM_BITS-1:0] sum_lead_next = sum_lead_reg + enter_ext - lead_leave_ext;
    wire [SUM_BITS-1:0] sum_lag_next  = sum_lag_reg + lag_enter_ext - lag_leave_ext;

    always @(posedge clk) begin
        if (step) begin
            win_reg <= win_next;
        end
    end

    always @(posedge clk) begin
        if (rst) begin
            body_reg     <= {WIN{1'b0}};
            last_reg     <= {(HALF+1){1'b0}};
            sum_lead_reg <= {SUM_BITS{1'b0}};
            sum_lag_reg  <= {SUM_BITS{1'b0}};
        end else if (step) begin
            body_reg     <= body_next;
            last_reg     <= last_next;
            sum_lead_reg <= sum_lead_next;
            sum_lag_reg  <= sum_lag_next;
        end
    end

    // ------------------------------------------------------------------
    // Forming: the fields of the word whose CUT sits at position HALF after
    // the step. With one pipeline stage they come from the _next values;
    // otherwise the window registers themselves are the first stage.
    // ------------------------------------------------------------------
    reg form_valid_reg;
    wire form_valid_next = step & body_next[HALF];

    always @(posedge clk) begin
        if (rst) begin
            form_valid_reg <= 1'b0;
        end else if (advance) begin
            form_valid_reg <= form_valid_next;
        end
    end

    wire                f_valid;
    wire [IB-1:0]       f_cut;
    wire [SUM_BITS-1:0] f_lag;
    wire [SUM_BITS-1:0] f_lead;
    wire                f_lag_full;
    wire                f_lead_full;
    wire                f_last;

    generate
        if (PIPELINE_STAGES == 1) begin : g_form_comb
            assign f_valid     = form_valid_next;
            assign f_cut       = win_next[HALF*IB +: IB];
            assign f_lag       = sum_lag_next;
            assign f_lead      = sum_lead_next;
            assign f_lag_full  = body_next[2*HALF];
            assign f_lead_full = body_next[0];
            assign f_last      = last_next[HALF];
        end else begin : g_form_reg
            assign f_valid     = form_valid_reg;
            assign f_cut       = win_reg[HALF*IB +: IB];
            assign f_lag       = sum_lag_reg;
            assign f_lead      = sum_lead_reg;
            assign f_lag_full  = body_reg[2*HALF];
            assign f_lead_full = body_reg[0];
            assign f_last      = last_reg[HALF];
        end
    endgenerate

    // ------------------------------------------------------------------
    // Statistic S (docs/bit-true.md section 3)
    // ------------------------------------------------------------------
    // Only one side complete: happens at a frame's edges; one-sided uses that side.
    wire use_lag_only  = (EDGE == 2) & ~f_lead_full;
    wire use_lead_only = (EDGE == 2) & ~f_lag_full;
    wire [STAT_BITS-1:0] lag_ext  = f_lag;
    wire [STAT_BITS-1:0] lead_ext = f_lead;
    wire [STAT_BITS-1:0] side_sel = use_lag_only ? lag_ext : lead_ext;
    wire [STAT_BITS-1:0] both_sel;

    generate
        if (KIND == 0) begin : g_ca
            assign both_sel = lag_ext + lead_ext;
        end else if (KIND == 1) begin : g_go
            assign both_sel = (lag_ext >= lead_ext) ? lag_ext : lead_ext;
        end else begin : g_so
            assign both_sel = (lag_ext <= lead_ext) ? lag_ext : lead_ext;
        end
    endgenerate

    wire one_side = use_lag_only | use_lead_only;
    // CA with one side: 2 * S_side; GO/SO: S_side.
    wire [STAT_BITS-1:0] side_stat = (KIND == 0) ? (side_sel << 1) : side_sel;
    wire [STAT_BITS-1:0] a_stat    = one_side ? side_stat : both_sel;
    wire                 a_v       = f_lag_full & f_lead_full;

    // Fields travelling with the statistic: {last, v, cut}.
    localparam integer SIDE_W = IB + 2;
    wire [SIDE_W-1:0] a_side = {f_last, a_v, f_cut};

    wire                 b_valid;
    wire [STAT_BITS-1:0] b_stat;
    wire [SIDE_W-1:0]    b_side;

    cfar_pipe_delay #(.WIDTH(STAT_BITS + SIDE_W), .DEPTH(USE_STAT_REG)) u_stat_stage (
        .clk      (clk),
        .rst      (rst),
        .en       (advance),
        .in_valid (f_valid),
        .in_data  ({a_side, a_stat}),
        .out_valid(b_valid),
        .out_data ({b_side, b_stat})
    );

    // ------------------------------------------------------------------
    // Product (docs/bit-true.md section 5)
    // ------------------------------------------------------------------
    wire [MUL_BITS-1:0] b_mul;

    generate
        if (TRUNCATE_PARTIALS == 0) begin : g_full_mul
            wire [MUL_BITS-1:0] stat_ext  = b_stat;
            wire [MUL_BITS-1:0] alpha_ext = ALPHA_INT;
            assign b_mul = stat_ext * alpha_ext;
        end else begin : g_trunc_mul
            // T0 = sum_i sign_i * ((S << p_i) >> d) over the NAF digits (sign_i, p_i) of A.
            localparam integer NP = ALPHA_BITS + 1;
            wire [NP*MUL_BITS-1:0] pos_acc;
            wire [NP*MUL_BITS-1:0] neg_acc;
            genvar k;
            for (k = 0; k < NP; k = k + 1) begin : g_digit
                wire [MUL_BITS-1:0] stat_ext = b_stat;
                wire [MUL_BITS-1:0] term     = (stat_ext << k) >> DROP_BITS;
                wire [MUL_BITS-1:0] pos_prev;
                wire [MUL_BITS-1:0] neg_prev;
                if (k == 0) begin : g_first
                    assign pos_prev = {MUL_BITS{1'b0}};
                    assign neg_prev = {MUL_BITS{1'b0}};
                end else begin : g_rest
                    assign pos_prev = pos_acc[(k-1)*MUL_BITS +: MUL_BITS];
                    assign neg_prev = neg_acc[(k-1)*MUL_BITS +: MUL_BITS];
                end
                if (NAF_POS[k]) begin : g_pos
                    assign pos_acc[k*MUL_BITS +: MUL_BITS] = pos_prev + term;
                end else begin : g_pos_skip
                    assign pos_acc[k*MUL_BITS +: MUL_BITS] = pos_prev;
                end
                if (NAF_NEG[k]) begin : g_neg
                    assign neg_acc[k*MUL_BITS +: MUL_BITS] = neg_prev + term;
                end else begin : g_neg_skip
                    assign neg_acc[k*MUL_BITS +: MUL_BITS] = neg_prev;
                end
            end
            assign b_mul = pos_acc[(NP-1)*MUL_BITS +: MUL_BITS] - neg_acc[(NP-1)*MUL_BITS +: MUL_BITS];
        end
    endgenerate

    wire                c_valid;
    wire [MUL_BITS-1:0] c_mul;
    wire [SIDE_W-1:0]   c_side;

    cfar_pipe_delay #(.WIDTH(MUL_BITS + SIDE_W), .DEPTH(USE_MUL_REG)) u_mul_stage (
        .clk      (clk),
        .rst      (rst),
        .en       (advance),
        .in_valid (b_valid),
        .in_data  ({b_side, b_mul}),
        .out_valid(c_valid),
        .out_data ({c_side, c_mul})
    );

    // ------------------------------------------------------------------
    // Rounding, overflow, decision, word (docs/bit-true.md sections 5-8)
    // ------------------------------------------------------------------
    wire [IB-1:0] c_cut  = c_side[IB-1:0];
    wire          c_v    = c_side[IB];
    wire          c_last = c_side[IB+1];

    wire [RB-1:0] rnd_in  = c_mul;
    wire [RB-1:0] rnd_sum = rnd_in + RND_HALF;
    wire [RB-1:0] rnd_q   = rnd_sum >> ROUND_DROP;
    wire          rnd_tie = (ROUNDING == 2) && (ROUND_DROP > 0) && ((rnd_in & RND_MASK) == RND_TIE);
    wire [RB-1:0] t0      = (rnd_tie & rnd_q[0]) ? rnd_q - RND_ONE : rnd_q;

    wire [XB-1:0] t0_ext  = t0;
    wire          t_over  = (t0_ext > T_MAX);
    wire [THRESHOLD_BITS-1:0] t_fit = ((OVERFLOW == 0) && t_over) ? T_MAX[THRESHOLD_BITS-1:0]
                                                                  : t0_ext[THRESHOLD_BITS-1:0];

    wire [CB-1:0] cmp_cut_ext = c_cut;
    wire [CB-1:0] cmp_cut     = cmp_cut_ext << THRESHOLD_FRAC_BITS;
    wire [CB-1:0] cmp_t       = t_fit;
    wire          det_raw     = (COMPARE_GE != 0) ? (cmp_cut >= cmp_t) : (cmp_cut > cmp_t);

    // Skip policy: no decision where the window is not valid.
    wire                      skip_cell = (EDGE == 0) & ~c_v;
    wire [THRESHOLD_BITS-1:0] t_out     = skip_cell ? {THRESHOLD_BITS{1'b0}} : t_fit;
    wire                      det_out   = ~skip_cell & det_raw;
    wire [OUT_BITS-1:0]       c_word    = {c_last, c_v, det_out, t_out, c_cut};

    wire                d_valid;
    wire [OUT_BITS-1:0] d_word;

    cfar_pipe_delay #(.WIDTH(OUT_BITS), .DEPTH(PAD_STAGES)) u_pad_stages (
        .clk      (clk),
        .rst      (rst),
        .en       (advance),
        .in_valid (c_valid),
        .in_data  (c_word),
        .out_valid(d_valid),
        .out_data (d_word)
    );

    // ------------------------------------------------------------------
    // Output register (the last pipeline stage)
    // ------------------------------------------------------------------
    always @(posedge clk) begin
        if (rst) begin
            out_valid_reg <= 1'b0;
        end else if (advance) begin
            out_valid_reg <= d_valid;
        end
    end

    always @(posedge clk) begin
        if (advance) begin
            out_word_reg <= d_word;
        end
    end

    assign m_axis_tvalid = out_valid_reg;
    assign m_axis_tdata  = out_word_reg;
    assign m_axis_tlast  = out_word_reg[OUT_BITS-1];

endmodule
`default_nettype wire
