"""Many files as independent tasks: in this process, on a local Dask cluster, or on a cluster.

What
----
:func:`run_batch` applies one per-file task to many files and returns one
:class:`FileOutcome` per file, in the order given.  A task is any picklable
callable ``task(path) -> result`` whose result has ``to_dict()`` (the JSON
the command line prints for that file); :class:`CheckTask` and
:class:`RenumberTask` call the library's workflow functions.  The tasks run

- in this process, one after another (no ``jobs``, no ``scheduler``);
- on a local Dask cluster of ``jobs`` worker processes (``LocalCluster``);
- on an existing dask.distributed scheduler (``scheduler="tcp://host:8786"``),
  whose workers must see the files under the same absolute paths.

Why
---
dask.distributed runs the same client code against a cluster on one
machine and against one started by SSH, a batch queue or Kubernetes, and
brings what a pool of our own would have to reinvent: a worker's death is
noticed and reported for each task it held, and tasks can declare
resources that each worker holds a fixed amount of.

Faults
------
- A worker that dies during a task (killed, out of memory, a fault in a
  compiled library) fails every task it held at once: the local cluster's
  scheduler allows no failure (``allowed_failures=0``).  Those files are
  run again at the end, each alone on the cluster, so that a file is not
  blamed for its neighbour's crash; a file whose worker dies again, alone,
  gets an error, and the batch goes on.  A file thus crashes workers
  twice at most.  An existing scheduler applies its own
  ``distributed.scheduler.allowed-failures`` (3 unless configured: Dask
  retries the task itself, and a file killed that often gets an error);
  bandwise adds its lone retry only where that setting is 0.
- No more tasks are in flight than the workers have threads, so that a
  worker's death strikes few tasks that were only waiting.
- A file that cannot be read, or whose task raises, gets an error entry;
  one bad file never costs the others.
- With a results file, every finished file is one line appended with a
  single ``write`` and flushed to disk (``fsync``) before the next: a batch
  interrupted or killed at any moment leaves whole lines behind, at most
  followed by one torn line, which the next run drops before appending.

Memory
------
Each task declares its estimated peak memory (:func:`task_memory`) as the
Dask resource ``MEMORY`` in bytes: the estimate the reader refuses a file
by (:func:`bandwise.formats.headers.counts_estimate`, from the header's
counts; it errs low on purpose) times the measured ratio of the command's
peak to it (:data:`PEAK_OVER_ESTIMATE`), or, for formats whose header
gives no counts, the file's size times a measured factor
(:data:`SIZE_FACTORS`).  Local workers each hold the
machine's available memory divided among them; workers of an existing
cluster hold what they were started with (``dask worker --resources
MEMORY=16e9``).  A worker runs tasks at once only while their estimates
add up to what it holds, and a file whose estimate exceeds every worker's
holding is refused with both figures, without being sent.  When no worker
of an existing cluster declares ``MEMORY``, tasks are sent without it.

Cost
----
With a results file the client reads every file once to hash it
(SHA-256); the estimate reads the header (a text gmsh file is searched
for its ``$Elements`` line).  Each task's result travels back as JSON-ready
data, never as the mesh.

References
----------
M. Rocklin, "Dask: parallel computation with blocked algorithms and task
scheduling", Proceedings of the 14th Python in Science Conference, 2015,
pp. 130-136 (the task scheduler; its distributed scheduler's resources and
worker-failure rules are those of the dask.distributed documentation).
"""

from __future__ import annotations

import contextlib
import fcntl
import glob
import hashlib
import json
import os
import socket
import time
import uuid
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from bandwise.core.errors import InputError, MeshWriteError, one_line
from bandwise.core.jsonable import json_default
from bandwise.core.memory import BASELINE_BYTES, available_bytes
from bandwise.core.tables import human_bytes

