"""The FPGA devices `fit` can place and route for: capacity, tool arguments, cell names.

Capacities are the vendors' published logic-cell and flip-flop counts (Lattice iCE40 LP/HX
and UltraPlus family data sheets, ECP5 family data sheet; they match the totals nextpnr
reports as available).  Each device names the next larger one, so a candidate that does not
fit can point to a device it would fit.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Family:
    """What one FPGA family's flow needs: the Yosys pass, the nextpnr tool, cell type names."""

    name: str
    synth: str  # Yosys script command
    pnr: str  # nextpnr binary (system) name; the wheel is "yowasp-" + this
    lut: str  # LUT cell type after synthesis
    carry: str  # carry cell type after synthesis
    ff_prefix: str  # flip-flop cell types start with this
    logic_bel: str  # nextpnr resource holding the LUTs (the capacity that runs out)
    ff_bel: str  # nextpnr resource holding the flip-flops
    pnr_extra: tuple[str, ...] = ()


ICE40 = Family("ice40", "synth_ice40", "nextpnr-ice40", "SB_LUT4", "SB_CARRY", "SB_DFF",
               "ICESTORM_LC", "ICESTORM_LC")
# No pins are needed out of context: no IO buffers, no global clock routing.  The static
# placer: on ECP5-85F it lifted the best 256-bit prefix unit from 356 to 372 MHz (median of
# seeds 1-3) and narrowed the seeds' spread at 64 bits (docs/modes.md, "Measured").
ECP5 = Family("ecp5", "synth_ecp5", "nextpnr-ecp5", "LUT4", "CCU2C", "TRELLIS_FF",
              "TRELLIS_COMB", "TRELLIS_FF", ("--out-of-context", "--placer", "static"))


@dataclass(frozen=True)
class Device:
    name: str
    family: Family
    args: tuple[str, ...]  # nextpnr arguments selecting the part, package and speed grade
    logic_cells: int  # LUT4 sites (iCE40: logic cells, each LUT4 + flip-flop + carry)
    flip_flops: int
    part: str  # the vendor's part name, for reports
    larger: str | None  # the next device in this table with more room

    @property
    def pnr_args(self) -> tuple[str, ...]:
        return self.args + self.family.pnr_extra


DEVICES = {d.name: d for d in (
    Device("ice40-up5k", ICE40, ("--up5k", "--package", "sg48"), 5280, 5280,
           "iCE40UP5K-SG48", "ice40-hx8k"),
    Device("ice40-hx8k", ICE40, ("--hx8k", "--package", "ct256"), 7680, 7680,
           "iCE40HX8K-CT256", "ecp5-25k"),
    Device("ecp5-25k", ECP5, ("--25k", "--package", "CABGA256", "--speed", "6"), 24288, 24288,
           "LFE5U-25F-6BG256", "ecp5-85k"),
    Device("ecp5-85k", ECP5, ("--85k", "--package", "CABGA381", "--speed", "6"), 83640, 83640,
           "LFE5U-85F-6BG381", None),
)}


def get(name: str) -> Device:
    """The device called `name` (KeyError when the table has none)."""
    return DEVICES[name]


def room_for(device: Device, logic: int, flip_flops: int) -> Device | None:
    """The first device from `device` upwards with room for this many LUT sites and flip-flops."""
    d: Device | None = device
    while d is not None:
        if logic <= d.logic_cells and flip_flops <= d.flip_flops:
            return d
        d = DEVICES[d.larger] if d.larger else None
    return None
