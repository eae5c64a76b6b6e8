"""Checking many netlists: a process pool, per-file isolation and time bound, a cache, shards.

Each file is checked on its own: a rule that crashes or a file that runs past the time
bound becomes a diagnostic for that file, and the batch goes on. Results come back in
the order of the input list whatever the number of workers, so output is deterministic.
Every command (``netlist``, ``stages``, ``check``) plans its files here, so each gets the
same configuration, limits and time bound.
"""

from __future__ import annotations

import hashlib
import os
import signal
import threading
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, TypeVar

from drivelint import __version__
from drivelint.cache import CACHE_FORMAT, default_cache_dir, digest, file_digest
from drivelint.config import Config, find_config, load_config, may_widen
from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.paths import resolved

if TYPE_CHECKING:
    from drivelint.checks.runner import CheckResult
    from drivelint.circuit.model import Circuit, Device
    from drivelint.pipeline import LoadOptions
    from drivelint.report.brief import Brief
    from drivelint.stages.model import DriveStage

__all__ = ["default_cache_dir"]

T = TypeVar("T")
MAX_JOBS = 64  # worker processes at most, whatever --jobs says


@dataclass(frozen=True, slots=True)
class BatchOptions:
    """How a batch runs: workers, cache, configuration, time bound."""

    jobs: int = 1
    cache_dir: Path | None = None  # None: no cache
    config_file: Path | None = None  # None: discovered per file
    parts: tuple[Path, ...] = ()
    seconds_per_file: float | None = None  # None: each file's limits.max_seconds_per_file
    # Sandbox widening given on the command line (a configuration inside the scanned tree
    # cannot give it; see config.may_widen).
    allow_outside_root: bool = False
    allow_hidden_includes: bool = False
    scan_roots: tuple[Path, ...] = ()  # the paths named on the command line


@dataclass(frozen=True, slots=True)
class Job:
    """One file to check, with the configuration that applies to it."""

    path: Path
    config: Config
    text: bytes | str | None = None  # standard input
    allow_outside_root: bool = False  # decided by plan()
    allow_hidden_includes: bool = False

    def seconds(self, options: BatchOptions) -> float:
        if options.seconds_per_file is not None:
            return options.seconds_per_file
        return float(self.config.limits.max_seconds_per_file)


@dataclass(slots=True)
class BatchStats:
    """What a batch did: files checked, answered from the cache, failed."""

    files: int = 0
    from_cache: int = 0
    failed: list[str] = field(default_factory=list)


def shard_of(path: Path, count: int) -> int:
    """A stable shard number in 0..count-1 for a path (by its POSIX form)."""
    # File names that are not UTF-8 arrive with surrogate escapes: hash their own bytes.
    value = hashlib.sha256(path.as_posix().encode("utf-8", "surrogateescape")).digest()
    return int.from_bytes(value[:8], "big") % count


def select_shard(paths: Sequence[Path], index: int, count: int) -> list[Path]:
    """The ``index``-th (1-based) of ``count`` slices; the slices cover ``paths`` exactly once."""
    return [p for p in paths if shard_of(p, count) == index - 1]


def config_for_stdin(name: str, options: BatchOptions) -> Config:
    """The configuration standard input is checked with (its limits bound the read)."""
    where = options.config_file or find_config(Path(name))
    return load_config(where)


def plan(
    paths: Sequence[Path],
    options: BatchOptions,
    stdin: tuple[str, bytes | str] | None = None,
) -> list[Job]:
    """One job per file not excluded by its configuration; configurations read once."""
    configs: dict[Path | None, Config] = {}
    found: dict[Path, Path | None] = {}  # folder -> its configuration file
    from drivelint.ratings.parts import load_libraries

    roots = options.scan_roots or tuple(paths)

    def config_for(path: Path) -> Config:
        if options.config_file is not None:
            where: Path | None = options.config_file
        else:
            folder = path.parent
            if folder not in found:
                found[folder] = find_config(path)
            where = found[folder]
        if where not in configs:
            config = load_config(where)
            # The parts libraries named by the configuration or the command line are
            # checked once, here: a bad one stops the run (PartsError) before any file.
            load_libraries((*config.parts, *options.parts))
            configs[where] = config
        return configs[where]

    def job(path: Path, text: bytes | str | None = None) -> Job:
        config = config_for(path)
        widen = options.allow_outside_root or may_widen(config, path, roots)
        return Job(path, config, text, widen, options.allow_hidden_includes)

    jobs = [job(path) for path in paths if not config_for(path).excluded(path)]
    if stdin is not None:
        name, text = stdin
        jobs.append(job(Path(name), text))
    return jobs


