"""Run a batch: read inputs, send chunks to worker processes (local pool or Dask), write results.

The parent process is the only writer. Chunks may finish in any order; the parent writes them in
input order (holding at most the in-flight window), so the committed rows of a results file are
always a prefix of the input, and resuming means skipping that prefix. Files written by 1 worker,
N workers or a Dask cluster hold the same rows in the same order.
"""
from __future__ import annotations

import concurrent.futures as cf
import contextlib
import fcntl
import json
import multiprocessing
import os
import signal
import sys
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

from .. import __version__
from ..driver import Options
from ..errors import InputError, PPPError, StorageError
from ..model import params as param_registry
from . import inputs
from . import schema as S
from .progress import Progress
from .reader import ResultsFile, rewrite
from .store import ResultsWriter, now_utc
from .worker import compute_chunk

#: attributes that must agree for a results file to be continued or merged
IDENTITY_ATTRS = ("input_sha256", "input_format", "options", "parameters_sha256", "shard", "heavy",
                  "smiles_column", "id_column")
#: BLAS/OpenMP threads per worker: one, so that every worker computes bit for bit alike
THREAD_ENV = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


@dataclass(frozen=True)
class BatchConfig:
    """Everything a batch run needs. ``shard`` is (k, n) with 1 <= k <= n."""

    input: Path
    output: Path
    options: Options = Options()
    fmt: str | None = None
    smiles_column: str | None = None
    id_column: str | None = None
    jobs: int = 0  # 0: all local cores
    heavy: bool = False
    time_limit: float | None = 120.0
    shard: tuple[int, int] = (1, 1)
    scheduler: str | None = None  # Dask scheduler address, or "local" to start a loopback cluster
    overwrite: bool = False
    block_size: int = 1000  # molecules per committed block
    block_seconds: float = 30.0  # commit at least this often
    progress: bool | None = None  # None: only when stderr is a terminal


@dataclass
class BatchSummary:
    path: Path
    expected: int
    resumed_from: int
    written: int
    counts: dict = field(default_factory=dict)  # whole file: "ok" and each error kind
    warned: int = 0  # whole file: ok molecules whose result carries warnings
    wall_seconds: float = 0.0
    complete: bool = False
    interrupted: bool = False
    workers: str = ""
    startup_seconds: float = 0.0  # from the start until the first result arrived (workers starting up)

    def lines(self) -> list[str]:
        total = sum(self.counts.values())
        ok = self.counts.get("ok", 0)
        failed = {k: v for k, v in sorted(self.counts.items()) if k != "ok"}
        state = "complete" if self.complete else ("interrupted" if self.interrupted else "incomplete")
        rate = self.written / self.wall_seconds if self.wall_seconds > 0 else 0.0
        out = [f"{self.path}: {total} of {self.expected} molecules ({state})",
               f"  computed in this run  {self.written}" + (f" (resumed after {self.resumed_from})"
                                                            if self.resumed_from else ""),
               f"  ok                    {ok}" + (f" ({self.warned} with warnings: see the 'warnings' column)"
                                                        if self.warned else ""),
               f"  failed                {total - ok}" + (": " + ", ".join(f"{k} {v}" for k, v in failed.items())
                                                          if failed else ""),
               f"  wall time             {self.wall_seconds:.1f} s, {rate:.1f} molecules/s ({self.workers})"]
        if not self.complete:
            out.append("  run the same command again to continue where it stopped")
        return out


