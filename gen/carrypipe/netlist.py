"""The unit as a structural netlist: named vectors, continuous assignments and registers,
grouped into sections (one per pipeline stage).  Pure Python, no HDL library.

The builders (`slices.py`, `leveled.py`) turn a plan into a `Netlist`; `verilog.py` prints it
as readable Verilog-2001 and `hdl.py` turns it into Amaranth (simulation, and a component for
Amaranth designers).  Both read the same netlist, so they cannot drift apart.

Bit positions are the unit's own: a vector declared over positions lsb..lsb+width-1 carries
those bits of whatever it holds, so `a_skew_2[63:32]` holds bits 63:32 of operand `a`.  In
Python, `vec[lo:hi]` is half-open like any slice (`a[32:64]` is bits 63:32) and `vec[i]` one bit.

Expressions are immutable trees whose width is fixed when they are made; arithmetic (`Arith`)
is modular in its stated width with every operand zero-extended, as in Verilog when every
operand is first extended to the result width.  `pack` turns per-bit expressions into vector
expressions over runs of bits, so a prefix level reads as one line instead of one per bit.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from .header import runs
from .reset import ResetPort

DATA, CONTROL = "data", "control"  # register classes: which registers a reset clears


@dataclass(eq=False)
class Vec:
    """A named vector: a port, a wire or a register."""

    name: str
    width: int
    lsb: int = 0  # the bit position of its bit 0
    role: str = "wire"  # input, output, wire, reg
    cls: str = DATA  # registers only: DATA or CONTROL (the valid chain)
    keep: bool = False  # registers only: synthesis must not merge it with an equal one

    def __post_init__(self):
        if self.width < 1:
            raise ValueError(f"{self.name}: width {self.width} < 1")

    @property
    def msb(self) -> int:
        return self.lsb + self.width - 1

    @property
    def all(self) -> "Ref":
        return Ref(self, self.lsb, self.width)

    def __getitem__(self, key) -> "Ref":
        if isinstance(key, slice):
            lo = self.lsb if key.start is None else key.start
            hi = self.msb + 1 if key.stop is None else key.stop
            if key.step is not None or not self.lsb <= lo < hi <= self.msb + 1:
                raise IndexError(f"{self.name}[{key.start}:{key.stop}] outside "
                                 f"[{self.lsb}:{self.msb + 1}]")
            return Ref(self, lo, hi - lo)
        if not self.lsb <= key <= self.msb:
            raise IndexError(f"{self.name}[{key}] outside {self.lsb}..{self.msb}")
        return Ref(self, key, 1)

    def __repr__(self):
        return f"Vec({self.name}[{self.msb}:{self.lsb}])"


class Expr:
    """An expression of a fixed width; `&`, `|`, `^`, `~` build bitwise operations."""

    width: int

    def __and__(self, other):
        return Op("&", (self, other))

    def __or__(self, other):
        return Op("|", (self, other))

    def __xor__(self, other):
        return Op("^", (self, other))

    def __invert__(self):
        """~x, with ~~x written as x (a constant absorbed twice into one dot)."""
        if isinstance(self, Op) and self.op == "~":
            return self.args[0]
        return Op("~", (self,))


@dataclass(frozen=True, eq=True)
class Ref(Expr):
    """Bits lo..lo+width-1 of a vector."""

    vec: Vec
    lo: int
    width: int

    def __hash__(self):
        return hash((id(self.vec), self.lo, self.width))

    def __eq__(self, other):
        return (isinstance(other, Ref) and other.vec is self.vec and other.lo == self.lo
                and other.width == self.width)


@dataclass(frozen=True)
class Const(Expr):
    value: int
    width: int


@dataclass(frozen=True)
class Op(Expr):
    """A bitwise operation: '~' on one operand; '&', '|', '^' on equal widths."""

    op: str
    args: tuple

    def __post_init__(self):
        widths = {a.width for a in self.args}
        if len(widths) != 1:
            raise ValueError(f"operands of {self.op} differ in width: {sorted(widths)}")

    @property
    def width(self) -> int:
        return self.args[0].width


@dataclass(frozen=True)
class Cat(Expr):
    """Concatenation, least significant part first (printed most significant first)."""

    parts: tuple

    @property
    def width(self) -> int:
        return sum(p.width for p in self.parts)


@dataclass(frozen=True)
class Rep(Expr):
    """One bit repeated `count` times."""

    bit: Expr
    count: int

    @property
    def width(self) -> int:
        return self.count


@dataclass(frozen=True)
class Arith(Expr):
    """`+`, `-` or `*` of the operands, each zero-extended to `width`, modulo 2**width."""

    op: str
    args: tuple
    width: int


@dataclass(frozen=True)
class Cmp(Expr):
    """An unsigned comparison of two equal-width operands ('<', '<=', '=='): one bit."""

    op: str
    x: Expr
    y: Expr
    width: int = 1


@dataclass(frozen=True)
class Mux(Expr):
    """`sel ? one : zero`."""

    sel: Expr
    one: Expr
    zero: Expr

    @property
    def width(self) -> int:
        return self.one.width


def cat(*parts: Expr) -> Expr:
    """Concatenation (LSB first) with adjacent slices of one vector merged."""
    merged: list[Expr] = []
    for p in parts:
        last = merged[-1] if merged else None
        if (isinstance(p, Ref) and isinstance(last, Ref) and last.vec is p.vec
                and last.lo + last.width == p.lo):
            merged[-1] = Ref(p.vec, last.lo, last.width + p.width)
        else:
            merged.append(p)
    return merged[0] if len(merged) == 1 else Cat(tuple(merged))


def bit(e: Expr, i: int) -> Expr:
    """Bit i (0-based) of a bitwise expression (slices, constants, repetitions,
    concatenations and bitwise operations of them)."""
    if not 0 <= i < e.width:
        raise IndexError(f"bit {i} of a {e.width}-bit expression")
    if isinstance(e, Ref):
        return Ref(e.vec, e.lo + i, 1) if e.width > 1 else e
    if isinstance(e, Const):
        return Const(e.value >> i & 1, 1)
    if isinstance(e, Rep):
        return e.bit
    if isinstance(e, Op):
        return Op(e.op, tuple(bit(a, i) for a in e.args))
    if isinstance(e, Cat):
        for p in e.parts:
            if i < p.width:
                return bit(p, i)
            i -= p.width
    if isinstance(e, Mux):
        return Mux(e.sel, bit(e.one, i), bit(e.zero, i))
    raise TypeError(f"cannot take a bit of {type(e).__name__}")


def part(e: Expr, lo: int, n: int) -> Expr:
    """Bits lo..lo+n-1 (0-based) of a bitwise expression, keeping its shape: a slice stays
    a slice, and `b ^ {12{sub}}` gives `b[7:4] ^ {4{sub}}`, not four one-bit terms."""
    if not (0 <= lo and n >= 1 and lo + n <= e.width):
        raise IndexError(f"bits {lo}..{lo + n - 1} of a {e.width}-bit expression")
    if n == 1:
        return bit(e, lo)
    if isinstance(e, Ref):
        return Ref(e.vec, e.lo + lo, n)
    if isinstance(e, Const):
        return Const(e.value >> lo & ((1 << n) - 1), n)
    if isinstance(e, Rep):
        return Rep(e.bit, n)
    if isinstance(e, Op):
        return Op(e.op, tuple(part(a, lo, n) for a in e.args))
    if isinstance(e, Mux):
        return Mux(e.sel, part(e.one, lo, n), part(e.zero, lo, n))
    if isinstance(e, Cat):
        pieces, at = [], 0
        for p in e.parts:
            a, b = max(lo, at), min(lo + n, at + p.width)
            if a < b:
                pieces.append(part(p, a - at, b - a))
            at += p.width
        return cat(*pieces)
    raise TypeError(f"cannot take bits of {type(e).__name__}")


# ---- statements and the netlist ----

@dataclass
class Assign:
    """A continuous assignment `{targets...} = expr` (targets LSB first: wires, runs of
    their bits, or output ports)."""

    targets: tuple
    expr: Expr


@dataclass
class Load:
    """A register load on the rising edge: `{targets...} <= expr` (targets LSB first)."""

    targets: tuple
    expr: Expr


@dataclass
class Section:
    """A group of declarations and logic with a comment: one pipeline stage, the valid chain,
    or the outputs."""

    title: list[str]
    regs: list[Vec] = field(default_factory=list)
    wires: list[Vec] = field(default_factory=list)
    assigns: list[Assign] = field(default_factory=list)
    loads: list[Load] = field(default_factory=list)


@dataclass
class Port:
    vec: Vec
    meaning: str


@dataclass
class Netlist:
    name: str
    ports: list[Port]
    sections: list[Section]
    reset: ResetPort = ResetPort("none")  # how the reset acts (on CONTROL registers, DATA
    reset_data: bool = False  # too when reset_data)
    enable: bool = False  # every register loads only while `en` is high
    header: list[str] = field(default_factory=list)

    def resets(self, vec: Vec) -> bool:
        """Whether the reset clears this register."""
        return self.reset.kind != "none" and (vec.cls == CONTROL or self.reset_data)


class NameClash(ValueError):
    """A port, register or wire would carry the module's own name: legal Verilog, but a
    signal that hides its module's name is a lint warning (Verilator -Wall: VARHIDDEN), so
    the unit's name must be another."""

    def __init__(self, vec: Vec):
        self.vec = vec
        what = {"input": "an input port", "output": "an output port", "reg": "a register",
                "wire": "a wire"}[vec.role]
        super().__init__(f"{vec.name} is {what} of this unit")