# -- one file, bounded -----------------------------------------------------------------------


class _TimeLimit(Exception):
    pass


@contextmanager
def _time_limit(seconds: float) -> Iterator[None]:
    """Interrupt the work after ``seconds`` (POSIX interval timer; main thread only)."""
    usable = (
        seconds > 0
        and hasattr(signal, "setitimer")
        and threading.current_thread() is threading.main_thread()
    )
    if not usable:
        yield
        return

    def expire(signum: int, frame: object) -> None:
        raise _TimeLimit

    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def guarded(
    path: Path, seconds: float, work: Callable[[], T], failure: Callable[[str, str], T]
) -> T:
    """``work()``, or ``failure(message, code)`` when it runs out of time or memory or crashes."""
    try:
        with _time_limit(seconds):
            return work()
    except _TimeLimit:
        return failure(
            f"took longer than {seconds:g} s (limit max_seconds_per_file); file skipped", "limit"
        )
    except RecursionError:
        return failure("input nested too deeply to check (recursion limit)", "limit")
    except MemoryError:
        return failure("ran out of memory checking this file", "limit")
    except Exception as exc:  # a bug must cost one file, not the batch
        import traceback

        where = traceback.extract_tb(exc.__traceback__)[-1]
        return failure(
            f"internal error: {type(exc).__name__}: {exc} ({Path(where.filename).name}:"
            f"{where.lineno}); please report it",
            "internal-error",
        )


def failed_circuit(path: Path, message: str, code: str) -> Circuit:
    from drivelint.circuit.model import Circuit

    span = Span(str(path), 1, 1)
    diagnostic = Diagnostic(Severity.ERROR, span, message, "", code)
    return Circuit(str(path), "", {}, (), {}, {}, frozenset(), (), (diagnostic,))


def _failure(path: Path, message: str, code: str) -> CheckResult:
    from drivelint.checks.runner import CheckResult

    circuit = failed_circuit(path, message, code)
    return CheckResult(circuit, (), (), circuit.diagnostics)


def load_options(job: Job) -> LoadOptions:
    """The reading options of a job: its configuration and the widening plan() decided."""
    from dataclasses import replace

    from drivelint.pipeline import options_from

    return replace(
        options_from(job.config),
        allow_outside_root=job.allow_outside_root,
        allow_hidden_includes=job.allow_hidden_includes,
    )


def check_job(
    job: Job, options: BatchOptions, inputs: list[tuple[str, str, str]] | None = None
) -> CheckResult:
    """Check one file; never raises for anything the file or a rule does."""
    from drivelint import pipeline

    def work() -> CheckResult:
        return pipeline.check_path(
            job.path,
            job.config,
            options.parts,
            text=job.text,
            load=load_options(job),
            inputs=inputs,
        )

    return guarded(job.path, job.seconds(options), work, lambda m, c: _failure(job.path, m, c))


def load_job(job: Job, options: BatchOptions) -> Circuit:
    """``drivelint netlist``: read and elaborate one file, bounded like a check."""
    from drivelint import pipeline

    def work() -> Circuit:
        return pipeline.load_circuit(job.path, load_options(job), text=job.text)

    return guarded(
        job.path, job.seconds(options), work, lambda m, c: failed_circuit(job.path, m, c)
    )


def stages_job(job: Job, options: BatchOptions) -> tuple[Circuit, tuple[DriveStage, ...]]:
    """``drivelint stages``: read, elaborate and recognise one file, bounded like a check."""
    from drivelint import pipeline

    def work() -> tuple[Circuit, tuple[DriveStage, ...]]:
        return pipeline.load_stages(
            job.path,
            load_options(job),
            (*job.config.parts, *options.parts),
            text=job.text,
        )

    return guarded(
        job.path, job.seconds(options), work, lambda m, c: (failed_circuit(job.path, m, c), ())
    )


