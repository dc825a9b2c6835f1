"""Test vectors and their expected results, from Python integer arithmetic.

A vector is one operand set offered to the unit. With `enable`, a vector may carry a gap:
the unit first sees one cycle with `en` low (and the operands inverted, which it must
ignore) before the cycle that takes the vector. Every checker (the Python simulation and
the emitted testbench) uses the same vectors and the same expected values.
"""

from __future__ import annotations

import random
from dataclasses import dataclass

from .plan import Plan


@dataclass(frozen=True)
class Vector:
    a: int
    b: int
    cin: int = 0
    valid: int = 1
    gap: bool = False


def expected(plan: Plan, v: Vector) -> tuple[int, int]:
    """(sum, cout) of a + b + cin in W bits, by Python integers."""
    total = v.a + v.b + v.cin
    return total & ((1 << plan.width) - 1), total >> plan.width


def directed(plan: Plan) -> list[Vector]:
    """Corner cases: zeros, all ones + all ones, all ones + 1, alternating bits, and a carry
    that must travel from bit 0 to every bit position in turn."""
    w = plan.width
    top = (1 << w) - 1
    five = int("01" * w, 2) & top
    cin = 1 if plan.config.carry_in else 0
    cases = [(0, 0, 0), (top, top, cin), (top, 1, 0), (top, 0, cin), (five, top ^ five, cin),
             (five, five, 0), (top ^ five, top ^ five, cin), (top ^ five, five, 0)]
    cases += [((1 << k) - 1, 1, 0) for k in range(1, w + 1)]
    if cin:
        cases += [(((1 << k) - 1), 0, 1) for k in range(1, w + 1)]
    return [Vector(a, b, c) for a, b, c in cases]


def random_vectors(plan: Plan, count: int, seed: int) -> list[Vector]:
    """Seeded random operands; a quarter are chosen so that long carry chains propagate."""
    rng = random.Random(seed)
    c, w = plan.config, plan.width
    top = (1 << w) - 1
    out = []
    for _ in range(count):
        a = rng.getrandbits(w)
        pick = rng.random()
        if pick < 0.25:
            b = (top ^ a) ^ (1 << rng.randrange(w))  # one generate inside a long propagate run
        elif pick < 0.3:
            b = top ^ a
        else:
            b = rng.getrandbits(w)
        out.append(Vector(a, b, rng.getrandbits(1) if c.carry_in else 0,
                          rng.getrandbits(1) if c.valid else 1,
                          c.enable and rng.random() < 0.2))
    return out


def suite(plan: Plan, count: int, seed: int) -> list[Vector]:
    """The directed vectors, then seeded random ones up to `count` in all; with `valid` and
    `enable`, the directed ones get bubbles and gaps too."""
    rng = random.Random(seed ^ 0x5EED)
    c = plan.config
    fixed = [Vector(v.a, v.b, v.cin,
                    rng.getrandbits(1) if c.valid else 1,
                    c.enable and rng.random() < 0.2) for v in directed(plan)]
    return fixed + random_vectors(plan, max(0, count - len(fixed)), seed)


def field_widths(plan: Plan) -> list[tuple[str, int]]:
    """The fields of one packed vector word, least significant first."""
    w = plan.width
    return [("a", w), ("b", w), ("cin", 1), ("valid", 1), ("gap", 1), ("sum", w), ("cout", 1)]


def pack(plan: Plan, v: Vector) -> int:
    s, cout = expected(plan, v)
    word, shift = 0, 0
    for (_, width), value in zip(field_widths(plan), (v.a, v.b, v.cin, v.valid, int(v.gap), s, cout)):
        word |= value << shift
        shift += width
    return word


def hex_lines(plan: Plan, vectors: list[Vector]) -> str:
    """The vector file read by the testbench with $readmemh: one packed word per line."""
    digits = (sum(w for _, w in field_widths(plan)) + 3) // 4
    return "".join(f"{pack(plan, v):0{digits}x}\n" for v in vectors)
