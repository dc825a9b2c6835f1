"""Every file `build` writes for a fixed corpus of configs (the bundled examples, the lint
cases and a sweep of kinds, modes, cells and options) is byte for byte what it was when
`tests/data/render_digests.json` was written: refactors of the builders change no output
unless the digests are regenerated on purpose (`python tests/render_digest.py --write`)."""

import json

from render_digest import DIGESTS, digests


def test_emitted_files_are_unchanged():
    known = json.loads(DIGESTS.read_text())
    found = digests(set(known))
    changed = sorted(k for k in known if found.get(k) != known[k])
    assert not changed, f"{len(changed)} configs render differently: {changed[:10]}"


def test_the_check_can_fail(monkeypatch):
    from carrypipe import verilog

    write = verilog.write
    monkeypatch.setattr(verilog, "write", lambda net: write(net).replace("endmodule", "endmodule "))
    known = json.loads(DIGESTS.read_text())
    some = sorted(known)[:3]
    assert all(digests(set(some))[k] != known[k] for k in some)
