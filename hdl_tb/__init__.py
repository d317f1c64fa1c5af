"""Reference Verilog core, testbench generator and co-simulation runner."""
