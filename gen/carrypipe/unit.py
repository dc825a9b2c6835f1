"""The pipelined unit as Amaranth hardware, built from a plan and nothing else.

This module builds the `slices` structure; the prefix modes (`levels`, `blocks`) share its
ports, input register, valid chain and enable, and take their stages from `leveled.py`.

Registers, with the names they carry into the Verilog:
  a_in, b_in, cin_in   input register (with `register_inputs`)
  a_skew_i, b_skew_i   operand bits of slices i..S-1, waiting for slice i (shrinking words)
  sum_stage_i          the sum bits of slice i;  carry_stage_i  its carry-out
  sum_deskew_i         finished result bits below slice i, travelling on (growing words)
  valid_i              the valid bit after i cycles (the only registers with a reset)
Data registers are reset-less so that synthesis may pack the delay lines into shift-register
LUTs; with `enable` every register of the unit holds while `en` is low.
"""

from __future__ import annotations

from dataclasses import replace

from amaranth.hdl import Cat, ClockDomain, Elaboratable, EnableInserter, Module, Signal

from . import cells, leveled
from .plan import Plan

# Test-only faults that `carrypipe prove` must find (tests/test_prove.py); never set by a build.
FAULTS = ("missing-skew", "late-carry", "swapped-node")


class PipelinedAdder(Elaboratable):
    """{cout, sum} = a + b (+ cin), S slices, one result per clock after `plan.latency`."""

    def __init__(self, plan: Plan, fault: str | None = None):
        if fault is not None and fault not in FAULTS:
            raise ValueError(f"fault must be one of {', '.join(FAULTS)}, not {fault!r}")
        self.plan = plan
        self.fault = fault
        self._widths = {w.name: w.width for w in plan.words}
        c, w = plan.config, plan.width
        self.a = Signal(w, name="a")
        self.b = Signal(w, name="b")
        self.sum = Signal(w, name="sum")
        self.cin = Signal(name="cin") if c.carry_in else None
        self.cout = Signal(name="cout") if c.carry_out else None
        self.en = Signal(name="en") if c.enable else None
        self.in_valid = Signal(name="in_valid") if c.valid else None
        self.out_valid = Signal(name="out_valid") if c.valid else None

    def ports(self) -> list[Signal]:
        """The top-level signals, in the plan's port order (clk and rst come from the domain)."""
        named = {p.name: p for p in self.plan.ports}
        return [getattr(self, n) for n in named if n not in ("clk", "rst")]

    def elaborate(self, platform):
        m = Module()
        plan, c = self.plan, self.plan.config

        a, b, cin = self.a, self.b, self.cin
        if c.register_inputs:
            a_in, b_in = self._reg("a_in"), self._reg("b_in")
            m.d.sync += [a_in.eq(a), b_in.eq(b)]
            a, b = a_in, b_in
            if cin is not None:
                cin_in = self._reg("cin_in")
                m.d.sync += cin_in.eq(cin)
                cin = cin_in

        if c.pipeline == "slices":
            self._slices(m, a, b, cin)
        else:  # prefix levels or blocks: no slices, see `leveled`
            leveled.build(m, plan, a, b, cin, self.sum, self.cout)

        if c.valid:
            valid = self.in_valid
            for k in range(plan.latency):
                nxt = Signal(name=f"valid_{k + 1}")
                m.d.sync += nxt.eq(valid)
                valid = nxt
            m.d.comb += self.out_valid.eq(valid)

        if self.en is not None:
            m = EnableInserter({"sync": self.en})(m)
        return m

    def _reg(self, name: str) -> Signal:
        """The data register the plan lists under `name`, at the plan's width."""
        return reg(self._widths[name], name)

    def _slices(self, m: Module, a, b, cin):
        """Slice i adds its bits in cycle i; the skew words shrink, the deskew words grow."""
        plan = self.plan
        a_wait, b_wait = a, b  # operand bits of slices i.. as seen in cycle i
        carry = cin
        done = []  # finished result bits below slice i, registered
        last = len(plan.slices) - 1
        for s in plan.slices:
            i = s.index
            net = s.network()
            if self.fault == "swapped-node" and i == 0:  # last node's operands exchanged
                hi, lo = net.levels[-1][-1]
                net = replace(net, levels=net.levels[:-1] + (net.levels[-1][:-1] + ((lo, hi),),))
            total, cout = cells.build(m, s.cell, a_wait[:s.width], b_wait[:s.width], carry,
                                      f"slice{i}", net)
            sum_stage = self._reg(f"sum_stage_{i}")
            m.d.sync += sum_stage.eq(total)
            carry = None
            if not s.carry_out:  # no cout port: keep the cell whole, named for lint tools
                m.d.comb += Signal(name=f"slice{i}_carry_unused").eq(cout)
            if s.carry_out:
                carry = self._reg(f"carry_stage_{i}")
                m.d.sync += carry.eq(cout)
                if self.fault == "late-carry" and i == 0:  # one register too many
                    late = reg(1, "carry_late_0")
                    m.d.sync += late.eq(carry)
                    carry = late
            if i < last:
                a_next, b_next = self._reg(f"a_skew_{i + 1}"), self._reg(f"b_skew_{i + 1}")
                skew = m.d.comb if self.fault == "missing-skew" and i == 0 else m.d.sync
                skew += a_next.eq(a_wait[s.width:])
                m.d.sync += b_next.eq(b_wait[s.width:])
                a_wait, b_wait = a_next, b_next
                deskew = self._reg(f"sum_deskew_{i + 1}")
                m.d.sync += deskew.eq(Cat(*done, sum_stage))
                done = [deskew]
            else:
                m.d.comb += self.sum.eq(Cat(*done, sum_stage))
                if self.cout is not None:
                    m.d.comb += self.cout.eq(carry)


def reg(width: int, name: str) -> Signal:
    """A data register: reset-less, so synthesis may pack delay lines into LUT shift registers."""
    return Signal(width, name=name, reset_less=True)


def clock_domain(plan: Plan):
    """The `sync` domain the unit runs in: with a reset only when the config asks for one."""
    return lambda name: ClockDomain(name, reset_less=plan.config.reset == "none")
