`timescale 1ns/1ps
`default_nettype none
// A wrapper whose every port name starts with an underscore (legal: IEEE Std 1364-2005, 3.7).
module _wrap #(
    parameter integer INPUT_BITS = 16, parameter integer REF_CELLS = 16, parameter integer GUARD_CELLS = 2,
    parameter integer KIND = 0, parameter integer OS_RANK = 1, parameter integer EDGE = 0,
    parameter integer MAX_FRAME_LENGTH = 256, parameter integer SUM_BITS = 20,
    parameter [63:0] ALPHA_INT = 64'd2212, parameter integer DROP_BITS = 12,
    parameter integer THRESHOLD_FRAC_BITS = 0, parameter integer THRESHOLD_BITS = 21,
    parameter integer ROUNDING = 1, parameter integer OVERFLOW = 0, parameter integer COMPARE_GE = 0,
    parameter integer TRUNCATE_PARTIALS = 0, parameter integer PIPELINE_STAGES = 2, parameter integer SRST_LEVEL = 1
) (
    input  wire _clk, input wire _rst,
    input  wire [INPUT_BITS-1:0] _din, input wire _din_valid, output wire _din_ready, input wire _din_last,
    output wire [INPUT_BITS+THRESHOLD_BITS+2:0] _dout, output wire _dout_valid, input wire _dout_ready,
    output wire _dout_last
);
    cfar_stream #(.INPUT_BITS(INPUT_BITS), .REF_CELLS(REF_CELLS), .GUARD_CELLS(GUARD_CELLS), .KIND(KIND),
        .OS_RANK(OS_RANK), .EDGE(EDGE), .MAX_FRAME_LENGTH(MAX_FRAME_LENGTH), .SUM_BITS(SUM_BITS), .ALPHA_INT(ALPHA_INT), .DROP_BITS(DROP_BITS),
        .THRESHOLD_FRAC_BITS(THRESHOLD_FRAC_BITS), .THRESHOLD_BITS(THRESHOLD_BITS), .ROUNDING(ROUNDING),
        .OVERFLOW(OVERFLOW), .COMPARE_GE(COMPARE_GE), .TRUNCATE_PARTIALS(TRUNCATE_PARTIALS),
        .PIPELINE_STAGES(PIPELINE_STAGES), .SRST_LEVEL(SRST_LEVEL))
      u_core (.clk(_clk), .srst(_rst), .s_axis_tdata(_din), .s_axis_tvalid(_din_valid), .s_axis_tready(_din_ready),
              .s_axis_tlast(_din_last), .m_axis_tdata(_dout), .m_axis_tvalid(_dout_valid),
              .m_axis_tready(_dout_ready), .m_axis_tlast(_dout_last));
endmodule
