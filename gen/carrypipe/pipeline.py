"""What every pipeline mode's builder shares: the ports, the input register, the valid chain,
registers made from the plan's words, and the output section.
"""

from __future__ import annotations

from . import header, reset
from .netlist import CONTROL, DATA, Builder, Cat, Const, Expr, Netlist, Vec


class Frame:
    """A netlist under construction for `plan`, with its ports, inputs and valid chain."""

    def __init__(self, plan):
        self.plan = plan
        c = plan.config
        self.b = b = Builder(c.name)
        self.ports = {p.name: b.port(p.name, p.width, p.direction, p.meaning)
                      for p in plan.ports}
        self.words = {w.name: w for w in plan.words}
        # What each data input is as the first stage sees it: the port, or its register.
        self.src: dict[str, Expr] = {p.name: self.ports[p.name].all for p in plan.data_inputs()}
        if c.register_inputs:
            b.section(*header.input_title(plan))
            for p in plan.operand_inputs():
                r = self.reg(f"{p.name}_in")
                b.load(r, self.src[p.name])
                self.src[p.name] = r.all
        self.valid: list[Expr] = []  # in_valid after k cycles
        if c.valid:
            b.section(*header.valid_title(plan))
            self.valid = [self.src["in_valid"]]
            for k in range(1, plan.latency + 1):
                r = self.reg(f"valid_{k}")
                b.load(r, self.valid[-1])
                self.valid.append(r.all)

    def reg(self, name: str) -> Vec:
        """The register the plan lists under `name`, declared in the current section."""
        w = self.words[name]
        return self.b.reg(name, w.width, w.lsb, CONTROL if w.kind == "control" else DATA,
                          w.keep)

    def finish(self, drives: dict[str, Expr]) -> Netlist:
        """The output section (each output port from the register that holds it) and the
        netlist."""
        c = self.plan.config
        fixed = constant_bits(drives)
        self.b.section("Outputs: every result leaves a register of the last stage"
                       + (f"; {', '.join(fixed)}." if fixed else "."))
        if c.valid:
            drives = {**drives, "out_valid": self.valid[-1]}
        for p in self.plan.ports:
            if p.direction == "output":
                self.b.drive(self.ports[p.name].all, drives[p.name])
        return self.b.netlist(reset=reset.of(c), reset_data=c.reset_data, enable=c.enable,
                              header=header.lines(self.plan))


def constant_bits(drives: dict[str, Expr]) -> list[str]:
    """The output bits tied to a constant (a column no dot reaches: the top product bit of
    an unsigned multiplier by a 1-bit operand), as words: `product bit 8 is always 0`."""
    out = []
    for name, e in drives.items():
        at = 0
        for p in e.parts if isinstance(e, Cat) else (e,):
            if isinstance(p, Const):
                value = "0" if p.value == 0 else f"{p.width}'d{p.value}"
                out.append(f"{name} {header.bit_span(at, at + p.width - 1)} "
                           f"{'is' if p.width == 1 else 'are'} always {value}")
            at += p.width
    return out