# -- the cache ------------------------------------------------------------------------------

_CODE_DIGEST: list[str] = []


def code_digest() -> str:
    """A digest of drivelint's own code, grammar and rule cards: a changed rule or check
    must not be answered from a cache filled by the old one."""
    if not _CODE_DIGEST:
        package = Path(__file__).resolve().parent
        roots = [package, package.parent / "rules", package.parent / "grammar"]
        files = sorted(
            p
            for root in roots
            if root.is_dir()
            for p in root.rglob("*")
            if p.suffix in (".py", ".toml", ".lark")
        )
        _CODE_DIGEST.append(digest(*(p.read_bytes() for p in files)))
    return _CODE_DIGEST[0]


_SETTINGS_DIGESTS: dict[tuple[object, ...], bytes] = {}


def _stat_signature(path: Path | None) -> tuple[object, ...]:
    try:
        info = os.stat(path) if path is not None else None
    except OSError:
        info = None
    if info is None:
        return (path, None)
    return (path, info.st_mtime_ns, info.st_size, info.st_ino, info.st_ctime_ns)


def _settings_digest(job: Job, options: BatchOptions) -> bytes:
    """Everything besides the netlist and its includes that decides its result: the
    configuration, every parts library (and whether a ``parts.toml`` sits beside the
    netlist), drivelint's code. Memoised while those files' stat signatures stay."""
    config = job.config
    parts = (*config.parts, *options.parts, job.path.parent / "parts.toml")
    files = (config.path, *parts)
    key = tuple(_stat_signature(f) for f in files)
    found = _SETTINGS_DIGESTS.get(key)
    if found is None:
        pieces = [
            f"format {CACHE_FORMAT} drivelint {__version__}".encode(),
            code_digest().encode(),
            os.fsencode(str(config.path)),
            file_digest(config.path).encode() if config.path is not None else b"none",
        ]
        for part in parts:
            pieces.append(os.fsencode(part.absolute()) + b"=" + file_digest(part).encode())
        found = digest(*pieces).encode()
        _SETTINGS_DIGESTS[key] = found
    return found


_ROOTS: dict[Path, Path] = {}


def cache_key(job: Job, options: BatchOptions) -> str | None:
    """The key of a job's result, or None when the job is not cacheable (standard input,
    an unreadable file)."""
    from drivelint.netlist.reader import read_bounded
    from drivelint.paths import find_project_root

    if options.cache_dir is None or job.text is not None:
        return None
    content = read_bounded(job.path, job.config.limits.max_file_bytes)
    if not isinstance(content, bytes):
        return None
    try:
        resolved = job.path.resolve()
        folder = resolved.parent
        root = _ROOTS.get(folder)
        if root is None:  # one walk per folder and batch (run_batch clears the table)
            root = _ROOTS[folder] = find_project_root(resolved)
    except (OSError, RuntimeError):
        return None
    return digest(
        os.fsencode(job.path),  # reports show the path as given ...
        os.fsencode(Path.cwd()),  # ... relative to the folder drivelint runs in
        os.fsencode(resolved),
        os.fsencode(root),  # a root marker added or removed moves the sandbox
        os.fsencode(os.path.expanduser("~")),  # '~' in an include name
        b"outside=%d hidden=%d" % (job.allow_outside_root, job.allow_hidden_includes),
        content,
        _settings_digest(job, options),
    )


def cache_lookup(job: Job, options: BatchOptions) -> CheckResult | None:
    """The cached result of a job whose netlist, includes and settings are unchanged."""
    from drivelint.cache import read_entry
    from drivelint.checks.runner import CheckResult

    key = cache_key(job, options)
    if key is None or options.cache_dir is None:
        return None
    found = read_entry(options.cache_dir, key)
    return found if isinstance(found, CheckResult) else None


def brief_lookup(job: Job, options: BatchOptions) -> Brief | None:
    """The cached brief of a job whose netlist, includes and settings are unchanged."""
    from drivelint.cache import read_brief
    from drivelint.report.brief import Brief

    key = cache_key(job, options)
    if key is None or options.cache_dir is None:
        return None
    found = read_brief(options.cache_dir, key)
    return found if isinstance(found, Brief) else None


