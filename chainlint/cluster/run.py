"""`chainlint profile DATA --dask ADDRESS`: count the pieces of a dataset on a Dask cluster,
merge their partials there in a tree, and finish the profile on the client.

Tasks: one per piece (`chainlint.profile.pieces`), each sealing its partial under a key made
for this run; merges pair neighbours in row order, level by level, so no more than two
partials meet in one place and the client receives only the root. A worker lost mid-run is
Dask's to handle: its running tasks are rescheduled and results it held are recomputed from
their tasks. A task failing on bad data fails the run: every task is cancelled and the error,
which names the file and the piece, is raised; nothing is written.
"""

from __future__ import annotations

import hashlib
import os
import re
import secrets
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any, TextIO

import dask
from distributed import Client, Future, LocalCluster, as_completed

from chainlint.cluster import tasks
from chainlint.profile.errors import DataError
from chainlint.profile.joint import JointCounter
from chainlint.profile.partial import partial_document, worker_settings
from chainlint.profile.settings import Settings
from chainlint.profile.pieces import Plan

_LOCAL = re.compile(r"local(?::(\d+))?")


class ClusterError(Exception):
    """The cluster cannot be reached, or lost the run (not a fault of the data)."""


#: Seconds a cluster may take to start its workers or answer the client before the run gives up.
START_SECONDS = 120.0
#: Seconds a client or a cluster may take to close.
CLOSE_SECONDS = 30.0


@contextmanager
def connect(address: str, timeout: float = START_SECONDS) -> Iterator[Client]:
    """A client of the scheduler at `address`, or of a LocalCluster of N worker processes for
    `local[:N]` (N: this machine's cores when not given), closed on leaving. Starting and
    connecting are bounded by `timeout` seconds, closing by `CLOSE_SECONDS`."""
    local = _LOCAL.fullmatch(address)
    cluster = None
    try:
        if local:
            workers = int(local.group(1) or os.cpu_count() or 1)
            if workers < 1:
                raise ClusterError(f"--dask {address}: a local cluster needs at least one worker")
            # Dask gives each worker process one thread for pyarrow and numpy; here the cores are
            # shared out instead, so that one worker uses them all as the local path does.
            threads = max(1, (os.cpu_count() or 1) // workers)
            environ = {**dask.config.get("distributed.nanny.pre-spawn-environ"), "OMP_NUM_THREADS": threads}
            # Dask has glibc return freed memory to the system from 64 KiB up: each batch's
            # buffers are then faulted in afresh (measured: twice the page faults, 20% more CPU
            # counting in a worker than in the client). A task's memory is bounded by its piece.
            environ.pop("MALLOC_TRIM_THRESHOLD_", None)
            # Dask's statistical profiler samples every thread's stack 100 times a second in the
            # scheduler and each worker: CPU taken from the counting, for a dashboard nobody reads here.
            with dask.config.set({"distributed.nanny.pre-spawn-environ": environ, "distributed.worker.profile.enabled": False}):
                cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=":0",
                                       silence_logs=50, death_timeout=timeout)
            client = Client(cluster, timeout=timeout)
        else:
            client = Client(address, timeout=min(timeout, 10.0))
    except (OSError, ValueError, TimeoutError, RuntimeError) as error:
        if cluster is not None:
            cluster.close(timeout=CLOSE_SECONDS)
        if local:
            raise ClusterError(f"--dask {address}: the local cluster did not start ({error})") from None
        raise ClusterError(f"--dask {address}: cannot reach the scheduler ({error}); give tcp://HOST:PORT, or local[:N]") from None
    try:
        yield client
    finally:
        try:
            client.close(timeout=CLOSE_SECONDS)
        finally:
            if cluster is not None:
                cluster.close(timeout=CLOSE_SECONDS)


