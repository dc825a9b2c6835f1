"""Print a `Netlist` as readable Verilog-2001, the way a careful colleague would write it.

Ports come in the netlist's order with one comment each; every section (a pipeline stage, the
valid chain, the outputs) gets its comment, its declarations, its continuous assignments and
one `always` block per register class.  Every operand of an arithmetic operation is
zero-extended to the result width and every assignment matches widths exactly, so lint tools
(Verilator -Wall, Icarus -Wall, Yosys) read it without warnings.  Pure string building: the
same netlist gives the same bytes.
"""

from __future__ import annotations

from . import header
from .netlist import Arith, Cat, Cmp, Const, Expr, Load, Mux, Netlist, Op, Ref, Rep, Vec

INDENT = "  "
LINE = 100  # statements longer than this are folded (`fold`)

# Binding strength (higher binds tighter), Verilog-2005 table 5-4.
_PREC = {"~": 10, "*": 9, "+": 8, "-": 8, "<": 7, "<=": 7, "==": 6, "&": 5, "^": 4, "|": 3, "?": 1}
_ATOM = 11


def rng(vec: Vec) -> str:
    """The declared range of a vector ('' for one bit)."""
    return "" if vec.width == 1 else f"[{vec.msb}:{vec.lsb}]"


def const(value: int, width: int) -> str:
    if width == 1:
        return f"1'b{value}"
    if value == 0:
        return f"{width}'d0"
    if value == (1 << width) - 1 and width > 1:
        return f"{{{width}{{1'b1}}}}"
    return f"{width}'h{value:x}"


def expr(e: Expr) -> str:
    return _expr(e)[0]


def _wrap(text_prec: tuple[str, int], outer: int, right: bool = False) -> str:
    text, prec = text_prec
    return f"({text})" if prec < outer or (right and prec == outer) else text


def _expr(e: Expr) -> tuple[str, int]:
    """(text, binding strength) of an expression."""
    if isinstance(e, Ref):
        v = e.vec
        if e.width == v.width:
            return v.name, _ATOM
        if e.width == 1:
            return f"{v.name}[{e.lo}]", _ATOM
        return f"{v.name}[{e.lo + e.width - 1}:{e.lo}]", _ATOM
    if isinstance(e, Const):
        return const(e.value, e.width), _ATOM
    if isinstance(e, Rep):
        return f"{{{e.count}{{{_expr(e.bit)[0]}}}}}", _ATOM
    if isinstance(e, Cat):
        return "{" + ", ".join(_expr(p)[0] for p in reversed(e.parts)) + "}", _ATOM
    if isinstance(e, Op):
        if e.op == "~":
            inner = _expr(e.args[0])
            return "~" + (inner[0] if inner[1] == _ATOM else f"({inner[0]})"), _PREC["~"]
        prec = _PREC[e.op]
        parts = []
        for a in e.args:
            sub = _expr(a)
            # Mixed bitwise operators get parentheses for the reader, except the AND
            # inside an OR of the carry operator (g | p & c), which every adder text uses;
            # so does a comparison inside one (`(a == b) & e`).
            mixed = isinstance(a, Cmp) or isinstance(a, Op) and a.op not in ("~", e.op) \
                and not (e.op == "|" and a.op == "&")
            parts.append(f"({sub[0]})" if mixed or sub[1] < prec else sub[0])
        return f" {e.op} ".join(parts), prec
    if isinstance(e, Arith):
        parts = [_extend(a, e.width) for a in e.args]
        text = parts[0]
        for p in parts[1:]:
            text += f" {e.op} {p}"
        return text, _PREC[e.op]
    if isinstance(e, Cmp):
        prec = _PREC[e.op]
        return f"{_wrap(_expr(e.x), prec)} {e.op} {_wrap(_expr(e.y), prec, True)}", prec
    if isinstance(e, Mux):
        return (f"{_wrap(_expr(e.sel), 2)} ? {_wrap(_expr(e.one), 2)} : "
                f"{_wrap(_expr(e.zero), 1)}"), _PREC["?"]
    raise TypeError(f"cannot print {type(e).__name__}")


def _extend(a: Expr, width: int) -> str:
    """An arithmetic operand zero-extended to `width` bits."""
    text, prec = _expr(a)
    pad = width - a.width
    if pad == 0:
        return text if prec >= _PREC["+"] else f"({text})"
    if pad < 0:
        raise ValueError(f"operand of {a.width} bits in a {width}-bit operation")
    zeros = "1'b0" if pad == 1 else f"{pad}'d0"
    if isinstance(a, Cat):  # splice the parts instead of nesting braces
        text = text[1:-1]
    return f"{{{zeros}, {text}}}"


# Where a folded statement breaks best, by the operator that starts the next line: the
# loosest-binding first (a break before `&` in `g | p & c` would read as `(g | p) & c`).
_BREAK_RANK = {"?": 0, ":": 0, "|": 1, "^": 2, "&": 3, "+": 4, "-": 4, "==": 5, "<": 5,
               "<=": 5}


