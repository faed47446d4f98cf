"""Wall-time accounting per pipeline stage, for ``ppp run --timings``.

A :class:`StageTimer` belongs to the caller that creates it and is passed down explicitly; stages
with the same name accumulate (several molecules, several chromophores).
"""
from __future__ import annotations

import time
from contextlib import contextmanager, nullcontext


class StageTimer:
    """Accumulates wall time (s) and call counts per named stage, in first-seen order."""

    def __init__(self):
        self.seconds: dict[str, float] = {}
        self.calls: dict[str, int] = {}

    @contextmanager
    def stage(self, name: str):
        t0 = time.perf_counter()
        try:
            yield
        finally:
            self.add(name, time.perf_counter() - t0)

    def add(self, name: str, seconds: float) -> None:
        self.seconds[name] = self.seconds.get(name, 0.0) + seconds
        self.calls[name] = self.calls.get(name, 0) + 1

    @property
    def total(self) -> float:
        return sum(self.seconds.values())

    def report(self, wall: float | None = None) -> str:
        """Table of the stages: seconds, share of the total, calls. ``wall``: total including
        everything not attributed to a stage (start-up, imports)."""
        total = wall if wall is not None else self.total
        lines = [f"{'stage':<22} {'time/s':>9} {'share':>6} {'calls':>6}"]
        for name, sec in self.seconds.items():
            share = 100.0 * sec / total if total > 0 else 0.0
            lines.append(f"{name:<22} {sec:9.4f} {share:5.1f}% {self.calls[name]:6d}")
        if wall is not None:
            rest = wall - self.total
            lines.append(f"{'other (unattributed)':<22} {rest:9.4f} {100.0 * rest / total if total > 0 else 0.0:5.1f}%")
        lines.append(f"{'total':<22} {total:9.4f}")
        return "\n".join(lines)


#: The context manager of :func:`maybe_stage` without a timer: stateless, so one instance serves every
#: call (a generator-based context manager costs about 1 us per use, a dozen times per molecule).
_NO_STAGE = nullcontext()


def maybe_stage(timer: StageTimer | None, name: str):
    """``timer.stage(name)`` when a timer is given, otherwise a context manager that does nothing."""
    return _NO_STAGE if timer is None else timer.stage(name)
