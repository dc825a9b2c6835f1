"""The dot matrix of a carry-save unit: every bit to be added, by column, and one constant.

A multi-operand sum or a product is the sum of many weighted bits, "dots" in the dot diagram
of the trade: a dot in column k weighs 2^k.  This module says which dots a unit adds (pure
data, no HDL) and what each one is in terms of the unit's inputs; `reduction.py` then adds
them up with counters, and the builder turns each dot into logic.

- `unit: sum`: operand x_i's bit j is a dot in column j.  Signed operands are read with the
  sign bit inverted and a constant added: a W-bit two's-complement value is
  sum_{j<W-1} x_j 2^j + (1 - x_{W-1}) 2^(W-1) - 2^(W-1) (common practice).
- `unit: multiplier` with `partial_products: and`: dot a_i & b_j in column i + j, the plain
  AND array.  Signed operands follow Baugh and Wooley (1973) in its modified form: the
  products of one sign bit with the other operand's non-sign bits are inverted, and
  2^(m-1) + 2^(n-1) + 2^(m+n-1) is added (modulo 2^(m+n)).
- `partial_products: booth4`: radix-4 recoding of b (Booth 1951, MacSorley 1961): digit k
  of {-2, -1, 0, 1, 2} from bits b_(2k+1), b_(2k), b_(2k-1) selects 0, a or 2a, inverted
  when negative, plus the negate bit n (the +1 of the two's complement) in column 2k.  Each
  row is a signed number whose sign bit is inverted and the constant -2^(top) added, as
  above.  The negate bit joins the row's low bit x ^ n (x = one & a_0) by
  (x ^ n) + n = x + 2 (n & ~x): a dot x in column 2k and a dot n & ~x in column 2k + 1, so
  no column holds a lone pair below the rest (which would leave a gap in the final rows).

Every constant is summed into one number K (modulo 2^N, N the result width), whose one-bits
the reduction absorbs into dots (`reduction.py`).  `value` evaluates a dot for given inputs,
so the matrix is checked against Python's integers without any HDL.
"""

from __future__ import annotations

from dataclasses import dataclass

@dataclass(frozen=True)
class Leaf:
    """One dot of the matrix as a function of the inputs (see `value`).

    op "bit": input `args[0]` bit `args[1]`; "and": a[args[0]] & b[args[1]]; "booth": row
    args[0]'s selection at bit args[1] >= 1, ((one & a_i) | (two & a_(i-1))) ^ neg;
    "booth_low": row args[0]'s low bit before negation, one & a_0; "booth_carry": its
    negate bit carried, neg & ~(one & a_0).  `invert` complements it."""

    column: int
    op: str
    args: tuple
    invert: bool = False


@dataclass(frozen=True)
class Matrix:
    """The dots of a unit (LSB column first), the constant K and the result width N."""

    width: int  # N: the result is the sum of the dots and K, modulo 2^N
    leaves: tuple[Leaf, ...]
    constant: int  # K, 0 <= K < 2^N
    rows: tuple[tuple[int, int], ...]  # (first column, bits) of every partial-product row
    family: str  # what the leaves are: "operands" (input bits), "and" or "booth4" products

    @property
    def logic_leaves(self) -> bool:
        """The leaves are logic (partial products, a level of their own), not input bits."""
        return self.family != "operands"

    def heights(self) -> list[int]:
        out = [0] * self.width
        for leaf in self.leaves:
            out[leaf.column] += 1
        return out


def booth_selects(b: int, n: int, signed: bool, k: int) -> tuple[int, int, int]:
    """(one, two, neg) of radix-4 digit k of the n-bit b (see `_selects`)."""
    return _selects(*(_bit(b, n, signed, j) for j in (2 * k + 1, 2 * k, 2 * k - 1)))


def booth_digit(hi: int, mid: int, lo: int) -> int:
    """The digit the selects stand for: (one + 2 two), negated when neg (and one or two)."""
    one, two, neg = _selects(hi, mid, lo)
    return -(one + 2 * two) if neg else one + 2 * two


def _selects(hi: int, mid: int, lo: int) -> tuple[int, int, int]:
    """(one, two, neg) from the bits b_(2k+1), b_2k, b_(2k-1): one = b_2k ^ b_(2k-1), two =
    b_(2k+1) & ~b_2k & ~b_(2k-1) | ~b_(2k+1) & b_2k & b_(2k-1), neg = b_(2k+1)."""
    return mid ^ lo, int((hi, mid, lo) in ((1, 0, 0), (0, 1, 1))), hi


def _bit(value: int, width: int, signed: bool, j: int) -> int:
    """Bit j of a `width`-bit value extended past its top (0 below bit 0)."""
    if j < 0:
        return 0
    if j >= width:
        return (value >> (width - 1)) & 1 if signed else 0
    return (value >> j) & 1


