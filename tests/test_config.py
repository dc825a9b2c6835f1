"""Config validation: every mistake is one line naming the key, the value and what is allowed."""

from __future__ import annotations

import os
import re
import sys
from pathlib import Path

import pytest
import yaml

import carrypipe
from carrypipe.config import ConfigError, from_mapping, load, parse_text
from conftest import fifo_watchdog


def base(**extra):
    return {"name": "u", "width": 8, **extra}


def test_defaults_are_filled_in():
    cfg = from_mapping(base())
    assert cfg.normalized() == {
        "name": "u", "unit": "adder", "width": 8, "cell": "native", "slices": [8],
        "carry_in": False, "carry_out": True, "valid": False, "enable": False,
        "reset": "none", "reset_data": False, "signed": False, "register_inputs": False}


@pytest.mark.parametrize("keys, split", [
    ({"slice_width": 3}, (3, 3, 2)),
    ({"slice_width": 8}, (8,)),
    ({"slice_width": 1}, (1,) * 8),
    ({"slices": [5, 2, 1]}, (5, 2, 1)),
], ids=["uneven-last", "one-slice", "bit-serial", "explicit"])
def test_split(keys, split):
    assert from_mapping(base(**keys)).slices == split


@pytest.mark.parametrize("keys, message", [
    ({"widht": 8}, r"config: unknown key 'widht'; did you mean 'width'\? \(allowed keys: name, "),
    ({"width": 0}, r"config: key 'width': value 0 is not allowed; expected an integer from 1 to 4096\Z"),
    ({"width": 4097}, r"config: key 'width': value 4097 is not allowed; expected an integer from 1 to 4096\Z"),
    ({"width": True}, r"config: key 'width': value true is not allowed; expected an integer from 1 to 4096\Z"),
    ({"width": "8"}, r"config: key 'width': value '8' is not allowed; expected an integer from 1 to 4096, written without quotes\Z"),
    ({"cell": "carry-lookahead"}, r"config: key 'cell': value 'carry-lookahead' is not allowed; expected one of ripple, native, kogge-stone, brent-kung, sklansky, han-carlson, ladner-fischer\Z"),
    ({"slice_width": 9}, r"config: key 'slice_width': value 9 is not allowed; expected an integer from 1 to width \(8\)\Z"),
    ({"slice_width": 0}, r"config: key 'slice_width': value 0 is not allowed"),
    ({"slices": [4, 3]}, r"config: key 'slices': value \[4, 3\] is not allowed; expected slice widths that sum to width \(8\), not 7\Z"),
    ({"slices": [4, 0, 4]}, r"config: key 'slices': value \[4, 0, 4\] is not allowed; expected a list of positive integers"),
    ({"slices": []}, r"config: key 'slices': value \[\] is not allowed"),
    ({"slices": [4, 4], "slice_width": 4}, r"config: keys 'slice_width' and 'slices' are both given; expected at most one of them\Z"),
    ({"valid": "yes"}, r"config: key 'valid': value 'yes' is not allowed; expected true or false\Z"),
    ({"reset": "asynchronous"}, r"config: key 'reset': value 'asynchronous' is not allowed; expected one of none, sync, async\Z"),
    ({"reset": "sync"}, r"config: key 'reset': value 'sync' is not allowed with nothing to reset; expected 'none', or valid: true or reset_data: true beside it\Z"),
    ({"reset_data": True}, r"config: key 'reset_data': value true is not allowed with reset 'none'; expected reset 'sync' or 'async' beside it\Z"),
    ({"unit": "divider"}, r"config: key 'unit': value 'divider' is not allowed; expected one of adder, subtractor, addsub, comparator, accumulator, "
     r"sum, multiplier\Z"),
    ({"unit": "comparator", "carry_in": True}, r"config: key 'carry_in' is given with unit 'comparator'; expected it only with unit 'adder' or 'subtractor' or 'addsub'\Z"),
    # A comparator has no blocks mode and no wide-network keys: the message names the units
    # that take the key, or only the modes the comparator has.
    ({"unit": "comparator", "pipeline": "levels", "block_width": 4}, r"config: key 'block_width' is given with unit 'comparator'; expected it only with unit 'adder' or 'subtractor' or 'addsub' or 'sum' or 'multiplier'\Z"),
    ({"unit": "comparator", "levels_per_stage": 2}, r"config: key 'levels_per_stage' is given with pipeline 'slices'; expected it only with pipeline 'levels' \(unit 'comparator'\)\Z"),
    ({"unit": "accumulator", "pipeline": "levels"}, r"config: key 'pipeline': value 'levels' is not allowed with unit 'accumulator'; expected one of slices\Z"),
    ({"name": "module"}, r"config: key 'name': value 'module' is not allowed; expected a name that is not a Verilog or SystemVerilog keyword \(module is one\)\Z"),
    ({"name": "small"}, r"config: key 'name': value 'small' is not allowed; expected a name that is not a Verilog or SystemVerilog keyword \(small is one\)\Z"),
    ({"name": "integer"}, r"config: key 'name': value 'integer' is not allowed; expected a name that is not a Verilog or SystemVerilog keyword \(integer is one\)\Z"),  # found by a trial: the message once added "written in plain decimal digits"
    ({"name": "1abc"}, r"config: key 'name': value '1abc' is not allowed"),
    ({"name": "../x"}, r"config: key 'name': value '../x' is not allowed"),
    ({"name": "a" * 65}, r"config: key 'name': value 'aaaa.*\.\.\. is not allowed"),
], ids=lambda v: str(v)[:30] if isinstance(v, dict) else None)
def test_bad_values(keys, message):
    data = {**base(), **keys}
    if "widht" in keys:
        del data["width"]
    with pytest.raises(ConfigError, match="^" + message):
        from_mapping(data)


