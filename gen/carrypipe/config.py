"""Read and validate a unit config (YAML) into one frozen, normalized `Config`.

Every user mistake becomes a `ConfigError` whose message is one line naming the file, the
key, the value and what is allowed; the command line turns it into exit status 2.
"""

from __future__ import annotations

import difflib
import os
import re
import stat
from collections.abc import Mapping
from dataclasses import asdict, dataclass, fields, replace
from pathlib import Path

import yaml

from . import cells, prefix, units
from .reset import ACTIVE

MAX_WIDTH = max(k.max_width for k in units.KINDS.values())  # the widest of any kind
UNITS = tuple(units.KINDS)
PREFIX_CELLS = cells.PREFIX_STYLES
CELLS = tuple(cells.STYLES)
RESETS = ("none", "sync", "async")
PIPELINES = ("slices", "levels", "blocks")
PREFIX_PIPELINES = ("levels", "blocks")  # modes pipelined by prefix levels, not by slices
MAX_LEVELS_PER_STAGE = 64
TREES = ("dadda", "wallace", "native")
PARTIAL_PRODUCTS = ("and", "booth4")
MIN_OPERANDS, MAX_OPERANDS = 3, 16
MAX_TREE_LEVELS_PER_STAGE = 16
MAX_NATIVE_STAGES = 16
# Keys only the carry-save kinds read (sum, multiplier), and of those the keys of the
# counter trees (dadda, wallace) that `tree: native` does not read: the final adder's and
# the tree's own.
TREE_KEYS = ("operands", "width_b", "partial_products", "tree", "tree_levels_per_stage",
             "native_stages")
COUNTER_TREE_KEYS = ("partial_products", "tree_levels_per_stage", "cell", "pipeline",
                     "slice_width", "slices", "levels_per_stage", "block_width",
                     "wire_registers", "local_width", "carry_increment")
# A config of 4096 one-bit slices, one per line with a comment each, is about 70 KiB;
# PyYAML reads about 100 KiB a second, so the bound also bounds the time to read one.
MAX_CONFIG_BYTES = 1 << 18
MAX_NESTING = 16  # levels of YAML collections; a config needs 2 (the mapping, `slices`)
# Decimal integers with more digits stay text: no key allows them, and Python refuses to
# convert very long digit strings (sys.get_int_max_str_digits(), 4300 by default).
MAX_INT_DIGITS = 20

# Verilog-2005 and SystemVerilog-2017 reserved words: a module may not be named after one.
VERILOG_KEYWORDS = frozenset("""
accept_on alias always always_comb always_ff always_latch and assert assign assume automatic
before begin bind bins binsof bit break buf bufif0 bufif1 byte case casex casez cell chandle
checker class clocking cmos config const constraint context continue cover covergroup
coverpoint cross deassign default defparam design disable dist do edge else end endcase
endchecker endclass endclocking endconfig endfunction endgenerate endgroup endinterface
endmodule endpackage endprimitive endprogram endproperty endspecify endsequence endtable
endtask enum event eventually expect export extends extern final first_match for force
foreach forever fork forkjoin function generate genvar global highz0 highz1 if iff ifnone
ignore_bins illegal_bins implements implies import incdir include initial inout input inside
instance int integer interconnect interface intersect join join_any join_none large let
liblist library local localparam logic longint macromodule matches medium modport module
nand negedge nettype new nexttime nmos nor noshowcancelled not notif0 notif1 null or output
package packed parameter pmos posedge primitive priority program property protected pull0
pull1 pulldown pullup pulsestyle_ondetect pulsestyle_onevent pure rand randc randcase
randsequence rcmos real realtime ref reg reject_on release repeat restrict return rnmos
rpmos rtran rtranif0 rtranif1 s_always s_eventually s_nexttime s_until s_until_with scalared
sequence shortint shortreal showcancelled signed small soft solve specify specparam static
string strong strong0 strong1 struct super supply0 supply1 sync_accept_on sync_reject_on
table tagged task this throughout time timeprecision timeunit tran tranif0 tranif1 tri tri0
tri1 triand trior trireg type typedef union unique unique0 unsigned until until_with untyped
use uwire var vectored virtual void wait wait_order wand weak weak0 weak1 while wildcard
wire with within wor xnor xor
""".split())

_IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")
MAX_NAME = 64
# carrypipe's own Verilog modules (prove's miters, its cut netlist) all start with this prefix,
# so no unit can be named like one; checked in any case, as file names may ignore case.
RESERVED_PREFIX = "carrypipe_"
# Names carrypipe keeps: its own (`carrypipe`, whose testbench and harness modules would fall
# under the prefix), those whose files collide with carrypipe's own in one folder (`fit`
# writes fit.json beside the manifest <name>.json; `prove` writes miter.v beside <name>.v),
# and the Windows device names, which name no file there (nul.v is the null device).
RESERVED_NAMES = frozenset(["carrypipe", "fit", "miter", "con", "prn", "aux", "nul",
                            *(f"{port}{i}" for port in ("com", "lpt") for i in range(10))])
# A comment that begins with `verilator` or `synopsys_` is a directive to Verilator (a
# metacomment), and Verilator stops on one it does not know; comment lines of the emitted
# files may begin with the unit's name (a wrapped file list), so no name begins so.
DIRECTIVE_PREFIXES = ("verilator", "synopsys")


class ConfigError(ValueError):
    """A user mistake in a config or an option: the message is one line."""


@dataclass(frozen=True)
class Config:
    """A validated unit description; `slices` is always the explicit LSB-first split."""

    name: str
    width: int
    slices: tuple[int, ...]
    unit: str = "adder"
    cell: str = "native"
    carry_in: bool = False
    carry_out: bool = True
    valid: bool = False
    enable: bool = False
    reset: str = "none"
    reset_data: bool = False
    reset_active: str = "high"
    signed: bool = False
    register_inputs: bool = False
    pipeline: str = "slices"
    levels_per_stage: int = 1
    block_width: int = 16
    wire_registers: int = 0
    local_width: int = 0
    operands: int = 0  # unit sum
    width_b: int = 0  # unit multiplier (the config gives width when it omits width_b)
    partial_products: str = "and"
    tree: str = "dadda"
    tree_levels_per_stage: int = 1
    native_stages: int = 1
    carry_increment: bool = False

    def normalized(self) -> dict:
        """The config as plain data with every default filled in (for headers, manifests, caches).

        Keys that the unit kind and pipeline mode do not read are left out (a prefix mode takes
        no split, a comparator no carry-in), a `slices` unit leaves out `pipeline` too, and a
        unit without a reset `reset_active`.
        `from_mapping` of the result gives the same config back.
        """
        data = asdict(self)
        data["slices"] = list(self.slices)
        if not self.slices:  # no final adder (a tree that leaves one bit a column): no split
            del data["slices"]
        for key in list(data):
            if key in KEYS and not reads(key, self.unit, self.pipeline, self.tree):
                del data[key]
        if self.pipeline == "slices" and "pipeline" in data:
            del data["pipeline"]
        if self.reset == "none":  # no reset port: no polarity
            del data["reset_active"]
        return data

    def with_split(self, slices) -> "Config":
        """The same unit with another split (`plan --slice-width` / `--slices` previews)."""
        return replace(self, slices=tuple(slices))

    def replaced(self, **keys) -> "Config":
        """The same unit with some keys changed, validated again."""
        return from_mapping({**self.normalized(), **keys}, where="config")


# key -> (description of what is allowed, default or REQUIRED)
REQUIRED = object()
KEYS = {
    "name": ("a Verilog identifier (letters, digits, _; not starting with a digit; "
             f"at most {MAX_NAME} characters; not a Verilog or SystemVerilog keyword; not "
             f"starting with {RESERVED_PREFIX}, verilator or synopsys; not carrypipe, fit, "
             "miter, con, prn, aux, nul, comN or lptN, in any case)", REQUIRED),
    "unit": ("one of " + ", ".join(UNITS), "adder"),
    "width": (f"an integer from 1 to {MAX_WIDTH}", REQUIRED),
    "cell": ("one of " + ", ".join(CELLS), "native"),
    "slice_width": ("an integer from 1 to width", None),
    "slices": ("a list of positive integers (LSB first) that sum to width", None),
    "carry_in": ("true or false", False),
    "carry_out": ("true or false", True),
    "valid": ("true or false", False),
    "enable": ("true or false", False),
    "reset": ("one of " + ", ".join(RESETS), "none"),
    "reset_data": ("true or false", False),
    "reset_active": ("one of " + ", ".join(ACTIVE), "high"),
    "signed": ("true or false", False),
    "register_inputs": ("true or false", False),
    "pipeline": ("one of " + ", ".join(PIPELINES), "slices"),
    "levels_per_stage": (f"an integer from 1 to {MAX_LEVELS_PER_STAGE}", 1),
    "block_width": ("an integer from 1 to width", 16),  # or the width, if narrower
    "wire_registers": ("an integer from 0 to the prefix network's depth", 0),
    "local_width": ("an integer from 0 to width (0: one prefix network over every bit)", 0),
    "operands": (f"an integer from {MIN_OPERANDS} to {MAX_OPERANDS}", None),
    "width_b": ("an integer from 1 to the multiplier's largest width", None),
    "partial_products": ("one of " + ", ".join(PARTIAL_PRODUCTS), "and"),
    "tree": ("one of " + ", ".join(TREES), "dadda"),
    "tree_levels_per_stage": (f"an integer from 1 to {MAX_TREE_LEVELS_PER_STAGE}", 1),
    "native_stages": (f"an integer from 1 to {MAX_NATIVE_STAGES}", 1),
    "carry_increment": ("true or false", False),
}
# Keys that only some pipeline modes read, and the modes that read each.
MODE_KEYS = {
    "slice_width": ("slices",),
    "slices": ("slices",),
    "levels_per_stage": PREFIX_PIPELINES,
    "block_width": ("blocks",),
    "wire_registers": PREFIX_PIPELINES,
    "local_width": ("levels",),
    "carry_increment": ("levels",),
}
SPLIT_KEYS = ("slice_width", "slices")
PREFIX_KEYS = tuple(k for k in MODE_KEYS if k not in SPLIT_KEYS)  # the prefix modes' keys


