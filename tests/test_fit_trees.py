"""`fit` for the carry-save units: the candidates (trees x levels per stage x the final
adder's splits, native x ranks), the chosen config written back into the user's file, the
--trees option, and (slow) a real run."""

import re

import pytest
from click.testing import CliRunner

from carrypipe import candidates, config, config_edit
from carrypipe.cli import main
from carrypipe.plan import make_plan
from carrypipe.toolflow import Measurement

TAP = "# tap of the test filter\nname: tap12\nunit: multiplier\nwidth: 12   # bits\n" \
      "signed: true\ncell: native\nslice_width: 8\n"


def base():
    return config.parse_text(TAP, "tap.yaml")


def test_candidates_span_trees_levels_and_final_adders():
    found = candidates.generate(base())
    trees = {(c.tree, c.tree_levels_per_stage if c.tree != "native" else None,
              c.native_stages if c.tree == "native" else None) for c in found}
    assert trees == {("dadda", 1, None), ("dadda", 2, None), ("wallace", 1, None),
                     ("wallace", 2, None), *(("native", None, n) for n in (1, 2, 3, 4))}
    for c in found:
        if c.tree != "native" and c.pipeline == "slices":
            # The split divides the final adder, in at most TREE_SLICES slices.
            assert sum(c.slices) == make_plan(c).rows.adder_width
            assert len(c.slices) <= candidates.TREE_SLICES
    assert {c.pipeline for c in found if c.tree != "native"} == {"slices", "levels", "blocks"}
    rows = candidates.distinct([candidates.Row(make_plan(c)) for c in found])
    # Every config is its own circuit but where Kogge-Stone and Han-Carlson coincide over a
    # final adder of 2 or 3 blocks (the same Verilog: test_fit_candidates).
    merged = {(r.label, *r.same) for r in rows if r.same}
    assert merged and all(len(group) == 2 and "blocks of" in group[0] for group in merged)
    assert {g[1] for g in merged} == {g[0].replace("kogge-stone", "han-carlson") for g in merged}
    assert len(rows) + len(merged) == len(found)
    assert all(r.label for r in rows)


def test_trees_and_modes_restrict_the_candidates():
    only = candidates.generate(base(), ("native",), ("slices",), ("wallace",))
    assert only and {(c.tree, c.pipeline, c.cell) for c in only} == {
        ("wallace", "slices", "native")}
    assert {c.tree for c in candidates.generate(base(), None, ("levels",), ("native",))} == {
        "native"}


def test_the_chosen_config_goes_back_into_the_users_file():
    for c in candidates.generate(base()):
        text = config_edit.rewrite(TAP, c)
        assert not text.startswith("# Written whole")
        assert "# tap of the test filter" in text and "width: 12   # bits" in text
        assert config.parse_text(text, "x").normalized() == c.normalized()


def test_trees_option_needs_a_carry_save_unit(write_config):
    cfg = write_config("name: a8\nwidth: 8\n")
    res = CliRunner().invoke(main, ["fit", str(cfg), "--target-mhz", "100", "--device",
                                    "ice40-hx8k", "--trees", "dadda"])
    assert res.exit_code == 2
    assert res.output.strip() == ("carrypipe: error: --trees: value 'dadda' is not allowed "
                                  "with unit 'adder'; expected it only with unit 'sum' or "
                                  "'multiplier'")
    cfg = write_config(TAP)
    res = CliRunner().invoke(main, ["fit", str(cfg), "--target-mhz", "100", "--device",
                                    "ice40-hx8k", "--trees", "dadda,maple"])
    assert res.exit_code == 2 and "--trees: value 'maple' is not allowed" in res.output


@pytest.mark.slow
def test_real_fit_of_a_multiplier(write_config, tmp_path, monkeypatch):
    monkeypatch.setenv("CARRYPIPE_CACHE", str(tmp_path / "cache"))
    cfg = write_config(TAP.replace("width: 12", "width: 6"))
    out = tmp_path / "o"
    res = CliRunner().invoke(main, ["fit", str(cfg), "--target-mhz", "150", "--device",
                                    "ice40-hx8k", "--modes", "slices", "--cells", "native",
                                    "--jobs", "2", "-o", str(out)])
    assert res.exit_code == 0, res.output
    chosen = re.search(r"^chosen: (.*), latency (\d+)", res.output, re.M)
    assert chosen, res.output
    rebuilt = tmp_path / "b"
    build = CliRunner().invoke(main, ["build", str(out / "tap12.yaml"), "-o", str(rebuilt)])
    assert build.exit_code == 0, build.output
    assert (out / "tap12.v").read_bytes() == (rebuilt / "tap12.v").read_bytes()


