`timescale 1ns/1ps
`default_nettype none
// Parameter check, used inside a generate branch that only an illegal
// parameter set elaborates (the construct of cfar_stream.v, under this
// file's own name so both files compile together in any order).
// Under Verilator, an elaboration-time $fatal (IEEE Std 1800-2017, 20.11).
// Icarus Verilog and Yosys: the instantiation of a module that does not
// exist, whose name says what is wrong.
`ifdef VERILATOR
`define CFAR_MAP_STOP(name) $fatal(1, `"name`");
`else
`define CFAR_MAP_STOP(name) name u_stop ();
`endif
// cfar_map: streaming range-Doppler (map) CFAR detector (CA, GO, SO), the
// map reference core of cfarvec. It reproduces docs/bit-true-2d.md word for
// word: the window stream of each map (padded lines of P_f = L_f + 2H_f
// cells, P_s = L_s + 2H_s lines; pad cells zero or, under circular, wrapped
// map cells), 2H_s line buffers in one inferred RAM, running rectangle sums
// over column sums (guard rectangle and reference ring, or cross-shaped
// window), the noise statistic, then the 1D arithmetic of cfar_stream.v
// unchanged (product S*A or truncated shift-and-add, rounding, saturate or
// wrap, decision), skip / zero-pad / circular per axis.
//
// Streams (AXI4-Stream signal names, ARM IHI 0051A), one map cell per
// transfer in the spec's streaming order:
//   s_axis_tuser: 1 on the first cell of each map (start-of-map marker);
//     the core takes and drops cells offered where a map's first cell is
//     due until one carries it (this is how it recovers after a reset),
//   s_axis_tlast: end of a fast-axis line; accepted, not needed (the core
//     counts lines itself),
//   m_axis_tdata: the output word of docs/bit-true-2d.md section 8, LSB
//     first CUT, threshold T, det, window-valid, last-of-map marker on top,
//   m_axis_tlast: 1 on the word of each line's last cell (fast axis),
//   m_axis_tuser: 1 on the word of each map's first cell.
//
// Memory: line buffers 2H_s x P_f cells (one RAM of P_f words of 2H_s*W_in
// bits); input store: none, two lines (circular fast axis only: 2 L_f
// cells) or the whole map (circular slow axis: L_s L_f cells), one RAM.
//
// Timing (docs/reference-core-2d.md): one window-stream step per clock at
// full rate; pad steps run without input (s_axis_tready low). Neither axis
// circular: every word leaves H_s P_f + H_f + PIPELINE_STAGES cycles after
// its cell at full rate. The whole pipeline holds while a word waits at the
// output (m_axis_tready low). PIPELINE_STAGES: 2 = sums, output register;
// 3 = + register after the multiplier; 4 = + register after the statistic;
// 5.. = + delay registers.
module cfar_map #(
    // Sample width W_in in bits (unsigned cells), 1..32.
    parameter integer INPUT_BITS = 16,
    // Range cells L_r of a map, >= the window's range extent.
    parameter integer RANGE_CELLS = 64,
    // Doppler bins L_d of a map, >= the window's Doppler extent.
    parameter integer DOPPLER_BINS = 32,
    // Streaming order: 0 = doppler-fast (a line is one range cell's Doppler bins), 1 = range-fast.
    parameter integer ORDER = 0,
    // Window shape: 0 = guard rectangle with reference ring, 1 = cross-shaped window.
    parameter integer WINDOW = 0,
    // Reference cells beyond the guard cells along range, each side, >= 0.
    parameter integer REF_RANGE = 2,
    // Reference cells beyond the guard cells along Doppler, each side, >= 0 (REF_RANGE + REF_DOPPLER >= 1).
    parameter integer REF_DOPPLER = 2,
    // Guard cells along range, each side of the CUT, >= 0.
    parameter integer GUARD_RANGE = 1,
    // Guard cells along Doppler, each side of the CUT, >= 0.
    parameter integer GUARD_DOPPLER = 1,
    // Detector kind: 0 = CA (all reference cells), 1 = GO, 2 = SO (greater / smaller range half).
    parameter integer KIND = 0,
    // Edge policy along range: 0 = skip, 1 = zero-pad, 3 = circular.
    parameter integer RANGE_EDGE = 1,
    // Edge policy along Doppler: 0 = skip, 1 = zero-pad, 3 = circular.
    parameter integer DOPPLER_EDGE = 3,
    // Width W_S of the sums, >= bitlen(N (2^W_in - 1)) for CA, bitlen(N_half (2^W_in - 1)) for GO/SO.
    parameter integer SUM_BITS = 22,
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
    // Register stages from the sums to m_axis_tdata, >= 2.
    parameter integer PIPELINE_STAGES = 2,
    // Level of srst that resets the core: 1 = active high, 0 = active low.
    parameter integer SRST_LEVEL = 1
) (
    input  wire                                 clk,
    // Synchronous reset (polarity set by SRST_LEVEL).
    input  wire                                 srst,
    // Input stream: one map cell per transfer.
    input  wire [INPUT_BITS-1:0]                s_axis_tdata,
    input  wire                                 s_axis_tvalid,
    output wire                                 s_axis_tready,
    input  wire                                 s_axis_tlast,
    input  wire                                 s_axis_tuser,
    // Output stream: one word per map cell, in input order.
    output wire [INPUT_BITS+THRESHOLD_BITS+2:0] m_axis_tdata,
    output wire                                 m_axis_tvalid,
    input  wire                                 m_axis_tready,
    output wire                                 m_axis_tlast,
    output wire                                 m_axis_tuser
);

    // ------------------------------------------------------------------
    // Derived parameters
    // ------------------------------------------------------------------
    // Short name for the sample width.
    localparam integer IB = INPUT_BITS;
    // Half extents and extents of the window along Doppler and range.
    localparam integer HD = REF_DOPPLER + GUARD_DOPPLER;
    localparam integer HR = REF_RANGE + GUARD_RANGE;
    localparam integer WD = 2 * HD + 1;
    localparam integer WR = 2 * HR + 1;
    // Reference cells N and cells of each range half N_half (docs/bit-true-2d.md section 2).
    localparam integer N_ALL  = (WINDOW == 0) ? WD * WR - (2 * GUARD_DOPPLER + 1) * (2 * GUARD_RANGE + 1)
                                              : 2 * REF_DOPPLER + 2 * REF_RANGE;
    localparam integer N_HALF = (WINDOW == 0) ? WD * HR - (2 * GUARD_DOPPLER + 1) * GUARD_RANGE : REF_RANGE;
    // Largest true sum of the part the detector uses, and the bits it needs.
    localparam [63:0] PART_MAX  = ((KIND == 0) ? N_ALL : N_HALF) * ((64'd1 << INPUT_BITS) - 64'd1);
    localparam integer PART_BITS = $clog2(PART_MAX + 64'd1);
    // Stream axes: L_s, L_f (lengths), H_s, H_f (half extents), edge codes.
    localparam integer LS = (ORDER == 1) ? DOPPLER_BINS : RANGE_CELLS;
    localparam integer LF = (ORDER == 1) ? RANGE_CELLS : DOPPLER_BINS;
    localparam integer HS = (ORDER == 1) ? HD : HR;
    localparam integer HF = (ORDER == 1) ? HR : HD;
    localparam integer ES = (ORDER == 1) ? DOPPLER_EDGE : RANGE_EDGE;
    localparam integer EF = (ORDER == 1) ? RANGE_EDGE : DOPPLER_EDGE;
    // Window extents W_s, W_f, padded line P_f and padded lines P_s.
    localparam integer WS = 2 * HS + 1;
    localparam integer WF = 2 * HF + 1;
    localparam integer PF = LF + 2 * HF;
    localparam integer PS = LS + 2 * HS;
    // Input store mode: 0 = none (no circular axis), 1 = two lines (circular fast axis only), 2 = the map.
    localparam integer STORE = (ES == 3) ? 2 : (EF == 3) ? 1 : 0;
    localparam integer ST_DEPTH = (STORE == 2) ? LS * LF : (STORE == 1) ? 2 * LF : 1;
    localparam integer ST_AB = (ST_DEPTH > 1) ? $clog2(ST_DEPTH) : 1;
    // Counter widths.
    localparam integer QB = (PF > 1) ? $clog2(PF) : 1;
    localparam integer PB = (PS > 1) ? $clog2(PS) : 1;
    localparam integer JB = (LF > 1) ? $clog2(LF) : 1;
    localparam integer IB_S = (LS > 1) ? $clog2(LS) : 1;
    // Line-buffer word: 2H_s cells (at least one cell for the declaration).
    localparam integer LBW = (HS > 0) ? 2 * HS * IB : IB;
    // Statistic, product, rounding and comparison widths (as cfar_stream.v).
    localparam integer STAT_BITS = SUM_BITS;
    localparam integer ALPHA_BITS = $clog2(ALPHA_INT + 64'd1);
    localparam integer MUL_BITS = STAT_BITS + ALPHA_BITS + 1;
    localparam integer ROUND_DROP = (TRUNCATE_PARTIALS != 0) ? 0 : DROP_BITS;
    localparam integer RB = ((MUL_BITS > ROUND_DROP) ? MUL_BITS : ROUND_DROP) + 2;
    localparam integer XB = ((RB > THRESHOLD_BITS) ? RB : THRESHOLD_BITS) + 1;
    localparam integer CB = ((THRESHOLD_BITS > IB + THRESHOLD_FRAC_BITS) ? THRESHOLD_BITS
                                                                        : IB + THRESHOLD_FRAC_BITS) + 1;
    // Output word width W_in + W_T + 3.
    localparam integer OUT_BITS = IB + THRESHOLD_BITS + 3;
    localparam [RB-1:0] RND_ONE  = 1;
    localparam [RB-1:0] RND_HALF = (ROUNDING == 0) ? {RB{1'b0}} : ((RND_ONE << ROUND_DROP) >> 1);
    localparam [RB-1:0] RND_TIE  = (RND_ONE << ROUND_DROP) >> 1;
    localparam [RB-1:0] RND_MASK = (RND_ONE << ROUND_DROP) - RND_ONE;
    localparam [XB-1:0] T_ONE = 1;
    localparam [XB-1:0] T_MAX = (T_ONE << THRESHOLD_BITS) - T_ONE;
    // NAF digits of A as masks of positive and negative powers [Prodinger 2000].
    localparam [64:0] A_EXT   = ALPHA_INT;
    localparam [64:0] NAF_X3  = A_EXT + (A_EXT >> 1);
    localparam [64:0] NAF_NZ  = (A_EXT >> 1) ^ NAF_X3;
    localparam [64:0] NAF_POS = NAF_X3 & NAF_NZ;
    localparam [64:0] NAF_NEG = (A_EXT >> 1) & NAF_NZ;
    localparam [MUL_BITS-1:0] ALPHA_MUL = ALPHA_INT;
    localparam integer PAD_STAGES = (PIPELINE_STAGES > 4) ? PIPELINE_STAGES - 4 : 1;
    // Fields beside the datapath: {map start, line end, last of map, skip, window-valid, cut}.
    localparam integer SIDE_W = IB + 5;

    // Rectangles of the reference cells (docs/bit-true-2d.md section 3), in
    // window coordinates (Doppler row d0, range column r0, nd rows, nr
    // columns), up to four slots; PART 0 is the sum used by CA (all) or the
    // lagging half (GO/SO), PART 1 the leading half; NEG = subtracted.
    localparam integer GDD = 2 * GUARD_DOPPLER + 1;
    localparam integer RING = (WINDOW == 0) ? 1 : 0;
    localparam integer CA   = (KIND == 0) ? 1 : 0;
    localparam integer R0_D0 = RING ? 0 : HD;
    localparam integer R0_R0 = 0;
    localparam integer R0_ND = RING ? WD : 1;
    localparam integer R0_NR = RING ? (CA ? WR : HR) : REF_RANGE;
    localparam integer R0_NEG = 0;
    localparam integer R0_PART = 0;
    localparam integer R1_D0 = RING ? REF_DOPPLER : HD;
    localparam integer R1_R0 = RING ? REF_RANGE : HR + GUARD_RANGE + 1;
    localparam integer R1_ND = RING ? GDD : 1;
    localparam integer R1_NR = RING ? (CA ? 2 * GUARD_RANGE + 1 : GUARD_RANGE) : (CA ? REF_RANGE : 0);
    localparam integer R1_NEG = RING;
    localparam integer R1_PART = 0;
    localparam integer R2_D0 = RING ? 0 : (CA ? 0 : HD);
    localparam integer R2_R0 = RING ? HR + 1 : (CA ? HR : HR + GUARD_RANGE + 1);
    localparam integer R2_ND = RING ? (CA ? 0 : WD) : (CA ? REF_DOPPLER : 1);
    localparam integer R2_NR = RING ? HR : (CA ? 1 : REF_RANGE);
    localparam integer R2_NEG = 0;
    localparam integer R2_PART = CA ? 0 : 1;
    localparam integer R3_D0 = RING ? REF_DOPPLER : HD + GUARD_DOPPLER + 1;
    localparam integer R3_R0 = RING ? HR + 1 : HR;
    localparam integer R3_ND = RING ? (CA ? 0 : GDD) : (CA ? REF_DOPPLER : 0);
    localparam integer R3_NR = RING ? GUARD_RANGE : 1;
    localparam integer R3_NEG = RING;
    localparam integer R3_PART = CA ? 0 : 1;
    // Slots with cells; the same rectangles in stream axes (slow row s0, fast column f0).
    localparam integer R0_USED = (R0_ND > 0 && R0_NR > 0) ? 1 : 0;
    localparam integer R1_USED = (R1_ND > 0 && R1_NR > 0) ? 1 : 0;
    localparam integer R2_USED = (R2_ND > 0 && R2_NR > 0) ? 1 : 0;
    localparam integer R3_USED = (R3_ND > 0 && R3_NR > 0) ? 1 : 0;
    localparam integer R0_S0 = (ORDER == 1) ? R0_D0 : R0_R0;
    localparam integer R0_F0 = (ORDER == 1) ? R0_R0 : R0_D0;
    localparam integer R0_NS = (ORDER == 1) ? R0_ND : R0_NR;
    localparam integer R0_NF = (ORDER == 1) ? R0_NR : R0_ND;
    localparam integer R1_S0 = (ORDER == 1) ? R1_D0 : R1_R0;
    localparam integer R1_F0 = (ORDER == 1) ? R1_R0 : R1_D0;
    localparam integer R1_NS = (ORDER == 1) ? R1_ND : R1_NR;
    localparam integer R1_NF = (ORDER == 1) ? R1_NR : R1_ND;
    localparam integer R2_S0 = (ORDER == 1) ? R2_D0 : R2_R0;
    localparam integer R2_F0 = (ORDER == 1) ? R2_R0 : R2_D0;
    localparam integer R2_NS = (ORDER == 1) ? R2_ND : R2_NR;
    localparam integer R2_NF = (ORDER == 1) ? R2_NR : R2_ND;
    localparam integer R3_S0 = (ORDER == 1) ? R3_D0 : R3_R0;
    localparam integer R3_F0 = (ORDER == 1) ? R3_R0 : R3_D0;
    localparam integer R3_NS = (ORDER == 1) ? R3_ND : R3_NR;
    localparam integer R3_NF = (ORDER == 1) ? R3_NR : R3_ND;

    // ------------------------------------------------------------------
    // Illegal parameter combinations stop elaboration (`CFAR_MAP_STOP).
    // ------------------------------------------------------------------
    generate
        if (KIND == 3) begin : g_err_os
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__KIND_3_os_is_not_supported_by_the_map_core)
        end
        if (KIND < 0 || KIND > 3) begin : g_err_kind
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__KIND_must_be_0_ca_1_go_or_2_so)
        end
        if (ORDER < 0 || ORDER > 1) begin : g_err_order
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__ORDER_must_be_0_doppler_fast_or_1_range_fast)
        end
        if (WINDOW < 0 || WINDOW > 1) begin : g_err_window
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__WINDOW_must_be_0_ring_or_1_cross)
        end
        if (REF_RANGE < 0 || REF_DOPPLER < 0 || GUARD_RANGE < 0 || GUARD_DOPPLER < 0) begin : g_err_negative
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__REF_and_GUARD_extents_must_be_at_least_0)
        end
        if (REF_RANGE + REF_DOPPLER < 1) begin : g_err_no_ref
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__REF_RANGE_plus_REF_DOPPLER_must_be_at_least_1)
        end
        if (KIND != 0 && N_HALF < 1) begin : g_err_halves
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__GO_and_SO_need_non_empty_range_halves)
        end
        if (RANGE_CELLS < WR) begin : g_err_range_cells
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__RANGE_CELLS_below_the_window_range_extent)
        end
        if (DOPPLER_BINS < WD) begin : g_err_doppler_bins
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__DOPPLER_BINS_below_the_window_Doppler_extent)
        end
        if (RANGE_CELLS * DOPPLER_BINS > (1 << 24)) begin : g_err_map_cells
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__RANGE_CELLS_times_DOPPLER_BINS_above_2_to_the_24)
        end
        if (RANGE_EDGE != 0 && RANGE_EDGE != 1 && RANGE_EDGE != 3) begin : g_err_range_edge
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__RANGE_EDGE_must_be_0_skip_1_zero_pad_or_3_circular)
        end
        if (DOPPLER_EDGE != 0 && DOPPLER_EDGE != 1 && DOPPLER_EDGE != 3) begin : g_err_doppler_edge
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__DOPPLER_EDGE_must_be_0_skip_1_zero_pad_or_3_circular)
        end
        if (INPUT_BITS < 1 || INPUT_BITS > 32) begin : g_err_input_bits
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__INPUT_BITS_must_be_1_to_32)
        end
        if (SUM_BITS < PART_BITS) begin : g_err_sum_bits
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__SUM_BITS_below_bitlen_of_the_largest_part_sum)
        end
        if (ALPHA_INT == 64'd0) begin : g_err_alpha
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__ALPHA_INT_must_be_at_least_1)
        end
        if (DROP_BITS < 0) begin : g_err_drop_bits
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__DROP_BITS_must_be_at_least_0)
        end
        if (THRESHOLD_FRAC_BITS < 0) begin : g_err_threshold_frac_bits
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__THRESHOLD_FRAC_BITS_must_be_at_least_0)
        end
        if (THRESHOLD_BITS < 1) begin : g_err_threshold_bits
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__THRESHOLD_BITS_must_be_at_least_1)
        end
        if (ROUNDING < 0 || ROUNDING > 2) begin : g_err_rounding
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__ROUNDING_must_be_0_floor_1_half_up_or_2_half_even)
        end
        if (OVERFLOW < 0 || OVERFLOW > 1) begin : g_err_overflow
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__OVERFLOW_must_be_0_saturate_or_1_wrap)
        end
        if (COMPARE_GE < 0 || COMPARE_GE > 1) begin : g_err_compare
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__COMPARE_GE_must_be_0_or_1)
        end
        if (TRUNCATE_PARTIALS < 0 || TRUNCATE_PARTIALS > 1) begin : g_err_truncate
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__TRUNCATE_PARTIALS_must_be_0_or_1)
        end
        if (TRUNCATE_PARTIALS == 1 && ROUNDING != 0) begin : g_err_truncate_rounding
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__TRUNCATE_PARTIALS_needs_ROUNDING_0_floor)
        end
        if (PIPELINE_STAGES < 2) begin : g_err_stages
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__PIPELINE_STAGES_must_be_at_least_2)
        end
        if (SRST_LEVEL < 0 || SRST_LEVEL > 1) begin : g_err_srst_level
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__SRST_LEVEL_must_be_0_or_1)
        end
    endgenerate

    // ------------------------------------------------------------------
    // Handshake and the window-stream position
    // ------------------------------------------------------------------
    wire rst = (SRST_LEVEL != 0) ? srst : ~srst;

    reg  [PIPELINE_STAGES-1:0] valid_pipe_reg;
    reg  [OUT_BITS+1:0]        out_word_reg;   // {map start, line end, word}

    wire out_valid = valid_pipe_reg[PIPELINE_STAGES-1];
    // The whole pipeline moves unless a word waits at the output.
    wire advance   = ~out_valid | m_axis_tready;

    localparam [PB-1:0] P_LAST = PS - 1;
    localparam [QB-1:0] Q_LAST = PF - 1;

    // Map index along an axis of a padded position, wrapped once (circular; pads otherwise unused).
    function [JB-1:0] fast_index;
        input [QB-1:0] q;
        begin
            if (q < HF)           fast_index = q + LF - HF;
            else if (q >= HF + LF) fast_index = q - HF - LF;
            else                  fast_index = q - HF;
        end
    endfunction

    function [IB_S-1:0] slow_index;
        input [PB-1:0] p;
        begin
            if (p < HS)           slow_index = p + LS - HS;
            else if (p >= HS + LS) slow_index = p - HS - LS;
            else                  slow_index = p - HS;
        end
    endfunction

    // pos_reg: flags of the padded position (p, q), the entering cell of a step there:
    // {body_s, body_f, map's first cell, line end, line start, last step of the padded map,
    //  the CUT (map index (p - 2H_s, q - 2H_f)) is a map cell, and the CUT's fields
    //  {map start, line end, last of map, skip, window-valid}}.
    localparam integer PF_BITS = 12;

    // Store read address of a position: line base (bank or map line) plus the wrapped fast index.
    function [ST_AB-1:0] store_address;
        input [PB-1:0] p;
        input [QB-1:0] q;
        begin
            store_address = (STORE == 2) ? slow_index(p) * LF + fast_index(q) : fast_index(q);
        end
    endfunction

    // Padded position (p, q) of the next window-stream step, the one after it, and their flags
    // (registers, so that a simulator evaluates the position logic once per step).
    reg  [PB-1:0]         p_reg;
    reg  [QB-1:0]         q_reg;
    reg  [PB-1:0]         p_succ_reg;
    reg  [QB-1:0]         q_succ_reg;
    reg  [PF_BITS-1:0]    pos_reg;
    reg  [ST_AB-1:0]      st_addr_reg;       // store address of (p, q) without the line bank
    reg  [ST_AB-1:0]      st_addr_succ_reg;  // the same for the position after it
    reg  [PB-1:0]         p_n;
    reg  [QB-1:0]         q_n;
    reg  [PB-1:0]         p_2;
    reg  [QB-1:0]         q_2;
    reg                   fits_s;
    reg                   fits_f;
    reg                   range_fits;
    reg                   doppler_fits;
    reg                   cut_line_end;

    wire body_s       = pos_reg[11];
    wire body_f       = pos_reg[10];
    wire at_first     = pos_reg[9];
    wire line_end_pos = pos_reg[8];
    wire line_start   = pos_reg[7];
    wire last_pos     = pos_reg[6];
    wire cut_body     = pos_reg[5];

    // The step, and the cell entering the window stream at it.
    wire          step;
    wire [IB-1:0] enter_value;
    wire [WS*IB-1:0] column;

    // The CUT (row H_s of the column that entered H_f steps ago) and its fields, stage 1.
    reg [(HF+1)*IB-1:0] cut_pipe_reg;
    reg [4:0]           flags_reg;     // {map start, line end, last of map, skip, window-valid}

    always @(posedge clk) begin
        if (step) begin
            cut_pipe_reg <= {cut_pipe_reg[HF*IB+IB-1:0], column[HS*IB +: IB]};
            flags_reg    <= pos_reg[4:0];
        end
        // (p_n, q_n): the position after this clock; (p_2, q_2): the one after it.
        if (rst | step) begin
            p_n = rst ? {PB{1'b0}} : p_succ_reg;
            q_n = rst ? {QB{1'b0}} : q_succ_reg;
            if (q_n != Q_LAST) begin
                p_2 = p_n;
                q_2 = q_n + 1'b1;
            end else begin
                p_2 = (p_n != P_LAST) ? p_n + 1'b1 : {PB{1'b0}};
                q_2 = {QB{1'b0}};
            end
            p_reg      <= p_n;
            q_reg      <= q_n;
            p_succ_reg <= p_2;
            q_succ_reg <= q_2;
            // The window fits along an axis: H <= i <= L - 1 - H.
            fits_s       = (p_n >= 3 * HS) && (p_n <= LS - 1 + HS);
            fits_f       = (q_n >= 3 * HF) && (q_n <= LF - 1 + HF);
            range_fits   = (ORDER == 1) ? fits_f : fits_s;
            doppler_fits = (ORDER == 1) ? fits_s : fits_f;
            cut_line_end = (q_n == 2 * HF + LF - 1);
            pos_reg <= {(p_n >= HS) && (p_n < HS + LS), (q_n >= HF) && (q_n < HF + LF), (p_n == HS) && (q_n == HF),
                        (q_n == Q_LAST), (q_n == 0), (p_n == P_LAST) && (q_n == Q_LAST),
                        (p_n >= 2 * HS) && (p_n < 2 * HS + LS) && (q_n >= 2 * HF) && (q_n < 2 * HF + LF),
                        (p_n == 2 * HS) && (q_n == 2 * HF), cut_line_end, cut_line_end && (p_n == 2 * HS + LS - 1),
                        ((RANGE_EDGE == 0) & ~range_fits) | ((DOPPLER_EDGE == 0) & ~doppler_fits),
                        range_fits & (doppler_fits | (DOPPLER_EDGE == 3))};
            if (STORE != 0) begin
                st_addr_reg      <= rst ? store_address(p_n, q_n) : st_addr_succ_reg;
                st_addr_succ_reg <= store_address(p_2, q_2);
            end
        end
    end

    // ------------------------------------------------------------------
    // Input: straight into the window stream, or through a store
    // (docs/bit-true-2d.md section 9).
    // ------------------------------------------------------------------
    generate
        if (STORE == 0) begin : g_direct
            // A body step takes the offered cell; the first cell of a map must carry s_axis_tuser,
            // cells offered before it are taken and dropped. Pad steps need no input.
            wire body   = body_s & body_f;
            assign s_axis_tready = advance & body & ~rst;
            assign step = advance & ~rst & (~body | (s_axis_tvalid & (~at_first | s_axis_tuser)));
            assign enter_value = body ? s_axis_tdata : {IB{1'b0}};
        end else begin : g_store
            reg [IB-1:0]    st_mem [0:ST_DEPTH-1];
            reg [IB-1:0]    st_rd_reg;         // the store cell at the read address of the current position
            reg [ST_AB-1:0] wr_addr_reg;       // next write address
            reg [JB-1:0]    wj_reg;            // fast index of the next cell written
            reg [IB_S-1:0]  wi_reg;            // slow index of the next cell written
            wire            write_ok;          // the store can take a cell
            wire            read_ok;           // the cells of the current step are in the store
            wire [ST_AB-1:0] rd_addr_next;     // read address of the position after this clock
            wire            w_first = (wi_reg == {IB_S{1'b0}}) && (wj_reg == {JB{1'b0}});
            wire            w_take;
            wire            w_line_end = (wj_reg == LF - 1);
            wire            w_map_end  = w_line_end && (wi_reg == LS - 1);

            assign s_axis_tready = write_ok & ~rst;
            // A taken cell is stored unless it is dropped while a map start is awaited.
            assign w_take = s_axis_tvalid & s_axis_tready & (~w_first | s_axis_tuser);
            assign step   = advance & ~rst & read_ok;

            if (STORE == 1) begin : g_lines
                // Two line stores (ping-pong): line k in bank k mod 2. Lines written and lines read,
                // modulo 4; the write side may run at most two lines ahead of the line being read.
                reg [1:0] wseq_reg;
                reg [1:0] wseq_d_reg;          // one clock late: a line counted here is readable
                reg [1:0] rdone_reg;
                wire [1:0] ahead = wseq_reg - rdone_reg;
                assign write_ok = (ahead != 2'd2);
                assign read_ok  = ~body_s | (wseq_d_reg != rdone_reg);
                wire       rd_line_end = step & body_s & line_end_pos;
                wire [1:0] rdone_next = rd_line_end ? rdone_reg + 2'd1 : rdone_reg;
                wire [ST_AB-1:0] bank_base = rdone_next[0] ? LF : 0;
                assign rd_addr_next = bank_base + (step ? st_addr_succ_reg : st_addr_reg);
                assign enter_value  = body_s ? st_rd_reg : {IB{1'b0}};
                always @(posedge clk) begin
                    if (rst) begin
                        wseq_reg   <= 2'd0;
                        wseq_d_reg <= 2'd0;
                        rdone_reg  <= 2'd0;
                    end else begin
                        wseq_d_reg <= wseq_reg;
                        if (w_take & w_line_end) wseq_reg <= wseq_reg + 2'd1;
                        rdone_reg <= rdone_next;
                    end
                end
                always @(posedge clk) begin
                    if (rst) begin
                        wr_addr_reg <= {ST_AB{1'b0}};
                    end else if (w_take) begin
                        wr_addr_reg <= w_line_end ? (wseq_reg[0] ? 0 : LF) : wr_addr_reg + 1'b1;
                    end
                end
            end else begin : g_map
                // The whole map: written while not full, replayed through the window stream once full.
                reg filled_reg;
                reg filled_d_reg;              // one clock late: the map is readable
                assign write_ok = ~filled_reg;
                assign read_ok  = filled_reg & filled_d_reg;
                assign rd_addr_next = step ? st_addr_succ_reg : st_addr_reg;
                assign enter_value  = (body_f | (EF == 3)) ? st_rd_reg : {IB{1'b0}};
                always @(posedge clk) begin
                    if (rst) begin
                        filled_reg   <= 1'b0;
                        filled_d_reg <= 1'b0;
                        wr_addr_reg  <= {ST_AB{1'b0}};
                    end else begin
                        filled_d_reg <= filled_reg;
                        if (w_take) wr_addr_reg <= w_map_end ? {ST_AB{1'b0}} : wr_addr_reg + 1'b1;
                        if (w_take & w_map_end) filled_reg <= 1'b1;
                        else if (step && last_pos) filled_reg <= 1'b0;
                    end
                end
            end

            // The store RAM: one write port, one synchronous read port. It is read at a step (the cell of
            // the next position) and while the cells of the current one are not in the store yet (so the
            // read that follows the last write is fresh); otherwise the word read last is still right.
            always @(posedge clk) begin
                if (w_take) st_mem[wr_addr_reg] <= s_axis_tdata;
                if (step | ~read_ok) st_rd_reg <= st_mem[rd_addr_next];
                if (rst) begin
                    wj_reg <= {JB{1'b0}};
                    wi_reg <= {IB_S{1'b0}};
                end else if (w_take) begin
                    wj_reg <= w_line_end ? {JB{1'b0}} : wj_reg + 1'b1;
                    if (w_line_end) wi_reg <= w_map_end ? {IB_S{1'b0}} : wi_reg + 1'b1;
                end
            end
        end
    endgenerate

    // ------------------------------------------------------------------
    // Line buffers: one RAM of P_f words, word q holding fast position q of
    // the 2H_s padded lines before the current one (oldest at the LSBs).
    // Each step reads the word of its position (prefetched one clock
    // ahead) and writes it back with the oldest cell dropped and the
    // entering cell added. The entering column: {enter, word}, row 0 the
    // oldest line.
    // ------------------------------------------------------------------
    generate
        if (HS > 0) begin : g_line_buffers
            reg  [LBW-1:0] lb_mem [0:PF-1];
            reg  [LBW-1:0] lb_rd_reg;
            wire [LBW-1:0] lb_word;
            assign column = {enter_value, lb_word};
            // Read at a step only: without a step nothing is written, and after a reset the word read
            // last feeds only the rows of lines before the map, which no CUT of a map cell sees.
            always @(posedge clk) begin
                if (step) begin
                    lb_mem[q_reg] <= column[WS*IB-1:IB];
                    lb_rd_reg     <= lb_mem[q_succ_reg];
                end
            end
            if (PF == 1) begin : g_forward
                // A one-cell padded line reads the word it writes: forward it.
                reg [LBW-1:0] lb_fwd_reg;
                reg           lb_fwd_on_reg;
                always @(posedge clk) begin
                    lb_fwd_on_reg <= step;
                    if (step) lb_fwd_reg <= column[WS*IB-1:IB];
                end
                assign lb_word = lb_fwd_on_reg ? lb_fwd_reg : lb_rd_reg;
            end else begin : g_no_forward
                assign lb_word = lb_rd_reg;
            end
        end else begin : g_no_line_buffers
            assign column = enter_value;
        end
    endgenerate

    // ------------------------------------------------------------------
    // Running rectangle sums (one cfar_map_rect per used slot).
    // ------------------------------------------------------------------
    wire [SUM_BITS-1:0] box0;
    wire [SUM_BITS-1:0] box1;
    wire [SUM_BITS-1:0] box2;
    wire [SUM_BITS-1:0] box3;

    generate
        if (R0_USED) begin : g_rect0
            cfar_map_rect #(.CELL_BITS(IB), .ROWS(WS), .COLS(WF), .ROW0(R0_S0), .NROWS(R0_NS), .COL0(R0_F0),
                            .NCOLS(R0_NF), .SUM_BITS(SUM_BITS), .LINE_CELLS(PF), .QBITS(QB), .PBITS(PB))
                u_rect (.clk(clk), .step(step), .line_start(line_start), .p(p_reg), .q(q_reg),
                        .q_next(q_succ_reg), .column(column), .box(box0));
        end else begin : g_no_rect0
            assign box0 = {SUM_BITS{1'b0}};
        end
        if (R1_USED) begin : g_rect1
            cfar_map_rect #(.CELL_BITS(IB), .ROWS(WS), .COLS(WF), .ROW0(R1_S0), .NROWS(R1_NS), .COL0(R1_F0),
                            .NCOLS(R1_NF), .SUM_BITS(SUM_BITS), .LINE_CELLS(PF), .QBITS(QB), .PBITS(PB))
                u_rect (.clk(clk), .step(step), .line_start(line_start), .p(p_reg), .q(q_reg),
                        .q_next(q_succ_reg), .column(column), .box(box1));
        end else begin : g_no_rect1
            assign box1 = {SUM_BITS{1'b0}};
        end
        if (R2_USED) begin : g_rect2
            cfar_map_rect #(.CELL_BITS(IB), .ROWS(WS), .COLS(WF), .ROW0(R2_S0), .NROWS(R2_NS), .COL0(R2_F0),
                            .NCOLS(R2_NF), .SUM_BITS(SUM_BITS), .LINE_CELLS(PF), .QBITS(QB), .PBITS(PB))
                u_rect (.clk(clk), .step(step), .line_start(line_start), .p(p_reg), .q(q_reg),
                        .q_next(q_succ_reg), .column(column), .box(box2));
        end else begin : g_no_rect2
            assign box2 = {SUM_BITS{1'b0}};
        end
        if (R3_USED) begin : g_rect3
            cfar_map_rect #(.CELL_BITS(IB), .ROWS(WS), .COLS(WF), .ROW0(R3_S0), .NROWS(R3_NS), .COL0(R3_F0),
                            .NCOLS(R3_NF), .SUM_BITS(SUM_BITS), .LINE_CELLS(PF), .QBITS(QB), .PBITS(PB))
                u_rect (.clk(clk), .step(step), .line_start(line_start), .p(p_reg), .q(q_reg),
                        .q_next(q_succ_reg), .column(column), .box(box3));
        end else begin : g_no_rect3
            assign box3 = {SUM_BITS{1'b0}};
        end
    endgenerate

    // ------------------------------------------------------------------
    // The CUT and its fields: the CUT is row H_s of the column that
    // entered H_f steps ago; its map index (i, j) = (p - 2H_s, q - 2H_f) of
    // the entering position. Registered at the step (stage 1, beside the sums).
    // ------------------------------------------------------------------
    // (cut_pipe_reg and flags_reg are loaded in the position block above.)

    // ------------------------------------------------------------------
    // Datapath functions (the arithmetic of cfar_stream.v after S)
    // ------------------------------------------------------------------
    // Noise statistic S (docs/bit-true-2d.md section 4): the signed sums of
    // each part's rectangles modulo 2^SUM_BITS, then CA: the sum, GO: the
    // larger, SO: the smaller of the two range halves.
    function [STAT_BITS-1:0] noise_statistic;
        input [SUM_BITS-1:0] b0;
        input [SUM_BITS-1:0] b1;
        input [SUM_BITS-1:0] b2;
        input [SUM_BITS-1:0] b3;
        reg   [SUM_BITS-1:0] pa;
        reg   [SUM_BITS-1:0] pb;
        begin
            pa = R0_NEG ? -b0 : b0;
            pb = {SUM_BITS{1'b0}};
            if (R1_NEG) pa = pa - b1; else pa = pa + b1;
            if (R2_PART == 0) pa = pa + b2; else pb = pb + b2;
            if (R3_PART == 0) begin
                if (R3_NEG) pa = pa - b3; else pa = pa + b3;
            end else begin
                if (R3_NEG) pb = pb - b3; else pb = pb + b3;
            end
            if (KIND == 0)      noise_statistic = pa;
            else if (KIND == 1) noise_statistic = (pa >= pb) ? pa : pb;
            else                noise_statistic = (pa <= pb) ? pa : pb;
        end
    endfunction

    // Product S * A, or the truncated shift-and-add of A's NAF digits (docs/bit-true.md section 5).
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

    // Rounding, overflow, decision, skip and word packing (docs/bit-true.md sections 5-8,
    // docs/bit-true-2d.md section 7). side = {map start, line end, last, skip, valid, cut};
    // the result is {map start, line end, word}.
    function [OUT_BITS+1:0] output_word;
        input [MUL_BITS-1:0] prod;
        input [SIDE_W-1:0]   side;
        reg   [RB-1:0]             rnd;
        reg   [XB-1:0]             t0;
        reg   [THRESHOLD_BITS-1:0] t;
        reg   [CB-1:0]             c_cmp;
        reg                        det;
        begin
            rnd = prod;
            t0  = (rnd + RND_HALF) >> ROUND_DROP;
            if (ROUNDING == 2 && ROUND_DROP > 0) begin
                if ((rnd & RND_MASK) == RND_TIE && t0[0]) t0 = t0 - T_ONE;
            end
            if (OVERFLOW == 0 && t0 > T_MAX) t = T_MAX[THRESHOLD_BITS-1:0];
            else                             t = t0[THRESHOLD_BITS-1:0];
            c_cmp = side[IB-1:0];
            det   = (COMPARE_GE != 0) ? ((c_cmp << THRESHOLD_FRAC_BITS) >= t)
                                      : ((c_cmp << THRESHOLD_FRAC_BITS) > t);
            if (side[IB+1]) begin
                t   = {THRESHOLD_BITS{1'b0}};
                det = 1'b0;
            end
            output_word = {side[IB+4:IB+2], side[IB], det, t, side[IB-1:0]};
        end
    endfunction

    // Valid bits of all stages: a word is formed at a step whose CUT is a map cell. A data stage
    // loads only when the word entering it is valid (a clock enable; it saves a simulator the
    // arithmetic of the pad steps and bubbles).
    wire form_valid_next = step & cut_body;
    wire [PIPELINE_STAGES-1:0] valid_in_ext = form_valid_next;

    always @(posedge clk) begin
        if (rst) begin
            valid_pipe_reg <= {PIPELINE_STAGES{1'b0}};
        end else if (advance) begin
            valid_pipe_reg <= (valid_pipe_reg << 1) | valid_in_ext;
        end
    end

    wire [SIDE_W-1:0] f_side = {flags_reg, cut_pipe_reg[HF*IB +: IB]};

    reg [STAT_BITS-1:0]           stat_reg;
    reg [SIDE_W-1:0]              stat_side_reg;
    reg [MUL_BITS-1:0]            mul_reg;
    reg [SIDE_W-1:0]              mul_side_reg;
    reg [PAD_STAGES*(OUT_BITS+2)-1:0] pad_reg;

    generate
        if (PIPELINE_STAGES <= 2) begin : g_out_direct
            always @(posedge clk) begin
                if (advance && valid_pipe_reg[0])
                    out_word_reg <= output_word(scaled_product(noise_statistic(box0, box1, box2, box3)), f_side);
            end
        end else begin : g_out_staged
            if (PIPELINE_STAGES == 3) begin : g_mul_from_sums
                always @(posedge clk) begin
                    if (advance && valid_pipe_reg[0]) begin
                        mul_reg      <= scaled_product(noise_statistic(box0, box1, box2, box3));
                        mul_side_reg <= f_side;
                    end
                end
            end else begin : g_stat_then_mul
                always @(posedge clk) begin
                    if (advance && valid_pipe_reg[0]) begin
                        stat_reg      <= noise_statistic(box0, box1, box2, box3);
                        stat_side_reg <= f_side;
                    end
                    if (advance && valid_pipe_reg[1]) begin
                        mul_reg       <= scaled_product(stat_reg);
                        mul_side_reg  <= stat_side_reg;
                    end
                end
            end
            if (PIPELINE_STAGES <= 4) begin : g_out_from_mul
                always @(posedge clk) begin
                    if (advance && valid_pipe_reg[PIPELINE_STAGES-2]) out_word_reg <= output_word(mul_reg, mul_side_reg);
                end
            end else begin : g_out_from_pads
                always @(posedge clk) begin
                    if (advance) begin
                        pad_reg      <= (pad_reg << (OUT_BITS + 2)) | output_word(mul_reg, mul_side_reg);
                        out_word_reg <= pad_reg[PAD_STAGES*(OUT_BITS+2)-1 -: OUT_BITS+2];
                    end
                end
            end
        end
    endgenerate

    assign m_axis_tvalid = out_valid;
    assign m_axis_tdata  = out_word_reg[OUT_BITS-1:0];
    assign m_axis_tlast  = out_word_reg[OUT_BITS];
    assign m_axis_tuser  = out_word_reg[OUT_BITS+1];

endmodule

// cfar_map_rect: the running sum of one rectangle of the window (rows
// ROW0 .. ROW0+NROWS-1 of the slow axis, columns COL0 .. COL0+NCOLS-1 of
// the fast axis), docs/bit-true-2d.md section 3. At each step the column
// sum of the rectangle's rows in the entering column (formed from the one
// at the same fast position a line before: plus the new last row, minus
// the top row, one RAM word per padded-line cell) enters a shift
// register (newest at the LSBs; entry k is window column COLS-1-k, entry
// COLS-COL0 the column that just left the rectangle's range), and
// box <- box + (column sum now entering the rectangle) - (the one leaving),
// modulo 2^SUM_BITS. At the first step of a padded line the register is
// cleared: the columns of the line before count as 0, which no CUT of a
// map cell ever sees (its window lies in one padded line), so no reset is
// needed and garbage left in the line buffers by a reset never reaches a word.
module cfar_map_rect #(
    // Width of one cell in bits, >= 1.
    parameter integer CELL_BITS = 16,
    // Rows (slow axis) and columns (fast axis) of the window.
    parameter integer ROWS = 5,
    parameter integer COLS = 5,
    // First row and number of rows of the rectangle, NROWS >= 1.
    parameter integer ROW0 = 0,
    parameter integer NROWS = 5,
    // First column and number of columns of the rectangle, NCOLS >= 1.
    parameter integer COL0 = 0,
    parameter integer NCOLS = 5,
    // Width of the sums.
    parameter integer SUM_BITS = 20,
    // Cells of a padded line P_f (the column-sum RAM's depth), and the bits of a position in it.
    parameter integer LINE_CELLS = 16,
    parameter integer QBITS = 4,
    // Bits of a padded line index.
    parameter integer PBITS = 4
) (
    input  wire                      clk,
    // Shift the entering column in at this clock edge.
    input  wire                      step,
    // The step is the first of a padded line.
    input  wire                      line_start,
    // Padded line of the step (0 at the first line of each map's padded map).
    input  wire [PBITS-1:0]          p,
    // Position of the step in its padded line, and of the step after it.
    input  wire [QBITS-1:0]          q,
    input  wire [QBITS-1:0]          q_next,
    // The entering column, row r in [r*CELL_BITS +: CELL_BITS], row 0 the oldest line.
    input  wire [ROWS*CELL_BITS-1:0] column,
    // The rectangle's sum modulo 2^SUM_BITS after the last step.
    output wire [SUM_BITS-1:0]       box
);

    // Entries of the column-sum register: window columns COLS-1 down to COL0, and the one that left.
    localparam integer LEN = COLS - COL0 + 1;
    localparam integer SB = SUM_BITS;
    // Entry of the column sum entering the rectangle (unused when it is the entering column).
    localparam integer ENTER_POS = (COL0 + NCOLS == COLS) ? 0 : COLS - COL0 - NCOLS - 1;
    // Entry of the column sum leaving it.
    localparam integer LEAVE_POS = COLS - COL0 - 1;

    generate
        if (ROW0 < 0 || NROWS < 1 || ROW0 + NROWS > ROWS || COL0 < 0 || NCOLS < 1 || COL0 + NCOLS > COLS)
        begin : g_err_rect
            `CFAR_MAP_STOP(cfar_map_PARAMETER_ERROR__rect_outside_the_window)
        end
    endgenerate

    reg [LEN*SB-1:0] cs_reg;
    reg [SB-1:0]     box_reg;

    // Column sums, formed line by line: word q of vs_mem holds, for fast position q, the sum of the
    // rectangle's rows of the column there without its top row (ROW0), which is the sum of all rows but
    // the last of the next line's column (the line buffers move every cell up one row a line). Only cells
    // of lines of this map's padded map count: the new last row from padded line ADD_FROM on, the top row
    // taken off from line SUB_FROM on, nothing carried into line 0. From padded line 2H_s = ROWS - 1 on
    // every row is such a cell and the sum is exact; before, it is the sum of those rows that are, and
    // whatever a reset or the map before left in the line buffers never enters it.
    localparam integer ADD_FROM = ROWS - ROW0 - NROWS;
    localparam integer SUB_FROM = ROWS - 1 - ROW0;
    reg [SB-1:0] vs_mem [0:LINE_CELLS-1];
    reg [SB-1:0] vs_rd_reg;
    reg [SB-1:0] cs_in;
    reg [SB-1:0] cs_top;
    reg [SB-1:0] cs_enter;
    always @(posedge clk) begin
        if (step) begin
            cs_in  = (p == {PBITS{1'b0}}) ? {SB{1'b0}} : vs_rd_reg;
            if (p >= ADD_FROM) cs_in = cs_in + column[(ROW0+NROWS-1)*CELL_BITS +: CELL_BITS];
            cs_top = (p >= SUB_FROM) ? column[ROW0*CELL_BITS +: CELL_BITS] : {SB{1'b0}};
            vs_mem[q] <= cs_in - cs_top;
            // Read one step ahead (a one-cell line reads the word it writes: forward it).
            vs_rd_reg <= (LINE_CELLS == 1) ? cs_in - cs_top : vs_mem[q_next];
            if (line_start) begin
                cs_reg  <= {{((LEN-1)*SB){1'b0}}, cs_in};
                box_reg <= (COL0 + NCOLS == COLS) ? cs_in : {SB{1'b0}};
            end else begin
                cs_enter = (COL0 + NCOLS == COLS) ? cs_in : cs_reg[ENTER_POS*SB +: SB];
                cs_reg  <= {cs_reg[(LEN-1)*SB-1:0], cs_in};
                box_reg <= box_reg + cs_enter - cs_reg[LEAVE_POS*SB +: SB];
            end
        end
    end

    assign box = box_reg;

endmodule
`undef CFAR_MAP_STOP
`default_nettype wire