def _checked(job: Job, options: BatchOptions, want_brief: bool) -> tuple[CheckResult, Brief | None]:
    """Check a job and, when it completed, keep its result and brief in the cache; the
    brief is made when it is kept or wanted."""
    from drivelint.cache import write_entry
    from drivelint.report.brief import brief_of

    inputs: list[tuple[str, str, str]] = []
    result = slim(check_job(job, options, inputs))
    key = cache_key(job, options)
    if key is None or options.cache_dir is None:
        return result, brief_of(result) if want_brief else None
    brief = brief_of(result)
    if any(d.code in ("internal-error", "limit") for d in result.diagnostics):
        return result, brief  # a crash or a bound is not worth keeping: the next run tries again
    # The netlist itself is in the key already (its bytes and where its path leads).
    top = (str(job.path.absolute()), str(resolved(job.path)))
    inputs = [i for i in inputs if not (i[0] == "file" and i[1] == top[1]) and i[1] != top[0]]
    write_entry(options.cache_dir, key, inputs, result, brief)
    return result, brief


def check_and_store(job: Job, options: BatchOptions) -> CheckResult:
    """Check a job and, when it completed, keep its result in the cache."""
    return _checked(job, options, False)[0]


def brief_and_store(job: Job, options: BatchOptions) -> Brief:
    """Check a job as :func:`check_and_store` does; its brief."""
    brief = _checked(job, options, True)[1]
    assert brief is not None
    return brief


def cached_check(job: Job, options: BatchOptions) -> tuple[CheckResult, bool]:
    """Check through the cache: (result, came from cache)."""
    found = cache_lookup(job, options)
    if found is not None:
        return found, True
    return check_and_store(job, options), False


def slim(result: CheckResult) -> CheckResult:
    """The result without the parts of the circuit no report uses: only the devices and
    instances the stages and findings name, and of the source text only the lines the
    findings point at (as short excerpts). Cheaper to cache and to send back from a
    worker, and no file's content travels further than a report would show it."""
    from dataclasses import replace

    from drivelint.diagnostics import EXCERPT_CHARS

    circuit = result.circuit
    names = {n for s in result.stages for n in (s.switch, *s.related)}
    names |= {n for f in (*result.findings, *result.accepted) for n in (f.device, f.switch)}
    if s_driver := {s.driver.device for s in result.stages if s.driver}:
        names |= s_driver
    devices = {n: _slim_device(circuit.devices[n]) for n in sorted(names) if n in circuit.devices}
    instances = {n: circuit.instances[n] for n in sorted(names) if n in circuit.instances}
    wanted: dict[str, dict[int, str]] = {}
    for finding in (*result.findings, *result.accepted):
        span = finding.span
        text = circuit.line_text(span)
        if text:
            wanted.setdefault(span.path, {})[span.line] = text[: EXCERPT_CHARS + 1]
    sources = {
        path: tuple(lines.get(n, "") for n in range(1, max(lines) + 1))
        for path, lines in sorted(wanted.items())
    }
    diagnostics = tuple(d.shortened() for d in result.diagnostics)
    return replace(
        result,
        circuit=replace(
            circuit,
            devices=devices,
            instances=instances,
            nets=(),
            title=circuit.title[: EXCERPT_CHARS + 1],
            sources=sources,
            diagnostics=tuple(d.shortened() for d in circuit.diagnostics),
        ),
        diagnostics=diagnostics,
    )


_KEPT_MODEL_PARAMS = frozenset({"pchan", "nchan"})  # what Model.polarity reads


def _slim_device(device: Device) -> Device:
    """A device as reports use it: its model's name, type and polarity, not every parameter."""
    from dataclasses import replace

    model = device.model
    if model is None or not model.params:
        return device
    params = {k: v for k, v in model.params.items() if k in _KEPT_MODEL_PARAMS}
    return replace(device, model=replace(model, params=params))


# -- the pool --------------------------------------------------------------------------------


def _watch_parent(parent: int) -> None:
    """End this worker when the parent is gone (even killed with SIGKILL)."""
    import time

    while True:
        if os.getppid() != parent:
            os._exit(70)
        time.sleep(0.5)


