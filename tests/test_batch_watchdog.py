"""Batch worker processes: how they start (ppp.batch.runner) and their per-molecule time limit
(ppp.batch.worker: a watchdog thread that raises MoleculeTimeout in the computing thread). Laws
checked: workers start in a way that gives them the parent's numerical path only when it is the
command line's; a pending timeout never leaks into the next molecule; arming/disarming works under a
profiler (sys.setprofile), where an earlier version spun forever."""
from __future__ import annotations

import subprocess
import sys
import textwrap
import time

from ppp.batch import runner, worker


def test_a_timeout_at_the_deadline_never_leaks_past_disarm(monkeypatch):
    # molecules that end right around their deadline: the watchdog fires inside the computation
    # (recorded as a timeout) or just as it ends (absorbed by disarm); either way nothing may be raised
    # after disarm, where it would hit the next molecule or the writer
    absorbed = []
    absorb = worker._absorb_pending_timeout
    monkeypatch.setattr(worker, "_absorb_pending_timeout", lambda: (absorbed.append(1), absorb()))
    dog = worker._Watchdog()
    timeouts = leaked = 0
    # computations from 0 to 12 ms against a 3 ms limit: the watchdog needs the interpreter lock to
    # fire, which a busy thread hands over only every sys.getswitchinterval() (5 ms by default)
    for k in range(120):
        try:
            dog.arm(0.003)
            try:
                end = time.perf_counter() + 0.0001 * k
                while time.perf_counter() < end:
                    pass
            finally:
                dog.disarm()
        except worker.MoleculeTimeout:
            timeouts += 1
        try:
            for _ in range(1000):
                pass
        except worker.MoleculeTimeout:
            leaked += 1
    assert leaked == 0
    assert timeouts + len(absorbed) > 0  # the watchdog fired: the race was exercised


def test_time_limit_fires_and_is_disarmed():
    dog = worker._Watchdog()
    dog.arm(0.05)
    raised = False
    try:
        while True:  # a computation that runs past its limit
            sum(range(100))
    except worker.MoleculeTimeout:
        raised = True
    finally:
        dog.disarm()
    assert raised
    dog.arm(30.0)
    dog.disarm()  # in time: nothing is raised, now or later
    assert sum(range(10_000)) == 49_995_000


def test_arm_and_disarm_under_a_profiler_do_not_hang():
    code = textwrap.dedent("""
        import cProfile
        from ppp.batch.worker import _Watchdog
        profiler = cProfile.Profile()
        profiler.enable()
        dog = _Watchdog()
        for _ in range(3):
            dog.arm(100.0)
            dog.disarm()
        profiler.disable()
        print("done")
    """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0 and out.stdout.strip() == "done", out.stderr


def test_workers_are_forked_on_linux_unless_the_parent_has_numba_loaded(monkeypatch):
    linux = sys.platform.startswith("linux")
    monkeypatch.delitem(sys.modules, "numba", raising=False)
    assert runner._pool_context().get_start_method() == ("fork" if linux else "spawn")
    # a parent with numba loaded would hand its workers the compiled SCF loop: spawn clean ones
    monkeypatch.setitem(sys.modules, "numba", object())
    assert runner._pool_context().get_start_method() == "spawn"
