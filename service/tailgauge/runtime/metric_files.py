"""prometheus-client's multiprocess files, made unable to crash a worker when their filesystem is full.

prometheus-client keeps each worker's values in a file under ``PROMETHEUS_MULTIPROC_DIR`` that it
maps into memory and grows with ``truncate``, which reserves no space: the first write to a page
the filesystem cannot back raises SIGBUS and kills the worker (on a full /tmp every request then
failed, health included). Here every page is allocated (``posix_fallocate``) before it is
mapped, so a full, missing or read-only directory surfaces as an ``OSError`` when a file or a
series is created, never as a signal.

How metrics degrade: from the first such error on, the worker keeps every series it creates in
process only (counted, never exported: ``/metrics`` reads files); series it had already created
keep their allocated pages and stay exported. The worker logs this once and ``/health/ready``
carries :func:`degradation` as a note.

Dead workers: gunicorn's master folds a dead worker's counter and histogram files into one
archive file per type (:func:`fold_dead_worker`) and removes them, so the disk holds one file set
per live worker plus the archive, and the server's totals never go down when a worker is
replaced. Removing the files instead would make every total drop at each restart (every ~20,000
requests by ``max_requests``), which Prometheus reads as a counter reset and turns into a false
spike in ``rate()``.

Kept free of the web stack: gunicorn's master imports it from its configuration.
"""

from __future__ import annotations

import contextlib
import errno
import fcntl
import glob
import logging
import os
import threading

from prometheus_client import values
from prometheus_client.mmap_dict import MmapedDict, mmap_key
from prometheus_client.multiprocess import MultiProcessCollector

ARCHIVE = "archive"  # counter_archive.db: the collector reads any counter_*.db
_FOLDED_TYPES = ("counter", "histogram", "summary")
_HEADER_BYTES = 8  # a file shorter than its header is being created: not readable yet
_INITIAL_SIZE = 1 << 16  # prometheus-client's own first size

logger = logging.getLogger("tailgauge.metrics")


def _allocate(fd: int, size: int) -> None:
    """Give the file ``size`` bytes with every block allocated, or raise OSError (ENOSPC, EFBIG, ...)."""
    try:
        os.posix_fallocate(fd, 0, size)
    except OSError as error:
        if error.errno not in (errno.EOPNOTSUPP, errno.EINVAL):
            raise
        # A filesystem without fallocate: zeros written past the end allocate the blocks too.
        current = os.fstat(fd).st_size
        if size > current:
            os.pwrite(fd, bytes(size - current), current)


