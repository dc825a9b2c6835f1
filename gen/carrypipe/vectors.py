"""Test vectors and their expected results, from the unit kind's Python reference.

A vector is one input set offered to the unit: its data inputs, its valid bit and whether a
gap comes first.  With `enable`, a vector may carry a gap: the unit first sees one cycle with
`en` low (and the inputs inverted, which it must ignore) before the cycle that takes the
vector.  Every checker (the Python simulation and the emitted testbench) uses the same
vectors and the same expected values, computed by running the kind's reference model over
the vectors in order (the accumulator's total carries from one to the next).
"""

from __future__ import annotations

import random
from dataclasses import dataclass, field

TAG_BITS = 32  # every packed vector carries its own number, so a missing one is seen


@dataclass(frozen=True)
class Vector:
    inputs: dict = field(hash=False)  # data input port -> value (in_valid is `valid`)
    valid: int = 1
    gap: bool = False


def output_ports(plan) -> list:
    """The outputs a vector expects: every output but out_valid (that is `valid`)."""
    return [p for p in plan.ports if p.direction == "output" and p.name != "out_valid"]


def expected(plan, vecs: list[Vector]) -> list[dict]:
    """The outputs of every vector, by the unit kind's reference over the sequence."""
    model = plan.unit.model(plan.config)
    out = []
    for v in vecs:
        got = model.step({**v.inputs, **({"in_valid": v.valid} if plan.config.valid else {})})
        out.append({p.name: got[p.name] for p in output_ports(plan)})
    return out


def settled(plan) -> tuple[Vector, dict]:
    """A valid vector whose results do not hang on what came before it (the same after
    other vectors as alone) and are not all zero, with those results: what a check after
    the vectors can drive and expect whatever the unit holds, and see a reset clear.  Tried
    in order: every input all ones, then with the 1-bit inputs (flags) zero, then with one
    input zero."""
    ins = plan.operand_inputs()
    ones = {p.name: (1 << p.width) - 1 for p in ins}
    flags = [p.name for p in ins if p.width == 1]
    tries = [ones, {**ones, **dict.fromkeys(flags, 0)}, *({**ones, p.name: 0} for p in ins)]
    before = [Vector(t, valid) for t in tries for valid in (1, 0)]

    def after(w: Vector, v: Vector) -> dict | None:
        try:
            return expected(plan, [w, v])[1]
        except ValueError:  # a sequence the reference refuses (an accumulator not cleared)
            return None

    for inputs in tries:
        v = Vector(inputs)
        alone = expected(plan, [v])[0]
        if any(alone.values()) and all(after(w, v) in (alone, None) for w in before):
            return v, alone
    raise AssertionError(f"no settled vector for {plan.config.name}")


def directed(plan) -> list[Vector]:
    return [Vector(i) for i in plan.unit.directed(plan.config)]


def random_vectors(plan, count: int, seed: int) -> list[Vector]:
    """Seeded random inputs (the kind picks them; see `units.Kind.random_inputs`)."""
    rng = random.Random(seed)
    c = plan.config
    out = []
    for _ in range(count):
        inputs = plan.unit.random_inputs(c, rng)
        out.append(Vector(inputs, rng.getrandbits(1) if c.valid else 1,
                          c.enable and rng.random() < 0.2))
    return out


def suite(plan, count: int, seed: int) -> list[Vector]:
    """The directed vectors, then seeded random ones up to `count` in all; with `valid` and
    `enable`, the directed ones get bubbles and gaps too (the first is always valid, so an
    accumulator starts from its clear)."""
    rng = random.Random(seed ^ 0x5EED)
    c = plan.config
    fixed = [Vector(v.inputs, 1 if k == 0 or not c.valid else rng.getrandbits(1),
                    c.enable and rng.random() < 0.2) for k, v in enumerate(directed(plan))]
    return fixed + random_vectors(plan, max(0, count - len(fixed)), seed)


def field_widths(plan) -> list[tuple[str, int]]:
    """The fields of one packed vector word, least significant first: inputs, valid, gap,
    expected outputs, and the vector's own number plus one (the tag)."""
    return ([(p.name, p.width) for p in plan.operand_inputs()] + [("valid", 1), ("gap", 1)]
            + [(p.name, p.width) for p in output_ports(plan)] + [("tag", TAG_BITS)])


def pack(plan, k: int, v: Vector, out: dict) -> int:
    values = {**v.inputs, "valid": v.valid, "gap": int(v.gap), **out, "tag": k + 1}
    word, shift = 0, 0
    for name, width in field_widths(plan):
        word |= (values[name] & ((1 << width) - 1)) << shift
        shift += width
    return word


def hex_lines(plan, vecs: list[Vector]) -> str:
    """The vector file read by the testbench with $readmemh: one packed word per line."""
    digits = (sum(w for _, w in field_widths(plan)) + 3) // 4
    return "".join(f"{pack(plan, k, v, out):0{digits}x}\n"
                   for k, (v, out) in enumerate(zip(vecs, expected(plan, vecs))))
