"""Fuzzed bad configs: every one gives one line on stderr, exit status 2 and no output folder.

The corpus holds the classes that once gave tracebacks, hangs or silent acceptance: YAML 1.1
spellings of integers, booleans, floats, nulls and dates for every key that takes an integer
or a boolean (yaml.org/type/int, /bool, /float, /null, /timestamp: the YAML 1.1 type
repository, from memory), integers longer than Python converts from text (its
int_max_str_digits default, 4300 digits), deep nesting, anchors, aliases, merge keys and
tags, names carrypipe keeps for itself, random bytes, and paths that are not regular files.
"""

import json
import os
import random
import socket
import subprocess
import sys
from pathlib import Path

import pytest
import yaml
from click.testing import CliRunner

import carrypipe
from carrypipe.cli import main

GOOD = {"name": "u", "width": 8, "slice_width": 4, "cell": "ripple"}
BAD_VALUES = {
    "name": ["../x", "module", "1abc", "a b", "", "x" * 65, "endmodule", "$x", 7, None, True,
             ["u"], {"u": 1}, "a-b", "é"],
    "width": [0, -1, 4097, 10**30, -(10**30), "8", 8.0, 8.5, True, None, [8], {"w": 8}, "wide"],
    "slice_width": [0, -4, 9, 10**20, "4", 4.0, False, None, [4]],
    "slices": [[], [0, 8], [4, 4, 1], [9], [-1, 9], "4,4", [4.0, 4.0], [True, 7], None, 8,
               [[4], [4]]],
    "cell": ["kogge", "", 3, None, ["ripple"], "Ripple", "ripple "],
    "carry_in": ["yes", 1, 0, None, "true", [True]],
    "carry_out": ["no", 2, None],
    "valid": ["on", -1, 1.5],
    "enable": ["off", 1, {}],
    "reset": ["async", "", True, None, 0, "SYNC"],
    "register_inputs": ["true", 1],
    "unit": ["multiply", None, 1, "Adder", "comparators", "Multiplier", "summer"],
    "pipeline": ["stages", None, 3],
    "reset_data": ["yes", 1, None, True],  # true needs a reset
    "signed": ["on", 2, None, "true"],
}
# The carry-save kinds' keys, each on a config of a kind that reads it.
TREE_BASES = {"operands": {"name": "u", "unit": "sum", "width": 8, "operands": 4},
              "width_b": {"name": "u", "unit": "multiplier", "width": 8},
              "partial_products": {"name": "u", "unit": "multiplier", "width": 8},
              "tree": {"name": "u", "unit": "sum", "width": 8, "operands": 4},
              "tree_levels_per_stage": {"name": "u", "unit": "multiplier", "width": 8},
              "native_stages": {"name": "u", "unit": "multiplier", "width": 8,
                                "tree": "native"}}
BAD_TREE_VALUES = {
    "operands": [2, 17, 0, -3, "4", 4.0, True, None, [4], "four"],
    "width_b": [0, -1, 257, 10**30, "8", 8.5, True, None, [8]],
    "partial_products": ["booth", "AND", "", None, 4, "booth8", ["and"], "and "],
    "tree": ["dada", "Dadda", None, 3, "wallace ", "", ["native"]],
    "tree_levels_per_stage": [0, 17, -1, "2", 2.0, True, None],
    "native_stages": [0, 17, "1", None, 1.5, False],
}
# Keys each fine alone but refused together (a unit kind or mode that does not read a key,
# a reset with nothing to clear).
BAD_COMBINATIONS = [
    {"unit": "comparator", "carry_in": True}, {"unit": "comparator", "carry_out": False},
    {"unit": "comparator", "pipeline": "blocks"}, {"unit": "accumulator", "signed": True},
    {"unit": "accumulator", "pipeline": "levels"}, {"unit": "accumulator", "carry_in": True},
    {"unit": "subtractor", "pipeline": "levels", "cell": "native"},
    {"reset": "sync"}, {"reset": "async", "reset_data": False},
    {"reset": "none", "reset_data": True, "valid": True},
    {"unit": "multiplier", "carry_in": True}, {"unit": "multiplier", "carry_out": True},
    {"unit": "sum", "operands": 3, "carry_out": False}, {"unit": "sum"},
    {"unit": "sum", "operands": 3, "width_b": 4}, {"unit": "multiplier", "operands": 3},
    {"unit": "multiplier", "width": 300}, {"unit": "multiplier", "slices": [4, 4]},
    {"unit": "multiplier", "tree": "native", "cell": "ripple"},
    {"unit": "multiplier", "tree": "native", "partial_products": "booth4"},
    {"unit": "multiplier", "tree": "native", "tree_levels_per_stage": 2},
    {"unit": "multiplier", "native_stages": 2}, {"operands": 3}, {"tree": "dadda"},
    {"width_b": 4}, {"unit": "multiplier", "width": 1, "width_b": 1, "slice_width": 1},
    {"unit": "sum", "operands": 4, "signed": True, "pipeline": "levels", "cell": "native"},
]