class Builder:
    """Collects a netlist section by section; every name is checked to be unique and to
    differ from the module's."""

    def __init__(self, name: str):
        self.name = name
        self.ports: list[Port] = []
        self.sections: list[Section] = []
        self.names: dict[str, Vec] = {}

    def _new(self, vec: Vec) -> Vec:
        if vec.name in self.names:
            raise ValueError(f"{vec.name} is declared twice")
        if vec.name == self.name:
            raise NameClash(vec)
        self.names[vec.name] = vec
        return vec

    def port(self, name: str, width: int, direction: str, meaning: str) -> Vec:
        vec = self._new(Vec(name, width, 0, direction))
        self.ports.append(Port(vec, meaning))
        return vec

    def section(self, *title: str) -> Section:
        s = Section(list(title))
        self.sections.append(s)
        return s

    @property
    def current(self) -> Section:
        return self.sections[-1]

    def reg(self, name: str, width: int, lsb: int = 0, cls: str = DATA,
            keep: bool = False) -> Vec:
        vec = self._new(Vec(name, width, lsb, "reg", cls, keep))
        self.current.regs.append(vec)
        return vec

    def wire(self, name: str, expr: Expr, lsb: int = 0) -> Ref:
        """A wire holding `expr` (bit 0 of expr at position lsb)."""
        vec = self._new(Vec(name, expr.width, lsb, "wire"))
        self.current.wires.append(vec)
        self.current.assigns.append(Assign((vec.all,), expr))
        return vec.all

    def split_wire(self, parts: list[tuple[str, int, int]], expr: Expr) -> list[Vec]:
        """Wires (name, width, lsb), LSB first, assigned together from one expression."""
        vecs = [self._new(Vec(name, width, lsb, "wire")) for name, width, lsb in parts]
        self.current.wires += vecs
        self.current.assigns.append(Assign(tuple(v.all for v in vecs), expr))
        return vecs

    def wire_bits(self, name: str, bits: dict[int, Expr]) -> Vec:
        """A wire over positions min..max of `bits` (which must be contiguous), assigned in
        packed runs."""
        lo, hi = min(bits), max(bits)
        if len(bits) != hi - lo + 1:
            raise ValueError(f"{name}: positions are not contiguous")
        vec = self._new(Vec(name, hi - lo + 1, lo, "wire"))
        self.current.wires.append(vec)
        for start, expr in pack(bits):
            self.current.assigns.append(Assign((vec[start:start + expr.width],), expr))
        return vec

    def wire_runs(self, name: str, bits: dict[int, Expr]) -> "Runs":
        """Wires of one family of one-bit terms: one wire per contiguous run of positions
        (named `name`, or `name_<first position>` when there are several)."""
        found = runs(bits)
        return Runs([self.wire_bits(name + (f"_{lo}" if len(found) > 1 else ""),
                                    {q: bits[q] for q in range(lo, hi + 1)})
                     for lo, hi in found])

    def drive(self, target: Ref, expr: Expr) -> None:
        """A continuous assignment to an output port (or a declared wire)."""
        self.current.assigns.append(Assign((target,), expr))

    def load(self, targets, expr: Expr) -> None:
        """Register load; `targets` is a Ref/Vec or a sequence of them (LSB first)."""
        if isinstance(targets, (Ref, Vec)):
            targets = (targets,)
        refs = tuple(t.all if isinstance(t, Vec) else t for t in targets)
        if sum(t.width for t in refs) != expr.width:
            raise ValueError(f"load of {[t.vec.name for t in refs]}: width "
                             f"{sum(t.width for t in refs)} != {expr.width}")
        self.current.loads.append(Load(refs, expr))

    def load_bits(self, vec: Vec, bits: dict[int, Expr]) -> None:
        """Load register `vec` bit by bit, in packed runs."""
        for start, expr in pack(bits):
            self.load(vec[start:start + expr.width], expr)

    def netlist(self, **kw) -> Netlist:
        net = Netlist(self.name, self.ports, [s for s in self.sections
                                              if s.regs or s.wires or s.assigns or s.loads],
                      **kw)
        check(net)
        return net


