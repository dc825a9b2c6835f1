"""The Python entry point for Amaranth designers: `carrypipe.component(config)` gives a unit as
a `wiring.Component` that drops into an Amaranth design and meets its documented timing.

Two units in one small design, simulated in Amaranth against Python integers: an adder whose
sum feeds a comparator, so the comparator's verdict about a + b and c arrives after both
latencies (c waits in the design's own delay line).
"""

from __future__ import annotations

import random
import subprocess

import pytest
from amaranth.hdl import ClockDomain, Fragment, Module, Shape, Signal
from amaranth.lib import wiring
from amaranth.sim import Simulator

from carrypipe import component, emit
from carrypipe.config import ConfigError, from_mapping
from carrypipe.plan import make_plan
from carrypipe.tools import which


def test_the_component_has_the_documented_signature():
    add = component({"name": "acc_add", "width": 24, "slice_width": 8, "carry_in": True,
                     "valid": True, "enable": True})
    assert isinstance(add, wiring.Component)
    members = dict(add.signature.members)
    # clk and rst are the sync domain's; every other port is a member, in port order.
    assert list(members) == ["en", "a", "b", "cin", "in_valid", "sum", "cout", "out_valid"]
    assert members["a"].flow == wiring.In and Shape.cast(members["a"].shape).width == 24
    assert members["sum"].flow == wiring.Out and Shape.cast(members["cout"].shape).width == 1
    Fragment.get(add, None)  # elaborated (as a design would), so it is not left unused


def test_a_bad_config_is_one_line():
    with pytest.raises(ConfigError, match=r"^component: key 'width': value 0 is not allowed"):
        component({"name": "u", "width": 0})
    for not_a_mapping, kind in ((None, "empty"), ("unit.yaml", "str"), ([("width", 8)], "list")):
        with pytest.raises(ConfigError, match=rf"^component: expected a mapping of keys to "
                                              rf"values, got {kind}\Z"):
            component(not_a_mapping)


def test_the_clock_domain_from_the_config_keys():
    # README: `carrypipe.hdl.clock_domain(config)` makes the domain the config expects.
    from carrypipe.hdl import clock_domain

    keys = {"name": "u", "width": 8, "valid": True, "reset": "async"}
    domain = clock_domain(keys)
    assert (domain.name, domain.async_reset, domain.rst is not None) == ("sync", True, True)
    assert clock_domain({"name": "u", "width": 8}).rst is None  # no reset: reset-less
    with pytest.raises(ConfigError, match=r"^clock_domain: expected a mapping of keys to values, "
                                          r"got empty\Z"):
        clock_domain(None)


def test_two_units_in_one_design():
    width, rng = 12, random.Random(5)
    add = component({"name": "sum_stage", "width": width, "slice_width": 4})
    cmp = component({"name": "threshold", "unit": "comparator", "width": width,
                     "pipeline": "levels", "slice_width": 4})
    lat_add, lat_cmp = add.latency, cmp.latency
    assert (lat_add, lat_cmp) == (3, 3)  # three slices; three slices in a tree of depth 2
    m = Module()
    m.domains.sync = ClockDomain("sync", reset_less=True)
    m.submodules.add, m.submodules.cmp = add, cmp
    c_in = Signal(width)
    delayed = [c_in]
    for k in range(lat_add):  # the design's own delay line keeps c beside a + b
        nxt = Signal(width, name=f"c_delayed_{k + 1}")
        m.d.sync += nxt.eq(delayed[-1])
        delayed.append(nxt)
    m.d.comb += [cmp.a.eq(add.sum), cmp.b.eq(delayed[-1])]

    inputs = [(rng.getrandbits(width), rng.getrandbits(width), rng.getrandbits(width))
              for _ in range(60)] + [(5, 7, 12), (4095, 1, 0), (0, 0, 0)]
    seen = []

    async def bench(ctx):
        for k in range(len(inputs) + lat_add + lat_cmp):
            a, b, c = inputs[k] if k < len(inputs) else (0, 0, 0)
            ctx.set(add.a, a)
            ctx.set(add.b, b)
            ctx.set(c_in, c)
            await ctx.tick()
            seen.append((ctx.get(cmp.lt), ctx.get(cmp.eq), ctx.get(cmp.gt)))

    sim = Simulator(m)
    sim.add_clock(1e-8)
    sim.add_testbench(bench)
    sim.run()
    for k, (a, b, c) in enumerate(inputs):
        total = (a + b) % (1 << width)  # Python integers
        want = (int(total < c), int(total == c), int(total > c))
        assert seen[k + lat_add + lat_cmp - 1] == want, (k, a, b, c)