# Plain scalars that YAML 1.1 (PyYAML's default) reads as a number, boolean, null or date, or
# that Python's int() would take, but that are not a plain decimal integer: each must be
# refused where an integer is expected.
INT_SPELLINGS = ["0x10", "0X10", "0o10", "0b100", "010", "0100", "08", "00", "-04", "+4",
                 "+0", "1_6", "0_4", "1:04", "4.0", "4.", "4e0", "0.4e1", ".inf", "-.inf",
                 ".nan", ".NaN", "2001-12-14", "2001-12-14 21:59:43.10 -5", "~", "Null",
                 "NULL", "", "yes", "on", "True", "'4'", '"4"', "٤", "４", "4\u00a0", "1,000",
                 "four"]
# Every YAML 1.1 boolean spelling but `true` / `false`, and other near misses.
BOOL_SPELLINGS = ["yes", "no", "Yes", "No", "YES", "NO", "on", "off", "On", "Off", "ON", "OFF",
                  "y", "n", "Y", "N", "True", "False", "TRUE", "FALSE", "tRUE", "1", "0", "~",
                  "null", "", "'true'", '"false"', "1.0", ".nan"]
BOOL_KEYS = ("carry_in", "carry_out", "valid", "enable", "register_inputs", "reset_data",
             "signed")
# Integer keys and the config each is read in (the prefix keys only with their pipeline).
LEVELS = "name: u\nwidth: 16\ncell: kogge-stone\npipeline: levels\n"
INT_KEYS = {
    "width": "name: u\nwidth: {}\n",
    "slice_width": "name: u\nwidth: 8\nslice_width: {}\n",
    "slices": "name: u\nwidth: 8\nslices: [4, {}]\n",
    "levels_per_stage": LEVELS + "levels_per_stage: {}\n",
    "wire_registers": LEVELS + "wire_registers: {}\n",
    "local_width": LEVELS + "local_width: {}\n",
    "block_width": "name: u\nwidth: 16\ncell: sklansky\npipeline: blocks\nblock_width: {}\n",
    "operands": "name: u\nunit: sum\nwidth: 8\noperands: {}\n",
    "width_b": "name: u\nunit: multiplier\nwidth: 8\nwidth_b: {}\n",
    "tree_levels_per_stage": "name: u\nunit: multiplier\nwidth: 8\ntree_levels_per_stage: {}\n",
    "native_stages": "name: u\nunit: multiplier\nwidth: 8\ntree: native\nnative_stages: {}\n",
}
HUGE = ["9" * 21, "1" + "0" * 99, "9" * 4300, "9" * 4301, "9" * 5000, "-" + "9" * 5000,
        "1" * 200_000]
RESERVED = ["carrypipe_miter", "carrypipe_slices", "carrypipe_cut", "carrypipe_tb",
            "carrypipe_", "CARRYPIPE_MITER", "Carrypipe_harness", "carrypipe", "CarryPipe",
            "fit", "Fit", "FIT", "miter", "Miter", "con", "CON", "nul", "Nul", "aux", "prn",
            "com0", "com1", "COM9", "lpt1", "LPT9"]


def _nested(n: int) -> list[tuple[str, str]]:
    """Configs nested n levels deep, in flow and block style, as a value and as a key."""
    return [(f"[ x {n}", "name: u\nwidth: " + "[" * n + "]" * n + "\n"),
            (f"{{ x {n}", "name: u\nwidth: " + "{" * n + "\n"),
            (f"[{{ x {n}", "name: u\nslices: " + "[{a: " * n + "\n"),
            (f"- x {n}", "- " * n + "x\n"),
            (f"key [ x {n}", "? " + "[" * n + "]" * n + "\n: 1\n"),
            (f"block maps x {n}", "".join(" " * i + f"k{i}:\n" for i in range(min(n, 1400))))]