class BackedMmapedDict(MmapedDict):
    """prometheus-client's ``MmapedDict`` whose pages are all allocated before they are mapped.

    Relies on the parent's layout (prometheus-client 0.26: ``_used``, ``_capacity``, ``_f``);
    tests/test_metric_files.py pins it.
    """

    def __init__(self, filename: str) -> None:
        created = not os.path.exists(filename)
        fd = os.open(filename, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            _allocate(fd, max(os.fstat(fd).st_size, _INITIAL_SIZE))
        except OSError:
            if created:  # an empty file would break every scrape that reads it
                with contextlib.suppress(OSError):
                    os.remove(filename)
            raise
        finally:
            os.close(fd)
        super().__init__(filename)  # sees a non-empty file: no truncate, maps the allocated pages

    def _init_value(self, key: str) -> None:
        encoded = key.encode("utf-8")
        entry = 4 + len(encoded) + (8 - (len(encoded) + 4) % 8) + 16  # as the parent packs it
        capacity = self._capacity
        while self._used + entry > capacity:
            capacity *= 2
        if capacity > self._capacity:
            _allocate(self._f.fileno(), capacity)  # before the parent's truncate and remap
        super()._init_value(key)


class _Process:
    """This process's files and values (reset after a fork, as prometheus-client does)."""

    def __init__(self) -> None:
        self.lock = threading.Lock()
        self.pid = os.getpid()
        self.files: dict[str, BackedMmapedDict] = {}
        self.values: list[GuardedValue] = []
        self.note: str | None = None

    def check_pid(self) -> None:
        if self.pid != os.getpid():
            self.pid = os.getpid()
            for file in self.files.values():
                file.close()
            self.files.clear()
            for value in self.values:
                value._attach()

    def file_for(self, prefix: str) -> BackedMmapedDict:
        file = self.files.get(prefix)
        if file is None:
            directory = multiprocess_directory() or ""
            file = BackedMmapedDict(os.path.join(directory, f"{prefix}_{self.pid}.db"))
            self.files[prefix] = file
        return file

    def degrade(self, error: OSError) -> None:
        if self.note is None:
            reason = error.strerror or type(error).__name__
            self.note = (
                f"metrics: this worker cannot write to PROMETHEUS_MULTIPROC_DIR ({reason}); series it "
                "creates from now on are counted in this process only and are not exported"
            )
            logger.warning(self.note, extra={"errno": error.errno})


_process = _Process()


class GuardedValue:
    """A prometheus-client value class: file-backed like its own, in process once files fail."""

    _multiprocess = True

    def __init__(self, typ, metric_name, name, labelnames, labelvalues, help_text, multiprocess_mode="", **_):
        self._prefix = f"{typ}_{multiprocess_mode}" if typ == "gauge" else typ
        self._key = mmap_key(metric_name, name, labelnames, labelvalues, help_text)
        self._value = self._timestamp = 0.0
        self._file: BackedMmapedDict | None = None
        with _process.lock:
            _process.check_pid()
            self._attach()
            _process.values.append(self)

    def _attach(self) -> None:
        """Back this value by this process's file (lock held); in process only once files fail."""
        self._file = None
        if _process.note is not None:
            return
        try:
            file = _process.file_for(self._prefix)
            self._value, self._timestamp = file.read_value(self._key)  # allocates the entry
        except OSError as error:
            _process.degrade(error)
            return
        self._file = file

    def _store(self) -> None:
        if self._file is not None:  # the entry's page was allocated when it was created
            self._file.write_value(self._key, self._value, self._timestamp)

    def inc(self, amount: float) -> None:
        with _process.lock:
            _process.check_pid()
            self._value += amount
            self._timestamp = 0.0
            self._store()

    def set(self, value: float, timestamp: float | None = None) -> None:
        with _process.lock:
            _process.check_pid()
            self._value = value
            self._timestamp = timestamp or 0.0
            self._store()

    def set_exemplar(self, exemplar) -> None:  # not kept in multiprocess mode (as prometheus-client)
        return

    def get(self) -> float:
        with _process.lock:
            return self._value

    def get_exemplar(self):
        return None


def multiprocess_directory() -> str | None:
    """The directory every worker writes its metric files to, or None when metrics stay in process."""
    return os.environ.get("PROMETHEUS_MULTIPROC_DIR") or None


def install() -> None:
    """Make metrics created from now on use :class:`GuardedValue` (when PROMETHEUS_MULTIPROC_DIR is set).

    prometheus-client reads ``values.ValueClass`` each time it creates a series; this is the one
    place that replaces it.
    """
    if multiprocess_directory():
        values.ValueClass = GuardedValue


def degradation() -> str | None:
    """Why this worker's new series are not exported, or None while every series is."""
    return _process.note


@contextlib.contextmanager
def _directory_lock(directory: str, operation: int):
    """flock on the directory itself: folding (exclusive) never interleaves with a scrape (shared)."""
    try:
        fd = os.open(directory, os.O_RDONLY | os.O_DIRECTORY)
    except OSError:
        yield
        return
    try:
        fcntl.flock(fd, operation)
        yield
    finally:
        os.close(fd)  # releases the lock


def _readable(path: str) -> bool:
    try:
        return os.stat(path).st_size >= _HEADER_BYTES
    except OSError:
        return False


class DirectoryCollector:
    """Sums every worker's files, as ``MultiProcessCollector``, skipping files still being created."""

    def __init__(self, directory: str) -> None:
        self.directory = directory

    def collect(self):
        with _directory_lock(self.directory, fcntl.LOCK_SH):
            files = [path for path in glob.glob(os.path.join(self.directory, "*.db")) if _readable(path)]
            return list(MultiProcessCollector.merge(files, accumulate=True))


def fold_dead_worker(directory: str, pid: int) -> None:
    """Add a dead worker's counters and histograms to the archive files, then remove its files
    (its live gauges too, which count living workers only).

    The new archive is written beside the old one and renamed over it; on any error (a full
    disk) the dead worker's files stay where they are, still counted, and the error is raised.
    """
    with _directory_lock(directory, fcntl.LOCK_EX):
        for typ in _FOLDED_TYPES:
            dead = os.path.join(directory, f"{typ}_{pid}.db")
            if not os.path.exists(dead):
                continue
            archive = os.path.join(directory, f"{typ}_{ARCHIVE}.db")
            sources = [dead] + ([archive] if os.path.exists(archive) else [])
            merged = MultiProcessCollector.merge(sources, accumulate=False)
            partial = archive + ".partial"
            with contextlib.suppress(FileNotFoundError):
                os.remove(partial)
            out = BackedMmapedDict(partial)
            try:
                for metric in merged:
                    for sample in metric.samples:
                        key = mmap_key(
                            metric.name, sample.name, list(sample.labels), list(sample.labels.values()),
                            metric.documentation,
                        )
                        out.write_value(key, sample.value, 0.0)
            except BaseException:
                out.close()
                os.remove(partial)
                raise
            out.close()
            os.replace(partial, archive)
            os.remove(dead)
        # Live gauges (in-flight work) count only living workers: a dead one's values just go.
        for live in glob.glob(os.path.join(glob.escape(directory), f"gauge_live*_{pid}.db")):
            os.remove(live)


__all__ = [
    "ARCHIVE",
    "BackedMmapedDict",
    "DirectoryCollector",
    "GuardedValue",
    "degradation",
    "fold_dead_worker",
    "install",
    "multiprocess_directory",
]