def _worker_start(parent: int) -> None:
    # The parent handles Ctrl-C and ends the workers itself.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:  # Linux: the kernel signals this worker the moment the parent dies
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, signal.SIGKILL)  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        pass
    if os.getppid() != parent:  # the parent died before the signal was asked for
        os._exit(70)
    threading.Thread(target=_watch_parent, args=(parent,), daemon=True).start()


def _worker(args: tuple[Job, BatchOptions]) -> CheckResult:
    return check_and_store(*args)


def _brief_worker(args: tuple[Job, BatchOptions]) -> Brief:
    return brief_and_store(*args)


def _warm_up() -> None:
    """Load what every check needs before workers fork, so they inherit it.

    Not lark: lines and expressions that parse are read by hand, and a worker imports
    lark only to word a syntax error.
    """
    from drivelint.cache import prepare
    from drivelint.checks.registry import registry

    registry()
    prepare()


def run_batch(
    jobs: Sequence[Job],
    options: BatchOptions,
    progress: Callable[[int], None] | None = None,
) -> tuple[list[CheckResult], BatchStats]:
    """Check every job; results in the order of ``jobs``.

    Cache hits are answered here; only the misses go to the worker processes. Ctrl-C ends
    the workers before it reaches the caller as KeyboardInterrupt.
    """
    from drivelint.report.status import failed

    return _run(
        jobs,
        options,
        progress,
        cache_lookup,
        _worker,
        lambda r: r.circuit.path if failed(r) else None,
    )


def run_batch_brief(
    jobs: Sequence[Job],
    options: BatchOptions,
    progress: Callable[[int], None] | None = None,
) -> tuple[list[Brief], BatchStats]:
    """Check every job as :func:`run_batch` does; each file's brief (what a plain text
    report, the summary and the exit code read), from the cache where it holds one."""
    return _run(
        jobs,
        options,
        progress,
        brief_lookup,
        _brief_worker,
        lambda b: b.path if b.status == "error" else None,
    )


def _run(
    jobs: Sequence[Job],
    options: BatchOptions,
    progress: Callable[[int], None] | None,
    lookup: Callable[[Job, BatchOptions], T | None],
    work: Callable[[tuple[Job, BatchOptions]], T],
    failed: Callable[[T], str | None],
) -> tuple[list[T], BatchStats]:
    """The batch: ``lookup`` answers from the cache, ``work`` checks a miss (in a worker
    when there are several), ``failed`` names a file that could not be checked."""
    from drivelint.cache import private_folder

    if options.cache_dir is not None and not private_folder(options.cache_dir):
        from dataclasses import replace

        options = replace(options, cache_dir=None)  # someone else could write there
    stats = BatchStats(files=len(jobs))
    _ROOTS.clear()  # a marker may have been added since the last batch in this process
    results: list[T | None] = [lookup(j, options) for j in jobs]
    stats.from_cache = sum(r is not None for r in results)
    if progress and stats.from_cache:
        progress(stats.from_cache)
    missing = [i for i, r in enumerate(results) if r is None]
    if options.jobs <= 1 or len(missing) <= 1:
        for index in missing:
            results[index] = work((jobs[index], options))
            if progress:
                progress(1)
    else:
        import multiprocessing

        _warm_up()
        # No more workers than files, nor than MAX_JOBS: --jobs 10000 must not fork 10000.
        workers = min(options.jobs, len(missing), MAX_JOBS)
        chunk = max(1, min(16, len(missing) // (workers * 8) or 1))
        pool = multiprocessing.Pool(workers, _worker_start, (os.getpid(),))
        try:
            tasks = [(jobs[i], options) for i in missing]
            for index, result in zip(missing, pool.imap(work, tasks, chunksize=chunk)):
                results[index] = result
                if progress:
                    progress(1)
            pool.close()
        except BaseException:
            pool.terminate()  # Ctrl-C, or a failure in the parent: no worker outlives it
            raise
        finally:
            pool.join()
    done = [r for r in results if r is not None]
    stats.failed = [path for path in map(failed, done) if path is not None]
    return done, stats