def _bad_texts():
    """At least 600 invalid config texts (or bytes), each with what it exercises."""
    cases = []
    for key, values in BAD_VALUES.items():
        base = {k: v for k, v in GOOD.items() if k != "slice_width" or key != "slices"}
        for value in values:
            cases.append((f"{key}={value!r}", yaml.safe_dump({**base, key: value})))
    for key, values in BAD_TREE_VALUES.items():
        for value in values:
            cases.append((f"{key}={value!r}", yaml.safe_dump({**TREE_BASES[key], key: value})))
    for keys in BAD_COMBINATIONS:
        data = {**GOOD, **keys}
        if "pipeline" in keys:
            data.pop("slice_width")
        cases.append((f"combination {keys}", yaml.safe_dump(data)))
    for key, template in INT_KEYS.items():
        for text in INT_SPELLINGS:
            cases.append((f"YAML 1.1 {key}: {text}", template.format(text)))
        for text in HUGE:
            cases.append((f"huge {key}: {len(text)} chars", template.format(text)))
    for key in BOOL_KEYS:
        for text in BOOL_SPELLINGS:
            cases.append((f"YAML 1.1 {key}: {text}", f"name: u\nwidth: 8\n{key}: {text}\n"))
    for text in BOOL_SPELLINGS:  # a levels-mode key: read with local blocks only
        cases.append((f"YAML 1.1 carry_increment: {text}",
                      LEVELS + f"local_width: 8\ncarry_increment: {text}\n"))
    for text in HUGE:
        cases.append((f"huge name: {len(text)} chars", f"name: {text}\nwidth: 8\n"))
        cases.append((f"huge key: {len(text)} chars", f"name: u\nwidth: 8\n{text}: 1\n"))
    for n in (17, 100, 350, 1000, 100_000):
        cases += _nested(n)
    cases += [(f"reserved name {name}", f"name: {name}\nwidth: 8\n") for name in RESERVED]
    cases += [
        ("anchor on a value", "name: &n u\nwidth: 8\n"),
        ("anchor on a number", "name: u\nwidth: &w 8\n"),
        ("anchor on the mapping", "&top\nname: u\nwidth: 8\n"),
        ("anchor on a list", "name: u\nwidth: 8\nslices: &s [4, 4]\n"),
        ("anchor on a key", "&k name: u\nwidth: 8\n"),
        ("anchor on an empty value", "name: u\nwidth: 8\nvalid: &v\n"),
        ("alias alone", "name: u\nwidth: *w\n"),
        ("merge key", "name: u\n<<: {width: 8}\n"),
        ("merge key list", "name: u\n<<: [{width: 8}]\n"),
        ("merge key explicit", "name: u\n? <<\n: {width: 8}\n"),
        ("merge key tagged", "name: u\n!!merge <<: {width: 8}\n"),
        ("tag int", "name: u\nwidth: !!int 0x8\n"),
        ("tag int plain", "name: u\nwidth: !!int 8\n"),
        ("tag str", "name: !!str u\nwidth: 8\n"),
        ("tag bool", "name: u\nwidth: 8\nvalid: !!bool yes\n"),
        ("tag float", "name: u\nwidth: !!float 8\n"),
        ("tag timestamp", "name: u\nwidth: !!timestamp 2001-12-14\n"),
        ("tag set", "name: u\nwidth: 8\nslices: !!set {4, 4}\n"),
        ("tag omap", "!!omap\n- name: u\n- width: 8\n"),
        ("non-specific tag", "name: ! u\nwidth: 8\n"),
        ("local tag", "name: !adder u\nwidth: 8\n"),
        ("tag directive", "%TAG !c! tag:example.com,2026:\n---\nname: !c!n u\nwidth: 8\n"),
        ("two documents", "name: u\nwidth: 8\n---\nname: v\nwidth: 8\n"),
        ("size limit", "name: u\nwidth: 8\n#" + "x" * (1 << 20) + "\n"),
    ]
    for key in ("name", "width"):
        cases.append((f"missing {key}", yaml.safe_dump({k: v for k, v in GOOD.items() if k != key})))
    for key in ("widht", "slice", "Name", "carry", "cells", "x", "1", "true", "null", "<<"):
        cases.append((f"unknown {key}", f"name: u\nwidth: 8\n'{key}': 1\n"))
    cases.append(("both splits", yaml.safe_dump({**GOOD, "slices": [4, 4]})))
    cases += [("non-mapping " + t, t) for t in
              ("- 1\n- 2\n", "42\n", "just text\n", "[name, width]\n", "null\n", "~\n", "true\n",
               "'quoted'\n", "!!binary aGVsbG8=\n")]
    cases += [("empty", ""), ("blank", "   \n\n"), ("comment only", "# nothing\n"),
              ("bad yaml", "name: [u\nwidth: 8\n"), ("tab", "name:\tu\n\twidth: 8\n"),
              ("repeated key", "name: u\nwidth: 8\nwidth: x\n"), ("nul", "name: u\x00\n"),
              ("python tag", "name: !!python/object:os.system ls\nwidth: 8\n"),
              ("alias", "a: &a u\nname: *a\nwidth: 8\n"),
              ("bomb", "a: &a [x, x, x, x, x, x, x, x, x]\nb: &b [*a, *a, *a, *a, *a, *a, *a]\n"
                       "c: &c [*b, *b, *b, *b, *b, *b, *b]\nd: [*c, *c, *c, *c, *c, *c, *c]\n"),
              ("not UTF-8", b"name: \xff\nwidth: 8\n"), ("UTF-16", "name: u\nwidth: 8\n".encode("utf-16"))]
    rng = random.Random(4)
    for k in range(160):
        junk = bytes(rng.getrandbits(8) for _ in range(rng.randrange(1, 300)))
        cases.append((f"junk {k}", junk))
    for k in range(240):  # random mixes of good keys with one bad value
        key = rng.choice(list(BAD_VALUES))
        data = {kk: vv for kk, vv in GOOD.items() if rng.random() < 0.9 or kk not in ("name", "width")}
        data[key] = rng.choice(BAD_VALUES[key])
        cases.append((f"mix {k}: {key}={data[key]!r}", yaml.safe_dump(data)))
    return cases


