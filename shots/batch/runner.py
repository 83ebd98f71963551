"""Where tasks run: in this process, in local worker processes, or on a Dask cluster.

The three runners take the same tasks (``shots.batch.worker`` functions) and return the same
results, so a batch writes the same bytes whichever runs it. Each hands out futures and waits
for the first to finish; the batch submits lazily so only a few results wait in memory.
"""

from __future__ import annotations

import multiprocessing
import os
from collections.abc import Callable
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from contextlib import contextmanager
from dataclasses import dataclass
from urllib.parse import urlsplit

import shots
from shots.batch import worker
from shots.errors import BatchError

WORKER_DIED = "WorkerDied"


def available_cores() -> int:
    """Cores this process may run on (the affinity mask where the OS has one)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:
        return max(1, os.cpu_count() or 1)


def numba_threads(workers: int, cores: int | None = None) -> int:
    """Threads per worker so that ``workers`` processes never oversubscribe the cores."""
    return max(1, (cores or available_cores()) // max(1, workers))


def start_context():
    """Spawn: a fresh interpreter per worker, on every OS, with no forked locks or threads.

    A fork server preloading the renderer would start workers about a second sooner, but its
    workers missed numba's on-disk cache for the render kernel and compiled it again (two
    minutes on this machine, measured), so spawn it is.
    """
    return multiprocessing.get_context("spawn")


class InlineRunner:
    """Runs each task in this process when it is submitted (one worker, all cores)."""

    def __init__(self, threads: int | None = None):
        self.workers = 1
        self.threads = threads or available_cores()
        self._previous: int | None = None

    def submit(self, fn: Callable, *args) -> Future:
        import numba

        if self._previous is None:
            self._previous = numba.get_num_threads()
            worker.set_threads(self.threads)
        future: Future = Future()
        try:
            future.set_result(fn(*args))
        except BaseException as exc:
            future.set_exception(exc)
        return future

    def wait_any(self, pending: set) -> tuple[set, set]:
        return set(pending), set()

    def result(self, future: Future, model: str, variant: str):
        return future.result()

    def close(self) -> None:
        if self._previous is not None:
            worker.set_threads(self._previous)


class ProcessRunner:
    """A pool of worker processes, each with ``cores // workers`` numba threads."""

    def __init__(self, workers: int, threads: int | None = None):
        self.workers = workers
        self.threads = threads or numba_threads(workers)
        self._pool = self._new_pool()

    def _new_pool(self) -> ProcessPoolExecutor:
        return ProcessPoolExecutor(
            max_workers=self.workers, mp_context=start_context(),
            initializer=worker.init_worker, initargs=(self.threads, os.getpid()),
        )

    def submit(self, fn: Callable, *args) -> Future:
        try:
            return self._pool.submit(fn, *args)
        except BrokenProcessPool:  # a worker died earlier: carry on with a fresh pool
            self._pool.shutdown(wait=False, cancel_futures=True)
            self._pool = self._new_pool()
            return self._pool.submit(fn, *args)

    def wait_any(self, pending: set) -> tuple[set, set]:
        done, not_done = wait(pending, return_when=FIRST_COMPLETED)
        return done, not_done

    def result(self, future: Future, model: str, variant: str):
        try:
            return future.result()
        except BrokenProcessPool:
            failure = worker.Failure(WORKER_DIED, "a worker process died (out of memory, or a "
                                                  "crash while rendering this model)")
            return worker.TaskResult(model, variant, failure=failure)

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)


class DaskRunner:
    """Tasks sent to an existing Dask distributed scheduler (``pip install shots[dask]``).

    Workers return bytes and this process writes them, so the cluster needs no access to the
    output folder, only to the model files (at the same paths) and the Python packages.
    """

    def __init__(self, address: str, tls: ClusterTls | None = None):
        try:
            from dask.distributed import Client
        except ImportError:
            raise BatchError("--cluster", None,
                             "needs Dask: pip install 'dask[distributed]'") from None
        if address.startswith("tls://") and tls is None:
            raise BatchError("--cluster", None, f"{address!r} uses TLS: give --tls-ca-file and "
                                                "--tls-cert (and --tls-key)")
        security = tls.security() if tls is not None else None
        try:
            self._client = Client(address, timeout="20s", set_as_default=False,
                                  security=security)
        except (OSError, TimeoutError, ValueError) as exc:
            raise BatchError("--cluster", None, f"cannot reach the scheduler at {address!r}: "
                                                f"{exc}") from None
        info = self._client.scheduler_info(n_workers=-1)["workers"].values()
        self.host_threads: dict[str, int] = {}
        for entry in info:
            host = entry.get("host") or urlsplit(entry.get("id", "")).hostname or ""
            self.host_threads[host] = self.host_threads.get(host, 0) + int(entry["nthreads"])
        self.workers = max(1, sum(self.host_threads.values()))
        from dask.distributed import as_completed

        self._completed = as_completed(loop=self._client.loop)
        self._finished: set = set()

    def submit(self, fn: Callable, *args):
        future = self._client.submit(worker.on_dask_worker, fn, self.host_threads,
                                     shots.__version__, *args, pure=False)
        self._completed.add(future)
        return future

    def wait_any(self, pending: set) -> tuple[set, set]:
        done = {next(self._completed), *self._completed.next_batch(block=False)}
        self._finished |= done
        ready = pending & self._finished
        self._finished -= ready
        return ready, pending - ready

    def result(self, future, model: str, variant: str):
        try:
            result = future.result()
        except Exception as exc:  # a worker lost, a task that could not be sent or unpickled
            failure = worker.Failure(WORKER_DIED, f"the cluster could not run the task: {exc}")
            return worker.TaskResult(model, variant, failure=failure)
        problem = worker.result_problem(result, model, variant)
        if problem is not None:  # what came back is used only once it has the expected shape
            failure = worker.Failure("BadResult", f"{model}: the cluster sent back a malformed "
                                                  f"result ({problem})")
            return worker.TaskResult(model, variant, failure=failure)
        return result

    def close(self) -> None:
        self._client.close()


@dataclass(frozen=True)
class ClusterTls:
    """TLS files for a Dask scheduler at a ``tls://`` address (Dask's ``Security``): the CA
    that signed the cluster's certificates, and this client's certificate and key."""

    ca_file: str
    cert: str
    key: str | None = None

    def __post_init__(self):
        for name in ("ca_file", "cert", "key"):
            path = getattr(self, name)
            if path is not None and not os.path.isfile(path):
                raise BatchError(f"--tls-{name.replace('_', '-')}", None,
                                 f"no such file {path!r}")

    def security(self):
        from distributed.security import Security

        return Security(tls_ca_file=self.ca_file, tls_client_cert=self.cert,
                        tls_client_key=self.key, require_encryption=True)


@contextmanager
def local_workers(workers: int | None = None, threads: int | None = None):
    """Worker processes kept for several batches: ``run_batch(..., pool=...)`` in the block.

    Each batch would otherwise start its own processes, and a worker's start (interpreter,
    imports, numba's cached kernels) costs it a second or two of CPU before its first frame.
    Processes start when the first task needs them and stop when the block ends.
    """
    runner = ProcessRunner(workers or available_cores(), threads)
    try:
        yield runner
    finally:
        runner.close()


def make_runner(workers: int, cluster: str | None, threads: int | None = None,
                tls: ClusterTls | None = None):
    """The runner for a batch: Dask when ``cluster`` names a scheduler, else local."""
    if cluster:
        return DaskRunner(cluster, tls)
    if workers <= 1:
        return InlineRunner(threads)
    return ProcessRunner(workers, threads)