class Runs:
    """Wires of one family (see `Builder.wire_runs`), indexed by bit position."""

    def __init__(self, vecs: list[Vec]):
        self.vecs = vecs

    def __getitem__(self, q: int) -> Ref:
        for v in self.vecs:
            if v.lsb <= q <= v.msb:
                return v[q]
        raise IndexError(q)


# ---- packing per-bit expressions into vector expressions ----

def _shape(e: Expr):
    """The tree of `e` with its leaves (one-bit slices, constants) left out."""
    if isinstance(e, (Ref, Const)):
        return "leaf"
    if isinstance(e, Op):
        return (e.op, *(_shape(a) for a in e.args))
    if isinstance(e, Mux):
        return ("?", _shape(e.sel), _shape(e.one), _shape(e.zero))
    return ("opaque", id(e))  # comparisons, sums: each bit stays on its own


def _leaves(e: Expr, in_sel: bool = False) -> list[tuple[Expr, bool]]:
    """The leaves of `e` (one-bit slices, constants), each with whether it lies in the
    select of a `Mux`."""
    if isinstance(e, (Ref, Const)):
        return [(e, in_sel)]
    if isinstance(e, Op):
        return [x for a in e.args for x in _leaves(a, in_sel)]
    if isinstance(e, Mux):
        return _leaves(e.sel, True) + _leaves(e.one, in_sel) + _leaves(e.zero, in_sel)
    return []