def reads(key: str, unit: str, mode: str, tree: str = "dadda") -> bool:
    """Whether a unit of this kind in this pipeline mode (and, for the carry-save kinds,
    with this tree) reads `key`."""
    kind = units.KINDS[unit]
    if refuses(kind, key):
        return False
    if kind.tree and tree == "native" and key in COUNTER_TREE_KEYS:
        return False
    if key == "native_stages":
        return tree == "native"
    return mode in kind.mode_keys.get(key, MODE_KEYS.get(key, (mode,)))


def refuses(kind: units.Kind, key: str) -> bool:
    """Whether a unit kind never reads `key` (in any mode)."""
    return key in kind.refused or (key in TREE_KEYS and not kind.tree)


class LongInteger(str):
    """A plain decimal integer with more than MAX_INT_DIGITS digits, kept as its text: no key
    allows one, and converting it could fail (or take long) for very long ones."""

    def __repr__(self) -> str:
        return f"{self[:MAX_INT_DIGITS]}... ({len(self.lstrip('-'))} digits)"


def _shown(value) -> str:
    """A value for a one-line message, spelled as YAML reads it, cut to 60 characters."""
    shown = _spelled(value)
    return shown if len(shown) <= 60 else shown[:57] + "..."


def _spelled(value) -> str:
    """true, false and null as YAML spells them, also inside lists and mappings ([true, 7]);
    anything else as Python's repr (text quoted)."""
    if isinstance(value, bool) or value is None:
        return {True: "true", False: "false", None: "null"}[value]
    if isinstance(value, list):
        return "[" + ", ".join(map(_spelled, value)) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{_spelled(k)}: {_spelled(v)}" for k, v in value.items()) + "}"
    return repr(value)


def _is_text(value) -> bool:
    """A value (or a list element) that YAML read as text, e.g. `0x40`, `6_4`, `8.0`, `'8'`."""
    return any(type(v) is str for v in (value if isinstance(value, list) else [value]))


def _fail(where: str, key: str, value, allowed: str) -> ConfigError:
    if value == "":  # `width:` with nothing after it (or '')
        return ConfigError(f"{where}: key '{key}': no value is given; expected {allowed}")
    if allowed.startswith(("an integer", "a list of positive integers")) and _is_text(value):
        head, sep, tail = allowed.partition(";")
        quoted = any(type(v) is str and re.fullmatch(r"-?(0|[1-9][0-9]*)", v)
                     for v in (value if isinstance(value, list) else [value]))
        how = "without quotes" if quoted else "in plain decimal digits"
        allowed = f"{head}, written {how}{sep}{tail}"
    return ConfigError(f"{where}: key '{key}': value {_shown(value)} is not allowed; "
                       f"expected {allowed}")


