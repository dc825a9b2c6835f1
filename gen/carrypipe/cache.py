"""Measurement cache: one small JSON file per (normalized config, device, seed, tool versions).

The key is the SHA-256 of those inputs written as canonical JSON (sorted keys), together with
the flow version, so it is the same on every machine and run; any change to the unit, the
harness, the tools or their arguments gives a new key.  The folder is `$CARRYPIPE_CACHE`
when set, else `$XDG_CACHE_HOME/carrypipe/fit`, else `~/.cache/carrypipe/fit`.  Results that
depend on the run (timeouts) are not stored.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from pathlib import Path

from .toolflow import FLOW_VERSION, Measurement, freq_mhz


def folder() -> Path:
    if os.environ.get("CARRYPIPE_CACHE"):
        return Path(os.environ["CARRYPIPE_CACHE"])
    base = os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache"
    return Path(base) / "carrypipe" / "fit"


def key(config: dict, device: str, seed: int, tools: dict) -> str:
    text = json.dumps({"config": config, "device": device, "seed": seed, "tools": tools,
                       "flow": FLOW_VERSION, "freq_mhz": freq_mhz(device)},
                      sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()


class Cache:
    """Read and write measurements; `read=False` (--no-cache) forces fresh runs."""

    def __init__(self, path: Path | None = None, read: bool = True):
        self.path = Path(path) if path else folder()
        self.read = read

    def _file(self, k: str) -> Path:
        return self.path / k[:2] / f"{k}.json"

    def get(self, k: str) -> Measurement | None:
        if not self.read:
            return None
        try:
            data = json.loads(self._file(k).read_text())
        except (OSError, ValueError):
            return None
        try:
            return Measurement(**data)
        except TypeError:
            return None

    def put(self, k: str, m: Measurement) -> None:
        if m.status == "timeout":
            return
        dest = self._file(k)
        try:
            dest.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".", dir=dest.parent)
            with os.fdopen(fd, "w") as fh:
                json.dump(m.as_dict(), fh, sort_keys=True)
            os.replace(tmp, dest)
        except OSError:
            pass  # a cache that cannot be written only costs time