#: Name of the Dask resource each task declares: its estimated peak memory, in bytes.
MEMORY = "MEMORY"
#: Worker deaths a task may be present at and still be retried by the local cluster's
#: scheduler: none, bandwise retries such files itself, each alone (see the module notes).
ALLOWED_FAILURES = 0
#: Measured peak memory of each command over the header estimate of its file (which leaves
#: out the checks' facet table, and assumes a node degree of 6 where a tetrahedral mesh has
#: about 14), rounded up from scrambled tetrahedral boxes of 1M, 3M and 10M nodes:
#: ``python scripts/bench_scale.py`` (check 2.1x to 2.4x; renumber 2.7x to 3.3x, RCM or
#: every ordering).
PEAK_OVER_ESTIMATE = {"check": 2.5, "renumber": 3.5}
#: Peak bytes of each command per byte of file when the header gives no counts, by the
#: reader a file goes to (keyword and bulk-data decks keep their text; other formats through
#: meshio).  Measured on a 216,000-node tetrahedral box, rounded up:
#: ``python scripts/bench_scale.py --size-factors``.
SIZE_FACTORS = {"check": {"keyword": 32, "bulk": 11, None: 6},
                "renumber": {"keyword": 52, "bulk": 24, None: 7}}


# --------------------------------------------------------------------------- inputs


def is_input_file(path: str | os.PathLike[str]) -> bool:
    """True when a file's name says a format bandwise reads: a mesh, a deck or a matrix.

    The formats floor decides (its registry of mesh formats and the matrix
    file names); a folder search keeps what this accepts.
    """
    from bandwise.formats import registry
    from bandwise.formats.matrix_io import is_matrix_file

    return is_matrix_file(path) or registry.by_extension(path) is not None


def _folder_files(folder: Path, exclude: Sequence[Path]) -> list[Path]:
    """Readable-format files under ``folder``, sorted; hidden files and folders (temporary
    outputs among them) and ``exclude`` left out."""
    out = []
    for path in sorted(folder.rglob("*")):
        rel = path.relative_to(folder).parts
        if any(p.startswith(".") for p in rel) or not path.is_file():
            continue
        if any(_is_under(path, e) for e in exclude):
            continue
        if is_input_file(path):
            out.append(path)
    return out


def _is_under(path: Path, folder: Path) -> bool:
    try:
        path.resolve().relative_to(folder.resolve())
        return True
    except ValueError:
        return False


def expand_paths(args: Iterable[str | os.PathLike[str]],
                 exclude: Sequence[str | os.PathLike[str]] = ()) -> list[Path]:
    """The files named by ``args``: files as given, folders searched, globs matched.

    Parameters
    ----------
    args
        Files (kept even when missing or of an unknown extension: their
        task reports it), folders (searched recursively for files of a
        format bandwise reads, hidden folders skipped), or glob patterns
        (``**`` for any depth; folders they match are searched).
    exclude
        Folders whose files are never picked by a search (an output folder).

    Returns
    -------
    list of Path
        In the order given, each folder's and pattern's files sorted; a
        search adds no file already there.

    Raises
    ------
    InputError
        A folder or pattern that yields no file.
    """
    skip = [Path(e) for e in exclude]
    found: list[Path] = []
    seen: set[str] = set()
    for arg in args:
        text = os.fspath(arg)
        path = Path(text)
        if path.is_file() or (not path.exists() and not glob.has_magic(text)):
            found.append(path)  # named: kept as given, even twice (a batch runs it once)
            seen.add(os.path.abspath(path))
            continue
        if path.is_dir():
            hits = _folder_files(path, skip)
            if not hits:
                raise InputError(f"{text}: no mesh or matrix file in this folder or below")
        else:
            hits = []
            for match in sorted(glob.glob(text, recursive=True)):
                m = Path(match)
                if m.is_dir():
                    hits += _folder_files(m, skip)
                elif is_input_file(m) and not any(_is_under(m, e) for e in skip):
                    hits.append(m)
            if not hits:
                raise InputError(f"{text}: matches no mesh or matrix file")
        for h in hits:
            if os.path.abspath(h) not in seen:
                seen.add(os.path.abspath(h))
                found.append(h)
    return found


def output_paths(inputs: Sequence[str | os.PathLike[str]], out_dir: str | os.PathLike[str]
                 ) -> dict[str, str]:
    """Where each input's output goes in ``out_dir``: its path below the inputs' common folder.

    ``sweep/a/mesh.msh`` and ``sweep/b/mesh.msh`` go to ``OUT/a/mesh.msh``
    and ``OUT/b/mesh.msh``; a lone file goes to ``OUT/<its name>``.  Keys
    and values are absolute paths.

    Raises
    ------
    InputError
        An output would be its own input (``out_dir`` is where the inputs are).
    """
    absolute = [os.path.abspath(p) for p in inputs]
    if not absolute:
        return {}
    base = os.path.commonpath([os.path.dirname(p) for p in absolute])
    out = os.path.abspath(out_dir)
    mapping = {p: os.path.join(out, os.path.relpath(p, base)) for p in absolute}
    same = [p for p, q in mapping.items() if p == q]
    if same:
        raise InputError(f"--out-dir {out_dir} is where the inputs are: {same[0]} would be "
                         "overwritten; name another folder")
    return mapping