@pytest.mark.parametrize("width, block", [(8, 8), (16, 16), (64, 16)])
def test_block_width_default_fits_the_width(width, block):
    # The documented default, 16, or the width when the unit is narrower.
    c = from_mapping({**base(), "width": width, "pipeline": "blocks", "cell": "kogge-stone"})
    assert c.block_width == block


@pytest.mark.parametrize("text", ["name: t\nwidth: 8\ncell: ripple\t\n",
                                  "name: t\nwidth: 8\t # operand width\ncell: ripple \t\r\n",
                                  "name:\tt\nwidth:\t8\n\t\ncell:\t\tripple\n",
                                  "name: t\nwidth: 8\ncell: ripple\nslices: [4,\t4]\n"])
def test_tabs_after_a_value_are_separators(text):
    # YAML 1.2 (section 6.2, separation spaces; from memory) allows tabs between a value and
    # the end of its line or a comment; PyYAML's scanner alone stops on them.
    c = parse_text(text, "t.yaml")
    assert (c.width, c.cell) == (8, "ripple")


def test_a_long_run_of_tabs_in_a_value_is_refused_at_once():
    # 200,000 tabs inside a value: one pass over the line (a backtracking pattern took
    # minutes here), then the YAML reader refuses the tab in a plain value.
    with pytest.raises(ConfigError, match=r"not valid YAML at line 1, column 8"):
        parse_text("name: a" + "\t" * 200_000 + "b\nwidth: 8\n", "t.yaml")


@pytest.mark.parametrize("text, column", [("name: t\n\twidth: 8\n", 1),
                                          ('name: "a\tb"\nwidth: 8\n', None)])
def test_tabs_elsewhere_stay_as_written(text, column):
    with pytest.raises(ConfigError) as err:
        parse_text(text, "t.yaml")
    if column:  # a tab in the indentation: YAML refuses it, at its own column, said plainly
        assert str(err.value) == (f"t.yaml: not valid YAML at line 2, column {column}: a tab in "
                                  "the indentation; expected spaces there (YAML indents with "
                                  "spaces)")
    else:  # inside a value the tab is kept, and named as it is
        assert "value 'a\\tb'" in str(err.value)


def test_a_tab_indenting_a_list_item_is_named_at_its_line():
    with pytest.raises(ConfigError, match=r"line 4, column 1: a tab in the indentation; "):
        parse_text("name: t\nwidth: 8\nslices:\n\t- 4\n\t- 4\n", "t.yaml")


def test_missing_required_key():
    with pytest.raises(ConfigError, match=r"^config: key 'width' is missing; expected an integer from 1 to 4096\Z"):
        from_mapping({"name": "u"})


