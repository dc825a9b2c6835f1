"""Do 4:2 compressors map better than full adders on 4-input LUTs, and what does a stage of
5-input functions cost?  A measurement, not a test.

Register-to-register stages of one row of W columns, each placed and routed in the
measurement harness of `fit` (serial shift-in, capture-and-shift-out), on each device:

  fa32   one level of full adders: 3 rows -> 2 (sum x ^ y ^ z, carry the majority);
  fa2x   two levels of full adders: 4 rows -> 3 -> 2 (Dadda's order: a full adder on three
         rows, then one on the fourth row, that sum and the carry from the column below);
  c42    a row of 4:2 compressors in their usual gate form (Weinberger 1981, from memory):
         cout = (x0 ^ x1) ? x2 : x0, s = x0 ^ x1 ^ x2 ^ x3 ^ cin,
         c = (x0 ^ x1 ^ x2 ^ x3) ? cin : x3, cin the cout of the column below.

  c53    a row of (5:3) counters: 5 rows -> 3 (the count's three bits, each a function of
         five inputs);
  r3     a radix-3 prefix level: G = g2 | p2 g1 | p2 p1 g0 of three neighbouring groups
         (five inputs: what would save prefix levels, Kogge-Stone 1973 with radix 3), and
         beside it the two-group propagate p2 p1.

fa2x and c42 both take 4 rows to 2 in one stage, and are the same Boolean functions column
by column; the question is whether the compressor's form maps onto fewer or faster LUTs.
c53 and r3 need a 5-input LUT: on ECP5 two LUT4s and the slice's PFUMX, on iCE40 two LUT4
levels; they ask whether such a stage keeps up with one LUT4 (fa32).

    python tests/bench_compressors.py --devices ecp5-85k,ice40-hx8k --width 32 --seeds 3
"""

from __future__ import annotations

import argparse
import statistics
import sys
from types import SimpleNamespace

from carrypipe import devices, toolflow
from carrypipe.units import Port


def _rows(w: int, n: int) -> str:
    return "\n".join(f"  reg [{w - 1}:0] x{i}_r;" for i in range(n))


def design(kind: str, w: int) -> tuple[str, int]:
    """(Verilog of module `cmp`, rows in)."""
    n = {"fa32": 3, "fa2x": 4, "c42": 4, "c53": 5, "r3": 5}[kind]
    head = ["module cmp (input wire clk, "
            + ", ".join(f"input wire [{w - 1}:0] x{i}" for i in range(n))
            + f", output reg [{w}:0] s, output reg [{w}:0] c"
            + (f", output reg [{w}:0] t);" if kind == "c53" else ");"), _rows(w, n)]
    load = ["  always @(posedge clk) begin"] + [f"    x{i}_r <= x{i};" for i in range(n)]
    if kind == "fa32":
        logic = [f"  wire [{w - 1}:0] s1 = x0_r ^ x1_r ^ x2_r;",
                 f"  wire [{w - 1}:0] c1 = x0_r & x1_r | x0_r & x2_r | x1_r & x2_r;"]
        out = ["    s <= {1'b0, s1};", "    c <= {c1, 1'b0};"]
    elif kind == "fa2x":
        logic = [f"  wire [{w - 1}:0] s1 = x0_r ^ x1_r ^ x2_r;",
                 f"  wire [{w - 1}:0] c1 = x0_r & x1_r | x0_r & x2_r | x1_r & x2_r;",
                 f"  wire [{w - 1}:0] y = {{c1[{w - 2}:0], 1'b0}};",
                 f"  wire [{w - 1}:0] s2 = s1 ^ x3_r ^ y;",
                 f"  wire [{w - 1}:0] c2 = s1 & x3_r | s1 & y | x3_r & y;"]
        out = [f"    s <= {{c1[{w - 1}], s2}};", "    c <= {c2, 1'b0};"]
    elif kind == "c53":
        total = " + ".join(f"x{i}_r[i]" for i in range(5))
        logic = [f"  reg [{w - 1}:0] b0, b1, b2;", "  integer i;",
                 "  always @* for (i = 0; i < %d; i = i + 1)" % w,
                 f"    {{b2[i], b1[i], b0[i]}} = {{2'b0, x0_r[i]}} + {total[len('x0_r[i] + '):]};"]
        out = ["    s <= {1'b0, b0};", "    c <= {b1, 1'b0};", "    t <= {b2[%d:0], 2'b0};" % (w - 2)]
    elif kind == "r3":
        logic = [f"  wire [{w - 1}:0] g1 = {{x2_r[0], x2_r[{w - 1}:1]}};",
                 f"  wire [{w - 1}:0] p1 = {{x3_r[0], x3_r[{w - 1}:1]}};",
                 f"  wire [{w - 1}:0] g0 = {{x4_r[1:0], x4_r[{w - 1}:2]}};"]
        out = ["    s <= {1'b0, x0_r | x1_r & g1 | x1_r & p1 & g0};",
               "    c <= {1'b0, x1_r & p1};"]
    else:
        logic = [f"  wire [{w - 1}:0] p = x0_r ^ x1_r;",
                 f"  wire [{w - 1}:0] co = (p & x2_r) | (~p & x0_r);",
                 f"  wire [{w - 1}:0] cin = {{co[{w - 2}:0], 1'b0}};",
                 f"  wire [{w - 1}:0] q = p ^ x2_r ^ x3_r;",
                 f"  wire [{w - 1}:0] s2 = q ^ cin;",
                 f"  wire [{w - 1}:0] c2 = (q & cin) | (~q & x3_r);"]
        out = [f"    s <= {{co[{w - 1}], s2}};", "    c <= {c2, 1'b0};"]
    return "\n".join(head + logic + load + out + ["  end", "endmodule", ""]), n


def stand_in(w: int, n: int, kind: str):
    """What the harness reads of a plan: the module name and the ports."""
    ports = [Port("clk", "input", 1, "")] + [Port(f"x{i}", "input", w, "") for i in range(n)]
    ports += [Port(o, "output", w + 1, "") for o in ("s", "c", "t")[:3 if kind == "c53" else 2]]
    return SimpleNamespace(config=SimpleNamespace(name="cmp"), ports=ports)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--devices", default="ecp5-85k,ice40-hx8k")
    ap.add_argument("--width", type=int, default=32)
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--kinds", default="fa32,fa2x,c42,c53,r3")
    args = ap.parse_args(argv)
    seeds = tuple(range(1, args.seeds + 1))
    for name in args.devices.split(","):
        device = devices.get(name)
        versions = toolflow.versions(device.family, "wheel")
        print(f"{device.name} ({device.part}), {', '.join(versions.values())}, width "
              f"{args.width}, seeds {','.join(map(str, seeds))} (median)")
        print(f"{'design':<6} {'MHz':>7} {'LUTs':>6} {'FFs':>6}  path (LUT steps)")
        for kind in args.kinds.split(","):
            text, n = design(kind, args.width)
            got = toolflow.place_and_route(stand_in(args.width, n, kind), text, device, seeds)
            ok = [m for m in got if m.status == "ok"]
            mhz = statistics.median(m.mhz for m in ok) if ok else None
            first = got[0]
            print(f"{kind:<6} {mhz or 0:>7.1f} {first.luts or 0:>6} {first.flip_flops or 0:>6}"
                  f"  {first.start} -> {first.end}", flush=True)
        print()
    return 0


if __name__ == "__main__":
    sys.exit(main())