def sha256_of(path: str | os.PathLike[str]) -> str:
    """SHA-256 of a file's bytes, in hexadecimal."""
    with open(path, "rb") as fh:
        return hashlib.file_digest(fh, "sha256").hexdigest()


def task_memory(path: str | os.PathLike[str], command: str = "check") -> int:
    """Estimated peak bytes of one file's task (what it declares as the ``MEMORY`` resource).

    From the header's counts where the format gives them (gmsh, VTU:
    :func:`bandwise.formats.headers.counts_estimate`, what the reader
    refuses a file by, times :data:`PEAK_OVER_ESTIMATE` of ``command``);
    otherwise the file's size times its reader's factor
    (:data:`SIZE_FACTORS`), plus the loaded libraries.
    """
    from bandwise.formats import headers, registry
    from bandwise.formats.decks import deck_kind

    counts = registry.header_counts(path)
    if counts is not None and counts.plausible:
        fmt = registry.by_extension(path)
        low = headers.counts_estimate(counts, streamed=fmt is not None and fmt.name == "vtu")
        return int(PEAK_OVER_ESTIMATE[command] * low)
    try:
        size = os.path.getsize(path)
    except OSError:
        size = 0
    return BASELINE_BYTES + SIZE_FACTORS[command][deck_kind(path)] * size


# --------------------------------------------------------------------------- results file


class ResultsFile:
    """A JSON-lines file of finished files, appended one whole line at a time.

    Use as a context manager: entering locks the file against a second
    batch, reads the lines already there (:attr:`lines`) and drops a torn
    last line left by a killed run; :meth:`append` then writes each line
    with one ``write`` call and ``fsync``.
    """

    def __init__(self, path: str | os.PathLike[str]) -> None:
        self.path = Path(path)
        self.lines: list[dict[str, Any]] = []
        self.dropped_torn_line = False
        self._fd: int | None = None

    def __enter__(self) -> ResultsFile:
        if self.path.is_dir():
            raise MeshWriteError(f"{self.path}: is a folder, not a results file")
        if not self.path.resolve().parent.is_dir():
            raise MeshWriteError(f"{self.path}: the folder {self.path.resolve().parent} "
                                 "does not exist")
        created = not self.path.exists()
        try:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        except OSError as exc:
            raise MeshWriteError(f"{self.path}: cannot open the results file: "
                                 f"{exc.strerror}") from None
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            os.close(fd)
            raise InputError(f"{self.path}: another batch is writing this results file") \
                from None
        self._fd = fd
        try:
            self._read_and_trim(fd)
        except BaseException:
            self.close()
            raise
        if created:
            from bandwise.formats.atomic import fsync_folder

            fsync_folder(self.path.resolve().parent)
        return self

    def _read_and_trim(self, fd: int) -> None:
        size = os.fstat(fd).st_size
        data = os.pread(fd, size, 0) if size else b""
        body, newline, tail = data.rpartition(b"\n")
        if not newline:
            body, tail = b"", data
        for k, raw in enumerate(body.split(b"\n") if body else [], 1):
            if not raw.strip():
                continue
            try:
                obj = json.loads(raw)
            except ValueError:
                obj = None
            if not isinstance(obj, dict) or "file" not in obj or "sha256" not in obj:
                raise InputError(f"{self.path}: line {k} is not a bandwise result (JSON with "
                                 "file and sha256); name another --results file")
            self.lines.append(obj)
        if tail:  # a line cut short by a killed run: dropped, so the next append starts clean
            os.ftruncate(fd, len(data) - len(tail))
            os.fsync(fd)
            self.dropped_torn_line = True

    def append(self, line: dict[str, Any]) -> None:
        """Append one JSON object as one line: a single ``write``, then ``fsync``."""
        if self._fd is None:
            raise MeshWriteError(f"{self.path}: the results file is not open")
        data = (json.dumps(line, default=json_default, separators=(",", ":")) + "\n").encode()
        try:
            written = os.write(self._fd, data)
            os.fsync(self._fd)
        except OSError as exc:
            raise MeshWriteError(f"{self.path}: cannot append a result: {exc.strerror}") \
                from None
        if written != len(data):  # disk full: the torn line is dropped by the next run
            raise MeshWriteError(f"{self.path}: only {written} of {len(data)} bytes of a "
                                 "result were written (disk full?)")
        self.lines.append(line)

    def close(self) -> None:
        """Unlock and close (idempotent)."""
        if self._fd is not None:
            fd, self._fd = self._fd, None
            os.close(fd)  # closing releases the lock

    def __exit__(self, *exc: object) -> None:
        self.close()