def _worker_init(parent: int):
    """Pool worker set-up: Ctrl-C is the parent's business, and a worker must not outlive its parent
    (after a kill -9 of the parent it would otherwise wait for work forever)."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:  # Linux: have the kernel send SIGKILL when the parent dies
        import ctypes
        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, signal.SIGKILL, 0, 0, 0)  # PR_SET_PDEATHSIG = 1
    except (OSError, AttributeError):
        pass
    if os.getppid() != parent:  # the parent died before prctl took effect
        os._exit(1)

    def watch():
        while True:
            time.sleep(1.0)
            if os.getppid() != parent:
                os._exit(1)

    import threading
    threading.Thread(target=watch, name="ppp-parent-watch", daemon=True).start()
    # one tiny molecule first: one-time costs (lazy imports, loading cached numba kernels) are paid
    # here, not by the first input molecule against its time limit
    from ..driver import compute
    compute("C=C")


def _lock(path: Path):
    lock_path = path.with_name(path.name + ".lock")
    fh = open(lock_path, "a+")
    try:
        fcntl.flock(fh, fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError:
        fh.close()
        raise StorageError(f"another ppp process is writing '{path}'") from None
    return fh, lock_path


def identity(cfg: BatchConfig, input_sha: str, pset) -> dict:
    return {"input_sha256": input_sha, "input_format": inputs.detect_format(cfg.input, cfg.fmt),
            "options": json.dumps(asdict(cfg.options), sort_keys=True),
            "parameters_sha256": pset.sha256, "shard": f"{cfg.shard[0]}/{cfg.shard[1]}",
            "heavy": bool(cfg.heavy), "smiles_column": cfg.smiles_column or "",
            "id_column": cfg.id_column or ""}


def _shard_items(cfg: BatchConfig):
    k, n = cfg.shard
    for item in inputs.read_items(cfg.input, cfg.fmt, cfg.smiles_column, cfg.id_column):
        if item.index % n == k - 1:
            yield item


def _open_output(cfg: BatchConfig, ident: dict, attrs: dict, pset) -> tuple[ResultsWriter | None, int]:
    """Writer positioned after the committed rows (None when the file is already complete)."""
    out = cfg.output
    if out.exists() and not cfg.overwrite:
        try:
            rf = ResultsFile(out)
        except StorageError as exc:
            raise StorageError(f"{exc}; or add --overwrite to start again") from None
        with rf:
            diff = [k for k in IDENTITY_ATTRS if str(rf.attrs.get(k, "")) != str(ident[k])]
            if diff:
                raise StorageError(f"'{out}' holds results of a different run (differs in: {', '.join(diff)}); "
                                   f"choose another output file or add --overwrite")
            if rf.complete:
                return None, rf.n_rows
            if rf.version != S.FORMAT_VERSION:
                # rows computed now would lose their warnings in the older layout, and copying the old
                # rows into the new one would show them as "no warnings" when none were recorded
                raise StorageError(f"'{out}' was started by an older ppp (results format version {rf.version}, "
                                   f"without per-molecule warnings) and is not complete; this ppp does not add "
                                   f"rows to it: finish it with the ppp that started it, or add --overwrite to "
                                   f"start again")
            done, interrupted, committed = rf.n_rows, rf.interrupted, rf.committed
        if interrupted:
            # killed writer: copy its committed rows into a fresh file, swapped in atomically
            rewrite(out)
            with ResultsFile(out) as rf2:
                committed = rf2.committed
        return ResultsWriter.append_to(out, committed), done
    return ResultsWriter.create(out, attrs, pset.text), 0


def _pool_context():
    """Start method of the local worker processes.

    Linux: "fork". A forked worker starts in milliseconds with the engine already imported by the
    parent; a spawned one pays about 0.5 s of imports (numpy, scipy, RDKit, h5py) first, which
    was most of the wall time of a few-hundred-molecule batch. The parent holds no threads of its own
    when the command line starts the pool (the pool launches all its workers before its manager thread), a worker never
    touches the parent's open HDF5 file, and it leaves through os._exit, so no exit handler of the
    parent's libraries runs in it. (A time-limit watchdog inherited from a parent that computed
    molecules itself is replaced in the child: ppp.batch.worker registers that at fork.) Elsewhere (macOS, where forking a process that has loaded system
    frameworks is unsafe): "spawn". Also "spawn" when the parent has numba loaded (a notebook that
    called ppp.solvers.kernels.warm_up, the test-suite process): forked workers would inherit it and
    run the compiled SCF loop, whose results differ from the numpy loop's, which the command line uses,
    in the last digits (below 1e-12 eV) - and a resumed file would mix the two.
    """
    fork = sys.platform.startswith("linux") and "numba" not in sys.modules
    return multiprocessing.get_context("fork" if fork else "spawn")


class _LocalBackend:
    def __init__(self, jobs: int):
        ctx = _pool_context()
        self.pool = cf.ProcessPoolExecutor(max_workers=jobs, mp_context=ctx, initializer=_worker_init,
                                             initargs=(os.getpid(),))
        self.jobs = jobs
        self.label = f"{jobs} local process{'es' if jobs > 1 else ''}"

    def submit(self, *args):
        return self.pool.submit(compute_chunk, *args)

    def wait(self, futures, timeout):
        done, _ = cf.wait(futures, timeout=timeout, return_when=cf.FIRST_COMPLETED)
        return done

    def close(self, cancel: bool):
        self.pool.shutdown(wait=True, cancel_futures=cancel)


class _DaskBackend:
    def __init__(self, address: str, jobs: int):
        try:
            import distributed
        except ImportError:
            raise InputError("--scheduler needs Dask distributed: pip install 'ppp[cluster]'") from None
        self.distributed = distributed
        self.cluster = None
        if address == "local":
            # a scheduler ppp starts itself listens on the loopback interface only
            self.cluster = distributed.LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True,
                                                    host="127.0.0.1", dashboard_address=None)
            address = self.cluster.scheduler_address
        try:
            self.client = distributed.Client(address, timeout=30)
        except (OSError, TimeoutError) as exc:
            if self.cluster is not None:
                self.cluster.close()
            raise InputError(f"cannot reach the Dask scheduler at {address}: {exc}") from None
        n = len(self.client.scheduler_info().get("workers", {})) or jobs
        self.jobs = max(n, 1)
        self.label = f"Dask at {address}, {self.jobs} worker{'s' if self.jobs > 1 else ''}"

    def submit(self, *args):
        return self.client.submit(compute_chunk, *args, pure=False)

    def wait(self, futures, timeout):
        try:
            done, _ = self.distributed.wait(list(futures), timeout=timeout, return_when="FIRST_COMPLETED")
        except (TimeoutError, self.distributed.TimeoutError if hasattr(self.distributed, "TimeoutError") else TimeoutError):
            return set()
        return set(done)

    def close(self, cancel: bool):
        self.client.close()
        if self.cluster is not None:
            self.cluster.close()


def run_batch(cfg: BatchConfig, stream=None) -> BatchSummary:
    """Compute every input of ``cfg.input`` into ``cfg.output``, resuming a partial file."""
    stream = stream if stream is not None else sys.stderr
    t0 = time.perf_counter()
    k, n = cfg.shard
    if not (n >= 1 and 1 <= k <= n):
        raise InputError(f"--shard must be K/N with 1 <= K <= N, got {k}/{n}")
    inputs.check_input_file(cfg.input)
    if cfg.output.exists() and cfg.output.resolve() == cfg.input.resolve():
        raise InputError(f"the results file '{cfg.output}' would replace the input file; choose another name")
    pset = param_registry.load(cfg.options.parameters)
    input_sha = inputs.file_sha256(cfg.input)
    expected = sum(1 for _ in _shard_items(cfg))
    records = sum(1 for _ in inputs.read_items(cfg.input, cfg.fmt, cfg.smiles_column, cfg.id_column)) \
        if n > 1 else expected
    ident = identity(cfg, input_sha, pset)
    attrs = dict(ident, program_version=__version__, parameters=pset.name, input_name=cfg.input.name,
                 input_records=records, expected_rows=expected,
                 time_limit=float(cfg.time_limit or 0.0))
    cfg.output.parent.mkdir(parents=True, exist_ok=True)
    lock_fh, lock_path = _lock(cfg.output)
    saved_env = {key: os.environ.get(key) for key in THREAD_ENV}
    for key, val in THREAD_ENV.items():  # inherited by the worker processes started below
        os.environ.setdefault(key, val)
    try:
        writer, done = _open_output(cfg, ident, attrs, pset)
        summary = BatchSummary(cfg.output, expected, done, 0)
        if writer is None:
            with ResultsFile(cfg.output) as rf:
                summary.counts, summary.warned = _counts(rf), _warned(rf)
            summary.complete = True
            summary.wall_seconds = time.perf_counter() - t0
            summary.workers = "nothing to do"
            return summary
        return _run(cfg, writer, done, expected, summary, pset, stream, t0)
    finally:
        for key, val in saved_env.items():
            if val is None:
                os.environ.pop(key, None)
            else:
                os.environ[key] = val
        lock_fh.close()
        lock_path.unlink(missing_ok=True)


def _counts(rf: ResultsFile, rows: int = 65536) -> dict:
    out: dict[str, int] = {}
    for start in range(0, rf.n_rows, rows):  # in slices: memory stays flat for any file size
        for kind in rf.text("error_kind", start, start + rows):
            out[kind or "ok"] = out.get(kind or "ok", 0) + 1
    return out


def _warned(rf: ResultsFile, rows: int = 65536) -> int:
    return sum(1 for start in range(0, rf.n_rows, rows) for cell in rf.text("warnings", start, start + rows) if cell)


def _run(cfg, writer, done, expected, summary, pset, stream, t0) -> BatchSummary:
    items = _shard_items(cfg)
    last_index = writer.h5["molecules/input_index"][done - 1] if done else None
    for _ in range(done):
        item = next(items, None)
        if item is None:
            break
    if done and item.index != last_index:
        writer.close(complete=False)
        raise StorageError(f"'{cfg.output}' does not match the input: its last row is input {last_index}, "
                           f"expected {item.index}")
    jobs = cfg.jobs or os.cpu_count() or 1
    backend = _DaskBackend(cfg.scheduler, jobs) if cfg.scheduler else _LocalBackend(jobs)
    summary.workers = backend.label
    progress = Progress(expected, stream, enabled=cfg.progress, start=done)
    window = 2 * backend.jobs + 2
    chunk_size, per_mol = 2, None
    target = 0.5 if cfg.scheduler else 0.25  # seconds of work per chunk
    pending: dict = {}  # future -> sequence number
    ready: dict = {}  # sequence number -> ChunkResult
    next_seq = next_write = 0
    exhausted = False
    last_commit = time.monotonic()
    args = (cfg.options, pset.sha256, cfg.heavy, cfg.time_limit)
    interrupted = False
    try:
        while True:
            while not exhausted and len(pending) + len(ready) < window:
                chunk = [tuple(vars(it).values()) for _, it in zip(range(chunk_size), items)]
                if not chunk:
                    exhausted = True
                    break
                pending[backend.submit(chunk, *args)] = next_seq
                next_seq += 1
            if not pending and not ready:
                break
            for fut in backend.wait(pending, timeout=0.25):
                seq = pending.pop(fut)
                res = fut.result()
                if not summary.startup_seconds:
                    summary.startup_seconds = time.perf_counter() - t0
                ready[seq] = res
                if len(res):
                    t = res.seconds / len(res)
                    per_mol = t if per_mol is None else 0.7 * per_mol + 0.3 * t
                    chunk_size = int(min(512, max(1, target / max(per_mol, 1e-5))))
            while next_write in ready:
                res = ready.pop(next_write)
                writer.add(res)
                next_write += 1
                summary.written += len(res)
                progress.advance(len(res), failed=int(sum(1 for e in res.error_kind if e)))
            if writer.pending_rows >= cfg.block_size or (
                    writer.pending_rows and time.monotonic() - last_commit >= cfg.block_seconds):
                writer.commit()
                last_commit = time.monotonic()
            progress.show()
    except KeyboardInterrupt:
        interrupted = True
    except BaseException as exc:
        progress.finish()
        backend.close(cancel=True)
        writer.close(complete=False, run_record=_record(t0, backend, summary))
        if isinstance(exc, cf.process.BrokenProcessPool):
            raise PPPError("a worker process stopped unexpectedly (out of memory, or killed); the results "
                           "written so far are kept: run the same command again to continue") from None
        raise
    with _ctrl_c_deferred():  # the file is being finished: a Ctrl-C now would only leave it half-written
        progress.finish()
        backend.close(cancel=interrupted)
        summary.wall_seconds = time.perf_counter() - t0
        complete = not interrupted and done + summary.written == expected
        writer.close(complete=complete, run_record=_record(t0, backend, summary))
        if complete:
            rewrite(cfg.output)
        with ResultsFile(cfg.output) as rf:
            summary.counts, summary.warned = _counts(rf), _warned(rf)
    summary.complete, summary.interrupted = complete, interrupted
    return summary


@contextlib.contextmanager
def _ctrl_c_deferred():
    """Ignore SIGINT inside the block (main thread only; elsewhere signals are not delivered anyway):
    closing, compacting and counting the results file run to the end once started. A Ctrl-C pressed
    meanwhile is dropped: the batch is ending already, and the file it leaves is a finished one."""
    try:
        previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    except ValueError:  # not the main thread
        yield
        return
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def _record(t0: float, backend, summary: BatchSummary) -> dict:
    return {"ended": now_utc(), "seconds": round(time.perf_counter() - t0, 3), "workers": backend.label,
            "rows_added": summary.written}