def value(leaf: Leaf, inputs: dict, m: int, n: int, signed: bool) -> int:
    """The dot's bit for the given inputs (a, b of m and n bits, or the sum's x<i>)."""
    op, args = leaf.op, leaf.args
    if op == "bit":
        v = (inputs[args[0]] >> args[1]) & 1
    elif op == "and":
        v = (inputs["a"] >> args[0]) & (inputs["b"] >> args[1]) & 1
    else:
        one, two, neg = booth_selects(inputs["b"], n, signed, args[0])
        a = inputs["a"]
        low = one & _bit(a, m, signed, 0)
        if op == "booth_low":
            v = low
        elif op == "booth_carry":
            v = neg & (low ^ 1)
        else:
            i = args[1]
            v = ((one & _bit(a, m, signed, i)) | (two & _bit(a, m, signed, i - 1))) ^ neg
    return v ^ int(leaf.invert)


def booth_single(k: int, n: int, signed: bool) -> bool:
    """Whether digit k of a signed n-bit b reads b's sign bit twice (b_(2k+1) is its
    extension, b_(2k) the bit itself: the top digit of an odd n), so that it is never ±2."""
    return signed and 2 * k == n - 1


def booth_rows(n: int, signed: bool) -> int:
    """Radix-4 digits of an n-bit b: ceil(n/2) signed; unsigned needs b's 0 above its top."""
    return (n + (0 if signed else 1) + 1) // 2


def sum_matrix(operands: int, w: int, signed: bool) -> Matrix:
    """x0 + ... + x(operands-1), each w bits; the exact sum has w + ceil(log2 operands) bits."""
    width = w + (operands - 1).bit_length()
    leaves = [Leaf(j, "bit", (f"x{i}", j), signed and j == w - 1)
              for i in range(operands) for j in range(w)]
    constant = -operands * (1 << (w - 1)) if signed else 0
    return Matrix(width, _by_column(leaves), constant % (1 << width),
                  tuple((0, w) for _ in range(operands)), "operands")


def and_matrix(m: int, n: int, signed: bool) -> Matrix:
    """a * b as the AND array (b's bit j selects row j); signed by Baugh-Wooley."""
    width = m + n
    leaves = []
    for j in range(n):
        for i in range(m):
            mixed = signed and ((i == m - 1) != (j == n - 1))  # one sign bit, not both
            leaves.append(Leaf(i + j, "and", (i, j), mixed))
    constant = ((1 << (m - 1)) + (1 << (n - 1)) + (1 << (width - 1))) if signed else 0
    return Matrix(width, _by_column(leaves), constant % (1 << width),
                  tuple((j, m) for j in range(n)), "and")


def _constant(leaf: Leaf, m: int, n: int, signed: bool) -> int | None:
    """The value of a Booth leaf that is the same for all inputs (a row past b's top bit of
    an unsigned b, bits past a's top), else None: tried on every value of the at most five
    input bits it reads."""
    k, i = leaf.args[0], (leaf.args[1] if len(leaf.args) > 1 else 0)
    if signed or (2 * k + 1 < n and i < m):  # every bit it reads is an input bit
        return None
    a_bits = sorted({j for j in (i, i - 1, 0) if 0 <= j < m})
    b_bits = sorted({j for j in (2 * k + 1, 2 * k, 2 * k - 1) if 0 <= j < n})
    seen = set()
    for bits in range(1 << (len(a_bits) + len(b_bits))):
        a = sum(1 << j for t, j in enumerate(a_bits) if bits >> t & 1)
        b = sum(1 << j for t, j in enumerate(b_bits) if bits >> (len(a_bits) + t) & 1)
        seen.add(value(leaf, {"a": a, "b": b}, m, n, False))
    return seen.pop() if len(seen) == 1 else None


def booth_matrix(m: int, n: int, signed: bool) -> Matrix:
    """a * b with b recoded in radix 4: row k is digit k times a, a signed number of
    m + 1 bits (signed a) or m + 2 bits (unsigned a, whose doubled value needs one more);
    m bits for a digit that is never ±2 (`booth_single`), whose selection's top two bits
    are equal (from m = 2: a one-bit a's only selection bit is the row's low bit). Bits
    that are the same for every input (past the tops of unsigned operands) join K."""
    width = m + n
    rows = booth_rows(n, signed)
    leaves, constant, shape = [], 0, []
    for k in range(rows):
        if not signed:
            length = m + 2
        elif m > 1 and booth_single(k, n, signed):
            length = m  # the selection's top two bits are equal
        else:
            length = m + 1
        low = 2 * k
        if low < width:
            leaves.append(Leaf(low, "booth_low", (k,)))
        if low + 1 < width:
            leaves.append(Leaf(low + 1, "booth_carry", (k,)))
        for i in range(1, length):
            if low + i < width:
                leaves.append(Leaf(low + i, "booth", (k, i), i == length - 1))
        constant -= 1 << (low + length - 1)  # the inverted sign bit's constant
        if low < width:
            shape.append((low, min(length, width - low)))
    kept = []
    for leaf in leaves:
        fixed = _constant(leaf, m, n, signed)
        if fixed is None:
            kept.append(leaf)
        else:
            constant += fixed << leaf.column
    return Matrix(width, _by_column(kept), constant % (1 << width), tuple(shape), "booth4")


def _by_column(leaves: list[Leaf]) -> tuple[Leaf, ...]:
    """Leaves sorted by column, keeping their order (row by row) inside a column."""
    return tuple(sorted(leaves, key=lambda leaf: leaf.column))