def check_name(where: str, name) -> None:
    """Validate `name`: a Verilog identifier that no Verilog keyword, no internal module of
    carrypipe and no file carrypipe writes beside the unit's can collide with."""
    if not isinstance(name, str) or not _IDENT.match(name) or len(name) > MAX_NAME:
        raise _fail(where, "name", name, KEYS["name"][0])
    if name in VERILOG_KEYWORDS:
        raise _fail(where, "name", name, f"a name that is not a Verilog or SystemVerilog "
                    f"keyword ({name} is one)")
    if name.lower().startswith(RESERVED_PREFIX):
        raise _fail(where, "name", name, f"a name that does not start with {RESERVED_PREFIX} "
                    "(in any case), which carrypipe keeps for its own modules")
    if name.lower().startswith(DIRECTIVE_PREFIXES):
        raise _fail(where, "name", name, "a name that does not start with verilator or "
                    "synopsys (in any case): a comment line beginning so is a directive to "
                    "Verilator")
    if name.lower() in RESERVED_NAMES:
        raise _fail(where, "name", name, "a name other than carrypipe, fit and miter (names of "
                    "carrypipe's own) and the Windows device names con, prn, aux, nul, com0-com9 "
                    "and lpt0-lpt9, in any case")


def _is_int(value) -> bool:
    return isinstance(value, int) and not isinstance(value, bool)


def check_split(where: str, key: str, value, width: int,
                what: str = "width") -> tuple[int, ...]:
    """Validate `slice_width` (an int) or `slices` (a list) against `width` (the unit's, or
    `what` names it: a tree's final adder); return the split."""
    if key == "slice_width":
        if not _is_int(value) or not 1 <= value <= width:
            raise _fail(where, key, value, f"an integer from 1 to {what} ({width})")
        full, rest = divmod(width, value)
        return (value,) * full + ((rest,) if rest else ())
    if (not isinstance(value, list) or not value
            or not all(_is_int(v) and v >= 1 for v in value)):
        raise _fail(where, key, value, KEYS["slices"][0].replace("width", what)
                    + f" ({width})")
    if sum(value) != width:
        raise _fail(where, key, value, f"slice widths that sum to {what} ({width}), "
                    f"not {sum(value)}")
    return tuple(value)


def from_mapping(data, where: str = "config") -> Config:
    """Validate a parsed config mapping (any `Mapping`, read as a dict) and return the
    normalized `Config`."""
    if isinstance(data, Mapping):
        data = dict(data)
    if not isinstance(data, dict):
        kind = "empty" if data is None or data == "" else type(data).__name__  # "": `---` alone
        raise ConfigError(f"{where}: expected a mapping of keys to values, got {kind}")
    for key in data:
        if not isinstance(key, str) or key not in KEYS:
            near = difflib.get_close_matches(str(key), KEYS, n=1)
            hint = f"; did you mean '{near[0]}'?" if near else ""
            raise ConfigError(f"{where}: unknown key {_shown(key)}{hint} "
                              f"(allowed keys: {', '.join(KEYS)})")
    for key, (allowed, default) in KEYS.items():
        if default is REQUIRED and key not in data:
            raise ConfigError(f"{where}: key '{key}' is missing; expected {allowed}")
    values = {key: data.get(key, default) for key, (_, default) in KEYS.items()}

    check_name(where, values["name"])
    width = values["width"]
    if not _is_int(width) or not 1 <= width <= MAX_WIDTH:
        raise _fail(where, "width", width, KEYS["width"][0])
    for key, choices in (("unit", UNITS), ("cell", CELLS), ("reset", RESETS),
                         ("reset_active", ACTIVE), ("pipeline", PIPELINES), ("tree", TREES),
                         ("partial_products", PARTIAL_PRODUCTS)):
        if values[key] not in choices:
            raise _fail(where, key, values[key], KEYS[key][0])
    unit, mode, tree = values["unit"], values["pipeline"], values["tree"]
    kind = units.KINDS[unit]
    if mode not in kind.modes:
        raise ConfigError(f"{where}: key 'pipeline': value {mode!r} is not allowed with unit "
                          f"{unit!r}; expected one of {', '.join(kind.modes)}")
    for key in data:
        _check_read(where, key, unit, mode, tree, data)
    for key in ("carry_in", "carry_out", "valid", "enable", "register_inputs", "reset_data",
                "signed"):
        if not isinstance(values[key], bool):
            raise _fail(where, key, values[key], "true or false")
    if kind.tree:
        _check_tree(where, kind, values, data)
    span, what = _span(kind, tree, width, values)  # what the split and prefix keys refer to
    if "slice_width" in data and "slices" in data:
        raise ConfigError(f"{where}: keys 'slice_width' and 'slices' are both given; "
                          "expected at most one of them")
    if span == 0:
        _check_no_adder(where, values, data)
        split: tuple[int, ...] = ()
    elif "slices" in data:
        split = check_split(where, "slices", data["slices"], span, what)
    elif "slice_width" in data:
        split = check_split(where, "slice_width", data["slice_width"], span, what)
    else:
        split = check_split(where, "slice_width", kind.default_slice_width(span, mode), span,
                            what)
    _check_reset(where, values)
    if "block_width" not in data and span:  # the default, down to a narrower width
        values["block_width"] = min(values["block_width"], span)
    if span:
        check_mode(where, {**values, "width": span}, what, given=data)
    own = {f.name: f.default for f in fields(Config)}
    kept = {k: (v if reads(k, unit, mode, tree) else own[k]) for k, v in values.items()
            if k in own and k not in ("width", "slices")}
    return Config(width=width, slices=split, **kept)


