`timescale 1ns/1ps
`default_nettype none
// cfar_pipe_delay: DEPTH register stages of a data word with its valid bit,
// all moving together when `en` is high (a stall-as-a-whole pipeline).
// DEPTH = 0 is a plain wire. Valid bits are reset; data registers are not
// (their content only matters while the matching valid bit is set).
module cfar_pipe_delay #(
    // Width of the data word carried beside the valid bit.
    parameter integer WIDTH = 1,
    // Number of register stages (0 = pass through).
    parameter integer DEPTH = 1
) (
    input  wire             clk,
    // Synchronous reset of the valid bits, active high.
    input  wire             rst,
    // Advance enable: every stage loads from the one before it.
    input  wire             en,
    input  wire             in_valid,
    input  wire [WIDTH-1:0] in_data,
    output wire             out_valid,
    output wire [WIDTH-1:0] out_data
);

    generate
        if (DEPTH < 0) begin : g_bad_depth
            cfar_pipe_delay_PARAMETER_ERROR__DEPTH_must_be_at_least_0 u_stop ();
        end

        if (DEPTH <= 0) begin : g_wire
            assign out_valid = in_valid;
            assign out_data  = in_data;
        end else begin : g_regs
            reg  [DEPTH-1:0]       valid_reg;
            reg  [DEPTH*WIDTH-1:0] data_reg;
            // Inputs zero-extended to the chain width (no zero-width replication).
            wire [DEPTH-1:0]       valid_in_ext = in_valid;
            wire [DEPTH*WIDTH-1:0] data_in_ext  = in_data;
            // Packed shift: the newest word enters at the least significant end.
            wire [DEPTH-1:0]       valid_next = (valid_reg << 1) | valid_in_ext;
            wire [DEPTH*WIDTH-1:0] data_next  = (data_reg << WIDTH) | data_in_ext;

            always @(posedge clk) begin
                if (rst) begin
                    valid_reg <= {DEPTH{1'b0}};
                end else if (en) begin
                    valid_reg <= valid_next;
                end
            end

            always @(posedge clk) begin
                if (en) begin
                    data_reg <= data_next;
                end
            end

            assign out_valid = valid_reg[DEPTH-1];
            assign out_data  = data_reg[DEPTH*WIDTH-1 -: WIDTH];
        end
    endgenerate

endmodule
`default_nettype wire
