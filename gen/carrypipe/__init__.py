"""carrypipe: pipelined arithmetic units as synthesizable Verilog."""

__version__ = "0.1.0"
