"""Running a reach map's chunks: in this process, on local worker processes or threads, or on a
Dask cluster. Every way runs the same chunk function on the same chunks, so the result is the
same bit for bit (on machines with the same numpy build).

How the work is split: the grid's flat index (orientation, x, y, z in C order) is cut into
contiguous chunks of ``chunk`` poses (``chunk_ranges``); a chunk is two numbers, and a worker
makes its poses itself from the grid it received with the job. Results come back per chunk and
are put in place by ``Collector``, which refuses a chunk twice or of the wrong length and knows
when every chunk is in.

Failures: a chunk whose function raises is run again, up to ``MAX_ATTEMPTS`` times in all; a
local worker process that dies breaks its pool, which is replaced and given the unfinished
chunks again (at most ``MAX_ATTEMPTS`` times); on Dask the scheduler moves the chunks of a worker
that dies to other workers, a chunk that the scheduler gives up on (it killed workers
repeatedly) is submitted again like a failed one, and each worker that leaves is reported. Every
such event is passed to ``note`` so the run can say so. Nothing is returned until every chunk
is in.
"""

from __future__ import annotations

import concurrent.futures as cf
import multiprocessing
import os
import uuid
from dataclasses import dataclass, field

import numpy as np

from ..errors import IkgenError, clip, quote
from .core import FIGURES
from .solvers import compute_chunk

MAX_ATTEMPTS = 3            # runs of one chunk (or pools of a local run) before the map gives up
CONNECT_TIMEOUT = 10.0      # seconds to reach a Dask scheduler
WORKER_TIMEOUT = 30.0       # seconds to wait for a Dask scheduler to have a worker
POLL = 0.5                  # seconds between looks at the Dask cluster's workers
POOLS = ("processes", "threads")


def chunk_ranges(total: int, size: int) -> list[tuple[int, int]]:
    """Contiguous (start, stop) ranges of at most ``size`` indices covering 0 .. total - 1."""
    return [(start, min(start + size, total)) for start in range(0, total, size)]


def describe_range(index: int, span: tuple[int, int]) -> str:
    return f"chunk {index + 1} (poses {span[0]:,} to {span[1] - 1:,})"


class Collector:
    """The map's arrays, filled chunk by chunk; ``missing`` lists the chunks not yet in."""

    def __init__(self, total: int, ranges: list[tuple[int, int]]):
        self.ranges = ranges
        self.arrays = {"count": np.zeros(total, dtype=np.int32), "conditioning": np.full(total, np.nan),
                       "margin": np.full(total, np.nan)}
        self.done: set[int] = set()
        self.poses_done = 0

    def add(self, index: int, result: dict) -> None:
        start, stop = self.ranges[index]
        if index in self.done:
            raise RuntimeError(f"{describe_range(index, self.ranges[index])} came back twice")
        for name in FIGURES:
            values = np.asarray(result[name])
            if values.shape != (stop - start,):
                raise RuntimeError(f"{describe_range(index, self.ranges[index])}: {name} has shape {values.shape}")
            self.arrays[name][start:stop] = values
        self.done.add(index)
        self.poses_done += stop - start

    @property
    def missing(self) -> list[int]:
        return [i for i in range(len(self.ranges)) if i not in self.done]


@dataclass
class Events:
    """What a run tells its user while it works: ``note(text)`` for retries and lost workers,
    ``progress(poses done)`` after each chunk."""
    note: object = print
    progress: object = None
    notes: list[str] = field(default_factory=list)

    def tell(self, text: str) -> None:
        self.notes.append(text)
        if self.note:
            self.note(text)

    def advance(self, done: int) -> None:
        if self.progress:
            self.progress(done)


def give_up(index: int, span, error: BaseException) -> IkgenError:
    return IkgenError(f"{describe_range(index, span)} failed {MAX_ATTEMPTS} times, last with "
                      f"{type(error).__name__}: {clip(str(error), 300)}; nothing was written")