def fold(line: str) -> list[str]:
    """A statement longer than LINE columns as several lines, broken between tokens (every
    space of a printed statement separates two), continuation lines indented two levels
    deeper; a shorter statement as it is.  Each break is the one in reach that is least
    deeply nested in brackets and braces, then before the loosest-binding operator (or
    after a comma), then the last; an operator starts the line after it."""
    if len(line) <= LINE:
        return [line]
    lead = line[:len(line) - len(line.lstrip(" "))]
    words: list[str] = []
    for w in line.strip(" ").split(" "):
        if words and not any(ch.isalnum() or ch in "_{}()[]'" for ch in words[-1]):
            words[-1] += " " + w  # an operator goes with the operand after it
        else:
            words.append(w)
    cost, depth, target = [], 0, True  # per word: how bad a break before it is
    for k, w in enumerate(words):
        op = w.split(" ", 1)[0] if " " in w else ""
        after_comma = k > 0 and words[k - 1].endswith(",")
        # The target and its `=` / `<=` stay on the first line.
        cost.append((LINE, 0) if target else
                    (depth, 0 if after_comma else _BREAK_RANK.get(op, 7)))
        target = target and not (depth == 0 and op in ("=", "<="))
        depth += sum(w.count(o) for o in "({") - sum(w.count(c) for c in ")}")
    lines, first = [], 0  # words[first:] are not placed yet
    while first < len(words):
        head = lead if not lines else lead + INDENT * 2
        end, width = first + 1, len(head) + len(words[first])
        while end < len(words) and width + 1 + len(words[end]) <= LINE:
            width += 1 + len(words[end])
            end += 1
        if end < len(words) and end - first > 1:  # break at the best place in reach
            end = min(range(first + 1, end + 1), key=lambda k: (cost[k], -k))
        lines.append(head + " ".join(words[first:end]))
        first = end
    return lines


def _target(refs: tuple) -> str:
    texts = [expr(r) for r in reversed(refs)]
    return texts[0] if len(texts) == 1 else "{" + ", ".join(texts) + "}"


def _declarations(kind: str, vecs: list[Vec]) -> list[str]:
    """Declarations with the ranges in one column."""
    width = max((len(rng(v)) for v in vecs), default=0)
    lines = []
    for v in vecs:
        keep = "(* keep *) " if v.keep else ""
        column = f"{rng(v):<{width}} " if width else ""
        lines.append(f"{INDENT}{keep}{kind} {column}{v.name};")
    return lines


def _always(net: Netlist, loads: list[Load], resets: bool, keep: bool) -> list[str]:
    """One `always` block for loads that share a reset behaviour and the keep attribute."""
    rst = net.reset
    edge = f"posedge clk or {rst.edge}" if resets and rst.kind == "async" else "posedge clk"
    lines = [f"{INDENT}(* keep *)"] if keep else []
    lines.append(f"{INDENT}always @({edge}) begin")
    body = [f"{_target(ld.targets)} <= {expr(ld.expr)};" for ld in loads]
    pad = INDENT * 2
    if resets:
        regs = list(dict.fromkeys(t.vec for ld in loads for t in ld.targets))
        lines.append(f"{pad}if ({rst.asserted}) begin")
        lines += [f"{pad}{INDENT}{v.name} <= {const(0, v.width)};" for v in regs]
        lines.append(f"{pad}end else{' if (en)' if net.enable else ''} begin")
        lines += [ln for b in body for ln in fold(f"{pad}{INDENT}{b}")]
        lines.append(f"{pad}end")
    elif net.enable:
        lines.append(f"{pad}if (en) begin")
        lines += [ln for b in body for ln in fold(f"{pad}{INDENT}{b}")]
        lines.append(f"{pad}end")
    else:
        lines += [ln for b in body for ln in fold(f"{pad}{b}")]
    lines.append(f"{INDENT}end")
    return lines


def write(net: Netlist) -> str:
    """The Verilog text of `net`: header comment, module, sections, `endmodule`."""
    out = header.comment(net.header)
    out.append(f"module {net.name} (")
    decl = [(("input " if p.vec.role == "input" else "output") + " wire", rng(p.vec), p.vec.name,
             p.meaning) for p in net.ports]
    w_rng = max(len(d[1]) for d in decl)
    w_name = max(len(d[2]) for d in decl)
    for k, (kind, r, name, meaning) in enumerate(decl):
        comma = "," if k < len(decl) - 1 else ""
        left = f"{INDENT}{kind} {r:<{w_rng}} {name}{comma}"
        width = len(INDENT) + 12 + w_rng + w_name + 2
        out += header.trailing_comment(f"{left:<{width}} ", meaning)
    out.append(");")
    for s in net.sections:
        out.append("")
        out += header.comment(s.title, INDENT)
        out += _declarations("reg", s.regs)
        whole = {id(a.targets[0].vec): a for a in s.assigns
                 if len(a.targets) == 1 and a.targets[0].vec.role == "wire"
                 and a.targets[0].width == a.targets[0].vec.width}
        for v in s.wires:  # a wire driven whole by one expression is declared with it
            head = f"{INDENT}wire {rng(v)}{' ' if v.width > 1 else ''}{v.name}"
            out += fold(f"{head} = {expr(whole[id(v)].expr)};" if id(v) in whole else f"{head};")
        out += [ln for a in s.assigns if not (len(a.targets) == 1 and id(a.targets[0].vec) in whole)
                for ln in fold(f"{INDENT}assign {_target(a.targets)} = {expr(a.expr)};")]
        groups: dict[tuple[bool, bool], list[Load]] = {}
        for ld in s.loads:
            v = ld.targets[0].vec
            groups.setdefault((net.resets(v), v.keep), []).append(ld)
        for (resets, keep), loads in groups.items():
            out += _always(net, loads, resets, keep)
    out += ["", "endmodule", ""]
    return "\n".join(out)
