"""Where the points of a sweep run: joblib's loky processes on this machine, or a dask cluster.

``loky`` (the default): ``jobs`` worker processes on this machine (default: every core joblib
counts); ``jobs = 1`` runs the points one after another in this process.

``dask``: joblib's dask backend on a dask.distributed cluster. With a scheduler address
(``tcp://host:port``) the points go to that running scheduler's workers; without one a
``LocalCluster`` is started on the loopback address 127.0.0.1 (``jobs`` worker processes, one thread
each) and stopped afterwards. Before any point is sent, :func:`preflight` checks with short probe
tasks and a timeout that the scheduler and every worker can import ampmodel (of which version) and
that the workers can write into the output folder and the parent can see what they wrote (a file
system shared between them). joblib's dask backend would otherwise wait forever on tasks that no
worker can unpickle.

HDF5 file locking is never switched off: each point file has one writer (the worker computing it).
"""
from __future__ import annotations

import os
import socket
import threading
import uuid
import warnings
from pathlib import Path
from typing import Any, Callable, Iterable, Iterator, Sequence

BACKENDS = ("loky", "dask")


class BackendError(Exception):
    """The compute backend cannot be used (scheduler unreachable, workers without ampmodel, ...)."""


class WorkerLost(RuntimeError):
    """A worker process died while it ran a task (killed from outside, or by the system when memory
    ran out); the tasks that finished before are not affected."""


def cores() -> int:
    """The cores this process may use (joblib's count: affinity and container limits respected)."""
    from joblib import cpu_count
    return max(1, cpu_count())


def where() -> str:
    """host:pid of the calling process (recorded with each point)."""
    return f"{socket.gethostname()}:{os.getpid()}"


# ----------------------------------------------------------------------------------------------
# Probes (run on the scheduler and on each worker)
# ----------------------------------------------------------------------------------------------

def probe_import() -> dict[str, str]:
    """Import ampmodel and what a point needs; return the version and where it runs."""
    from ampmodel import _version, simulation  # noqa: F401  (numpy and scipy come with them)
    from ampmodel.output import hdf5  # noqa: F401  (h5py comes with it)
    return {"version": _version.__version__, "where": where(), "file": str(Path(_version.__file__).parent)}


def probe_worker(folder: str, token: str) -> dict[str, str]:
    """:func:`probe_import`, then write ``folder/.probe-<token>-<pid>`` for the parent to find."""
    info = probe_import()
    name = Path(folder) / f".probe-{token}-{os.getpid()}"
    try:
        name.write_text(info["where"])
        info["wrote"] = name.name
    except OSError as exc:
        info["wrote"] = ""
        info["write_error"] = f"{exc.strerror or exc} ({folder})"
    return info


def _with_timeout(fn: Callable[[], Any], seconds: float, what: str) -> Any:
    """Call ``fn`` in a daemon thread; BackendError when it takes longer than ``seconds``."""
    box: dict[str, Any] = {}

    def target() -> None:
        try:
            box["value"] = fn()
        except BaseException as exc:   # noqa: BLE001 - handed to the caller
            box["error"] = exc

    t = threading.Thread(target=target, daemon=True, name=f"ampmodel preflight: {what}")
    t.start()
    t.join(seconds)
    if t.is_alive():
        raise BackendError(f"{what}: no answer within {seconds:g} s")
    if "error" in box:
        raise box["error"]
    return box["value"]


def _describe(exc: BaseException) -> str:
    text = f"{type(exc).__name__}: {exc}".strip()
    return text if len(text) < 300 else text[:297] + "..."


def preflight(client, folder: Path, timeout_s: float) -> list[dict[str, str]]:
    """Check that the cluster of ``client`` can run points writing into ``folder``.

    Returns one probe answer per worker (version, host:pid, install folder).

    Raises
    ------
    BackendError
        No worker within the timeout; the scheduler or a worker cannot import ampmodel; a worker
        cannot write into ``folder``, or writes where the parent cannot see it.
    """
    from distributed import TimeoutError as DaskTimeout
    from distributed import wait

    from ampmodel._version import __version__

    address = client.scheduler.address
    try:
        _with_timeout(lambda: client.run_on_scheduler(probe_import), timeout_s,
                      f"the dask scheduler at {address}")
    except BackendError as exc:
        raise BackendError(f"{exc}: it could not run a short task importing ampmodel. The scheduler "
                           f"unpickles the task graph, so ampmodel must be importable where it runs "
                           f"(pip install ampmodel there, or set PYTHONPATH)") from None
    except Exception as exc:
        raise BackendError(f"the dask scheduler at {address} cannot import ampmodel ({_describe(exc)}); "
                           f"install it where the scheduler runs (pip install ampmodel) or set its "
                           f"PYTHONPATH") from None

    try:
        _with_timeout(lambda: client.wait_for_workers(1, timeout=timeout_s), timeout_s + 5,
                      f"waiting for dask workers at {address}")
    except (BackendError, DaskTimeout, TimeoutError, OSError):
        raise BackendError(f"the dask scheduler at {address} has no workers (waited {timeout_s:g} s); "
                           f"start workers with `dask worker {address}`") from None
    workers = list(client.scheduler_info()["workers"])
    token = uuid.uuid4().hex[:12]
    folder.mkdir(parents=True, exist_ok=True)
    futures = [client.submit(probe_worker, str(folder), token, workers=[w], allow_other_workers=False,
                             pure=False, key=f"ampmodel-probe-{token}-{i}") for i, w in enumerate(workers)]
    try:
        wait(futures, timeout=timeout_s)
    except (DaskTimeout, TimeoutError):
        late = [w for w, f in zip(workers, futures, strict=True) if not f.done()]
        client.cancel(futures)
        raise BackendError(f"{len(late)} of {len(workers)} dask workers did not answer a short task "
                           f"importing ampmodel within {timeout_s:g} s ({', '.join(late[:4])}); a worker "
                           f"that cannot unpickle a task may never answer: check that ampmodel is "
                           f"installed on every worker") from None
    answers, problems = [], []
    for w, f in zip(workers, futures, strict=True):
        if f.status == "error":
            problems.append(f"worker {w} cannot import ampmodel: {_describe(f.exception())}")
            continue
        info = f.result()
        answers.append(info)
        if info.get("write_error"):
            problems.append(f"worker {w} cannot write into the output folder: {info['write_error']}")
        elif not (folder / info["wrote"]).exists():
            problems.append(f"worker {w} ({info['where']}) wrote a file into {folder} that this machine "
                            f"cannot see: give --out a folder on a file system shared with the workers")
        if info.get("version") and info["version"] != __version__:
            problems.append(f"worker {w} runs ampmodel {info['version']}, this machine {__version__}; "
                            f"install the same version everywhere")
    for probe in folder.glob(f".probe-{token}-*"):
        probe.unlink(missing_ok=True)
    if problems:
        raise BackendError("the dask cluster cannot run this sweep:\n  " + "\n  ".join(problems) +
                           ("\n  (install ampmodel on the workers with pip, or set their PYTHONPATH)"
                            if any("import" in p for p in problems) else ""))
    return answers