def test_the_readmes_caution_about_async_reset_in_amaranths_simulator_holds():
    """README, *In an Amaranth design*: the pinned Amaranth's Python simulator updates a
    reset-less register of an `async_reset` domain on the rising edge of `rst` too (found by
    a user's trial).  When an Amaranth upgrade fixes this, this test fails: drop the
    caution."""
    m = Module()
    m.domains.sync = cd = ClockDomain("sync", async_reset=True)
    data, r1, r2 = Signal(8), Signal(8, reset_less=True), Signal(8, reset_less=True)
    m.d.sync += [r1.eq(data), r2.eq(r1)]
    seen = []
    sim = Simulator(m)
    sim.add_clock(10e-9)

    async def bench(ctx):
        for i in range(1, 7):
            ctx.set(data, i)
            ctx.set(cd.rst, i == 4)  # rises between edges 3 and 4
            await ctx.tick()
            seen.append(ctx.get(r2))

    sim.add_testbench(bench)
    sim.run()
    # Clock edges only would give r2 = 0, 1, 2, 3, 4, 5; the rising rst loaded it early.
    assert seen == [0, 1, 2, 4, 4, 5]


@pytest.mark.skipif(not which("iverilog"), reason="Icarus Verilog is not installed")
@pytest.mark.parametrize("keys", [
    dict(width=16, slice_width=4, carry_in=True, valid=True, enable=True, reset="sync"),
    dict(unit="multiplier", width=6, width_b=5, signed=True, partial_products="booth4",
         pipeline="levels", cell="kogge-stone"),
    dict(unit="sum", operands=5, width=7, signed=True, valid=True, reset="sync",
         reset_data=True),
], ids=["adder", "multiplier", "sum"])
def test_the_verilog_amaranth_writes_passes_the_units_testbench(tmp_path, keys):
    """README, *In an Amaranth design*: the Verilog Amaranth writes from the component (with
    its own Yosys, the `amaranth` extra) is right: carrypipe's testbench for the same config,
    whose expected values Python computed, passes it in Icarus (found by a new-user trial:
    the extra was missing, so Amaranth found no Yosys)."""
    from amaranth.back import verilog

    keys = {"name": "u", **keys}
    (tmp_path / "u.v").write_text(verilog.convert(component(keys), name="u", emit_src=False))
    _passes_the_units_testbench(tmp_path, keys)


@pytest.mark.skipif(not which("iverilog"), reason="Icarus Verilog is not installed")
@pytest.mark.parametrize("keys", [
    dict(width=16, slice_width=4, carry_in=True, valid=True, enable=True, reset="async"),
    dict(unit="sum", operands=4, width=6, signed=True, valid=True, reset="async",
         reset_data=True),
], ids=["adder", "sum"])
def test_the_readmes_async_reset_wrapper_converts_to_a_passing_unit(tmp_path, keys):
    """README, *In an Amaranth design*: its wrapper for `reset: async` (run as the README
    prints it) gives Verilog that passes carrypipe's testbench for the same config in Icarus
    (a re-trial had to reach into Amaranth's private API to convert such a unit)."""
    from pathlib import Path

    from amaranth.back import verilog

    readme = (Path(__file__).parent.parent / "README.md").read_text()
    start = readme.index("```python\nfrom amaranth import Module")
    snippet = readme[start + len("```python\n"):readme.index("```", start + 3)]
    scope: dict = {}
    exec(compile(snippet, "README.md", "exec"), scope)
    assert "module acc_add(" in scope["text"]
    keys = {"name": "u", **keys}
    top = scope["WithAsyncReset"](keys)
    text = verilog.convert(top, name="u", emit_src=False)
    assert "posedge rst" in text  # the reset is asynchronous
    (tmp_path / "u.v").write_text(text)
    _passes_the_units_testbench(tmp_path, keys)


def _passes_the_units_testbench(folder, keys) -> None:
    """`folder/u.v` (written by Amaranth) passes carrypipe's testbench for `keys` in Icarus:
    expected values from Python's integers, 300 vectors."""
    files = emit.render(make_plan(from_mapping(keys)), vectors=300)
    for name in ("u_tb.v", "u_vectors.hex"):
        (folder / name).write_text(files[name])
    run = subprocess.run(["iverilog", "-g2005", "-o", "u.vvp", "u.v", "u_tb.v"], cwd=folder,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    run = subprocess.run(["vvp", "-n", "u.vvp"], cwd=folder, capture_output=True, text=True,
                         timeout=300)
    assert run.stdout.splitlines()[-1].startswith("PASS 300 vectors"), run.stdout[-2000:]
