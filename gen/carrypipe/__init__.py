"""carrypipe: pipelined arithmetic units as synthesizable Verilog.

For Amaranth designers, `component(config)` gives a unit as a `wiring.Component`::

    from carrypipe import component
    add = component({"name": "acc_add", "width": 64, "slice_width": 16, "valid": True})
"""

__version__ = "0.1.0"


def component(config: dict):
    """The unit of a config mapping (the keys of a config file) as an Amaranth
    `wiring.Component` in the `sync` domain; see `carrypipe.hdl`.  A bad config raises
    `carrypipe.config.ConfigError` with the usual one-line message."""
    from .config import from_mapping
    from .hdl import Unit
    from .plan import make_plan

    return Unit(make_plan(from_mapping(config, where="component")))