@pytest.mark.parametrize("text, message", [
    ("", r"unit.yaml: expected a mapping of keys to values, got empty\Z"),
    ("---\n", r"unit.yaml: expected a mapping of keys to values, got empty\Z"),
    ("- 1\n- 2\n", r"unit.yaml: expected a mapping of keys to values, got list\Z"),
    ("name: [unclosed\n", r"unit.yaml: not valid YAML at line 2, column 1: "),
    ("a: &x [1]\nb: *x\n", r"unit.yaml: not valid YAML at line 1, column 4: anchors are not allowed\Z"),
    ("name: u\nwidth: *x\n", r"unit.yaml: not valid YAML at line 2, column 8: aliases are not allowed\Z"),
    ("name: u\nwidth: 32\ncell: ripple\nwidth: 16\n", r"unit.yaml: not valid YAML at line 4, "
     r"column 1: key 'width' is given twice \(first at line 2\); expected each key once\Z"),
], ids=["empty", "empty-document", "list", "broken", "anchor", "alias", "repeated-key"])
def test_bad_files(write_config, text, message):
    with pytest.raises(ConfigError, match="^" + message):
        load(write_config(text))


def test_binary_junk(write_config, tmp_path):
    path = tmp_path / "junk.yaml"
    path.write_bytes(b"\xff\xfe\x00junk")
    with pytest.raises(ConfigError, match=r"^junk.yaml: config is not UTF-8 text\Z"):
        load(path)


def test_errors_are_one_line():
    with pytest.raises(ConfigError) as info:
        parse_text("name: u\nwidth: 8\ncell: |\n  two\n  lines\n", "x.yaml")
    assert "\n" not in str(info.value)


@pytest.mark.parametrize("keys", [
    {"slice_width": 3, "carry_in": True},
    {"pipeline": "levels", "cell": "sklansky", "levels_per_stage": 2},
    {"pipeline": "blocks", "cell": "kogge-stone", "block_width": 4, "valid": True},
], ids=["slices", "levels", "blocks"])
def test_normalized_config_reads_back(keys):
    cfg = from_mapping(base(**keys))
    assert from_mapping(cfg.normalized()) == cfg


# Plain scalars that YAML 1.1 reads as something other than text (yaml.org/type/int.html,
# float.html, bool.html, null.html, timestamp.html: the YAML 1.1 type repository, from
# memory; PyYAML's SafeLoader implements it and is asked below), or YAML 1.2's core schema
# reads as an integer (`0o100`, `08`), but that are not spelled as YAML 1.2's JSON schema
# spells an integer (YAML 1.2.2, section 10.2: -?(0|[1-9][0-9]*)).
INT_LOOKALIKES = ["0x40", "0b1000000", "0100", "6_4", "1:04", "+64", "64.0", "6.4e+1", ".inf",
                  ".nan", "2001-12-14", "yes", "on", "~", "Null", ""]
CORE_LOOKALIKES = ["0o100", "08", "064", "-0100"]
BOOL_LOOKALIKES = ["yes", "no", "Yes", "NO", "on", "off", "On", "OFF", "True", "FALSE", "~", ""]


@pytest.mark.parametrize("text", INT_LOOKALIKES + CORE_LOOKALIKES)
def test_yaml_1_1_numbers_are_refused_as_written(text):
    if text not in CORE_LOOKALIKES:
        assert not isinstance(yaml.safe_load(f"v: {text}")["v"], str)  # what YAML 1.1 reads
    with pytest.raises(ConfigError) as info:
        parse_text(f"name: u\nwidth: {text}\n", "u.yaml")
    assert str(info.value) == (f"u.yaml: key 'width': {shown(text)}; expected an integer "
                               "from 1 to 4096" + ", written in plain decimal digits" * bool(text))


@pytest.mark.parametrize("text", BOOL_LOOKALIKES)
def test_yaml_1_1_booleans_are_refused_as_written(text):
    assert not isinstance(yaml.safe_load(f"v: {text}")["v"], str)  # what YAML 1.1 reads
    with pytest.raises(ConfigError) as info:
        parse_text(f"name: u\nwidth: 8\nvalid: {text}\n", "u.yaml")
    assert str(info.value) == f"u.yaml: key 'valid': {shown(text)}; expected true or false"


def shown(text: str) -> str:
    """How a refusal names a value YAML 1.1 reads as a number, a boolean or null: an empty
    one (`width:` with nothing after it, null in YAML 1.1) is no value, the rest as written."""
    return f"value {text!r} is not allowed" if text else "no value is given"