def run_here(job, ranges, collector: Collector, events: Events, chunk_function=compute_chunk) -> None:
    """Every chunk in this process, one after the other."""
    for index, (start, stop) in enumerate(ranges):
        for attempt in range(1, MAX_ATTEMPTS + 1):
            try:
                result = chunk_function(job, start, stop)
                break
            except Exception as exc:  # noqa: BLE001 - any failure of a chunk is retried, then reported
                if attempt == MAX_ATTEMPTS:
                    raise give_up(index, (start, stop), exc) from None
                events.tell(f"{describe_range(index, (start, stop))} failed ({type(exc).__name__}: "
                            f"{clip(str(exc), 200)}); running it again (attempt {attempt + 1} of {MAX_ATTEMPTS})")
        collector.add(index, result)
        events.advance(collector.poses_done)


def make_pool(kind: str, workers: int) -> cf.Executor:
    if kind == "threads":
        return cf.ThreadPoolExecutor(max_workers=workers)
    # spawn: a clean interpreter per worker (fork would copy this process's threads and locks)
    return cf.ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("spawn"))


def run_pool(job, ranges, collector: Collector, events: Events, workers: int, kind: str = "processes",
             chunk_function=compute_chunk) -> None:
    """Every chunk on ``workers`` local worker processes or threads."""
    attempts = {index: 0 for index in range(len(ranges))}
    pools = 0
    while collector.missing:
        pools += 1
        if pools > MAX_ATTEMPTS:
            raise IkgenError(f"local worker processes died {MAX_ATTEMPTS} times; nothing was written")
        pool = make_pool(kind, workers)
        try:
            broken = _drain(pool, job, ranges, collector, events, attempts, chunk_function)
        finally:
            pool.shutdown(wait=True, cancel_futures=True)
        if broken:
            events.tell(f"a local worker process died; a new pool of {workers} runs the {len(collector.missing)} "
                        "unfinished chunk(s) again (the finished ones are kept)")


def _drain(pool, job, ranges, collector, events, attempts, chunk_function) -> bool:
    """Submit the missing chunks to ``pool`` and collect them, retrying failed ones; True when
    the pool broke (a worker process died) before every chunk was in. Chunks that finished
    before the break are kept."""
    pending = {pool.submit(chunk_function, job, *ranges[i]): i for i in collector.missing}
    while pending:
        done, _ = cf.wait(pending, return_when=cf.FIRST_COMPLETED)
        for future in done:
            index = pending.pop(future)
            try:
                result = future.result()
            except cf.process.BrokenProcessPool:
                _keep_finished(pending, collector, events)
                return True
            except Exception as exc:  # noqa: BLE001 - retried, then reported
                attempts[index] += 1
                if attempts[index] >= MAX_ATTEMPTS:
                    raise give_up(index, ranges[index], exc) from None
                events.tell(f"{describe_range(index, ranges[index])} failed ({type(exc).__name__}: "
                            f"{clip(str(exc), 200)}); running it again (attempt {attempts[index] + 1} of "
                            f"{MAX_ATTEMPTS})")
                pending[pool.submit(chunk_function, job, *ranges[index])] = index
                continue
            collector.add(index, result)
            events.advance(collector.poses_done)
    return False


def _keep_finished(pending: dict, collector: Collector, events: Events) -> None:
    """After a pool broke: collect the chunks whose futures had finished with a result."""
    for future, index in pending.items():
        if future.done() and not future.cancelled() and future.exception() is None:
            collector.add(index, future.result())
            events.advance(collector.poses_done)


# ------------------------------------------------------------------------------------- Dask

def dask_modules():
    try:
        import distributed
    except ImportError:
        raise IkgenError("--cluster needs Dask's distributed scheduler, which is not installed; expected it "
                         "installed with: pip install 'ikgen[cluster]' (or pip install 'dask[distributed]')") from None
    return distributed