def test_a_miss_bounds_others_only_by_a_stage_of_the_same_part():
    # A candidate with no prediction is taken to miss when a measured miss of its kind
    # failed in a stage no deeper (unit-gate model) than the deepest stage of the same part
    # (tree or final adder) of its own: the model's delays compare within a part only.
    # Here (a 4 x 16 sum, Dadda 2 levels per stage, Han-Carlson final adder) 3 prefix
    # levels per stage give stages of delay 8 (tree), 8 (g/p and 3 levels), 2, 4; one level
    # per stage gives 8 (tree), 4, 2, 2, 2, 4.  A miss in the tree stage bounds the other
    # (the same tree); a miss in the 3-level adder stage does not (iCE40 HX8K measured
    # 260.7 MHz for the first, 390.3 for the second).
    keys = {"name": "px", "unit": "sum", "operands": 4, "width": 16,
            "tree_levels_per_stage": 2, "pipeline": "levels", "cell": "han-carlson"}
    three, one = (candidates.Row(make_plan(config.from_mapping({**keys, "levels_per_stage": n})))
                  for n in (3, 1))
    assert [s.delay for s in three.plan.stages] == [8, 8, 2, 4]
    assert [s.delay for s in one.plan.stages] == [8, 4, 2, 2, 2, 4]
    assert candidates.kind(three) == candidates.kind(one)
    words = {w.edge - three.plan.input_cycles - 1: w for w in three.plan.words
             if w.kind != "input"}
    for stage, bounded in ((0, True), (1, False)):
        end = f"unit.{words[stage].name}_SB_DFF_Q"
        three.measured = [Measurement(1, "ok", mhz=260.7, start="x", end=end, inside=True)]
        assert three.measured_stage == stage
        assert (candidates.bound(one, [three, one], 350) is three) is bounded


def test_a_native_miss_bounds_no_other_native_candidate():
    """Found by a code review: `tree: native` stages have no delay model (every one 0), so
    one measured miss ruled out every other native candidate, including those with more
    ranks behind the operation for the tools to retime into (docs/fit.md: each kind without
    a prediction is probed at its middle split instead)."""
    keys = {"name": "nm", "unit": "multiplier", "width": 16, "tree": "native"}
    two, four = (candidates.Row(make_plan(config.from_mapping({**keys, "native_stages": n})))
                 for n in (2, 4))
    assert candidates.kind(two) == candidates.kind(four)
    end = f"unit.{two.plan.words[-1].name}_TRELLIS_FF_Q"
    two.measured = [Measurement(1, "ok", mhz=250.0, start="x", end=end, inside=True)]
    assert two.measured_stage is not None
    assert candidates.bound(four, [two, four], 300) is None
    assert "no shorter stages" not in candidates.why_not_run(four, [two, four], 300, {}, None)


def test_the_search_and_the_report_name_the_median_seeds_stage():
    """Found by a code review: the search narrowed the stage where the first seed's path
    ended, while the report and the chart named the median seed's."""
    keys = {"name": "px", "unit": "sum", "operands": 4, "width": 16,
            "tree_levels_per_stage": 2, "pipeline": "levels", "cell": "han-carlson",
            "levels_per_stage": 3}
    row = candidates.Row(make_plan(config.from_mapping(keys)))
    words = {w.edge - row.plan.input_cycles - 1: w for w in row.plan.words
             if w.kind != "input"}
    ends = {0: f"unit.{words[0].name}_SB_DFF_Q", 1: f"unit.{words[1].name}_SB_DFF_Q"}
    row.measured = [Measurement(1, "ok", mhz=300.0, start="x", end=ends[0], inside=True),
                    Measurement(2, "ok", mhz=260.0, start="x", end=ends[1], inside=True),
                    Measurement(3, "ok", mhz=250.0, start="x", end=ends[0], inside=True)]
    assert row.median_seed.seed == 2 and row.measured_stage == row.slowest_stage == 1