def test_an_empty_value_is_named_so():
    """`width:` with nothing after it is not "value ''", and no digits hint follows."""
    with pytest.raises(ConfigError) as info:
        parse_text("name: u\nwidth:\ncell: ripple\n", "u.yaml")
    assert str(info.value) == ("u.yaml: key 'width': no value is given; expected an integer "
                               "from 1 to 4096")
    with pytest.raises(ConfigError) as info:
        parse_text("name: u\nwidth: 8\ncell: ''\n", "u.yaml")
    assert str(info.value).startswith("u.yaml: key 'cell': no value is given; expected one "
                                      "of ripple,")


@pytest.mark.parametrize("text, shown", [("[true, 7]", "[true, 7]"), ("{a: null}", "{'a': null}"),
                                         ("[[1, false]]", "[[1, false]]")])
def test_a_list_or_mapping_is_shown_as_yaml_writes_it(text, shown):
    # Python's spelling ([True, 7], {'a': None}) is not what the user wrote.
    with pytest.raises(ConfigError) as info:
        parse_text(f"name: u\nwidth: 8\nslices: {text}\n", "u.yaml")
    assert str(info.value).startswith(f"u.yaml: key 'slices': value {shown} is not allowed; ")


def test_the_accepted_spellings():
    cfg = parse_text("name: on\nwidth: 64\nslices: [60, 4]\nvalid: true\ncarry_out: false\n",
                     "u.yaml")
    assert (cfg.name, cfg.width, cfg.slices, cfg.valid, cfg.carry_out) == ("on", 64, (60, 4),
                                                                          True, False)
    lev = parse_text("name: u\nwidth: 16\ncell: sklansky\npipeline: levels\nwire_registers: 0\n"
                     "local_width: 0\n", "u.yaml")
    assert (lev.wire_registers, lev.local_width) == (0, 0)


@pytest.mark.parametrize("digits", [21, 4301, 5000, 200_000])
def test_huge_integers_are_one_line(digits):
    if digits > 4300 and hasattr(sys, "get_int_max_str_digits"):
        # Python's own limit on converting text to int (docs: "Integer string conversion
        # length limitation", default 4300 digits) is what gave a traceback.
        with pytest.raises(ValueError):
            int("9" * digits)
    with pytest.raises(ConfigError) as info:
        parse_text(f"name: u\nwidth: {'9' * digits}\n", "u.yaml")
    assert str(info.value) == (f"u.yaml: key 'width': value {'9' * 20}... ({digits} digits) is "
                               "not allowed; expected an integer from 1 to 4096")


@pytest.mark.parametrize("text", [
    "name: u\nwidth: " + "[" * 350 + "]" * 350 + "\n",
    "name: u\nwidth: " + "{" * 2000 + "\n",
    "- " * 100_000 + "x\n",
    "".join(" " * i + f"k{i}:\n" for i in range(400)),
    "name: u\nwidth: " + "[" * 16 + "]" * 16 + "\n",
], ids=["350 [", "2000 {", "100000 -", "400 block maps", "17 levels"])
def test_deep_nesting_is_one_line(text):
    with pytest.raises(ConfigError, match=r"^u.yaml: not valid YAML at line \d+, column \d+: "
                                          r"collections nested deeper than 16 levels\Z"):
        parse_text(text, "u.yaml")


def test_sixteen_levels_are_read():
    with pytest.raises(ConfigError, match=r"key 'width': value \[\[\[\["):
        parse_text("name: u\nwidth: " + "[" * 15 + "]" * 15 + "\n", "u.yaml")


@pytest.mark.parametrize("text, what", [
    ("name: &n u\nwidth: 8\n", "line 1, column 7: anchors"),
    ("&top\nname: u\nwidth: 8\n", "line 1, column 1: anchors"),
    ("name: u\nwidth: 8\nslices: &s [8]\n", "line 3, column 9: anchors"),
    ("name: u\nwidth: *w\n", "line 2, column 8: aliases"),
    ("name: u\n<<: {width: 8}\n", "line 2, column 1: merge keys (<<)"),
    ("name: u\nwidth: !!int 0x8\n", "line 2, column 8: tags"),
    ("name: !!str u\nwidth: 8\n", "line 1, column 7: tags"),
], ids=["anchor", "anchor on the mapping", "anchor on a list", "alias", "merge key", "tag int",
        "tag str"])
