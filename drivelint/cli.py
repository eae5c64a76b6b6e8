"""The ``drivelint`` command. A thin shell: each command calls the pipeline and a formatter.

Heavy modules are imported inside the commands, so ``drivelint --help`` and a
pre-commit run on no files stay fast.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, NoReturn, TypeVar

import click

from drivelint import __version__

if TYPE_CHECKING:
    from collections.abc import Iterator

    from drivelint.batch import BatchOptions, BatchStats, Job
    from drivelint.report.brief import Brief

T = TypeVar("T")

EXIT_OK = 0
EXIT_FINDINGS = 1
EXIT_ERROR = 2
EXIT_INTERRUPTED = 130  # 128 + SIGINT, as shells report a command ended by Ctrl-C

FORMATS = click.Choice(["text", "json"])


class _Group(click.Group):
    """Ctrl-C ends every command with 130 (click's own handling would exit 1, the findings
    code); output that the terminal cannot encode is escaped rather than lost."""

    def invoke(self, ctx: click.Context) -> object:
        for stream in (sys.stdout, sys.stderr):
            try:
                stream.reconfigure(errors="backslashreplace")  # type: ignore[union-attr]
            except (AttributeError, ValueError, OSError):
                pass
        try:
            return super().invoke(ctx)
        except KeyboardInterrupt:
            click.echo("drivelint: interrupted", err=True)
            raise click.exceptions.Exit(EXIT_INTERRUPTED) from None


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="drivelint")
def main() -> None:
    """Check the floating gate drives of switching power stages in SPICE netlists."""


def _fail(message: str) -> NoReturn:
    from drivelint.diagnostics import printable

    click.echo(f"drivelint: {printable(message)}", err=True)
    sys.exit(EXIT_ERROR)


_config_option = click.option(
    "--config",
    "config_file",
    type=click.Path(path_type=Path, dir_okay=False, exists=True),
    help="Use this configuration file instead of discovering one per file.",
)
_parts_option = click.option(
    "--parts",
    "parts",
    multiple=True,
    type=click.Path(path_type=Path, dir_okay=False),
    help="A parts library (TOML); repeatable. A parts.toml beside the netlist is read too.",
)
_outside_option = click.option(
    "--allow-outside-root",
    is_flag=True,
    help="Let includes leave the project root (a configuration inside the checked tree "
    "cannot allow this).",
)
_hidden_option = click.option(
    "--allow-hidden-includes",
    is_flag=True,
    help="Let includes read dot-files and version-control folders (refused by default).",
)


def _options(**given: Any) -> BatchOptions:
    from drivelint.batch import BatchOptions

    return BatchOptions(**given)


def _plan(
    files: list[Path], options: BatchOptions, stdin: tuple[str, bytes] | None = None
) -> list[Job]:
    """Jobs for the files, or exit 2 naming the configuration or parts file at fault."""
    from drivelint.batch import plan
    from drivelint.config import ConfigError
    from drivelint.ratings.parts import PartsError

    try:
        return plan(files, options, stdin)
    except (ConfigError, PartsError) as exc:
        _fail(str(exc))


def _scan(paths: tuple[Path, ...], suffixes: tuple[str, ...] | None = None) -> list[Path]:
    from drivelint.paths import collect_paths

    for path in paths:
        if not path.exists() and not path.is_symlink():
            _fail(f"'{path}' does not exist (no such file or folder)")

    try:
        return collect_paths(paths, suffixes) if suffixes else collect_paths(paths)
    except OSError as exc:
        _fail(f"cannot list '{exc.filename}': {exc.strerror}")


@main.command("netlist")
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--format", "fmt", type=FORMATS, default="text", show_default=True)
@_config_option
@_outside_option
@_hidden_option
def netlist_command(
    files: tuple[Path, ...],
    fmt: str,
    config_file: Path | None,
    allow_outside_root: bool,
    allow_hidden_includes: bool,
) -> None:
    """Show what was read: devices, nets, DC rails, sources and diagnostics.

    FILES are netlists or folders (searched for .cir .net .sp .spi .spice .ckt).
    """
    from drivelint.batch import load_job
    from drivelint.circuit.model import Circuit
    from drivelint.diagnostics import Severity
    from drivelint.report.netlist import netlist_text, write_netlist_json

    options = _options(
        config_file=config_file,
        allow_outside_root=allow_outside_root,
        allow_hidden_includes=allow_hidden_includes,
        scan_roots=files,
    )
    jobs = _plan(_scan(files), options)
    failed = False

    def loaded() -> Iterator[Circuit]:
        # One circuit at a time: the previous one is gone before the next is read.
        nonlocal failed
        for job in jobs:
            circuit = load_job(job, options)
            failed |= any(d.severity is Severity.ERROR for d in circuit.diagnostics)
            yield circuit

    if fmt == "json":
        stream = sys.stdout
        write_netlist_json(loaded(), len(jobs), stream.write)
        stream.flush()
    else:
        click.echo("\n\n".join(netlist_text(c) for c in loaded()))
    sys.exit(EXIT_ERROR if failed else EXIT_OK)


@main.command("stages")
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--format", "fmt", type=FORMATS, default="text", show_default=True)
@_parts_option
@click.option("--all", "show_all", is_flag=True, help="Also show switches that do not float.")
@_config_option
@_outside_option
@_hidden_option
def stages_command(
    files: tuple[Path, ...],
    fmt: str,
    parts: tuple[Path, ...],
    show_all: bool,
    config_file: Path | None,
    allow_outside_root: bool,
    allow_hidden_includes: bool,
) -> None:
    """Show the gate-drive stages drivelint recognises, so you can see what it sees.

    FILES are netlists or folders (searched for .cir .net .sp .spi .spice .ckt).
    """
    from drivelint.batch import stages_job
    from drivelint.diagnostics import Severity
    from drivelint.ratings.parts import PartsError
    from drivelint.report.stages import stages_text
    from drivelint.stages.recognise import stages_json

    options = _options(
        config_file=config_file,
        parts=parts,
        allow_outside_root=allow_outside_root,
        allow_hidden_includes=allow_hidden_includes,
        scan_roots=files,
    )
    from drivelint.checks.runner import shifter_currents
    from drivelint.pipeline import parts_for

    results = []
    currents = {}
    failed = False
    for job in _plan(_scan(files), options):
        try:
            circuit, stages = stages_job(job, options)
            if any(s.level_shifter for s in stages):
                library = parts_for(job.path, (*job.config.parts, *options.parts))
                currents[circuit.path] = shifter_currents(circuit, stages, library)
        except PartsError as exc:
            _fail(str(exc))
        failed |= any(d.severity is Severity.ERROR for d in circuit.diagnostics)
        results.append((circuit, stages))
    if fmt == "json":
        import json

        payload = stages_json([s for _, stages in results for s in stages])
        for entry in payload["stages"]:
            # What the level shifter draws, from the rules' own account of the drains.
            found = currents.get(entry["path"], {}).get(entry["switch"])
            if "level_shifter" in entry and found is not None:
                entry["level_shifter"]["drain_on"] = found.value
        # What could not be read is said, not only left out of the stages.
        payload["diagnostics"] = [d.to_json() for c, _ in results for d in c.diagnostics]
        click.echo(json.dumps(payload, indent=2))
    else:
        click.echo(
            "\n\n".join(stages_text(c, s, show_all, currents.get(c.path)) for c, s in results)
        )
    sys.exit(EXIT_ERROR if failed else EXIT_OK)


def _expand(paths: tuple[str, ...], suffixes: tuple[str, ...]) -> tuple[list[Path], bool]:
    """Files, folders (recursively, by suffix) and glob patterns; and whether '-' was given."""
    import glob

    out: list[Path] = []
    stdin = False
    for raw in paths:
        if raw == "-":
            stdin = True
        elif not Path(raw).exists() and any(c in raw for c in "*?["):
            matches = sorted(glob.glob(raw, recursive=True))
            if not matches:
                raise click.UsageError(f"no file matches '{raw}'")
            out.extend(_scan(tuple(Path(m) for m in matches), suffixes))
        elif not Path(raw).exists() and not Path(raw).is_symlink():
            _fail(f"'{raw}' does not exist (no such file or folder)")
        else:
            out.extend(_scan((Path(raw),), suffixes))
    return out, stdin


def _read_stdin(limit: int) -> bytes:
    """Standard input, at most ``limit + 1`` bytes (one more tells the reader it is too big)."""
    stream = getattr(sys.stdin, "buffer", None)
    if stream is not None:
        return bytes(stream.read(limit + 1))
    return sys.stdin.read(limit + 1).encode("utf-8", "surrogateescape")


def _write_output(text: str, output: Path | None, checked: list[Path]) -> None:
    """Print, or write ``output`` atomically: a temporary file, then a rename.

    The report file gets the mode the umask gives a new file. Exits 2 with a message when
    the folder is missing or cannot be written, or when ``output`` is a file being checked.
    """
    if output is None:
        click.echo(text)
        return
    import os
    import tempfile

    target = output.absolute()
    folder = target.parent
    if target.exists() and any(target.samefile(p) for p in checked if p.exists()):
        _fail(f"--output '{output}' is one of the files being checked; not overwritten")
    if not folder.is_dir():
        _fail(f"cannot write '{output}': folder '{folder}' does not exist")
    try:
        fd, temporary = tempfile.mkstemp(dir=folder, prefix=f".{target.name}.", suffix=".tmp")
    except OSError as exc:
        _fail(f"cannot write '{output}': {exc.strerror}")
    try:
        mask = os.umask(0)
        os.umask(mask)
        with os.fdopen(fd, "w", encoding="utf-8", errors="backslashreplace") as handle:
            handle.write(text if text.endswith("\n") else text + "\n")
        os.chmod(temporary, 0o666 & ~mask)
        os.replace(temporary, target)
    except OSError as exc:
        Path(temporary).unlink(missing_ok=True)
        _fail(f"cannot write '{output}': {exc.strerror}")
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def _report_format_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """--format and --output, shared by the commands that write a report."""
    command = click.option(
        "--output",
        type=click.Path(path_type=Path, dir_okay=False),
        help="Write the report here (atomically).",
    )(command)
    return click.option(
        "--format",
        "fmt",
        default="text",
        show_default=True,
        type=click.Choice(["text", "json", "sarif", "junit", "github", "html"]),
    )(command)


def _report_render_options(command: Callable[..., Any]) -> Callable[..., Any]:
    """--show-accepted and --testbench, shared by the commands that write a report."""
    command = click.option(
        "--testbench",
        "testbench_dir",
        type=click.Path(path_type=Path, file_okay=False),
        default=None,
        help="HTML: link each finding to its decks in this `drivelint testbench` folder.",
    )(command)
    return click.option(
        "--show-accepted",
        is_flag=True,
        help="Text: also list the findings an acceptance directive accepted, with the reason.",
    )(command)


@main.command("check")
@click.argument("paths", nargs=-1, required=True)
@_report_format_options
@_parts_option
@click.option("--explain", is_flag=True, help="Show each finding's inputs, origins and formula.")
@click.option(
    "--fail-on",
    type=click.Choice(["error", "warning", "note"]),
    default=None,
    help="The lowest severity that makes the exit code 1 (default: the config's, else warning).",
)
@click.option(
    "--exit-zero", is_flag=True, help="Exit 0 even with findings (usage errors still exit 2)."
)
@click.option("--strict", is_flag=True, help="Exit 2 when any file could not be checked.")
@_config_option
@click.option(
    "--jobs",
    "-j",
    type=click.IntRange(min=1),
    default=None,
    help="Worker processes (default: cores; at most 64, and no more than files to check).",
)
@click.option("--no-cache", is_flag=True, help="Neither read nor write the result cache.")
@click.option("--shard", default=None, metavar="I/N", help="Check only slice I of N (1-based).")
@click.option(
    "--stdin-name", default="stdin.cir", show_default=True, help="Name for '-' (standard input)."
)
@click.option("--no-color", is_flag=True, help="Plain text even on a terminal.")
@click.option(
    "--select",
    "select",
    multiple=True,
    metavar="RULE,…",
    help="Report only these rules (ids, or their first words such as 'bootstrap'); repeatable.",
)
@click.option(
    "--ignore",
    "ignore",
    multiple=True,
    metavar="RULE,…",
    help="Do not report these rules (ids or their first words); repeatable.",
)
@_report_render_options
@click.option(
    "--with-includers",
    is_flag=True,
    help="Also check every netlist under the project root that includes a named file (a "
    "staged model or include file); named files that are not netlists are not checked "
    "themselves.",
)
@_outside_option
@_hidden_option
def check_command(
    paths: tuple[str, ...],
    fmt: str,
    output: Path | None,
    parts: tuple[Path, ...],
    explain: bool,
    fail_on: str | None,
    exit_zero: bool,
    strict: bool,
    config_file: Path | None,
    jobs: int | None,
    no_cache: bool,
    shard: str | None,
    stdin_name: str,
    no_color: bool,
    select: tuple[str, ...],
    ignore: tuple[str, ...],
    show_accepted: bool,
    testbench_dir: Path | None,
    with_includers: bool,
    allow_outside_root: bool,
    allow_hidden_includes: bool,
) -> None:
    """Check the floating gate drives in netlists and report what will fail.

    PATHS are netlists, folders (searched for .cir .net .sp .spi .spice .ckt), glob
    patterns, or - for standard input. Exit 0: nothing at or above the failing severity;
    1: findings (or a file that could not be checked); 2: usage or configuration errors
    (and, with --strict, any file that could not be checked); 130: interrupted.
    """
    import os

    from drivelint.batch import (
        config_for_stdin,
        default_cache_dir,
        run_batch,
        run_batch_brief,
        select_shard,
    )
    from drivelint.config import DEFAULT_SUFFIXES, ConfigError, RuleError, load_config
    from drivelint.ratings.parts import PartsError

    try:
        suffixes = load_config(config_file).suffixes if config_file else DEFAULT_SUFFIXES
    except ConfigError as exc:
        _fail(str(exc))
    keep = _rule_filter(select, ignore)
    if testbench_dir is not None and fmt != "html":
        raise click.UsageError("--testbench links decks into the HTML report: use --format html")
    files, use_stdin = _expand(paths, suffixes)
    if with_includers:
        files = _with_includers(files, suffixes)
    files = _spice_only(files)
    named = files  # the library, before sharding (the JSON report's run header)
    slice_of: tuple[int, int] | None = None
    if shard is not None:
        try:
            index, count = (int(x) for x in shard.split("/"))
            if not 1 <= index <= count:
                raise ValueError
        except ValueError:
            raise click.BadParameter(
                "expected I/N with 1 <= I <= N", param_hint="--shard"
            ) from None
        files = select_shard(files, index, count)
        slice_of = (index, count)
    options = _options(
        jobs=jobs or os.cpu_count() or 1,
        cache_dir=None if no_cache else default_cache_dir(),
        config_file=config_file,
        parts=parts,
        allow_outside_root=allow_outside_root,
        allow_hidden_includes=allow_hidden_includes,
        scan_roots=tuple(Path(p) for p in paths if p != "-"),
    )
    stdin = None
    if use_stdin:
        try:
            limit = config_for_stdin(stdin_name, options).limits.max_file_bytes
        except ConfigError as exc:
            _fail(str(exc))
        stdin = (stdin_name, _read_stdin(limit))
    color, width = _text_style(fmt, output, no_color)
    try:
        planned = _plan(files, options, stdin)
    except (PartsError, RuleError, ConfigError) as exc:
        _fail(str(exc))
    progress = len(planned) > 5 and sys.stderr.isatty() and fmt == "text" and output is None
    # Plain text (piped, or written to a file) is joined from each file's brief, which the
    # cache and the workers hand over ready: no result is built for it (report/brief.py).
    if fmt == "text" and not explain and not color and width is None:
        from drivelint.report.brief import brief_text, select_brief

        briefs, stats = _batched(run_batch_brief, planned, options, progress)
        if keep is not None:
            briefs = [select_brief(b, keep.__contains__) for b in briefs]
        report = brief_text(briefs, show_accepted)
    else:
        from drivelint.report.brief import brief_of
        from drivelint.report.formats import ReportOptions, formatter

        results, stats = _batched(run_batch, planned, options, progress)
        run = order = None
        if fmt == "json":
            from drivelint.merge import run_record

            run, order = run_record(
                named, slice_of, planned, options, keep, stdin_name if use_stdin else None
            )
        if keep is not None:
            from drivelint.checks.runner import select_rules

            results = [select_rules(r, keep.__contains__) for r in results]
        report_options = ReportOptions(
            explain=explain,
            color=color,
            show_accepted=show_accepted,
            width=width,
            testbench=str(testbench_dir) if testbench_dir is not None else None,
            output=str(output) if output is not None else None,
            run=run,
            order=order,
        )
        report = formatter(fmt)(results, report_options)
        briefs = [brief_of(r, render=False) for r in results]
    _write_output(report, output, files)
    if any(Path(p).is_dir() for p in paths if p != "-"):
        # A library scan: what the settings give that no netlist of it uses is said.
        for line in _unused_settings(planned, options, briefs):
            click.echo(line, err=True)
    if fmt != "text" or output is not None:
        from drivelint.report.brief import brief_summary

        click.echo(brief_summary(briefs, stats.from_cache), err=True)
    configured = [job.config.fail_on for job in planned]
    _exit(briefs, stats.failed, fail_on, configured, strict, exit_zero)


def _batched(
    batch: Callable[..., tuple[list[T], BatchStats]],
    planned: list[Job],
    options: BatchOptions,
    progress: bool,
) -> tuple[list[T], BatchStats]:
    """Run ``batch`` over the planned jobs, with a progress bar when asked; a parts,
    rule or configuration error met on the way ends the command (exit 2)."""
    from drivelint.config import ConfigError, RuleError
    from drivelint.ratings.parts import PartsError

    try:
        if not progress:
            return batch(planned, options)
        with click.progressbar(length=len(planned), label="checking", file=sys.stderr) as bar:
            return batch(planned, options, bar.update)
    except (PartsError, RuleError, ConfigError) as exc:
        _fail(str(exc))


def _text_style(fmt: str, output: Path | None, no_color: bool) -> tuple[bool, int | None]:
    """Colour and wrapping width: only for text printed on a terminal."""
    import os

    terminal = fmt == "text" and output is None and sys.stdout.isatty()
    color = terminal and not no_color and "NO_COLOR" not in os.environ
    width = None
    if terminal:
        import shutil

        width = shutil.get_terminal_size().columns
    return color, width


def _exit(
    briefs: Sequence[Brief],
    failed: list[str],
    fail_on: str | None,
    configured: list[Any],
    strict: bool,
    exit_zero: bool,
) -> NoReturn:
    """Exit as `check` does: 2 with --strict and a file not checked, 1 for findings at or
    above the failing severity (--fail-on, else the lowest the configurations set, else
    warning), a file not checked or a file checked in part; else 0."""
    from drivelint.diagnostics import Severity

    if fail_on:
        threshold = Severity.parse(fail_on)
    else:
        threshold = min(configured) if configured else Severity.WARNING
    if strict and failed:
        sys.exit(EXIT_ERROR)
    if exit_zero:
        sys.exit(EXIT_OK)
    # A file checked in part (status "partial") counts as a warning.
    partial = threshold <= Severity.WARNING and any(b.partial for b in briefs)
    if failed or partial or any(s >= threshold for b in briefs for _, s, _ in b.findings):
        sys.exit(EXIT_FINDINGS)
    sys.exit(EXIT_OK)


def _unused_settings(
    planned: list[Job], options: BatchOptions, results: Sequence[Brief]
) -> list[str]:
    """Warnings for parts entries and configured conditions no netlist of the run uses."""
    from drivelint.ratings.parts import PartsError, load_parts
    from drivelint.report.unused import unused_conditions, unused_parts

    files: set[Path] = set()
    configured: dict[str, list[str]] = {}
    for job in planned:
        beside = job.path.parent / "parts.toml"
        files.update((*job.config.parts, *options.parts))
        if beside.is_file():
            files.add(beside)
        for key, (_, origin) in job.config.conditions_for_file(job.path).items():
            configured.setdefault(key, []).append(origin)
    libraries = []
    for path in sorted(files):
        try:
            libraries.append(load_parts(path))
        except (PartsError, OSError):
            continue  # already reported where it was used
    lines = [d.headline() + f" [{d.code}]" for d in unused_parts(results, libraries)]
    return lines + unused_conditions(results, configured)


# What a netlist suffix may hold that is not SPICE: a PCB netlist in S-expression form
# shares ".net". Only the start of a file is looked at.
SNIFF_BYTES = 64 << 10


def not_spice(head: bytes) -> str | None:
    """Why these first bytes of a file are not a SPICE netlist, or None.

    An S-expression document (its first character an opening parenthesis, and nearly every
    line opening or closing one) is a netlist of another kind. A SPICE deck's first line
    is a free title, so one parenthesis alone proves nothing: most lines must be lists.
    """
    text = head.decode("utf-8", "replace").lstrip("\ufeff")
    stripped = text.lstrip()
    if not stripped.startswith("("):
        return None
    lines = [line.strip() for line in text.splitlines() if line.strip()]
    if len(lines) > 1 and not lines[-1].startswith(("(", ")")):
        lines = lines[:-1]  # a line cut at SNIFF_BYTES
    lists = sum(1 for line in lines if line.startswith(("(", ")")))
    if lists >= 0.9 * len(lines):
        return "an S-expression file (a PCB or schematic netlist of another format), not SPICE"
    return None


def _spice_only(files: list[Path]) -> list[Path]:
    """The files less those that are not SPICE netlists, each skipped with a one-line note."""
    import os
    import stat

    kept = []
    for path in files:
        # Opened without blocking and read only when a regular file: a FIFO must not hang
        # the run here either (the check itself refuses it with a diagnostic).
        flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
        try:
            fd = os.open(path, flags)
        except OSError:
            kept.append(path)  # the check reports why it cannot be read
            continue
        try:
            head = os.read(fd, SNIFF_BYTES) if stat.S_ISREG(os.fstat(fd).st_mode) else b""
        except OSError:
            head = b""
        finally:
            os.close(fd)
        why = not_spice(head)
        if why is None:
            kept.append(path)
        else:
            from drivelint.diagnostics import printable

            click.echo(f"{printable(str(path))}: note: skipped: {why} [not-spice]", err=True)
    return kept


MAX_INCLUDER_CANDIDATES = 20_000  # netlists looked at under one project root
MAX_INCLUDER_BYTES = 32 << 20  # larger ones are not searched for an include


def _with_includers(files: list[Path], suffixes: tuple[str, ...]) -> list[Path]:
    """``files`` (those with a netlist suffix) and every netlist under their project roots
    that reads one of them, directly or through other includes.

    A netlist whose text does not name a file's base name cannot include it, so only those
    that do are read (with their configuration's include paths and limits) to be sure.
    """
    from drivelint.config import ConfigError, find_config, load_config
    from drivelint.paths import resolved
    from drivelint.pipeline import collect_paths, find_project_root, load_circuit, options_from

    wanted = {resolved(f): f for f in files}
    roots = sorted({find_project_root(f) for f in files})
    out = [f for f in files if f.suffix.lower() in suffixes]
    seen = {resolved(f) for f in out}
    names = {f.name.lower().encode() for f in files}
    for root in roots:
        try:
            candidates = collect_paths((root,), suffixes)[:MAX_INCLUDER_CANDIDATES]
        except OSError:
            continue
        for candidate in candidates:
            real = resolved(candidate)
            if real in seen:
                continue
            try:
                if candidate.stat().st_size > MAX_INCLUDER_BYTES:
                    continue
                content = candidate.read_bytes().lower()
            except OSError:
                continue
            if not any(name in content for name in names):
                continue
            try:
                load = options_from(load_config(find_config(candidate)))
            except ConfigError:
                load = None
            circuit = load_circuit(candidate, load)
            if any(resolved(Path(f)) in wanted for f in circuit.files if f != str(candidate)):
                out.append(candidate)
                seen.add(real)
    return out


def _rule_filter(select: tuple[str, ...], ignore: tuple[str, ...]) -> frozenset[str] | None:
    """The rule ids --select/--ignore keep (None: every rule), or exit 2."""
    if not select and not ignore:
        return None
    from drivelint.checks.registry import registry
    from drivelint.checks.runner import expand_rule_patterns

    known = list(registry())
    try:
        chosen = (
            expand_rule_patterns([p for s in select for p in s.split(",")], known)
            if select
            else frozenset(known)
        )
        dropped = expand_rule_patterns([p for s in ignore for p in s.split(",")], known)
    except ValueError as exc:
        raise click.UsageError(str(exc)) from None
    return frozenset(chosen - dropped)


@main.command("merge")
@click.argument("reports", nargs=-1, required=True, type=click.Path(path_type=Path, dir_okay=False))
@_report_format_options
@click.option("--explain", is_flag=True, help="Show each finding's inputs, origins and formula.")
@click.option(
    "--fail-on",
    type=click.Choice(["error", "warning", "note"]),
    default=None,
    help="The lowest severity that makes the exit code 1 (default: as the check run's).",
)
@click.option(
    "--exit-zero", is_flag=True, help="Exit 0 even with findings (refused reports still exit 2)."
)
@click.option("--strict", is_flag=True, help="Exit 2 when any file could not be checked.")
@click.option("--no-color", is_flag=True, help="Plain text even on a terminal.")
@_report_render_options
def merge_command(
    reports: tuple[Path, ...],
    fmt: str,
    output: Path | None,
    explain: bool,
    fail_on: str | None,
    exit_zero: bool,
    strict: bool,
    no_color: bool,
    show_accepted: bool,
    testbench_dir: Path | None,
) -> None:
    """Join the JSON reports of `check --shard I/N` runs into one report, in any format.

    REPORTS are `drivelint check --format json` reports of the shards 1/N … N/N of one run
    (or one report of a whole run, to render it again). The result is what `drivelint
    check` over the whole library writes; nothing is checked again. Refused, with exit 2:
    reports of another drivelint, other settings or configurations, the same file or shard
    twice, a missing shard, a report that is not whole. Otherwise exits as `check` does.
    """
    from drivelint.diagnostics import Severity
    from drivelint.merge import MergeError, merge_reports, read_report, render
    from drivelint.report.formats import ReportOptions

    if testbench_dir is not None and fmt != "html":
        raise click.UsageError("--testbench links decks into the HTML report: use --format html")
    try:
        shard_reports = [read_report(path) for path in reports]
        results, run, order = merge_reports(shard_reports)
    except MergeError as exc:
        _fail(str(exc))
    color, width = _text_style(fmt, output, no_color)
    report_options = ReportOptions(
        explain=explain,
        color=color,
        show_accepted=show_accepted,
        width=width,
        testbench=str(testbench_dir) if testbench_dir is not None else None,
        output=str(output) if output is not None else None,
        run=run,
        order=order,
    )
    try:
        text = render(fmt, results, report_options, shard_reports)
    except MergeError as exc:
        _fail(str(exc))
    _write_output(text, output, list(reports))
    from drivelint.report.brief import brief_of, brief_summary

    briefs = [brief_of(r, render=False) for r in results]
    if fmt != "text" or output is not None:
        click.echo(brief_summary(briefs), err=True)
    failed = [b.path for b in briefs if b.status == "error"]
    configured = [Severity.parse(label) for label in run.fail_on]
    _exit(briefs, failed, fail_on, configured, strict, exit_zero)


@main.command("rules")
def rules_command() -> None:
    """List the rules: id, default severity, title."""
    from drivelint.checks.registry import registry

    for rule in registry().values():
        click.echo(f"{rule.id:<28} {rule.severity.label:<8} {rule.title}")


@main.command("explain")
@click.argument("rule_id")
def explain_command(rule_id: str) -> None:
    """Print a rule's card: what it checks, why, how, how to fix, options, references."""
    from drivelint.checks.registry import registry
    from drivelint.report.cards import card_text

    rules = registry()
    rule = rules.get(rule_id)
    if rule is None:
        click.echo(
            f"drivelint: unknown rule '{rule_id}'; known rules: {', '.join(rules)}", err=True
        )
        sys.exit(EXIT_ERROR)
    click.echo(card_text(rule))


@main.command("config")
@click.argument("path", type=click.Path(path_type=Path), default=Path("."))
@click.option(
    "--config",
    "config_file",
    type=click.Path(path_type=Path, dir_okay=False, exists=True),
    help="Show this configuration file instead of the one discovered for PATH.",
)
def config_command(path: Path, config_file: Path | None) -> None:
    """Print the effective configuration for PATH and where each value came from."""
    from drivelint.config import ConfigError, describe, find_config, load_config

    where = config_file or find_config(path)
    try:
        config = load_config(where)
    except ConfigError as exc:
        _fail(str(exc))
    click.echo(describe(config))


# -- testbench ------------------------------------------------------------------------------------


@main.command("testbench")
@click.argument("paths", nargs=-1, required=True)
@click.option(
    "--output",
    "-o",
    required=True,
    type=click.Path(path_type=Path, file_okay=False),
    help="Folder for the decks (DIR/<netlist stem>/<rule>__<device>.cir); the only place written.",
)
@click.option("--rule", "rule_id", default=None, help="Only findings of this rule.")
@click.option("--device", default=None, help="Only findings on this device or switch.")
@click.option(
    "--parts",
    "parts",
    multiple=True,
    type=click.Path(path_type=Path, dir_okay=False),
    help="A parts library (TOML); repeatable. A parts.toml beside the netlist is read too.",
)
@click.option("--format", "fmt", type=FORMATS, default="text", show_default=True)
@click.option("--run", "run_decks", is_flag=True, help="Run each deck in ngspice and compare.")
@click.option(
    "--jobs", "-j", type=click.IntRange(min=1), default=None, help="Parallel ngspice runs."
)
@click.option(
    "--run-timeout",
    type=click.FloatRange(min=1.0),
    default=120.0,
    show_default=True,
    help="Seconds one ngspice run may take.",
)
@_config_option
@_outside_option
@_hidden_option
def testbench_command(
    paths: tuple[str, ...],
    output: Path,
    rule_id: str | None,
    device: str | None,
    parts: tuple[Path, ...],
    fmt: str,
    run_decks: bool,
    jobs: int | None,
    run_timeout: float,
    config_file: Path | None,
    allow_outside_root: bool,
    allow_hidden_includes: bool,
) -> None:
    """Write a SPICE testbench per finding that reproduces it, and one with its fix.

    PATHS are netlists, folders or glob patterns. Each finding becomes
    DIR/<netlist stem>/<rule>__<device>.cir (self-contained; `ngspice -b` prints one
    `name = value` per claimed value) and, where the fix is a value or part change,
    <rule>__<device>.fixed.cir. Exit 0: decks written (and, with --run, run); 1: a file
    could not be checked, a deck not written or a run not completed; 2: usage errors.
    """
    import os

    from drivelint.checks.registry import registry
    from drivelint.config import DEFAULT_SUFFIXES, ConfigError, RuleError
    from drivelint.ratings.parts import PartsError
    from drivelint.testbench.command import (
        BenchOptions,
        make_testbenches,
        record_text,
        records_json,
    )
    from drivelint.testbench.ngspice import find_ngspice

    if rule_id is not None and rule_id not in registry():
        known = ", ".join(registry())
        click.echo(f"drivelint: unknown rule '{rule_id}'; known rules: {known}", err=True)
        sys.exit(EXIT_ERROR)
    if "-" in paths:
        raise click.UsageError("a testbench needs a netlist file; standard input is not read")
    files, _ = _expand(paths, DEFAULT_SUFFIXES)
    options = BenchOptions(
        output=output,
        rule=rule_id,
        device=device,
        parts=parts,
        run=run_decks,
        jobs=jobs or os.cpu_count() or 1,
        run_timeout=run_timeout,
    )
    if run_decks and find_ngspice() is None:
        click.echo("drivelint: --run needs ngspice on the PATH", err=True)
        sys.exit(EXIT_ERROR)
    batch = _options(
        config_file=config_file,
        parts=parts,
        allow_outside_root=allow_outside_root,
        allow_hidden_includes=allow_hidden_includes,
        scan_roots=tuple(files),
    )
    planned = _plan(files, batch)
    try:
        outcome = make_testbenches(planned, options)
    except (PartsError, RuleError, ConfigError) as exc:
        click.echo(f"drivelint: {exc}", err=True)
        sys.exit(EXIT_ERROR)
    for diagnostic in outcome.diagnostics:
        click.echo(diagnostic.render(), err=True)
    if fmt == "json":
        click.echo(records_json(outcome), nl=False)
    else:
        lines = [line for record in outcome.records for line in record_text(record)]
        click.echo("\n".join(lines) if lines else "no findings: no testbench written")
    sys.exit(EXIT_FINDINGS if outcome.failed else EXIT_OK)
