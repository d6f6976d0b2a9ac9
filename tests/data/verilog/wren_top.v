// A hand-written netlist for the invented "wren" library: every construct the reader takes.
`timescale 1ns/1ps
module pair (a, y);
  input a;
  output y;
  wire mid;
  inv_w u1 (.A(a), .Y(mid));
  inv_w u2 (.A(mid), .Y(y));
endmodule

/* the top module:
   hierarchy, buses, an escaped name, assigns and a constant */
module wren_top (clk, din, dout);
  input clk;
  input [2:0] din;
  output [1:0] dout;
  wire [3:0] bus;
  wire \odd[0].name ;
  wire n1, alias;
  inv_w i0 (.A(din[0]), .Y(bus[0]));
  nand_w i1 (.A(din[1]), .B(1'b1), .Y(\odd[0].name ));
  pair \sub[1].p (.a(\odd[0].name ), .y(n1));
  assign alias = n1;
  assign dout = {bus[0], alias};
  ram_w ram0 (.addr({din[2], bus[1:0]}),
              .dout(bus[3:2]),
              .clk(clk));
  nand_w i2 (.A(bus[3]), .B(bus[2]), .Y());
endmodule