# ----------------------------------------------------------------------------------------------
# Running the points
# ----------------------------------------------------------------------------------------------

class Cluster:
    """A dask client for the dask backend: connected to ``scheduler``, or to a LocalCluster on
    127.0.0.1 started here with ``workers`` processes (one thread each). Use as a context manager."""

    def __init__(self, scheduler: str | None, workers: int, timeout_s: float):
        self.scheduler, self.workers, self.timeout_s = scheduler, workers, timeout_s
        self.client = self.cluster = None

    def __enter__(self) -> "Cluster":
        try:
            from distributed import Client, LocalCluster
        except ImportError:
            raise BackendError("the dask backend needs dask.distributed: pip install 'ampmodel[cluster]' "
                               "(or pip install 'dask[distributed]')") from None
        try:
            if self.scheduler:
                self.client = _with_timeout(lambda: Client(self.scheduler, timeout=self.timeout_s),
                                            self.timeout_s + 5, f"connecting to {self.scheduler}")
            else:
                self.cluster = LocalCluster(host="127.0.0.1", n_workers=self.workers, threads_per_worker=1,
                                            processes=True, dashboard_address=None)
                self.client = Client(self.cluster)
        except BackendError:
            self.__exit__()
            raise BackendError(f"cannot reach the dask scheduler at {self.scheduler} within "
                               f"{self.timeout_s:g} s; is it running (dask scheduler), and is the address "
                               f"tcp://host:port?") from None
        except (OSError, TimeoutError, ValueError) as exc:
            self.__exit__()
            target = f"the dask scheduler at {self.scheduler}" if self.scheduler else "a local dask cluster"
            raise BackendError(f"cannot connect to {target}: {_describe(exc)}") from None
        return self

    def __exit__(self, *exc: Any) -> None:
        for thing in (self.client, self.cluster):
            if thing is not None:
                try:
                    thing.close()
                except Exception:   # noqa: BLE001 - closing is best effort
                    pass
        self.client = self.cluster = None


def release_workers() -> None:
    """Shut down joblib's reusable loky workers now (they would otherwise wait idle for minutes, holding
    the output streams of a parent that may be gone: a caller piping the output would hang)."""
    try:
        from joblib.externals.loky import reusable_executor
        executor = getattr(reusable_executor, "_executor", None)     # None: no workers were started
        if executor is not None:
            executor.shutdown(wait=True, kill_workers=True)
    except Exception:  # noqa: BLE001 - an executor already broken: nothing left to release
        pass


def run_tasks(function: Callable[[Any], Any], tasks: Sequence[Any], backend: str = "loky", jobs: int | None = None,
              client=None) -> Iterator[Any]:
    """Run ``function(task)`` for every task; yield the results as they come (in any order).

    Parameters
    ----------
    function : a module-level function (pickled by reference: the workers import ampmodel)
    tasks : picklable task descriptions
    backend : "loky" or "dask"
    jobs : loky: worker processes (None: every core; 1: in this process, one after another);
        dask: ignored (every worker of ``client``'s cluster takes tasks)
    client : the dask client (``Cluster.client``), for the dask backend
    """
    from joblib import Parallel, delayed, parallel_config
    if not tasks:
        return
    calls: Iterable = (delayed(function)(t) for t in tasks)
    if backend == "dask":
        if client is None:
            raise ValueError("the dask backend needs a client (use backends.Cluster)")
        with parallel_config(backend="dask", client=client, wait_for_workers_timeout=60):
            yield from Parallel(n_jobs=-1, return_as="generator_unordered", batch_size=1)(calls)
        return
    n = min(jobs or cores(), len(tasks))
    if n == 1:
        for t in tasks:
            yield function(t)
        return
    from joblib.externals.loky.process_executor import TerminatedWorkerError
    try:
        with warnings.catch_warnings():      # a stopped run cancels its queued tasks: said by the caller
            warnings.filterwarnings("ignore", message=".*tasks which were still being processed", category=UserWarning)
            yield from Parallel(n_jobs=n, backend="loky", return_as="generator_unordered")(calls)
    except TerminatedWorkerError as exc:
        raise WorkerLost(f"a worker process died while it computed ({exc}); killed from outside, or by "
                         f"the system when memory ran out (fewer --jobs need less memory)") from None
