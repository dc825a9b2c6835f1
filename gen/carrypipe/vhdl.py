"""`<name>_pkg.vhd`: the unit as a VHDL component, for VHDL designs that instantiate the
Verilog module in a mixed-language tool.

The component must carry the module's name to bind to it, so the package is written only
when that name can be a VHDL name that hides nothing: not a reserved word, a VHDL basic
identifier, not one of the unit's own ports once case is gone (VHDL has none), not a name
the standard packages or libraries declare.  Every figure is the plan's (the include file's
list, `flowfiles.figures`).
"""

from __future__ import annotations

import re

from . import __version__
from .flowfiles import figures, macro
from .header import timing_phrase, wrapped
from .verilog import LINE

# Reserved words of VHDL: IEEE 1076-2008 clause 15.10 and the two that 1076-2019 adds,
# `private` and `view` (listed from memory; tests/test_vhdl.py has GHDL refuse each one it
# knows as an entity name).  No VHDL identifier may be one, in any case.
RESERVED = frozenset("""
abs access after alias all and architecture array assert assume assume_guarantee attribute
begin block body buffer bus case component configuration constant context cover default
disconnect downto else elsif end entity exit fairness file for force function generate
generic group guarded if impure in inertial inout is label library linkage literal loop map
mod nand new next nor not null of on open or others out package parameter port postponed
private procedure process property protected pure range record register reject release rem
report restrict restrict_guarantee return rol ror select sequence severity shared signal sla
sll sra srl strong subtype then to transport type unaffected units until use variable view
vmode vprop vunit wait when while with xnor xor""".split())

# What the standard packages of VHDL-2008 declare, as GHDL's library sources give it (tests
# check these lists against the sources both ways): where a design makes such a name and the
# component of the same name visible by use clauses, VHDL makes neither visible; in the
# package itself the component hides it (a unit `std_logic`).
DECLARED = {
    "std.standard": """boolean false true bit character severity_level note warning error failure
        integer real time fs ps ns us ms sec min hr delay_length now natural positive string
        boolean_vector bit_vector integer_vector real_vector time_vector file_open_kind
        read_mode write_mode append_mode file_open_status open_ok status_error name_error
        mode_error foreign nul soh stx etx eot enq ack bel bs ht lf vt ff cr so si dle dc1 dc2
        dc3 dc4 nak syn etb can em sub esc fsp gsp rsp usp del """ + " ".join(
        f"c{n}" for n in range(128, 160)),
    "std.textio": """line text side right left width input output readline writeline read
        write justify tee sread swrite string_read string_write bread bwrite binary_read
        binary_write oread owrite octal_read octal_write hread hwrite hex_read hex_write""",
    "std.env": "stop finish resolution_limit",
    "ieee.std_logic_1164": """std_ulogic std_ulogic_vector resolved std_logic std_logic_vector
        x01 x01z ux01 ux01z to_bit to_bitvector to_stdulogic to_stdulogicvector
        to_stdlogicvector to_x01 to_x01z to_ux01 rising_edge falling_edge is_x to_01 to_bv
        to_slv to_sulv to_bit_vector to_std_logic_vector to_std_ulogic_vector to_string
        to_ostring to_hstring to_bstring to_binary_string to_octal_string to_hex_string""",
    "ieee.numeric_std": """unsigned signed unresolved_unsigned unresolved_signed u_unsigned
        u_signed to_integer to_unsigned to_signed resize shift_left shift_right rotate_left
        rotate_right std_match find_leftmost find_rightmost minimum maximum copyrightnotice""",
    "ieee.math_real": """math_e math_1_over_e math_pi math_2_pi math_1_over_pi math_pi_over_2
        math_pi_over_3 math_pi_over_4 math_3_pi_over_2 math_log_of_2 math_log_of_10
        math_log2_of_e math_log10_of_e math_sqrt_2 math_1_over_sqrt_2 math_sqrt_pi
        math_deg_to_rad math_rad_to_deg sign ceil floor round trunc realmax realmin uniform
        sqrt cbrt exp log log2 log10 sin cos tan arcsin arccos arctan sinh cosh tanh arcsinh
        arccosh arctanh copyrightnotice""",
}
# Declared implicitly with the types of std.textio (its file type: file_open, file_close,
# endfile, flush; its access type LINE: deallocate), so not in its source text.
IMPLICIT = {"std.textio": "file_open file_close endfile flush deallocate"}
LIBRARIES = ("ieee", "std", "work")
_DECLARED_BY = {name: where for table in (IMPLICIT, DECLARED)
                for where, names in reversed(table.items()) for name in names.split()}
_IDENT = re.compile(r"[A-Za-z](_?[A-Za-z0-9])*\Z")  # a VHDL basic identifier


def package_name(plan) -> str:
    """The package's name, and its file's without `.vhd`."""
    return f"{plan.config.name}_pkg"