# --------------------------------------------------------------------------- values


@dataclass(frozen=True)
class FileOutcome:
    """What became of one file of a batch.

    Attributes
    ----------
    file
        Absolute path of the input.
    sha256
        SHA-256 of its bytes (None without a results file, or when unreadable).
    entry
        The task result's ``to_dict()`` (None on error).
    error
        One line saying why the file could not be worked on (None when it was).
    seconds
        Time the task took on its worker (None when it did not run).
    worker
        ``host:pid`` of the process that ran it.
    resumed
        Taken from the results file of an earlier run, not run again.
    """

    file: str
    sha256: str | None = None
    entry: dict[str, Any] | None = None
    error: str | None = None
    seconds: float | None = None
    worker: str | None = None
    resumed: bool = False

    @property
    def ok(self) -> bool:
        """True when the file was worked on (its entry is there)."""
        return self.error is None

    def line(self) -> dict[str, Any]:
        """The results-file object: the entry plus ``sha256``, or ``file``, ``error``, ``sha256``."""
        if self.error is not None or self.entry is None:
            return {"file": self.file, "error": self.error, "sha256": self.sha256}
        return {**self.entry, "sha256": self.sha256}

    @classmethod
    def from_line(cls, line: dict[str, Any], file: str) -> FileOutcome:
        """An outcome read back from a results-file line (``file``: the path in this run)."""
        if set(line) == {"file", "error", "sha256"}:
            return cls(file, line["sha256"], error=line["error"], resumed=True)
        entry = {k: v for k, v in line.items() if k != "sha256"}
        return cls(file, line["sha256"], entry=entry, resumed=True)


@dataclass(frozen=True)
class BatchProgress:
    """Where a batch stands, passed to ``on_progress`` when it starts and after every file.

    ``total`` counts the files this run works on (files skipped because the
    results file has them are counted in ``skipped`` only).
    """

    done: int
    total: int
    errors: int
    skipped: int
    elapsed: float
    where: str  # "in this process", "on a local cluster of 2 worker processes" ... ("": nowhere)
    last: FileOutcome | None = None

    @property
    def eta(self) -> float | None:
        """Seconds left at the pace so far (None before the first file is done)."""
        if not self.done:
            return None
        return self.elapsed / self.done * (self.total - self.done)


@dataclass(frozen=True)
class BatchResult:
    """Every file's outcome, in the order given, and where the batch ran."""

    outcomes: tuple[FileOutcome, ...]
    where: str
    seconds: float
    dropped_torn_line: bool = False

    @property
    def skipped(self) -> int:
        """Files taken from the results file of an earlier run."""
        return sum(o.resumed for o in self.outcomes)

    @property
    def errors(self) -> list[FileOutcome]:
        """Outcomes of files that could not be worked on."""
        return [o for o in self.outcomes if not o.ok]


# --------------------------------------------------------------------------- tasks


@dataclass(frozen=True)
class CheckTask:
    """:func:`~bandwise.workflows.check.check_file` on one path, the same options for every file.

    ``options`` are ``check_file``'s keywords (``fail_on``, ``tolerance``,
    ``supports_file`` ...).  Options that are wrong for every file (the gate,
    the supports) are refused when the task is made, before any file is sent.
    """

    supports: tuple[Any, ...] = ()
    options: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        from bandwise.algorithms.checks.verdict import check_fail_on
        from bandwise.workflows.supports import support_list

        check_fail_on(self.options.get("fail_on", "error"))
        support_list(self.supports, self.options.get("supports_file"))

    def memory(self, path: str) -> int:
        """Estimated peak bytes of this task on ``path`` (:func:`task_memory`)."""
        return task_memory(path, "check")

    def __call__(self, path: str) -> Any:
        from bandwise.workflows.check import check_file

        return check_file(path, supports=self.supports, **self.options)


