"""Writing fit's choice into the user's own config file: only the chosen keys change."""

import difflib
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from carrypipe import config, config_edit, emit
from carrypipe.cli import main
from carrypipe.plan import make_plan

USER = """# Accumulator of the sample-rate converter (demo)
name: src_acc   # module name
width: 24

cell: native        # carry chain
slice_width: 8      # three stages for now
carry_in: true
valid: true         # the pipeline's valid bit
"""

USER_BLOCKS = """name: src_acc
width: 24
pipeline: blocks   # tried first
cell: sklansky
block_width: 8
slices_note_is_a_comment: false
""".replace("slices_note_is_a_comment: false\n", "# slices: [8, 8, 8] was the old split\n")

USER_SEQUENCE = """name: src_acc
width: 24
slices:
  - 12   # low half
  - 12
valid: true
reset: sync
"""

CHOSEN = [
    dict(slices=[9, 8, 7]),
    dict(slices=[6, 6, 6, 6]),
    dict(slices=[24]),
    dict(cell="kogge-stone", pipeline="levels", levels_per_stage=2),
    dict(cell="han-carlson", pipeline="levels", local_width=8, wire_registers=1),
    # A boolean key is written as YAML spells it (`true`; Python's `True` is refused).
    dict(cell="kogge-stone", pipeline="levels", local_width=8, wire_registers=1,
         carry_increment=True),
    dict(cell="brent-kung", pipeline="blocks", block_width=8),
]


def chosen_from(text, keys):
    data = {k: v for k, v in config.parse_text(text, "t").normalized().items()
            if k not in ("slices", *config.MODE_KEYS, "pipeline", "cell")}
    data.update(keys)
    return config.from_mapping(data)


@pytest.mark.parametrize("user", [USER, USER_BLOCKS, USER_SEQUENCE],
                         ids=["slice_width", "blocks", "sequence"])
@pytest.mark.parametrize("keys", CHOSEN, ids=lambda k: "-".join(map(str, k.values())))
def test_only_the_chosen_keys_change(user, keys, tmp_path):
    chosen = chosen_from(user, keys)
    written = config_edit.rewrite(user, chosen)
    # Every line that differs is an entry of a key fit chooses (or its continuation).
    diff = [line[2:] for line in difflib.ndiff(user.splitlines(), written.splitlines())
            if line[:1] in "+-"]
    for line in diff:
        assert line.startswith(config_edit.EDITED) or line.startswith("  - "), (line, written)
    # Every comment line and every other entry is kept, in order.
    keep = [line for line in user.splitlines() if not line.startswith(config_edit.EDITED)
            and not line.startswith("  - ")]
    assert [line for line in written.splitlines() if line in keep] == keep
    # `carrypipe build` of the written file gives the chosen unit's Verilog.
    path = tmp_path / "src_acc.yaml"
    path.write_text(written)
    res = CliRunner().invoke(main, ["build", str(path), "-o", str(tmp_path / "b")])
    assert res.exit_code == 0, res.output
    assert (tmp_path / "b" / "src_acc.v").read_text() == emit.unit_verilog(make_plan(chosen))


def test_kept_comments_and_replaced_values_in_place():
    written = config_edit.rewrite(USER, chosen_from(USER, dict(slices=[6, 6, 6, 6])))
    assert written == USER.replace("slice_width: 8 ", "slice_width: 6 ")
    written = config_edit.rewrite(USER, chosen_from(USER, dict(slices=[9, 8, 7])))
    assert written == USER.replace("slice_width: 8 ", "slices: [9, 8, 7] ")


def test_a_block_list_keeps_the_comment_on_its_key_line():
    user = ("name: frame_add\nwidth: 24\nslices:       # hand-tuned split\n  - 12   # low\n"
            "  - 12   # high\ncarry_in: true\n")
    written = config_edit.rewrite(user, chosen_from(user, dict(slices=[8, 8, 8])))
    assert written == ("name: frame_add\nwidth: 24\nslices: [8, 8, 8]       # hand-tuned split\n"
                       "carry_in: true\n")


def test_a_byte_order_mark_stays_and_the_edit_is_by_line():
    # A file saved with a UTF-8 byte-order mark (which `build` reads) is still line-edited.
    user = USER.split("\n", 1)[1]  # the first key on the mark's line
    written = config_edit.rewrite("\ufeff" + user, chosen_from(user, dict(slices=[6, 6, 6, 6])))
    assert written == "\ufeff" + user.replace("slice_width: 8 ", "slice_width: 6 ")


def test_a_config_with_tabs_is_edited_by_line():
    # Tabs that `build` reads as separators (after a colon, before a comment) do not stop
    # fit from editing the file in place.
    user = "name: tab_add\nwidth:\t24\ncell: ripple\t# cheapest\nslice_width: 8\n"
    written = config_edit.rewrite(user, chosen_from(user, dict(slices=[12, 12], cell="ripple")))
    assert written == user.replace("slice_width: 8", "slice_width: 12")


def test_a_tree_without_a_final_adder_is_written():
    # A multiplier with a 1-bit operand has no final adder: fit's candidates change its
    # tree only, and the written config has no split.
    user = "name: tap\nunit: multiplier\nwidth: 8\nwidth_b: 1\n"
    chosen = config.from_mapping({**config.parse_text(user, "t").normalized(),
                                  "tree": "wallace"})
    written = config_edit.rewrite(user, chosen)
    assert sorted(written.splitlines()) == sorted([*user.splitlines(), "tree: wallace"])
    assert config.parse_text(written, "t") == chosen


def test_a_flow_mapping_is_written_whole():
    user = "{name: src_acc, width: 24, cell: native}\n"
    chosen = chosen_from(user, dict(slices=[12, 12]))
    written = config_edit.rewrite(user, chosen)
    assert written.startswith("# Written whole by carrypipe fit")
    assert config.parse_text(written, "t").normalized() == chosen.normalized()


def test_the_docs_list_every_key_fit_may_edit():
    # docs/fit.md, *Output folder*: the list left out a sum's or multiplier's tree keys.
    text = (Path(__file__).parent.parent / "docs" / "fit.md").read_text()
    listed = text.split("only the keys `fit` chose added, changed or dropped (")[1].split(");")[0]
    assert set(re.findall(r"`(\w+)`", listed)) == set(config_edit.EDITED)