def connect(address: str, local_workers: int = 2):
    """A Dask client: for ``address`` "local", a new cluster of ``local_workers`` worker processes
    on this machine (closed with the client); else the scheduler at ``address``."""
    distributed = dask_modules()
    import logging
    if address == "local":
        try:
            cluster = distributed.LocalCluster(n_workers=local_workers, threads_per_worker=1, processes=True,
                                               dashboard_address=None, silence_logs=logging.CRITICAL)
        except (OSError, TimeoutError, RuntimeError) as exc:
            raise IkgenError(f"could not start a local Dask cluster of {local_workers} worker(s) "
                             f"({type(exc).__name__}: {clip(str(exc), 200)}); expected a machine where Dask "
                             "can start worker processes and listen on 127.0.0.1") from None
        return distributed.Client(cluster, set_as_default=False)
    try:
        client = distributed.Client(address, timeout=CONNECT_TIMEOUT, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise IkgenError(f"cannot reach the Dask scheduler at {quote(address)} within {CONNECT_TIMEOUT:g} s "
                         f"({type(exc).__name__}: {clip(str(exc), 200)}); expected the address of a running "
                         "scheduler such as tcp://127.0.0.1:8786 (start one with 'dask scheduler' and workers "
                         "with 'dask worker ADDRESS'), or 'local' for a cluster on this machine") from None
    try:
        client.wait_for_workers(1, timeout=WORKER_TIMEOUT)
    except (TimeoutError, OSError):
        client.close()
        raise IkgenError(f"the Dask scheduler at {quote(address)} has no worker after {WORKER_TIMEOUT:g} s; "
                         "expected at least one (start one with 'dask worker ADDRESS')") from None
    return client


def close(client) -> None:
    """Close a client and, for a local cluster, the cluster it started."""
    cluster = getattr(client, "cluster", None)
    client.close()
    if cluster is not None:
        cluster.close()


def cluster_workers(client) -> dict[str, int]:
    """The cluster's workers: address -> threads."""
    info = client.scheduler_info(n_workers=-1)
    return {address: int(worker.get("nthreads", 1)) for address, worker in info["workers"].items()}


def run_dask(job, ranges, collector: Collector, events: Events, client, chunk_function=compute_chunk) -> None:
    """Every chunk on the Dask cluster of ``client``."""
    distributed = dask_modules()
    run = uuid.uuid4().hex[:12]
    attempts = {index: 1 for index in range(len(ranges))}

    def submit(index):
        key = f"ikgen-reach-{run}-{index}-{attempts[index]}"
        return client.submit(chunk_function, job, *ranges[index], key=key, pure=False)

    pending = {submit(index): index for index in collector.missing}
    seen = set(cluster_workers(client))
    while pending:
        try:
            with client.as_current():
                done, _ = distributed.wait(list(pending), timeout=POLL, return_when="FIRST_COMPLETED")
        except TimeoutError:
            done = ()
        seen = _report_departures(client, seen, events)
        for future in done:
            index = pending.pop(future)
            try:
                result = future.result()
            except Exception as exc:  # noqa: BLE001 - a failed chunk (or one the scheduler gave up on) is retried
                if attempts[index] >= MAX_ATTEMPTS:
                    raise give_up(index, ranges[index], exc) from None
                attempts[index] += 1
                events.tell(f"{describe_range(index, ranges[index])} failed on the cluster ({type(exc).__name__}: "
                            f"{clip(str(exc), 200)}); submitting it again (attempt {attempts[index]} of "
                            f"{MAX_ATTEMPTS})")
                pending[submit(index)] = index
                continue
            finally:
                future.release()
            collector.add(index, result)
            events.advance(collector.poses_done)


def _report_departures(client, seen: set[str], events: Events) -> set[str]:
    try:
        now = set(cluster_workers(client))
    except (OSError, TimeoutError):
        return seen
    for address in sorted(seen - now):
        events.tell(f"worker {address} left the cluster during the run; the scheduler runs its chunks on other "
                    "workers (every chunk is still collected once)")
    return now


def local_cpus() -> int:
    """Cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:      # not on Linux
        return os.cpu_count() or 1