def unfit(plan) -> str | None:
    """Why the unit's name cannot name the component (None when it can), completing
    "<name> is ..."."""
    name = plan.config.name
    low = name.lower()
    if low in RESERVED:
        return "a VHDL reserved word, which no VHDL name may be"
    if not _IDENT.match(name):
        return ("not a VHDL identifier (it starts or ends with an underscore, or has two "
                "in a row)")
    if low in {p.name for p in plan.ports}:
        return f"the unit's own port {low} in VHDL, which has no case"
    if low in LIBRARIES:
        return "the name of a VHDL library, which a component of that name would hide"
    if low in _DECLARED_BY:
        return (f"declared by {_DECLARED_BY[low]}: a design that uses both would see neither "
                "(VHDL hides two such names from each other)")
    return None


def case_note(name: str) -> str | None:
    """A warning for a name with capitals: VHDL identifiers have no case, and a tool may
    look the Verilog module up under the name in lower case (None for a lower-case name)."""
    if name == name.lower():
        return None
    return (f"VHDL reads {name} without its case, and a tool may look the Verilog module up "
            f"as {name.lower()} (Icarus Verilog does, and then does not find it); a unit "
            "name in lower case avoids the question")


def notes(plan) -> list[str]:
    """What `build` and `fit` say about the package: why there is none, or the case note."""
    file = f"{package_name(plan)}.vhd"
    why = unfit(plan)
    if why:
        return [f"no {file}: {plan.config.name} is {why}"]
    case = case_note(plan.config.name)
    return [f"{file}: {case}"] if case else []


def files(plan) -> dict[str, str]:
    """The package by file name, or nothing when the name cannot carry it."""
    return {} if unfit(plan) else {f"{package_name(plan)}.vhd": package(plan)}


def package(plan) -> str:
    """A VHDL-93 package with the unit as a component (its ports in the documented order,
    `std_logic` and `std_logic_vector(w - 1 downto 0)`), the include file's figures as
    constants and, in a comment, an instance of it."""
    c, pkg = plan.config, package_name(plan)

    def note(text: str, pad: str = "") -> list[str]:
        return wrapped(text, f"{pad}-- ", f"{pad}--   ")

    case = case_note(c.name)
    lines = [*note(f"{pkg}.vhd: generated by carrypipe {__version__} with {c.name}.v; do not "
                   "edit."),
             *note(f"The Verilog module {c.name} as a VHDL component, for a VHDL design that "
                   f"instantiates it (compile {c.name}.v beside it), with its figures as "
                   "constants."),
             *note(f"Timing: {timing_phrase(plan)}."),
             *(note(f"{case}.") if case else []),
             "library ieee;", "use ieee.std_logic_1164.all;", "", f"package {pkg} is"]
    consts = [(macro(plan, n), v, meaning) for n, v, meaning in figures(plan)]
    width = max(len(n) for n, _, _ in consts)
    digits = max(len(str(v)) for _, v, _ in consts)
    rows = [(f"  constant {n:<{width}} : natural := {str(v) + ';':<{digits + 1}}", meaning)
            for n, v, meaning in consts]
    if max(len(f"{code}  -- {meaning}") for code, meaning in rows) <= LINE:
        lines += [f"{code}  -- {meaning}" for code, meaning in rows]
    else:  # a long unit name: each comment above its constant, its type below if need be
        for n, v, meaning in consts:
            code = f"  constant {n} : natural := {v};"
            lines += [*note(meaning, "  "), *([code] if len(code) <= LINE else
                                              [f"  constant {n}", f"    : natural := {v};"])]
    lines += ["", f"  component {c.name} is", "    port ("]
    name_w = max(len(p.name) for p in plan.ports)
    types = {p.name: "std_logic" if p.width == 1 else
             f"std_logic_vector({p.width - 1} downto 0)" for p in plan.ports}
    type_w = max(len(t) for t in types.values())
    last = len(plan.ports) - 1
    for k, p in enumerate(plan.ports):
        mode, semi = "in " if p.direction == "input" else "out", ";" if k < last else ""
        code = f"      {p.name:<{name_w}} : {mode} {types[p.name] + semi:<{type_w + 1}}  "
        lines += wrapped(p.meaning, f"{code}-- ", " " * len(code) + "--   ")
    lines += ["    );", "  end component;", ""]
    lines += note("An instance, in an architecture that uses this package (connect every port; "
                  "`open` for an output you do not use):", "  ")
    head = f"  --   u_{c.name} : {c.name} port map ("
    lines += [head] if len(head) <= LINE else [f"  --   u_{c.name}",
                                               f"  --     : {c.name} port map ("]
    lines += [f"  --     {p.name:<{name_w}} => {p.name}{',' if k < last else ');'}"
              for k, p in enumerate(plan.ports)]
    lines += [f"end package {pkg};", ""]
    return "\n".join(lines)
