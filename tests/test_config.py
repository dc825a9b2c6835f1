"""Config validation: every mistake is one line naming the key, the value and what is allowed."""

from __future__ import annotations

import pytest

from carrypipe.config import ConfigError, from_mapping, load, parse_text


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
    ({"width": "8"}, r"config: key 'width': value '8' is not allowed; expected an integer from 1 to 4096\Z"),
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
    ({"unit": "divider"}, r"config: key 'unit': value 'divider' is not allowed; expected one of adder, subtractor, addsub, comparator, accumulator\Z"),
    ({"unit": "comparator", "carry_in": True}, r"config: key 'carry_in' is given with unit 'comparator'; expected it only with unit 'adder' or 'subtractor' or 'addsub'\Z"),
    ({"unit": "accumulator", "pipeline": "levels"}, r"config: key 'pipeline': value 'levels' is not allowed with unit 'accumulator'; expected one of slices\Z"),
    ({"name": "module"}, r"config: key 'name': value 'module' is not allowed; expected a Verilog identifier"),
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


def test_missing_required_key():
    with pytest.raises(ConfigError, match=r"^config: key 'width' is missing; expected an integer from 1 to 4096\Z"):
        from_mapping({"name": "u"})


@pytest.mark.parametrize("text, message", [
    ("", r"unit.yaml: expected a mapping of keys to values, got empty\Z"),
    ("- 1\n- 2\n", r"unit.yaml: expected a mapping of keys to values, got list\Z"),
    ("name: [unclosed\n", r"unit.yaml: not valid YAML at line 2, column 1: "),
    ("a: &x [1]\nb: *x\n", r"unit.yaml: not valid YAML at line 2, column 4: aliases are not allowed\Z"),
    ("name: u\nwidth: 32\ncell: ripple\nwidth: 16\n", r"unit.yaml: not valid YAML at line 4, "
     r"column 1: key 'width' is given twice \(first at line 2\); expected each key once\Z"),
], ids=["empty", "list", "broken", "alias", "repeated-key"])
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