def test_anchors_merge_keys_and_tags_are_refused(text, what):
    with pytest.raises(ConfigError) as info:
        parse_text(text, "u.yaml")
    assert str(info.value) == f"u.yaml: not valid YAML at {what} are not allowed"


def test_internal_module_names_cannot_be_unit_names():
    """Every Verilog module carrypipe writes besides the unit (prove's miters, the cut netlist)
    is named by a constant of its module; each must be one the name rule refuses."""
    internal = set()
    for src in Path(carrypipe.__file__).parent.glob("*.py"):
        text = src.read_text()
        consts = dict(re.findall(r'^([A-Z_]+) = "([^"]*)"', text, re.M))
        # Verilog `module {NAME}` and Yosys JSON netlists `{"modules": {NAME: ...}}`.
        for ref in re.findall(r'(?:module \{|"modules": \{)([A-Z_]+)\b', text):
            internal.add(consts[ref])
        internal.update(re.findall(r"module (carrypipe_\w+)", text))
    assert {"carrypipe_miter", "carrypipe_slices", "carrypipe_cut"} <= internal
    for name in internal | {"carrypipe", "CarryPipe_Miter", "fit", "Miter", "nul", "COM1"}:
        with pytest.raises(ConfigError, match=f"^u.yaml: key 'name': value '{name}' is not allowed"):
            parse_text(f"name: {name}\nwidth: 8\n", "u.yaml")
    assert parse_text("name: carrypipeline\nwidth: 8\n", "u.yaml").name == "carrypipeline"


def test_a_fifo_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "fifo.yaml"
    os.mkfifo(fifo)
    with fifo_watchdog(fifo) as blocked:
        with pytest.raises(ConfigError, match=r"^/.*/fifo.yaml: cannot read config: it is a FIFO; "
                                              r"expected a regular file\Z"):
            load(fifo)
    assert not blocked


def test_a_device_and_a_huge_sparse_file_are_refused(tmp_path):
    with pytest.raises(ConfigError, match=r"^/dev/zero: cannot read config: it is a character device"):
        load("/dev/zero")
    sparse = tmp_path / "sparse.yaml"
    with open(sparse, "wb") as fh:
        fh.truncate(1 << 40)  # a TiB of holes: read no more than the limit
    with pytest.raises(ConfigError, match=r"^sparse.yaml: config is larger than 262144 bytes"):
        load(sparse)


def test_the_largest_real_config_is_within_the_size_bound(write_config):
    """4096 one-bit slices, one per line with a comment each (over 64 KiB): still read."""
    text = "name: u\nwidth: 4096\nslices:\n" + "  - 1  # one bit\n" * 4096
    assert len(text.encode()) > 1 << 16
    assert load(write_config(text)).slices == (1,) * 4096


@pytest.mark.parametrize("name", ["verilator_u", "Verilator", "VERILATORX", "synopsys",
                                  "Synopsys_sum"])
def test_names_that_verilator_reads_as_its_own_directive_are_refused(name):
    # Verilator takes a comment beginning with `verilator` or `synopsys_` as a metacomment
    # (a directive) and stops on one it does not know (seen with Verilator 5.006 here; its
    # manual documents the metacomments, from memory); comment lines of the emitted files
    # may begin with the name.
    with pytest.raises(ConfigError, match=rf"key 'name': value '{name}' is not allowed; "
                                          r"expected a name that does not start with "
                                          r"verilator or synopsys"):
        from_mapping({"name": name, "width": 8})
    from_mapping({"name": "my_" + name, "width": 8})  # inside a name they do no harm


def test_a_no_break_space_is_named():
    # YAML does not read U+00A0 (text copied from a web page) as a space (YAML 1.2, section
    # 5.5: white space is space and tab only; from memory): `width:\u00a08` is one word, a
    # key without its `:`, and PyYAML points past the end of the file.
    with pytest.raises(ConfigError) as info:
        parse_text("name: u\nwidth:\u00a08\n", "u.yaml")
    assert str(info.value) == ("u.yaml: not valid YAML at line 3, column 1: could not find "
                               "expected ':' (line 2, column 7 holds a no-break space, U+00A0, "
                               "which YAML does not read as a space)")
    with pytest.raises(ConfigError) as info:  # one in a quoted name, an error elsewhere
        parse_text('name: "u\u00a0v"\nwidth: [8\n', "u.yaml")
    assert "no-break" not in str(info.value)
