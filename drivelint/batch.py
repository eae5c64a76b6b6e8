"""Checking many netlists: a process pool, per-file isolation, a content-hash cache, shards.

Each file is checked on its own: a rule that crashes or a file that runs past the time
bound becomes a diagnostic for that file, and the batch goes on. Results come back in
the order of the input list whatever the number of workers, so output is deterministic.
"""

from __future__ import annotations

import hashlib
import os
import pickle
import signal
import tempfile
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

from drivelint import __version__
from drivelint.checks.runner import CheckResult
from drivelint.circuit.model import Circuit
from drivelint.config import Config, find_config, load_config
from drivelint.diagnostics import Diagnostic, Severity, Span

CACHE_FORMAT = 1
DEFAULT_SECONDS_PER_FILE = 60.0


@dataclass(frozen=True, slots=True)
class BatchOptions:
    jobs: int = 1
    cache_dir: Path | None = None  # None: no cache
    config_file: Path | None = None  # None: discovered per file
    parts: tuple[Path, ...] = ()
    seconds_per_file: float = DEFAULT_SECONDS_PER_FILE


@dataclass(frozen=True, slots=True)
class Job:
    path: Path
    config: Config
    text: str | None = None  # standard input


@dataclass(slots=True)
class BatchStats:
    files: int = 0
    from_cache: int = 0
    failed: list[str] = field(default_factory=list)


def default_cache_dir() -> Path:
    """The user cache directory (XDG base directory convention), drivelint's folder in it."""
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "drivelint"


def shard_of(path: Path, count: int) -> int:
    """A stable shard number in 0..count-1 for a path (by its POSIX form)."""
    digest = hashlib.sha256(path.as_posix().encode("utf-8")).digest()
    return int.from_bytes(digest[:8], "big") % count


def select_shard(paths: Sequence[Path], index: int, count: int) -> list[Path]:
    """The ``index``-th (1-based) of ``count`` slices; the slices cover ``paths`` exactly once."""
    return [p for p in paths if shard_of(p, count) == index - 1]


def plan(
    paths: Sequence[Path], options: BatchOptions, stdin: tuple[str, str] | None = None
) -> list[Job]:
    """One job per file not excluded by its configuration; configurations read once."""
    configs: dict[Path | None, Config] = {}
    found: dict[Path, Path | None] = {}  # folder -> its configuration file

    def config_for(path: Path) -> Config:
        if options.config_file is not None:
            where: Path | None = options.config_file
        else:
            folder = path.parent
            if folder not in found:
                found[folder] = find_config(path)
            where = found[folder]
        if where not in configs:
            configs[where] = load_config(where)
        return configs[where]

    jobs = []
    for path in paths:
        config = config_for(path)
        if not config.excluded(path):
            jobs.append(Job(path, config))
    if stdin is not None:
        name, text = stdin
        jobs.append(Job(Path(name), config_for(Path(name)), text))
    return jobs


class _TimeLimit(Exception):
    pass


@contextmanager
def _time_limit(seconds: float) -> Iterator[None]:
    """Interrupt the work after ``seconds`` (POSIX interval timer; main thread only)."""
    if seconds <= 0 or not hasattr(signal, "setitimer"):
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


def _failure(path: Path, message: str, code: str) -> CheckResult:
    span = Span(str(path), 1, 1)
    diagnostic = Diagnostic(Severity.ERROR, span, message, "", code)
    circuit = Circuit(str(path), "", {}, (), {}, {}, frozenset(), (), (diagnostic,))
    return CheckResult(circuit, (), (), (diagnostic,))


def check_job(job: Job, options: BatchOptions) -> CheckResult:
    """Check one file; never raises for anything the file or a rule does."""
    from drivelint.pipeline import check_path

    try:
        with _time_limit(options.seconds_per_file):
            return check_path(job.path, job.config, options.parts, text=job.text)
    except _TimeLimit:
        return _failure(
            job.path,
            f"checking took longer than {options.seconds_per_file:g} s (limit seconds_per_file); "
            "file skipped",
            "limit",
        )
    except RecursionError:
        return _failure(job.path, "input nested too deeply to check (recursion limit)", "limit")
    except MemoryError:
        return _failure(job.path, "ran out of memory checking this file", "limit")
    except Exception as exc:  # a bug must cost one file, not the batch
        import traceback

        where = traceback.extract_tb(exc.__traceback__)[-1]
        return _failure(
            job.path,
            f"internal error: {type(exc).__name__}: {exc} ({Path(where.filename).name}:"
            f"{where.lineno}); please report it",
            "internal-error",
        )


# -- the cache ------------------------------------------------------------------------------


def _digest(*parts: bytes) -> str:
    h = hashlib.sha256()
    for part in parts:
        h.update(len(part).to_bytes(8, "big"))
        h.update(part)
    return h.hexdigest()


def _file_digest(path: Path) -> str:
    try:
        return _digest(path.read_bytes())
    except OSError:
        return "missing"


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
        _CODE_DIGEST.append(_digest(*(p.read_bytes() for p in files)))
    return _CODE_DIGEST[0]


_CONFIG_DIGESTS: dict[tuple[object, ...], bytes] = {}


def _stat_signature(path: Path | None) -> tuple[object, ...]:
    try:
        info = path.stat() if path is not None else None
    except OSError:
        info = None
    return (path, info.st_mtime_ns, info.st_size) if info else (path, None, None)