BAD = _bad_texts()
FIT = ["--target-mhz", "100", "--device", "ecp5-85k"]


def behaves(args: list, where: str, out) -> str | None:
    """Run the command line; what went wrong, or None when it gave one error line on stderr,
    nothing on stdout, exit status 2 and no output folder."""
    res = CliRunner().invoke(main, args)
    lines = res.stderr.splitlines()
    if not (res.exit_code == 2 and isinstance(res.exception, SystemExit) and res.stdout == ""
            and len(lines) == 1 and lines[0].startswith(f"carrypipe: error: {where}")):
        return f"exit {res.exit_code}, stdout {res.stdout!r}, stderr {res.stderr[:300]!r}, " \
               f"{res.exception!r}"
    if out.exists():
        return "an output folder was written"
    return None


def test_the_corpus_covers_every_class():
    assert len(BAD) >= 600
    # README and docs/verification.md give the corpus's size; they must say the true one.
    root = Path(__file__).parent.parent
    for doc in ("README.md", "docs/verification.md"):
        assert f"{len(BAD):,} bad configs" in (root / doc).read_text(), doc
    assert f"All {len(BAD):,} configs" in (root / "README.md").read_text()
    labels = " ".join(what for what, _ in BAD)
    for part in ("YAML 1.1", "huge", "[ x 100000", "- x 350", "anchor", "alias", "merge",
                 "tag", "reserved name carrypipe_miter", "junk", "mix"):
        assert part in labels, part


def test_bad_configs_give_one_line_and_exit_2(tmp_path):
    out, cfg = tmp_path / "out", tmp_path / "bad.yaml"
    failed = []
    for k, (what, text) in enumerate(BAD):
        cfg.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
        commands = [["build", str(cfg), "-o", str(out)], ["plan", str(cfg)]]
        if k % 10 == 0:  # the other commands read configs the same way: a sample of them
            commands += [["check", str(cfg), "--sim", "amaranth"], ["prove", str(cfg)],
                         ["fit", str(cfg), *FIT, "-o", str(out)]]
        failed += [(what, args[0], why) for args in commands
                   if (why := behaves(args, "bad.yaml", out))]
    assert not failed, f"{len(failed)} of {len(BAD)} misbehaved, first: {failed[:3]}"


def odd_paths(tmp: Path) -> dict[str, str]:
    """Config paths that are not readable regular files; reading any of them must not block
    (a FIFO without a writer) or run without end (a device)."""
    paths = {"char device": "/dev/zero", "null device": "/dev/null"}
    for kind in ("FIFO", "socket", "folder", "link to a device", "sparse 20 GiB",
                 "dangling link", "missing"):
        paths[kind] = str(tmp / f"{kind.replace(' ', '_')}.yaml")
    os.mkfifo(paths["FIFO"])
    with socket.socket(socket.AF_UNIX) as sock:
        sock.bind(paths["socket"])  # the socket file stays when the socket is closed
    os.mkdir(paths["folder"])
    os.symlink("/dev/zero", paths["link to a device"])
    with open(paths["sparse 20 GiB"], "wb") as fh:
        fh.truncate(20 << 30)
    os.symlink(tmp / "nowhere.yaml", paths["dangling link"])
    return paths