@dataclass(frozen=True)
class RenumberTask:
    """:func:`~bandwise.workflows.renumber.renumber_file` from one path to its place in
    ``outputs`` (:func:`output_paths`; the node map goes beside each output)."""

    outputs: dict[str, str]
    method: str = "auto"
    objective: str = "profile"
    supports: tuple[Any, ...] = ()
    options: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        from bandwise.algorithms.orderings.compare import EFFORTS, OBJECTIVES
        from bandwise.workflows.renumber import sloan_options
        from bandwise.workflows.supports import support_list

        if self.objective not in OBJECTIVES:
            raise InputError(f"unknown objective {self.objective!r}; valid: "
                             f"{', '.join(OBJECTIVES)}")
        effort = self.options.get("effort", "fast")
        if effort not in EFFORTS:
            raise InputError(f"unknown effort {effort!r}; valid: {', '.join(EFFORTS)}")
        sloan_options(self.options.get("sloan_weights"))
        support_list(self.supports, self.options.get("supports_file"))

    def memory(self, path: str) -> int:
        """Estimated peak bytes of this task on ``path`` (:func:`task_memory`)."""
        return task_memory(path, "renumber")

    def __call__(self, path: str) -> Any:
        from bandwise.workflows.renumber import renumber_file

        dst = Path(self.outputs[path])
        try:
            dst.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise MeshWriteError(f"{dst.parent}: cannot make the folder: {exc.strerror}") \
                from None
        return renumber_file(path, dst, method=self.method, objective=self.objective,
                             supports=self.supports, **self.options)


def run_one(task: Callable[[str], Any], path: str) -> dict[str, Any]:
    """Run ``task`` on one file where it is called (a worker); return JSON-ready data.

    Returns ``{"entry", "seconds", "worker"}``, or ``{"error", ...}`` when the
    file cannot be worked on (a :class:`BandwiseError`, no memory, or any
    other failure of the task: never raised, so that one file never costs
    the others).
    """
    from bandwise.workflows.check import file_failure

    t0 = time.perf_counter()
    worker = f"{socket.gethostname()}:{os.getpid()}"
    try:
        result = task(path)
        entry = result.to_dict() if hasattr(result, "to_dict") else dict(result)
        entry = json.loads(json.dumps(entry, default=json_default))
        return {"entry": entry, "seconds": time.perf_counter() - t0, "worker": worker}
    except Exception as exc:  # noqa: BLE001  any failure is this file's, not the batch's
        error = file_failure(path, exc).error
    return {"error": error, "seconds": time.perf_counter() - t0, "worker": worker}


def _outcome(file: str, digest: str | None, payload: dict[str, Any]) -> FileOutcome:
    return FileOutcome(file, digest, entry=payload.get("entry"), error=payload.get("error"),
                       seconds=payload.get("seconds"), worker=payload.get("worker"))


# --------------------------------------------------------------------------- running


class _Recorder:
    """Keeps the outcomes, appends each to the results file, tells ``on_progress``."""

    def __init__(self, store: ResultsFile | None, on_progress: Callable[[BatchProgress], None]
                 | None, total: int, skipped: int) -> None:
        self.store, self.on_progress = store, on_progress
        self.total, self.skipped = total, skipped
        self.outcomes: dict[str, FileOutcome] = {}
        self.done = self.errors = 0
        self.where = "in this process"
        self.t0 = time.perf_counter()

    def start(self, where: str) -> None:
        self.where, self.t0 = where, time.perf_counter()
        self._tell(None)

    def __call__(self, outcome: FileOutcome) -> None:
        if self.store is not None:
            self.store.append(outcome.line())
        self.outcomes[outcome.file] = outcome
        self.done += 1
        self.errors += not outcome.ok
        self._tell(outcome)

    def _tell(self, last: FileOutcome | None) -> None:
        if self.on_progress is not None:
            self.on_progress(BatchProgress(self.done, self.total, self.errors, self.skipped,
                                           time.perf_counter() - self.t0, self.where, last))


