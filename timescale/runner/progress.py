"""Progress on stderr: cells done, failed and rate (tqdm when installed, else one redrawn line).
"""

from __future__ import annotations

import sys
import time

__all__ = ["Progress"]

# ---- progress -------------------------------------------------------------------------------------

class Progress:
    """Cells done, failed, rate on stderr: tqdm when installed, else one redrawn line."""

    def __init__(self, total, initial, enabled):
        self.total, self.done, self.failed = total, initial, 0
        self.enabled = enabled
        self.t0 = time.monotonic()
        self.start = initial
        self.last = 0.0
        self.bar = None
        if enabled:
            try:
                from tqdm import tqdm

                self.bar = tqdm(total=total, initial=initial, file=sys.stderr, unit="cell",
                                dynamic_ncols=True, smoothing=0.1)
            except ImportError:
                self.bar = None

    def update(self, rows):
        n = len(rows)
        self.done += n
        self.failed += sum(r.status == "failed" for r in rows)
        if not self.enabled:
            return
        now = time.monotonic()
        if self.bar is not None:
            self.bar.update(n)
            if now - self.last > 0.25:
                self.bar.set_postfix_str(f"failed {self.failed}", refresh=False)
                self.last = now
        elif now - self.last > 0.2 or self.done == self.total:
            self.last = now
            rate = (self.done - self.start) / max(now - self.t0, 1e-9)
            left = (self.total - self.done) / rate if rate > 0 else float("nan")
            sys.stderr.write(f"\r{self.done}/{self.total} cells  {self.failed} failed  "
                             f"{rate:.1f} cells/s  {left:.0f} s left ")
            sys.stderr.flush()

    def close(self):
        if not self.enabled:
            return
        if self.bar is not None:
            self.bar.set_postfix_str(f"failed {self.failed}")
            self.bar.close()
        else:
            sys.stderr.write("\n")
            sys.stderr.flush()