def _check_no_adder(where: str, values: dict, data: dict) -> None:
    """A counter tree that leaves at most one bit in every column has no final adder: a split
    of it, or a value other than the default for one of its prefix keys (a normalized config
    writes the defaults), is refused; its cell must still suit its mode. Every key in `data`
    is one the unit reads (checked before)."""
    given = [k for k in SPLIT_KEYS if k in data]
    given += [k for k in PREFIX_KEYS if k in data and not (
        type(data[k]) is type(KEYS[k][1]) and data[k] == KEYS[k][1])]
    if given:
        key = given[0]
        split = " to split" if key in SPLIT_KEYS else ""
        raise ConfigError(f"{where}: key '{key}': value {_shown(data[key])} is not "
                          "allowed; the tree leaves at most one bit in every column: "
                          f"there is no final adder{split} (leave the key out)")
    if values["pipeline"] != "slices":
        _check_prefix_cell(where, values, data)


def split_span(c: Config) -> tuple[int, str]:
    """The bits a config's split refers to, and their name in messages: the unit's width,
    or a carry-save unit's final adder (0: `tree: native`, or no final adder)."""
    return _span(units.KINDS[c.unit], c.tree, c.width, c)


def _span(kind: units.Kind, tree: str, width: int, source) -> tuple[int, str]:
    """`split_span` of a config or of its checked values (`source`, which the kind's
    `adder_width` reads)."""
    if not kind.tree:
        return width, "width"
    return (0 if tree == "native" else kind.adder_width(source)), "the final adder's width"


def _check_tree(where: str, kind, values: dict, data: dict) -> None:
    """The keys of the carry-save kinds: operands, width_b, the levels and ranks."""
    unit, width = values["unit"], values["width"]
    if width > kind.max_width:
        raise _fail(where, "width", width, f"an integer from 1 to {kind.max_width} with unit "
                    f"{unit!r}")
    if reads("operands", unit, values["pipeline"], values["tree"]):
        if "operands" not in data:
            raise ConfigError(f"{where}: key 'operands' is missing; expected "
                              f"{KEYS['operands'][0]} with unit {unit!r}")
        if not _is_int(values["operands"]) or \
                not MIN_OPERANDS <= values["operands"] <= MAX_OPERANDS:
            raise _fail(where, "operands", values["operands"], KEYS["operands"][0])
    if reads("width_b", unit, values["pipeline"], values["tree"]):
        values["width_b"] = data.get("width_b", width)
        wb = values["width_b"]
        if not _is_int(wb) or not 1 <= wb <= kind.max_width:
            raise _fail(where, "width_b", wb, f"an integer from 1 to {kind.max_width}")
    for key, top in (("tree_levels_per_stage", MAX_TREE_LEVELS_PER_STAGE),
                     ("native_stages", MAX_NATIVE_STAGES)):
        if not _is_int(values[key]) or not 1 <= values[key] <= top:
            raise _fail(where, key, values[key], KEYS[key][0])


def _check_read(where: str, key: str, unit: str, mode: str, tree: str, data: dict) -> None:
    """A key given for a unit kind, pipeline mode or tree that does not read it is refused."""
    if reads(key, unit, mode, tree):
        return

    def used(k: str, t: str = "dadda") -> list[str]:  # the modes of unit kind k that read it
        return [m for m in units.KINDS[k].modes if reads(key, k, m, t)]

    if not any(used(unit, t) for t in TREES):
        users = [k for k in UNITS if any(used(k, t) for t in TREES)]
        raise ConfigError(f"{where}: key '{key}' is given with unit {unit!r}; expected it "
                          f"only with unit {' or '.join(map(repr, users))}")
    trees = [t for t in TREES if used(unit, t)]
    if units.KINDS[unit].tree and tree not in trees:
        raise ConfigError(f"{where}: key '{key}' is given with tree {tree!r}; expected it only "
                          f"with tree {' or '.join(map(repr, trees))}")
    modes = used(unit, tree)
    if key in ("slice_width", "slices") and "pipeline" in data:
        raise ConfigError(f"{where}: keys '{key}' and 'pipeline' ({mode!r}) are both given; "
                          f"expected '{key}' only with pipeline {' or '.join(map(repr, modes))}")
    raise ConfigError(f"{where}: key '{key}' is given with pipeline {mode!r}; expected it only "
                      f"with pipeline {' or '.join(map(repr, modes))}"
                      + (f" (unit {unit!r})" if unit != "adder" else ""))