def _config_digest(job: Job, options: BatchOptions) -> bytes:
    """Everything besides the netlist that decides its result; memoised while those files'
    modification times and sizes stay the same."""
    config = job.config
    files = (config.path, *config.parts, *options.parts, job.path.parent / "parts.toml")
    key = tuple(_stat_signature(f) for f in files)
    if key not in _CONFIG_DIGESTS:
        text = b""
        if config.path is not None and config.path.is_file():
            text = config.path.read_bytes()
        parts = [
            str(p).encode() + _file_digest(p).encode() for p in (*config.parts, *options.parts)
        ]
        parts.append(_file_digest(job.path.parent / "parts.toml").encode())
        _CONFIG_DIGESTS[key] = _digest(
            __version__.encode(), code_digest().encode(), str(CACHE_FORMAT).encode(), text, *parts
        ).encode()
    return _CONFIG_DIGESTS[key]


def _entry(job: Job, options: BatchOptions) -> Path | None:
    """The cache file for a job, or None when the job is not cacheable."""
    if options.cache_dir is None or job.text is not None:
        return None
    try:
        content = job.path.read_bytes()
    except OSError:
        return None
    key = _digest(str(job.path).encode(), content, _config_digest(job, options))
    return options.cache_dir / key[:2] / f"{key}.pickle"


def cache_lookup(job: Job, options: BatchOptions) -> CheckResult | None:
    """The cached result of a job whose netlist, includes and settings are unchanged."""
    entry = _entry(job, options)
    if entry is None:
        return None
    try:
        with entry.open("rb") as handle:
            dependencies, result = pickle.load(handle)
    except (OSError, pickle.UnpicklingError, EOFError, ValueError, TypeError, AttributeError):
        return None
    if all(_file_digest(Path(p)) == d for p, d in dependencies):
        return result  # type: ignore[no-any-return]
    return None


def check_and_store(job: Job, options: BatchOptions) -> CheckResult:
    """Check a job and, when it completed, keep its result in the cache."""
    result = slim(check_job(job, options))
    entry = _entry(job, options)
    if entry is None or any(d.code in ("internal-error", "limit") for d in result.diagnostics):
        return result  # a crash or a bound is not worth keeping: the next run tries again
    dependencies = [(p, _file_digest(Path(p))) for p in result.circuit.files[1:]]
    _write_atomically(entry, pickle.dumps((dependencies, result), protocol=pickle.HIGHEST_PROTOCOL))
    return result


def cached_check(job: Job, options: BatchOptions) -> tuple[CheckResult, bool]:
    """Check through the cache: (result, came from cache)."""
    found = cache_lookup(job, options)
    if found is not None:
        return found, True
    return check_and_store(job, options), False


def _write_atomically(path: Path, data: bytes) -> None:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, temporary = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.replace(temporary, path)
    except OSError:
        pass  # a cache that cannot be written only costs speed


def slim(result: CheckResult) -> CheckResult:
    """The result without the parts of the circuit no report uses: only the devices and
    instances the stages and findings name are kept. Cheaper to cache and to send back
    from a worker process."""
    from dataclasses import replace

    circuit = result.circuit
    names = {n for s in result.stages for n in (s.switch, *s.related)}
    names |= {n for f in (*result.findings, *result.accepted) for n in (f.device, f.switch)}
    if s_driver := {s.driver.device for s in result.stages if s.driver}:
        names |= s_driver
    devices = {n: circuit.devices[n] for n in sorted(names) if n in circuit.devices}
    instances = {n: circuit.instances[n] for n in sorted(names) if n in circuit.instances}
    return replace(result, circuit=replace(circuit, devices=devices, instances=instances, nets=()))


def _worker(args: tuple[Job, BatchOptions]) -> CheckResult:
    return check_and_store(*args)


def _warm_up() -> None:
    """Load what every check needs before workers fork, so they inherit it."""
    from drivelint.checks.registry import registry
    from drivelint.netlist.expressions import compile_expression
    from drivelint.netlist.reader import _LineParser

    registry()
    _LineParser.get()
    compile_expression("1/(2*x)")  # builds the expression grammar


def run_batch(
    jobs: Sequence[Job],
    options: BatchOptions,
    progress: Callable[[int], None] | None = None,
) -> tuple[list[CheckResult], BatchStats]:
    """Check every job; results in the order of ``jobs``.

    Cache hits are answered here; only the misses go to the worker processes.
    """
    stats = BatchStats(files=len(jobs))
    results: list[CheckResult | None] = [cache_lookup(j, options) for j in jobs]
    stats.from_cache = sum(r is not None for r in results)
    if progress and stats.from_cache:
        progress(stats.from_cache)
    missing = [i for i, r in enumerate(results) if r is None]
    if options.jobs <= 1 or len(missing) <= 1:
        for index in missing:
            results[index] = check_and_store(jobs[index], options)
            if progress:
                progress(1)
    else:
        _warm_up()
        chunk = max(1, min(16, len(missing) // (options.jobs * 8) or 1))
        with ProcessPoolExecutor(max_workers=options.jobs) as pool:
            work = [(jobs[i], options) for i in missing]
            for index, result in zip(missing, pool.map(_worker, work, chunksize=chunk)):
                results[index] = result
                if progress:
                    progress(1)
    done = [r for r in results if r is not None]
    stats.failed = [
        r.circuit.path for r in done if any(d.severity is Severity.ERROR for d in r.diagnostics)
    ]
    return done, stats
