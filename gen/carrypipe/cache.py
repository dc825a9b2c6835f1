"""Measurement cache: one small JSON file per (normalized config, device, seed, tool versions).

The key is the SHA-256 of those inputs written as canonical JSON (sorted keys), together with
the flow version, so it is the same on every machine and run; any change to the unit, the
harness, the tools or their arguments gives a new key.  The folder is `$CARRYPIPE_CACHE`
when set, else `$XDG_CACHE_HOME/carrypipe/fit`, else `~/.cache/carrypipe/fit`.  Results that
depend on the run (timeouts, and tools that crashed, were killed or gave no output) are not
stored.

An entry is trusted only when it passes `valid`: the fields of a `Measurement` with their
types, finite numbers, a known status, an Fmax above 0 exactly when the status is ok, and the
seed it was asked for.  Anything else (a damaged, truncated or hand-edited file, a folder or
FIFO in its place) reads as missing, so the candidate is measured again and the entry
rewritten.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import tempfile
from dataclasses import fields
from pathlib import Path

from .config import read_regular
from .toolflow import FLOW_VERSION, Measurement, freq_mhz

# The statuses an entry may hold: timeouts and broken tools (crashed, killed, no output) are
# the run's, not the design's, and are not stored.
STORED = ("ok", "no-fit", "error")
FIELDS = frozenset(f.name for f in fields(Measurement))
COUNTS = ("luts", "carry", "flip_flops", "logic_used")
TEXTS = ("start", "end", "message")
DELAYS = ("logic_ns", "routing_ns")
MAX_ENTRY_BYTES = 1 << 16  # an entry is a few hundred bytes


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
        self.unwritable: str | None = None  # why the first write failed, for fit's note

    def _file(self, k: str) -> Path:
        return self.path / k[:2] / f"{k}.json"

    def get(self, k: str, seed: int) -> Measurement | None:
        """The stored measurement of seed `seed` under key `k`, or None when there is none
        or it is not `valid`."""
        if not self.read:
            return None
        try:
            data = json.loads(read_regular(self._file(k), MAX_ENTRY_BYTES).decode("utf-8"),
                              parse_constant=_no_constant, object_pairs_hook=_once)
        except (OSError, ValueError, RecursionError):  # ValueError: bad JSON or UTF-8
            return None
        return Measurement(**data) if valid(data, seed) else None

    def put(self, k: str, m: Measurement) -> None:
        """Store `m` under `k` (atomically); timeouts and invalid measurements are not kept."""
        data = m.as_dict()
        if not valid(data, m.seed):
            return
        dest = self._file(k)
        try:
            dest.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".", dir=dest.parent)
            with os.fdopen(fd, "w") as fh:
                json.dump(data, fh, sort_keys=True, allow_nan=False)
            os.replace(tmp, dest)
        except OSError as e:  # a cache that cannot be written only costs time: fit says so
            self.unwritable = self.unwritable or (e.strerror or type(e).__name__)


def valid(data, seed: int) -> bool:
    """Whether `data` (parsed JSON) is a storable measurement of `seed`."""
    if not isinstance(data, dict) or set(data) != FIELDS:
        return False
    mhz = data["mhz"]
    return (type(data["seed"]) is int and data["seed"] == seed
            and data["status"] in STORED and all(type(data[f]) is str for f in TEXTS)
            and (_real(mhz) and mhz > 0 if data["status"] == "ok" else mhz is None)
            and all(data[f] is None or type(data[f]) is int for f in COUNTS)
            and all(data[f] is None or _real(data[f]) and data[f] >= 0 for f in DELAYS)
            and (data["inside"] is None or type(data["inside"]) is bool)
            and _real(data["seconds"]) and data["seconds"] >= 0)


def _real(value) -> bool:
    """A finite JSON number (a bool is not one)."""
    try:
        return type(value) in (int, float) and math.isfinite(value)
    except OverflowError:  # an int too large for a float
        return False


def _no_constant(name: str):
    raise ValueError(f"{name} is not JSON")  # Python's json reads NaN and Infinity by default


def _once(pairs: list) -> dict:
    keys = [k for k, _ in pairs]
    if len(set(keys)) != len(keys):
        raise ValueError("a key is given twice")
    return dict(pairs)
