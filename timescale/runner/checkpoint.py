"""The checkpoint: an append-only JSON-lines record of finished cells that a resumed run reads
back (a line torn by a kill is dropped and its cell re-run).
"""

from __future__ import annotations

import io
import json
import os
import time
from pathlib import Path

import numpy as np

from timescale.contract.plugin import Pulse
from timescale.runner.cells import Row

__all__ = ["Checkpoint", "CHECKPOINT_FORMAT"]

CHECKPOINT_FORMAT = 1
_FSYNC_INTERVAL = 0.5  # s: fsync at most this often (a flush already survives a killed process)


# ---- checkpoint ---------------------------------------------------------------------------------

def _encode(row: Row, seen_attrs: set) -> str:
    d = {"i": row.index, "s": row.status, "m": row.message,
         "v": {k: np.asarray(v).tolist() for k, v in row.values.items()},
         "d": row.design, "b": row.bill, "p": row.path, "o": row.orientation,
         "l": row.limits, "k": row.binding}
    new = {k: list(v) for k, v in row.attrs.items() if k not in seen_attrs}
    if new:
        d["a"] = new
        seen_attrs.update(new)
    if row.waveform is not None:
        w = row.waveform
        d["w"] = {"values": w.values.tolist(), "rate": w.rate, "t0": w.t0, "units": w.units, "name": w.name}
    return json.dumps(d, separators=(",", ":"))


def _decode(d: dict, attrs: dict) -> Row:
    attrs.update({k: tuple(v) for k, v in d.get("a", {}).items()})
    w = d.get("w")
    wave = None if w is None else Pulse(np.asarray(w["values"], dtype=float), w["rate"], w["t0"], w["units"], w["name"])
    return Row(d["i"], d["s"], d["m"], {k: np.asarray(v, dtype=float) for k, v in d["v"].items()},
               attrs, d["d"], d["b"], d["p"], d["o"], wave, d.get("l", ""), d.get("k", ""))


class Checkpoint:
    """Append-only JSON-lines record of finished cells."""

    def __init__(self, path: Path, header: dict, resume: bool, overwrite: bool):
        self.path = path
        self.rows: dict[int, Row] = {}
        self.seen: set = set()
        self.header = header
        if path.exists() and resume:
            self._load()
            self.fh = open(path, "ab")
        else:
            if path.exists() and not overwrite:
                raise FileExistsError(
                    f"checkpoint {str(path)!r} exists from an earlier run; pass resume=True "
                    "(--resume) to continue it, or overwrite=True (--overwrite) to start again")
            self.fh = open(path, "wb")
            self.fh.write((json.dumps(header) + "\n").encode())
            self._sync()
        self.last_sync = time.monotonic()

    def _load(self):
        with open(self.path, "rb") as fh:
            data = fh.read()
        lines = data.split(b"\n")
        try:
            head = json.loads(lines[0])
        except ValueError:
            raise ValueError(f"checkpoint {str(self.path)!r} has no valid header; delete it to start again") from None
        if head.get("timescale_checkpoint") != CHECKPOINT_FORMAT or head.get("fingerprint") != self.header["fingerprint"]:
            raise ValueError(
                f"checkpoint {str(self.path)!r} belongs to a different suite (or format); delete it, "
                "or give another checkpoint path")
        self.header = head
        good = len(lines[0]) + 1
        attrs: dict = {}
        for line in lines[1:]:
            if not line:
                break
            try:
                row = _decode(json.loads(line), attrs)
            except (ValueError, KeyError, TypeError):
                break  # a line cut short by a kill: everything after it is re-run
            self.rows[row.index] = row
            good += len(line) + 1
        self.seen = set(attrs)
        if good < len(data):  # drop the torn tail so appended lines start clean
            with open(self.path, "r+b") as fh:
                fh.truncate(min(good, len(data)))

    def append(self, rows):
        buf = io.StringIO()
        for r in rows:
            buf.write(_encode(r, self.seen))
            buf.write("\n")
        self.fh.write(buf.getvalue().encode())
        self.fh.flush()
        if time.monotonic() - self.last_sync > _FSYNC_INTERVAL:
            self._sync()

    def _sync(self):
        self.fh.flush()
        os.fsync(self.fh.fileno())
        self.last_sync = time.monotonic()

    def close(self):
        if not self.fh.closed:
            self._sync()
            self.fh.close()