def run_batch(paths: Sequence[str | os.PathLike[str]], task: Callable[[str], Any], *,
              jobs: int | None = None, scheduler: str | None = None,
              results: str | os.PathLike[str] | None = None,
              on_progress: Callable[[BatchProgress], None] | None = None,
              estimate: Callable[[str], int | None] | None = None,
              memory_per_worker: int | None = None,
              allowed_failures: int = ALLOWED_FAILURES,
              timeout: float = 60.0) -> BatchResult:
    """Run ``task`` on every file, each as an independent task; see the module notes.

    Parameters
    ----------
    paths
        Input files (:func:`expand_paths` turns folders and globs into files).
    task
        Picklable ``task(absolute_path) -> result`` with ``result.to_dict()``.
    jobs
        Worker processes of a local Dask cluster.  With neither ``jobs`` nor
        ``scheduler`` the files are worked on in this process, one by one.
    scheduler
        Address of an existing dask.distributed scheduler instead.
    results
        JSON-lines file: one line per finished file is appended, and files
        whose SHA-256 is already there are not run again (their outcome is
        read back, ``resumed``).
    on_progress
        Called when the work starts and after every file.
    estimate
        Peak bytes of a file's task (the ``MEMORY`` resource it declares);
        default: the task's ``memory(path)`` where it has one, else
        :func:`task_memory`.
    memory_per_worker
        ``MEMORY`` held by each local worker (default: the available memory
        divided among the workers).
    allowed_failures
        Worker deaths a task may be present at and still be retried by the
        local cluster's scheduler (0: bandwise retries each such file alone).
    timeout
        Seconds to wait for an existing scheduler and its first worker.

    Returns
    -------
    BatchResult
        One outcome per distinct file, in the order given.

    Raises
    ------
    InputError
        ``jobs`` and ``scheduler`` both given, ``jobs < 1``, an unreachable
        scheduler, a results file that is not one.
    MeshWriteError
        The results file cannot be written.
    """
    if jobs is not None and scheduler is not None:
        raise InputError("give --jobs (a local cluster) or --scheduler (an existing one), "
                         "not both")
    if jobs is not None and jobs < 1:
        raise InputError(f"--jobs must be at least 1, got {jobs}")
    if estimate is None:
        estimate = getattr(task, "memory", task_memory)
    files = list(dict.fromkeys(os.path.abspath(p) for p in paths))
    t0 = time.perf_counter()
    with contextlib.ExitStack() as stack:
        store = None if results is None else stack.enter_context(ResultsFile(results))
        done_before = {} if store is None else {ln["sha256"]: ln for ln in store.lines
                                                if ln.get("sha256")}
        resumed: dict[str, FileOutcome] = {}
        unreadable: list[FileOutcome] = []
        todo: list[tuple[str, str | None]] = []
        for f in files:
            digest = None
            if store is not None:
                try:
                    digest = sha256_of(f)
                except OSError as exc:
                    why = "no such file" if isinstance(exc, FileNotFoundError) else exc.strerror
                    unreadable.append(FileOutcome(f, error=f"{f}: {why}"))
                    continue
                if digest in done_before:
                    resumed[f] = FileOutcome.from_line(done_before[digest], f)
                    continue
            todo.append((f, digest))
        record = _Recorder(store, on_progress, len(todo) + len(unreadable), len(resumed))
        record.outcomes.update(resumed)
        if jobs is None and scheduler is None:
            record.start("in this process")
            for outcome in unreadable:
                record(outcome)
            for f, digest in todo:
                record(_outcome(f, digest, run_one(task, f)))
        elif todo or unreadable:
            _run_on_dask(todo, unreadable, task, record, jobs=jobs, scheduler=scheduler,
                         estimate=estimate, memory_per_worker=memory_per_worker,
                         allowed_failures=allowed_failures, timeout=timeout)
        else:
            record.start("")
        dropped = store is not None and store.dropped_torn_line
    return BatchResult(tuple(record.outcomes[f] for f in files), record.where,
                       time.perf_counter() - t0, dropped)


def _where(jobs: int | None, scheduler: str | None, workers: int = 0, threads: int = 0) -> str:
    if scheduler is None:
        return f"on a local cluster of {jobs} worker process{'es' if jobs != 1 else ''}"
    return (f"on the scheduler at {scheduler} ({workers} worker{'s' if workers != 1 else ''}, "
            f"{threads} thread{'s' if threads != 1 else ''})")