def _step(x: Expr, y: Expr) -> int | None:
    """How leaf y of the next bit follows leaf x: 1 (next bit of the same vector), 0 (the
    same bit or constant), or None (no pattern)."""
    if isinstance(x, Const) and isinstance(y, Const):
        return 0 if x.value == y.value else None
    if isinstance(x, Ref) and isinstance(y, Ref) and x.vec is y.vec:
        d = y.lo - x.lo
        return d if d in (0, 1) else None
    return None


def _widen(e: Expr, steps: list[int], n: int) -> Expr:
    """The n-bit vector expression whose bit k is `e` with leaf j moved k * steps[j]."""
    it = iter(steps)

    def go(x):
        if isinstance(x, (Ref, Const)):
            s = next(it)
            if s == 1:
                return Ref(x.vec, x.lo, n)
            if isinstance(x, Const):
                return Const((1 << n) - 1 if x.value else 0, n)
            return Rep(x, n) if n > 1 else x
        if isinstance(x, Op):
            return Op(x.op, tuple(go(a) for a in x.args))
        go(x.sel)  # its leaves do not move (see `pack`): every bit shares the select
        return Mux(x.sel, go(x.one), go(x.zero))

    return go(e)


def pack(bits: dict[int, Expr]) -> list[tuple[int, Expr]]:
    """Runs of consecutive positions whose one-bit expressions follow one pattern, each as
    (first position, vector expression).  A select shared by a run stays one bit."""
    out: list[tuple[int, Expr]] = []
    order = sorted(bits)
    k = 0
    while k < len(order):
        start, first = order[k], bits[order[k]]
        shape, sel = _shape(first), [m for _, m in _leaves(first)]
        steps, n = None, 1
        while k + n < len(order) and order[k + n] == start + n:
            prev, nxt = bits[order[k + n - 1]], bits[order[k + n]]
            if _shape(nxt) != shape:
                break
            pair = [_step(x, y) for (x, _), (y, _) in zip(_leaves(prev), _leaves(nxt))]
            if None in pair or (steps is not None and pair != steps) \
                    or any(s and m for s, m in zip(pair, sel)):
                break
            steps = pair
            n += 1
        out.append((start, first if n == 1 else _widen(first, steps, n)))
        k += n
    return out


