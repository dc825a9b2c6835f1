"""Write a chosen split back into the user's own config file, keeping everything else as written.

Configs are flat YAML mappings, so the edit works on whole top-level entries: PyYAML's
composer gives each entry's lines (key mark to value end mark), and only the entries of the
keys that describe the structure (`cell`, `pipeline`, the split, the mode keys) are
replaced, dropped or added.  Comments, key order, blank lines and every other entry stay
byte for byte.  The result is parsed back and must give the chosen config; a file whose
layout does not allow a line edit (a one-line flow mapping, say) is written out whole
instead, with a comment that says so.
"""

from __future__ import annotations

import yaml

from . import config
from .config import KEYS, PREFIX_KEYS, SPLIT_KEYS, Config

FIT_TREE_KEYS = ("tree", "tree_levels_per_stage", "native_stages")  # a sum's or multiplier's
EDITED = ("pipeline", "cell", *SPLIT_KEYS, *PREFIX_KEYS, *FIT_TREE_KEYS)  # the keys `fit` chooses


def rewrite(text: str, chosen: Config, where: str = "config") -> str:
    """`text` (the user's config) with the structure keys of `chosen`."""
    bom = "\ufeff" if text.startswith("\ufeff") else ""  # a byte-order mark stays in front
    try:
        edited = bom + _edit(text[len(bom):], chosen)
    except _NoLineEdit:
        pass
    else:
        if config.parse_text(edited, where).normalized() == chosen.normalized():
            return edited
    return ("# Written whole by carrypipe fit: the original layout allowed no line edit.\n"
            + yaml.safe_dump(chosen.normalized(), sort_keys=False, default_flow_style=None))


class _NoLineEdit(Exception):
    pass


def wanted(text_keys: dict, chosen: Config) -> dict:
    """Structure key -> the value to write, or None to drop the key (absent: leave as is)."""
    norm, mode = chosen.normalized(), chosen.pipeline
    out: dict = {}

    def want(key, value, needed):
        if key in text_keys:
            out[key] = value
        elif needed:
            out[key] = value

    for key in FIT_TREE_KEYS:  # a sum's or multiplier's tree
        if key in norm:
            want(key, norm[key], norm[key] != KEYS[key][1])
        elif key in text_keys:
            out[key] = None
    if "tree" in norm and chosen.tree == "native":  # no final adder: none of its keys
        out.update({k: None for k in config.COUNTER_TREE_KEYS if k in text_keys})
        return {k: v for k, v in out.items() if v is None or text_keys.get(k, object()) != v}
    want("pipeline", mode, mode != KEYS["pipeline"][1])
    want("cell", chosen.cell, chosen.cell != KEYS["cell"][1])
    if mode == "slices" and chosen.slices:  # (a tree may leave no final adder to split)
        split = list(chosen.slices)
        k = split[0]
        span, what = config.split_span(chosen)
        even = config.check_split("fit", "slice_width", k, span, what) == chosen.slices
        key = "slice_width" if even and "slices" not in text_keys else "slices"
        want(key, k if key == "slice_width" else split, len(split) > 1)
        other = "slices" if key == "slice_width" else "slice_width"
        if other in text_keys:
            out[other] = None
    else:
        for key in SPLIT_KEYS:
            if key in text_keys:
                out[key] = None
    for key in PREFIX_KEYS:
        if key in norm:
            want(key, norm[key], norm[key] != KEYS[key][1])
        elif key in text_keys:
            out[key] = None
    return {k: v for k, v in out.items() if v is None or text_keys.get(k, object()) != v}


def _scalar(value) -> str:
    """A value as the config spells it (YAML 1.2 plain scalars: `true`, not Python's `True`)."""
    if isinstance(value, list):
        return "[" + ", ".join(map(_scalar, value)) + "]"
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


def _edit(text: str, chosen: Config) -> str:
    root = yaml.compose(config.untabbed(text), Loader=yaml.SafeLoader)
    if not isinstance(root, yaml.MappingNode) or root.flow_style:
        raise _NoLineEdit
    lines = text.splitlines(keepends=True)
    if lines and not lines[-1].endswith("\n"):
        lines[-1] += "\n"
    spans: dict[str, tuple[int, int, str]] = {}  # key -> (first line, last line, tail)
    values: dict = {}
    previous_end = -1
    for key_node, value_node in root.value:
        key = key_node.value
        first, end = key_node.start_mark.line, value_node.end_mark
        last = end.line if end.column > 0 else end.line - 1
        tail = lines[end.line][end.column:] if end.column > 0 else "\n"
        if value_node.start_mark.line > first:  # a block value below its key: keep the
            # key line's comment (the items' own go with the items)
            rest = lines[first][key_node.end_mark.column:].removeprefix(":")
            tail = rest if rest.strip().startswith("#") else "\n"
        if first <= previous_end or key_node.start_mark.column != 0 or \
                tail.strip() and not tail.strip().startswith("#"):
            raise _NoLineEdit  # two entries share a line, or something follows the value
        previous_end = last
        spans[key] = (first, last, tail)
        values[key] = yaml.safe_load(yaml.serialize(value_node))
    changes = wanted(values, chosen)
    replaced = {}  # first line -> new text of that entry (or "" to drop it)
    added = []
    for key, value in sorted(changes.items(), key=lambda kv: kv[1] is not None):  # drops first
        entry = "" if value is None else f"{key}: {_scalar(value)}"
        if key in spans:
            first, last, tail = spans[key]
            replaced[first] = (last, entry + tail if entry else "")
        elif entry:
            partner = [k for k in SPLIT_KEYS if k in spans and changes.get(k, 0) is None]
            if partner and key in SPLIT_KEYS:  # the other split key's place
                first, last, tail = spans[partner[0]]
                replaced[first] = (last, entry + tail)
            else:
                added.append(entry + "\n")
    anchor = next((k for k in ("cell", "width") if k in spans), None)
    after = spans[anchor][1] if anchor else len(lines) - 1
    out, skip_to = [], -1
    for n, line in enumerate(lines):
        if n <= skip_to:
            continue
        if n in replaced:
            skip_to, text_new = replaced[n]
            out.append(text_new)
        else:
            out.append(line)
        if n == after or (n < after <= skip_to):
            out += added
            added = []
    return "".join(out + added)