@contextlib.contextmanager
def _client(jobs: int | None, scheduler: str | None, memory_per_worker: int | None,
            allowed_failures: int, timeout: float) -> Iterator[Any]:
    """A Dask client on a new local cluster, or on an existing scheduler; closed on exit."""
    import logging

    from distributed import Client, LocalCluster

    with contextlib.ExitStack() as stack:
        if scheduler is None:
            budget = memory_per_worker
            if budget is None:
                available = available_bytes()
                budget = None if available is None else available // max(jobs or 1, 1)
            cluster = stack.enter_context(LocalCluster(
                n_workers=jobs, threads_per_worker=1, processes=True, host="127.0.0.1",
                dashboard_address="127.0.0.1:0", silence_logs=logging.CRITICAL,
                scheduler_kwargs={"allowed_failures": allowed_failures},
                resources=None if budget is None else {MEMORY: float(budget)}))
            yield stack.enter_context(Client(cluster, set_as_default=False))
            return
        try:
            client = stack.enter_context(Client(scheduler, timeout=timeout,
                                                set_as_default=False))
        except (OSError, TimeoutError, ValueError) as exc:
            raise InputError(f"cannot reach the Dask scheduler at {scheduler}: "
                             f"{one_line(exc, 200)}") from None
        try:
            client.wait_for_workers(1, timeout=timeout)
        except (OSError, TimeoutError):
            raise InputError(f"no worker joined the Dask scheduler at {scheduler} within "
                             f"{timeout:.0f} s") from None
        yield client


def _run_on_dask(todo: list[tuple[str, str | None]], unreadable: list[FileOutcome],
                 task: Callable[[str], Any], record: _Recorder, *, jobs: int | None,
                 scheduler: str | None, estimate: Callable[[str], int | None],
                 memory_per_worker: int | None, allowed_failures: int, timeout: float) -> None:
    from distributed import KilledWorker, as_completed

    with _client(jobs, scheduler, memory_per_worker, allowed_failures, timeout) as client:
        workers = client.scheduler_info()["workers"].values()
        held = [w.get("resources", {}).get(MEMORY) for w in workers]
        largest = max((h for h in held if h), default=None)
        slots = max(sum(int(w.get("nthreads", 1)) for w in workers), 1)
        record.start(_where(jobs, scheduler, len(held), slots))
        for outcome in unreadable:
            record(outcome)
        running: dict[str, tuple[str, str | None]] = {}
        pending = as_completed(loop=client.loop)

        def submit(f: str, digest: str | None) -> bool:
            """Send one file (False: refused, its estimate fits no worker)."""
            resources = None
            if largest is not None:
                need = estimate(f)
                if need is not None and need > largest:
                    record(FileOutcome(f, digest, error=(
                        f"{f}: needs about {human_bytes(need)} of memory; the largest worker "
                        f"holds {human_bytes(largest)} (fewer --jobs give each local worker "
                        "more)")))
                    return False
                resources = None if need is None else {MEMORY: float(need)}
            future = client.submit(run_one, task, f, key=f"bandwise-{uuid.uuid4().hex}",
                                   resources=resources, pure=False)
            running[future.key] = (f, digest)
            pending.add(future)
            return True

        def outcome(future: Any, second: bool) -> tuple[str, str | None, FileOutcome | None]:
            """The file and its outcome; None when a worker's death makes it a suspect."""
            f, digest = running.pop(future.key)
            try:
                payload = future.result()
            except KilledWorker as exc:
                if not second and exc.allowed_failures == 0:
                    return f, digest, None
                alone = " the last time with no other file running," if second else ""
                payload = {"error": f"{f}: the worker process died each time it worked on this "
                                    f"file,{alone} (killed for memory, or a crash in a compiled "
                                    "library); not retried again"}
            except Exception as exc:  # noqa: BLE001  the task's transport failed, not the batch
                payload = {"error": f"{f}: {type(exc).__name__}: {one_line(exc)}"}
            finally:
                future.release()
            return f, digest, _outcome(f, digest, payload)

        queue = iter(todo)
        suspects: list[tuple[str, str | None]] = []
        in_flight = 0
        while True:  # at most as many files in flight as the workers have threads
            while in_flight < slots:
                item = next(queue, None)
                if item is None:
                    break
                in_flight += submit(*item)
            if not in_flight:
                break
            future = next(pending)
            in_flight -= 1
            f, digest, got = outcome(future, second=False)
            if got is None:
                suspects.append((f, digest))
            else:
                record(got)
        for f, digest in suspects:  # alone on the cluster: a neighbour's crash is not its own
            if submit(f, digest):
                record(outcome(next(pending), second=True)[2])
