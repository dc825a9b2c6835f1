"""The reset port as the Verilog names it: `rst`, active high, or `rst_n`, active low
(`reset_active`).  One description read by the unit's ports, the printer, the testbench,
the miters and the proofs, so none of them spells the name or the polarity itself."""

from __future__ import annotations

from dataclasses import dataclass

ACTIVE = ("high", "low")


@dataclass(frozen=True)
class ResetPort:
    """A unit's reset: its kind (`reset`) and the level at which it acts (`reset_active`)."""
    kind: str  # none, sync, async
    active: str = "high"

    @property
    def low(self) -> bool:
        """Whether the reset acts while its port is low."""
        return self.active == "low"

    @property
    def name(self) -> str:
        """The port's name: `rst_n` when active low, the usual mark, else `rst`."""
        return "rst_n" if self.low else "rst"

    @property
    def edge(self) -> str:
        """The event of an asynchronous reset in a sensitivity list."""
        return f"{'negedge' if self.low else 'posedge'} {self.name}"

    @property
    def asserted(self) -> str:
        """The Verilog condition that is true while the reset acts."""
        return f"!{self.name}" if self.low else self.name

    def level(self, asserted: bool) -> int:
        """The port's value while the reset acts (True) or not (False)."""
        return int(asserted != self.low)

    def held(self) -> str:
        """`rst held low`: the port held where the reset does not act."""
        return f"{self.name} held {'high' if self.low else 'low'}"

    def inactive_set(self) -> str:
        """Yosys `sat` options holding the reset inactive (the unit must have one)."""
        return f"-set {self.name} {self.level(False)} "

    def words(self) -> str:
        """`rst (active high)`, as the header and report name the port."""
        return f"{self.name} (active {self.active})"


def of(config) -> ResetPort:
    """The reset of a unit's config."""
    return ResetPort(config.reset, config.reset_active)


NAMES = tuple(ResetPort("sync", active).name for active in ACTIVE)  # every reset port name