def _check_reset(where: str, values: dict) -> None:
    """A reset needs something to clear; clearing the data needs a reset."""
    if values["reset"] != "none" and not values["valid"] and not values["reset_data"]:
        raise ConfigError(f"{where}: key 'reset': value {values['reset']!r} is not allowed "
                          "with nothing to reset; expected 'none', or valid: true or "
                          "reset_data: true beside it")
    if values["reset_data"] and values["reset"] == "none":
        raise ConfigError(f"{where}: key 'reset_data': value true is not allowed with reset "
                          "'none'; expected reset 'sync' or 'async' beside it")
    if values["reset_active"] != "high" and values["reset"] == "none":
        raise ConfigError(f"{where}: key 'reset_active': value {values['reset_active']!r} is "
                          "not allowed with reset 'none'; expected reset 'sync' or 'async' "
                          "beside it")


def block_count(width: int, block_width: int) -> int:
    """How many blocks of `block_width` bits `width` bits make (the top one may be narrower)."""
    return -(-width // block_width)


def prefix_positions(width: int, pipeline: str, block_width: int) -> int:
    """How many positions the prefix network of a prefix pipeline mode spans: bits or blocks."""
    return width if pipeline == "levels" else block_count(width, block_width)


def check_mode(where: str, values: dict, what: str = "width", given=()) -> None:
    """Validate the keys of the prefix modes, alone and in combination (`values["width"]`
    is the width they refer to: the unit's, or `what` names it; `given` holds the keys the
    config wrote, so a refused default says it is one)."""
    mode, unit = values["pipeline"], values["unit"]
    if mode == "slices":
        return
    lps = values["levels_per_stage"]
    if not _is_int(lps) or not 1 <= lps <= MAX_LEVELS_PER_STAGE:
        raise _fail(where, "levels_per_stage", lps, KEYS["levels_per_stage"][0])
    if not reads("wire_registers", unit, mode):  # a comparator's tree: any cell style
        return
    _check_prefix_cell(where, values, given)
    block = values["block_width"]
    if mode == "blocks" and (not _is_int(block) or not 1 <= block <= values["width"]):
        raise _fail(where, "block_width", block, f"an integer from 1 to {what} "
                    f"({values['width']})")
    local = values["local_width"]
    if mode == "levels" and (not _is_int(local) or not 0 <= local <= values["width"]):
        raise _fail(where, "local_width", local,
                    f"an integer from 0 to {what} ({values['width']}); 0: one network")
    if mode == "levels":
        _check_increment(where, values, what)
    wires = values["wire_registers"]
    depth = prefix.local_network(values["cell"], prefix_positions(values["width"], mode, block),
                                 local if mode == "levels" else 0).depth
    if not _is_int(wires) or not 0 <= wires <= depth:
        raise _fail(where, "wire_registers", wires,
                    f"an integer from 0 to the depth of the {values['cell']} network ({depth})")


def _check_prefix_cell(where: str, values: dict, given=()) -> None:
    """A prefix mode's cell is a prefix style (`given`: the keys the config wrote)."""
    if values["cell"] not in PREFIX_CELLS:
        default = "" if "cell" in given else " (the default)"
        raise ConfigError(f"{where}: key 'cell': value {values['cell']!r}{default} is not "
                          f"allowed with key 'pipeline' {values['pipeline']!r}; expected one "
                          f"of {', '.join(PREFIX_CELLS)}")


def _check_increment(where: str, values: dict, what: str = "width") -> None:
    """`carry_increment` is a way for the bits of local blocks to wait for their block's
    carry: it needs at least two blocks of at least two bits."""
    inc, local, width = values["carry_increment"], values["local_width"], values["width"]
    if not isinstance(inc, bool):
        raise _fail(where, "carry_increment", inc, "true or false")
    if inc and width < 3:
        raise ConfigError(f"{where}: key 'carry_increment': value true is not allowed with "
                          f"{what} {width}; expected false (no two local blocks of two bits)")
    if inc and not prefix.has_local_blocks(local, width):
        raise ConfigError(f"{where}: key 'carry_increment': value true is not allowed with "
                          f"local_width {local}; expected local_width from 2 to {width - 1} "
                          f"({what} - 1) beside it, or carry_increment: false")


class _StrictLoader(yaml.SafeLoader):
    """A safe loader for configs: the plain scalars of YAML 1.2's JSON schema only, and no
    anchors, aliases, merge keys, tags, repeated keys or deep nesting.

    YAML 1.1 (PyYAML's default) reads `yes`/`on` as true, `0100` as octal 64, `6_4` as 64 and
    `1:04` as 64 (base 60).  Here a plain scalar is `null`, `true`, `false`, a decimal integer
    `-?(0|[1-9][0-9]*)` or else text, which then fails the key's type check showing the text
    as written.  The nesting bound is kept while scanning, before PyYAML's scanner (whose cost
    grows with the square of the flow depth) or its recursive composer can take long or
    overflow the stack.
    """

    yaml_implicit_resolvers: dict = {}  # filled below: this loader's own, not SafeLoader's

    def _deeper(self):
        """Called as a collection opens: refuse it when it is one level too many."""
        if self.flow_level + len(self.indents) > MAX_NESTING:
            raise yaml.scanner.ScannerError(None, None, "collections nested deeper than "
                                            f"{MAX_NESTING} levels", self.get_mark())

    def fetch_flow_collection_start(self, token_class):
        super().fetch_flow_collection_start(token_class)
        self._deeper()

    def add_indent(self, column):
        added = super().add_indent(column)
        if added:
            self._deeper()
        return added

    def compose_node(self, parent, index):
        event = self.peek_event()
        what = ("aliases" if isinstance(event, yaml.AliasEvent)
                else "anchors" if event.anchor is not None
                else "tags" if getattr(event, "tag", None) is not None else None)
        if what:
            raise yaml.composer.ComposerError(None, None, f"{what} are not allowed",
                                              event.start_mark)
        return super().compose_node(parent, index)

    def construct_mapping(self, node, deep=False):
        """A mapping in which every key is given once (YAML leaves a repeated key's meaning
        open; PyYAML would keep the last value without a word) and none is a merge key."""
        first = {}
        for key_node, _ in node.value:
            if isinstance(key_node, yaml.ScalarNode) and key_node.value == "<<" \
                    and key_node.style is None:
                raise yaml.constructor.ConstructorError(
                    None, None, "merge keys (<<) are not allowed", key_node.start_mark)
            key = self.construct_object(key_node, deep=True)
            if not isinstance(key, str):
                continue  # from_mapping refuses it by name
            if key in first:
                raise yaml.constructor.ConstructorError(
                    None, None, f"key {_shown(key)} is given twice (first at line "
                    f"{first[key] + 1}); expected each key once", key_node.start_mark)
            first[key] = key_node.start_mark.line
        return super().construct_mapping(node, deep)

    def construct_yaml_int(self, node):
        text = self.construct_scalar(node)
        return LongInteger(text) if len(text.lstrip("-")) > MAX_INT_DIGITS else int(text)


for _tag, _pattern, _first in (
        ("null", r"null\Z", "n"),
        ("bool", r"(?:true|false)\Z", "tf"),
        ("int", r"-?(?:0|[1-9][0-9]*)\Z", "-0123456789")):
    _StrictLoader.add_implicit_resolver(f"tag:yaml.org,2002:{_tag}", re.compile(_pattern),
                                        list(_first))
_StrictLoader.add_constructor("tag:yaml.org,2002:int", _StrictLoader.construct_yaml_int)


def untabbed(text: str) -> str:
    """`text` with the tabs that separate read as spaces: a run of blanks after `:`, `,`,
    `[`, `{` or `-`, or before a comment or the end of the line, outside quotes, and a blank
    line. YAML 1.2 takes tabs as separators there, but PyYAML's scanner stops on them ("found
    character '\\t' that cannot start any token"). Tabs in the indentation (YAML refuses
    them), inside quotes or inside a value stay as written. Every line keeps its length, so
    marks on the result point into `text` too."""
    lines = text.split("\n")
    for n, line in enumerate(lines):
        if "\t" not in line:
            continue
        body = line.lstrip(" \t")
        lead = len(line) - len(body)
        if not body:
            lines[n] = line.replace("\t", " ")
            continue
        chars, quote, k = list(line), None, lead
        while k < len(chars):
            ch = chars[k]
            if quote:
                quote = None if ch == quote else quote
            elif ch in "'\"":
                quote = ch
            elif ch in " \t":
                end = k
                while end < len(chars) and chars[end] in " \t":
                    end += 1
                if chars[k - 1] in ":,[{-" or end == len(chars) or chars[end] in "#\r":
                    chars[k:end] = " " * (end - k)
                k = end
                continue
            k += 1
        lines[n] = "".join(chars)
    return "\n".join(lines)


NO_BREAK = "\u00a0"


def _no_break(text: str, near: set[int]) -> str:
    """Where YAML fails beside a no-break space (U+00A0, as text copied from a web page
    brings), a hint naming it: YAML does not read it as a space, so `width:\u00a08` is one
    word, a key without its `:`, and the error points past it.  `near`: the 0-based lines
    around the error's marks; a no-break space elsewhere is left unsaid."""
    for line, body in enumerate(text.split("\n")):
        if line in near and NO_BREAK in body:
            return (f" (line {line + 1}, column {body.index(NO_BREAK) + 1} holds a no-break "
                    "space, U+00A0, which YAML does not read as a space)")
    return ""


def parse_text(text: str, where: str) -> Config:
    """Parse YAML text (`untabbed`) into a validated `Config`."""
    text = untabbed(text)
    try:
        data = yaml.load(text, Loader=_StrictLoader)  # noqa: S506 - safe loader subclass
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        at = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or "invalid YAML"
        lines = text.splitlines()
        if mark and "'\\t'" in problem and mark.line < len(lines) \
                and not lines[mark.line][:mark.column].strip():
            problem = "a tab in the indentation; expected spaces there (YAML indents with spaces)"
        # PyYAML's mark can fall on the line after the trouble ("could not find expected
        # ':'" at the start of the next line); its context mark names where a key began.
        context, near = getattr(exc, "context_mark", None), set()
        if mark:
            near |= {mark.line - 1, mark.line}
        if context:
            near.add(context.line)
        raise ConfigError(f"{where}: not valid YAML{at}: {problem}{_no_break(text, near)}") \
            from None
    return from_mapping(data, where)


_KINDS = ((stat.S_ISDIR, "a folder"), (stat.S_ISFIFO, "a FIFO"), (stat.S_ISSOCK, "a socket"),
          (stat.S_ISCHR, "a character device"), (stat.S_ISBLK, "a block device"))


class NotRegularFile(OSError):
    """A path that names a folder, FIFO, socket or device: reading it could block or never end."""


def _regular(mode: int) -> None:
    if not stat.S_ISREG(mode):
        kind = next((k for test, k in _KINDS if test(mode)), "not a regular file")
        raise NotRegularFile(f"it is {kind}; expected a regular file")


def read_regular(path: str | Path, limit: int) -> bytes:
    """The first `limit` + 1 bytes of the regular file `path` (so a caller can tell a longer
    one), without ever blocking: a folder, FIFO, socket or device is refused before it is
    opened (`NotRegularFile`), opened without blocking and checked again in case it was
    swapped in between.  Raises OSError."""
    _regular(os.stat(path).st_mode)
    flags = os.O_RDONLY
    for flag in ("O_NONBLOCK", "O_NOCTTY", "O_CLOEXEC", "O_BINARY"):  # those the system has
        flags |= getattr(os, flag, 0)
    fd = os.open(path, flags)
    try:
        _regular(os.fstat(fd).st_mode)
        chunks, size = [], 0
        while size <= limit and (chunk := os.read(fd, limit + 1 - size)):
            chunks.append(chunk)
            size += len(chunk)
        return b"".join(chunks)
    finally:
        os.close(fd)


def load(path: str | Path) -> Config:
    """Read and validate a config file."""
    return parse_text(read_text(path), Path(path).name or str(path))


def read_text(path: str | Path) -> str:
    """The text of a config file: a regular file of UTF-8 text, at most MAX_CONFIG_BYTES."""
    where = Path(path).name or str(path)  # a file it cannot open is named by its path
    try:
        raw = read_regular(path, MAX_CONFIG_BYTES)
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read config: {exc.strerror or exc}") from None
    if len(raw) > MAX_CONFIG_BYTES:
        raise ConfigError(f"{where}: config is larger than {MAX_CONFIG_BYTES} bytes; expected "
                          f"a file of at most {MAX_CONFIG_BYTES} bytes")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ConfigError(f"{where}: config is not UTF-8 text") from None
    if "\x00" in text:
        raise ConfigError(f"{where}: config contains NUL bytes; expected YAML text")
    return text