def profile_on_cluster(
    client: Client, plan: Plan, name: str, settings: Settings, joint: JointCounter | None = None,
    progress: Callable[[int, int], None] | None = None, timeout: float | None = None,
) -> dict[str, Any]:
    """The profile document of `plan`'s dataset, counted by `client`'s workers; `progress` is
    told the tasks done of the total as they finish. With `timeout` (seconds), a run that has
    not finished by then is cancelled (ClusterError)."""
    unknown = sorted(settings.redact - set(plan.schema.names))
    if unknown:
        raise DataError(f"--redact names no column of the data: {', '.join(unknown)}")
    key = secrets.token_bytes(32)  # in memory only: the client's and the tasks' arguments
    run = secrets.token_hex(4)
    context = client.submit(tasks.hold, (plan.layout, worker_settings(settings), plan.expected_rows or 0, joint),
                            key=f"chainlint-context-{run}", pure=False)
    level = [client.submit(tasks.count, piece, context, key, key=f"chainlint-count-{run}-{index}", pure=False, retries=0)
             for index, piece in enumerate(plan.pieces)]
    # A file's digest is taken by its first piece's task; a file with no piece (no row group) has its own.
    hashed = {piece.path for piece in plan.pieces if piece.hashes}
    digests = [client.submit(tasks.digest, location, key=f"chainlint-digest-{run}-{i}", pure=False)
               for i, location in enumerate(plan.locations()) if location not in hashed]
    inputs: dict[str, tuple[Future, Future]] = {}
    pending = list(level)
    depth = 0
    while len(level) > 1:
        depth += 1
        merged = []
        for index in range(0, len(level) - 1, 2):
            future = client.submit(tasks.merge, level[index], level[index + 1], key,
                                   key=f"chainlint-merge-{run}-{depth}-{index // 2}", pure=False, retries=0)
            inputs[future.key] = (level[index], level[index + 1])
            merged.append(future)
        pending.extend(merged)
        level = merged + level[len(merged) * 2:]
    root = level[0]
    total = len(pending)
    del level  # the client keeps a piece's partial only until its merge is done
    done = 0
    deadline = None if timeout is None else time.monotonic() + timeout
    # This client's own loop: without it Dask tracks the futures on the process's default client,
    # which may be another one (one that failed to connect stays the default) and never runs.
    waiting = as_completed(pending + digests, loop=client.loop, timeout=timeout)
    digest_keys = {d.key for d in digests}
    pending = []
    try:
        for future in waiting:
            if future.status == "error":
                _raise(future)
            inputs.pop(future.key, None)
            if future.key not in digest_keys:
                done += 1
                if progress is not None:
                    progress(done, total)
        left = None if deadline is None else max(1.0, deadline - time.monotonic())
        sealed = root.result(timeout=left)  # pickled on the way: it arrives sealed
        partial = sealed.open(key)
        for location, future in zip([loc for loc in plan.locations() if loc not in hashed], digests):
            partial.digests[location] = future.result(timeout=left)
        fingerprint = hashlib.sha256("".join(partial.digests[loc] for loc in plan.locations()).encode()).hexdigest()
    except TimeoutError:
        running = _running(client, plan, run)
        client.cancel([root, context, *digests, *[f for pair in inputs.values() for f in pair]], force=True)
        raise ClusterError(f"the run did not finish within {timeout:g} s ({done} of {total} tasks done{running}); "
                           "it was cancelled") from None
    except BaseException:
        client.cancel([root, context, *digests, *[f for pair in inputs.values() for f in pair]], force=True)
        raise
    source = {
        "kind": plan.kind,
        "files": [{"path": f.path, "bytes": f.bytes, "modified": f.modified} for f in plan.files],
        "fingerprint": "sha256:" + fingerprint,
    }
    return partial_document(partial, name, settings, source)


class TaskProgress:
    """Tasks done of the total on stderr: rewritten in place on a terminal, else a line at
    every tenth of the run (for logs)."""

    def __init__(self, stream: TextIO) -> None:
        self.stream = stream
        self.terminal = stream.isatty()
        self.start = time.monotonic()
        self.shown = -1

    def __call__(self, done: int, total: int) -> None:
        if self.terminal:
            self.stream.write(f"\r  {done:,} of {total:,} tasks  {time.monotonic() - self.start:6.1f} s")
            if done == total:
                self.stream.write("\r" + " " * 50 + "\r")
        elif done * 10 // total > self.shown:
            self.shown = done * 10 // total
            self.stream.write(f"{done:,} of {total:,} tasks done\n")
        self.stream.flush()


def _running(client: Client, plan: Plan, run: str) -> str:
    """What the workers were still running when the run gave up (a piece by its place in the
    data), for the error message."""
    try:
        processing = client.processing()
    except (OSError, TimeoutError):
        return ""
    shown = []
    for worker, keys in sorted(processing.items()):
        for task in keys:
            name = str(task)
            if name.startswith(f"chainlint-count-{run}-"):
                name = plan.pieces[int(name.rsplit("-", 1)[1])].where()
            shown.append(f"{name} on {worker}")
    return "; running: " + ", ".join(shown[:5]) + (" ..." if len(shown) > 5 else "") if shown else "; none running"


def _raise(future: Future) -> None:
    error = future.exception()
    if isinstance(error, DataError):  # its place as the task gave it: file, line, piece
        raise DataError(error.reason, path=error.path, line=error.line, column=error.column) from None
    kind = type(error).__name__
    if kind == "KilledWorker":
        raise ClusterError(f"a task was lost with its worker too many times ({error}); the run is abandoned") from None
    raise ClusterError(f"a task failed on the cluster: {kind}: {error}") from None
