"""A one-line progress bar with rate and ETA; silent unless the stream is a terminal."""
from __future__ import annotations

import time


def _clock(seconds: float) -> str:
    s = int(round(seconds))
    return f"{s // 3600}:{s % 3600 // 60:02d}:{s % 60:02d}"


class Progress:
    """``advance`` counts molecules written; ``show`` redraws at most every ``interval`` seconds.

    enabled : None -> only when ``stream.isatty()``
    """

    def __init__(self, total: int, stream, enabled: bool | None = None, start: int = 0, interval: float = 0.2):
        if enabled is None:
            enabled = bool(getattr(stream, "isatty", lambda: False)())
        self.enabled, self.stream, self.total = enabled, stream, total
        self.done, self.start, self.failed = start, start, 0
        self.t0 = time.monotonic()
        self.last = 0.0
        self.interval = interval
        self.width = 0

    def advance(self, n: int, failed: int = 0) -> None:
        self.done += n
        self.failed += failed

    def line(self) -> str:
        elapsed = time.monotonic() - self.t0
        new = self.done - self.start
        rate = new / elapsed if elapsed > 0 else 0.0
        frac = self.done / self.total if self.total else 1.0
        bar = "#" * int(24 * frac)
        eta = _clock((self.total - self.done) / rate) if rate > 0 else "--:--:--"
        return (f"[{bar:<24}] {self.done}/{self.total} {100 * frac:5.1f}%  {rate:7.1f} mol/s  "
                f"ETA {eta}  failed {self.failed}")

    def show(self, force: bool = False) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if not force and now - self.last < self.interval:
            return
        self.last = now
        text = self.line()
        self.stream.write("\r" + text + " " * max(0, self.width - len(text)))
        self.stream.flush()
        self.width = len(text)

    def finish(self) -> None:
        if self.enabled and self.width:
            self.show(force=True)
            self.stream.write("\n")
            self.stream.flush()