# ---- consistency: every bit driven once and read (what lint tools check) ----

class NetlistError(AssertionError):
    """A builder made an inconsistent netlist (a bug, not a user error)."""


def _refs(e: Expr):
    if isinstance(e, Ref):
        yield e
    elif isinstance(e, (Op, Cat)):
        for a in (e.args if isinstance(e, Op) else e.parts):
            yield from _refs(a)
    elif isinstance(e, Rep):
        yield from _refs(e.bit)
    elif isinstance(e, Arith):
        for a in e.args:
            yield from _refs(a)
    elif isinstance(e, Cmp):
        yield from _refs(e.x)
        yield from _refs(e.y)
    elif isinstance(e, Mux):
        yield from _refs(e.sel)
        yield from _refs(e.one)
        yield from _refs(e.zero)


def _statement(st, roles, use, drive) -> None:
    where = f"{type(st).__name__.lower()} of {st.targets[0].vec.name}"
    use(st.expr, where)
    for t in st.targets:
        drive(t, roles, where)
    if sum(t.width for t in st.targets) != st.expr.width:
        raise NetlistError(f"{where}: width {sum(t.width for t in st.targets)} != "
                           f"{st.expr.width}")


def check(net: Netlist) -> None:
    """Every wire, register and output bit is driven exactly once, every non-output bit is
    read (or named *unused*), and every vector is declared before it is read."""
    declared: dict[int, Vec] = {id(p.vec): p.vec for p in net.ports}
    driven: dict[tuple[int, int], int] = {}
    read: set[tuple[int, int]] = set()

    def use(e: Expr, where: str):
        for r in _refs(e):
            if id(r.vec) not in declared:
                raise NetlistError(f"{where} reads {r.vec.name} before it is declared")
            if not (r.vec.lsb <= r.lo and r.lo + r.width - 1 <= r.vec.msb):
                raise NetlistError(f"{where} reads {r.vec.name} outside its bits")
            read.update((id(r.vec), b) for b in range(r.lo, r.lo + r.width))

    def drive(t: Ref, role: tuple, where: str):
        if t.vec.role not in role:
            raise NetlistError(f"{where} drives {t.vec.role} {t.vec.name}")
        for b in range(t.lo, t.lo + t.width):
            key = (id(t.vec), b)
            if key in driven:
                raise NetlistError(f"{t.vec.name}[{b}] is driven twice")
            driven[key] = 1

    for s in net.sections:
        for v in s.regs + s.wires:
            declared[id(v)] = v
        for a in s.assigns:
            _statement(a, ("wire", "output"), use, drive)
        for ld in s.loads:
            _statement(ld, ("reg",), use, drive)
    every = [v for v in declared.values() if v.role != "input"]
    for v in every:
        for b in range(v.lsb, v.msb + 1):
            if (id(v), b) not in driven:
                raise NetlistError(f"{v.name}[{b}] is not driven")
            if v.role != "output" and (id(v), b) not in read and "unused" not in v.name:
                raise NetlistError(f"{v.name}[{b}] is never read")
    for p in net.ports:
        if p.vec.role == "input" and p.vec.name != "clk":
            for b in range(p.vec.width):
                if (id(p.vec), b) not in read and p.vec.name not in (net.reset.name, "en"):
                    raise NetlistError(f"input {p.vec.name}[{b}] is never read")