# Runs command lines in a child process, so that a regression (a read of /dev/zero that never
# ends, a FIFO that blocks) fails the test instead of exhausting memory or hanging the run.
CHILD = """
import json, resource, sys
resource.setrlimit(resource.RLIMIT_AS, (2 << 30, 2 << 30))
from click.testing import CliRunner
from carrypipe.cli import main
print(json.dumps([(r.exit_code, r.stdout, r.stderr, repr(r.exception))
                  for r in (CliRunner().invoke(main, a) for a in json.loads(sys.argv[1]))]))
"""


def test_paths_that_are_not_regular_files(tmp_path):
    out = tmp_path / "out"
    runs = []
    for kind, path in odd_paths(tmp_path).items():
        commands = [["build", path, "-o", str(out)], ["plan", path],
                    ["check", path, "--sim", "amaranth"], ["fit", path, *FIT, "-o", str(out)]]
        if kind != "folder":  # prove may read a build folder
            commands.append(["prove", path])
        runs += [(kind, args) for args in commands]
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(
        [str(Path(carrypipe.__file__).parents[1]), os.environ.get("PYTHONPATH", "")])}
    child = subprocess.run([sys.executable, "-c", CHILD, json.dumps([a for _, a in runs])],
                           capture_output=True, text=True, timeout=120, env=env)
    assert child.returncode == 0, child.stderr
    failed = []
    for (kind, args), (code, stdout, stderr, exc) in zip(runs, json.loads(child.stdout)):
        where = "" if kind == "folder" else os.path.basename(args[1])  # click names a folder
        lines = stderr.splitlines()
        if not (code == 2 and stdout == "" and len(lines) == 1
                and lines[0].startswith("carrypipe: error: ") and where in lines[0]):
            failed.append((kind, args[0], code, stderr[:200], exc))
    assert not failed, failed
    assert not out.exists()


@pytest.mark.parametrize("keys, why", [
    ({"name": "sum", "width": 8}, "sum is an output port of this unit"),
    ({"name": "clk", "width": 8, "slice_width": 4}, "clk is an input port of this unit"),
    ({"name": "acc", "unit": "accumulator", "width": 8}, "acc is an output port of this unit"),
    ({"name": "carry_stage_0", "width": 8, "slice_width": 4},
     "carry_stage_0 is a register of this unit"),
    ({"name": "gen", "width": 8, "pipeline": "levels", "cell": "kogge-stone"},
     "gen is a wire of this unit"),
])
def test_a_name_taken_by_one_of_the_units_signals_is_refused(tmp_path, keys, why):
    # Found by a new-user trial: `name: sum` built a module with an output `sum`, which
    # Verilator's -Wall lint flags (VARHIDDEN: a signal hiding its module's name).
    cfg = tmp_path / "c.yaml"
    cfg.write_text(yaml.safe_dump(keys))
    out = tmp_path / "out"
    for command in (["build", str(cfg), "-o", str(out)], ["plan", str(cfg)],
                    ["check", str(cfg)]):
        res = CliRunner().invoke(main, command)
        assert res.exit_code == 2, res.output
        assert res.output == (f"carrypipe: error: c.yaml: key 'name': value {keys['name']!r} is "
                              "not allowed; expected a name other than the unit's own signal "
                              f"names ({why})\n")
    assert not out.exists()


@pytest.mark.parametrize("text, how", [('"64"', "without quotes"), ("'64'", "without quotes"),
                                       ("064", "in plain decimal digits"),
                                       ("'064'", "in plain decimal digits")])
def test_a_quoted_integer_is_told_to_lose_its_quotes(tmp_path, text, how):
    """YAML reads `width: "64"` as text; the digits are plain, the quotes are the fault (a
    README trial read "written in plain decimal digits" there as nonsense)."""
    from carrypipe.config import ConfigError, parse_text

    with pytest.raises(ConfigError) as info:
        parse_text(f"name: u\nwidth: {text}\n", "u.yaml")
    assert str(info.value).endswith(f"expected an integer from 1 to 4096, written {how}")
