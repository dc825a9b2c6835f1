"""The netlist as Amaranth hardware: for the Python simulation and for Amaranth designers.

`Unit` is a `wiring.Component` whose signature is the plan's port list (without `clk` and
`rst`, which are the `sync` domain's clock and reset), so it drops into an Amaranth design
like any component::

    from carrypipe import component
    add = component({"name": "acc_add", "width": 64, "slice_width": 16, "valid": True})
    m.submodules.add = add          # add.a, add.b, add.in_valid in; add.sum, add.cout out

The registers that `rst` clears in the Verilog are the ones the `sync` domain's reset clears
here (the valid bits, or every register with `reset_data`); `reset: async` expects a domain
with `async_reset=True`.  An Amaranth domain's reset is active high, so `reset_active: low`
(the Verilog's `rst_n`) changes nothing here.  Every register holds while `en` is low, as in
the Verilog.
"""

from __future__ import annotations

from amaranth.hdl import Cat, Const, EnableInserter, Module, Mux, Signal, Value
from amaranth.lib import wiring
from amaranth.lib.wiring import In, Out

from . import reset
from .netlist import Arith, Cmp, Expr, Netlist, Op, Ref, Rep
from .netlist import Cat as NetCat
from .netlist import Const as NetConst
from .netlist import Mux as NetMux


def elaborate(net: Netlist, ports: dict[str, Value]) -> Module:
    """Amaranth statements for `net`, with `ports` standing for its ports (not the clock and
    the reset)."""
    m = Module()
    sig: dict[int, Value] = {id(p.vec): ports[p.vec.name] for p in net.ports
                             if p.vec.name not in ("clk", net.reset.name)}
    for s in net.sections:
        for v in s.regs:
            sig[id(v)] = Signal(v.width, name=v.name, reset_less=not net.resets(v))
        for v in s.wires:
            sig[id(v)] = Signal(v.width, name=v.name)

    def ref(r: Ref) -> Value:
        at = r.lo - r.vec.lsb
        return sig[id(r.vec)][at:at + r.width]

    def val(e: Expr) -> Value:
        if isinstance(e, Ref):
            return ref(e)
        if isinstance(e, NetConst):
            return Const(e.value, e.width)
        if isinstance(e, Op):
            args = [val(a) for a in e.args]
            if e.op == "~":
                return ~args[0]
            out = args[0]
            for a in args[1:]:
                out = out & a if e.op == "&" else out | a if e.op == "|" else out ^ a
            return out
        if isinstance(e, NetCat):
            return Cat(*(val(p) for p in e.parts))
        if isinstance(e, Rep):
            return val(e.bit).replicate(e.count)
        if isinstance(e, Arith):
            args = [Cat(val(a), Const(0, e.width - a.width)) if a.width < e.width else val(a)
                    for a in e.args]
            out = args[0]
            for a in args[1:]:
                out = out + a if e.op == "+" else out - a if e.op == "-" else out * a
            return out[:e.width]
        if isinstance(e, Cmp):
            x, y = val(e.x), val(e.y)
            return x < y if e.op == "<" else x <= y if e.op == "<=" else x == y
        if isinstance(e, NetMux):
            return Mux(val(e.sel), val(e.one), val(e.zero))
        raise TypeError(f"cannot translate {type(e).__name__}")

    for s in net.sections:
        for a in s.assigns:
            m.d.comb += Cat(*(ref(t) for t in a.targets)).eq(val(a.expr))
        for ld in s.loads:
            m.d.sync += Cat(*(ref(t) for t in ld.targets)).eq(val(ld.expr))
    if net.enable:
        m = EnableInserter({"sync": ports["en"]})(m)
    return m


class Unit(wiring.Component):
    """A carrypipe unit as an Amaranth component (see the module docstring)."""

    def __init__(self, plan):
        self.plan = plan
        self.latency = plan.latency  # cycles from inputs to results, as the manifest's
        super().__init__({p.name: (In if p.direction == "input" else Out)(p.width)
                          for p in self.signals()})

    def signals(self):
        """The plan's ports but the clock and the reset, which are the `sync` domain's."""
        control = ("clk", reset.of(self.plan.config).name)
        return [p for p in self.plan.ports if p.name not in control]

    def elaborate(self, platform):
        return elaborate(self.plan.netlist(), {p.name: getattr(self, p.name)
                                               for p in self.signals()})


def clock_domain(config):
    """The `sync` domain a unit of `config` (a `Config`, or the keys of a config file as
    `component` takes them) expects."""
    from amaranth.hdl import ClockDomain

    from .config import Config, from_mapping

    if not isinstance(config, Config):  # the keys; anything else is a ConfigError
        config = from_mapping(config, where="clock_domain")

    return ClockDomain("sync", reset_less=config.reset == "none",
                       async_reset=config.reset == "async")
