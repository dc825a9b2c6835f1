"""The FPGA devices `fit` can place and route for: capacity, tool arguments, cell names, pins.

Capacities are the vendors' published LUT and flip-flop counts where they match what nextpnr
reports as available (Lattice iCE40 LP/HX and UltraPlus, ECP5 and MachXO2 family data sheets;
Gowin GW1NR-9 data sheet), else nextpnr's own count (Nexus LIFCL-40: the `OXIDE_COMB` and
`OXIDE_FF` sites of its `--report`).  Each device names the next larger one, so a candidate
that does not fit can point to a device it would fit.

Every family runs from a pip wheel (`yowasp-nextpnr-*`).  Where nextpnr cannot place a
design out of context and wants every IO located (Gowin, Nexus), the measurement harness's
three pins (`clk`, `harness_si`, `harness_so`) get package sites from `Device.pins`.
"""

from __future__ import annotations

from dataclasses import dataclass

# The three pins of the measurement harness (see harness.py), in the order of Device.pins.
HARNESS_PINS = ("clk", "harness_si", "harness_so")


@dataclass(frozen=True)
class Family:
    """What one FPGA family's flow needs: the Yosys pass, the nextpnr tool, cell type names."""

    name: str
    synth: str  # Yosys script command
    pnr: str  # nextpnr binary (system) name; the wheel is "yowasp-" + this
    luts: tuple[str, ...]  # LUT cell types after synthesis
    carry: str  # carry cell type after synthesis
    carry_bits: int  # adder bits per carry cell
    ff_prefix: str  # flip-flop cell types start with this
    logic_bel: str  # nextpnr resource holding the LUTs (the capacity that runs out)
    pnr_extra: tuple[str, ...] = ()
    pin_file: str = ""  # "", "cst" (Gowin `IO_LOC`) or "pdc" (Lattice `ldc_set_location`)
    freq_mhz: int = 500  # the constraint nextpnr optimizes for: above any reachable figure
    # Nexus: nextpnr 0.11 refuses a carry chain whose first CCU2 has its CIN tied to a
    # constant, which synth_nexus gives every `+`; the flow unties it (see toolflow.py).
    untie_carry_in: bool = False


ICE40 = Family("ice40", "synth_ice40", "nextpnr-ice40", ("SB_LUT4",), "SB_CARRY", 1, "SB_DFF",
               "ICESTORM_LC")
# No pins are needed out of context: no IO buffers, no global clock routing.  The static
# placer: on ECP5-85F it lifted the best 256-bit prefix unit from 356 to 372 MHz (median of
# seeds 1-3) and narrowed the seeds' spread at 64 bits (docs/modes.md, "Measured").
ECP5 = Family("ecp5", "synth_ecp5", "nextpnr-ecp5", ("LUT4",), "CCU2C", 2, "TRELLIS_FF",
              "TRELLIS_COMB", ("--out-of-context", "--placer", "static"))
# MachXO2 places its three IOs by itself (no pin file needed).
MACHXO2 = Family("machxo2", "synth_lattice -family xo2", "nextpnr-machxo2", ("LUT4",), "CCU2D",
                 2, "TRELLIS_FF", "TRELLIS_COMB")
# Gowin without wide-LUT muxes (MUX2_LUT5-8): with them nextpnr-himbaechel-gowin 0.11 timed a
# one-stage 16-bit Kogge-Stone at 351 MHz over a one-LUT path (the fabric figure is 360 MHz);
# with LUT4s only, 91 MHz over 9 logic steps (docs/fit.md).
GOWIN = Family("gowin", "synth_gowin -nowidelut", "nextpnr-himbaechel-gowin",
               ("LUT1", "LUT2", "LUT3", "LUT4"), "ALU", 1, "DFF", "LUT4", pin_file="cst")
# Nexus reaches about 1 GHz register -> LUT -> register in the harness (docs/fit.md): the
# constraint sits higher.  router1: nextpnr-nexus's default router2 failed on every seed to
# route the clock pad to its DCC once a design had more than about 100 flip-flops.
NEXUS = Family("nexus", "synth_nexus", "nextpnr-nexus", ("LUT4",), "CCU2", 2, "FD1P3",
               "OXIDE_COMB", ("--router", "router1"), pin_file="pdc",
               freq_mhz=1500, untie_carry_in=True)
FAMILIES = (ICE40, ECP5, MACHXO2, GOWIN, NEXUS)


@dataclass(frozen=True)
class Device:
    name: str
    family: Family
    args: tuple[str, ...]  # nextpnr arguments selecting the part, package and speed grade
    logic_cells: int  # LUT4 sites (iCE40: logic cells, each LUT4 + flip-flop + carry)
    flip_flops: int
    part: str  # the vendor's part name, for reports
    larger: str | None  # the next device in this table with more room
    pins: tuple[str, ...] = ()  # package sites of HARNESS_PINS, where the family needs them

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
    Device("machxo2-1200", MACHXO2, ("--device", "LCMXO2-1200HC-4TG144C"), 1280, 1280,
           "LCMXO2-1200HC-4TG144C", None),
    Device("gowin-gw1n9", GOWIN, ("--device", "GW1NR-LV9QN88PC6/I5", "--vopt",
                                  "family=GW1N-9C"), 8640, 6480, "GW1NR-LV9QN88PC6/I5", None,
           pins=("52", "25", "10")),
    Device("nexus-40k", NEXUS, ("--device", "LIFCL-40-9BG400C"), 32256, 32256,
           "LIFCL-40-9BG400C", None, pins=("L13", "L14", "M14")),
)}


def get(name: str) -> Device:
    """The device called `name` (KeyError when the table has none)."""
    return DEVICES[name]


def room_for(device: Device, logic: int, flip_flops: int) -> Device | None:
    """The first device from `device` upwards (its `larger` chain) with room for this many
    LUT sites and flip-flops; past the chain's end, the smallest device in the table with
    room; None when no device has room."""
    d: Device | None = device
    while d is not None:
        if logic <= d.logic_cells and flip_flops <= d.flip_flops:
            return d
        d = DEVICES[d.larger] if d.larger else None
    roomy = [d for d in DEVICES.values() if logic <= d.logic_cells and flip_flops <= d.flip_flops]
    return min(roomy, key=lambda d: (d.flip_flops, d.logic_cells), default=None)


def pin_constraints(device: Device) -> str:
    """The pin file placing the harness's three pins on `device` ("" when none is needed)."""
    fmt = device.family.pin_file
    if not fmt:
        return ""
    line = ('IO_LOC "{port}" {site};' if fmt == "cst"
            else "ldc_set_location -site {{{site}}} [get_ports {port}]")
    return "".join(line.format(port=port, site=site) + "\n"
                   for port, site in zip(HARNESS_PINS, device.pins))
