"""``drivelint testbench``: check netlists, write a reproducer deck per finding, run them.

Each netlist is checked exactly as ``drivelint check`` checks it (the same configuration,
parts libraries, limits, project-root sandbox and time bound per file); its findings are
then turned into decks under ``DIR/<netlist stem>/``. Only ``DIR`` is written, every file
atomically (a temporary file in the same folder, then a rename). A netlist that cannot be
read is a diagnostic for that file; the others go on.
"""

from __future__ import annotations

import math
import os
import re
import signal
import tempfile
from collections.abc import Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path

from drivelint.batch import BatchOptions, Job, check_job, load_options
from drivelint.checks.base import Finding
from drivelint.checks.facts import StageFacts, devices_by_net
from drivelint.checks.registry import registry
from drivelint.checks.runner import CheckResult
from drivelint.config import RuleSetting
from drivelint.diagnostics import Diagnostic, Severity, Span
from drivelint.netlist.values import format_si
from drivelint.ratings.directives import CONDITION_KEYS, parse_directives
from drivelint.ratings.parts import PartsLibrary
from drivelint.ratings.ratings import Ratings
from drivelint.ratings.values import Value
from drivelint.testbench.bench import Bench, BenchContext, Declined, Fix
from drivelint.testbench.builders import BUILDERS, NOT_SIMULATED, build
from drivelint.testbench.deck import render
from drivelint.testbench.design import Design, DesignError
from drivelint.testbench.fixes import APPLIERS
from drivelint.testbench.measure import Claim, Limit, Trace
from drivelint.testbench.ngspice import DEFAULT_TIMEOUT, MAX_OUTPUT, RunResult, run_deck

MAX_NAME = 96  # characters of a file name taken from a device or netlist name
INDEX_NAME = "testbench.json"  # DIR/testbench.json: the records, as --format json prints them


@dataclass(frozen=True, slots=True)
class BenchOptions:
    output: Path
    rule: str | None = None
    device: str | None = None
    parts: tuple[Path, ...] = ()
    run: bool = False
    jobs: int = 1
    seconds_per_file: float | None = None  # None: each file's limits.max_seconds_per_file
    run_timeout: float = DEFAULT_TIMEOUT
    max_output: int = MAX_OUTPUT
    ngspice: str | None = None  # the executable; None: found on the PATH


@dataclass(slots=True)
class WrittenDeck:
    """One written deck and what it claims, checks and measured."""

    path: Path
    claims: tuple[Claim, ...]
    limits: tuple[Limit, ...]
    cards: tuple[str, ...]
    result: RunResult | None = None
    corner: tuple[str, ...] = ()
    corner_side: str | None = None
    corner_values: dict[str, float] = field(default_factory=dict)
    traces: tuple[Trace, ...] = ()

    def measured(self, name: str) -> float | None:
        return self.result.values.get(name) if self.result else None

    def limits_hold(self) -> bool | None:
        """True when every limit holds, False when one does not, None when unmeasured."""
        verdicts = [limit.holds(self.measured(limit.measure)) for limit in self.limits]
        if not verdicts or any(v is None for v in verdicts):
            return None
        return all(verdicts)


@dataclass(slots=True)
class Record:
    """The testbench of one finding."""

    finding: Finding
    deck: WrittenDeck | None = None
    reason: str | None = None  # why there is no deck
    fixed: WrittenDeck | None = None
    fix: str | None = None  # what the fixed deck changes
    fixed_reason: str | None = None  # why there is no fixed deck
    waveform: str | None = None  # the waveform file, relative to the output folder
    waveform_reason: str | None = None  # why a run wrote none

    def sort_key(self) -> tuple[str, int, int, str, str]:
        return self.finding.sort_key()

    def to_json(self) -> dict[str, object]:
        finding = self.finding
        out: dict[str, object] = {
            "rule": finding.rule,
            "device": finding.device,
            "switch": finding.switch,
            "path": finding.span.path,
            "line": finding.span.line,
            "deck": str(self.deck.path) if self.deck else None,
            "fixed_deck": str(self.fixed.path) if self.fixed else None,
            "claims": {c.key: _json_number(c.value) for c in self.deck.claims} if self.deck else {},
            "fix": self.fix,
            "waveform": self.waveform,
        }
        if self.waveform_reason:
            out["waveform_reason"] = self.waveform_reason
        if self.reason:
            out["reason"] = self.reason
        if self.fixed_reason:
            out["fixed_reason"] = self.fixed_reason
        if self.deck is not None:
            out["limits"] = [_limit_json(limit) for limit in self.deck.limits]
            if self.deck.corner_side is not None:
                out["corner"] = {
                    "side": self.deck.corner_side,
                    "values": {
                        k: _json_number(v) for k, v in sorted(self.deck.corner_values.items())
                    },
                    "what": list(self.deck.corner),
                }
            if self.deck.result is not None:
                out["measured"] = _measured_json(self.deck)
                out["failure_shown"] = _negate(self.deck.limits_hold())
                if self.deck.result.error:
                    out["run_error"] = self.deck.result.error
                if self.deck.result.trouble:
                    out["run_messages"] = list(self.deck.result.trouble)
        if self.fixed is not None and self.fixed.result is not None:
            out["fixed_measured"] = _measured_json(self.fixed)
            out["fixed_failure_gone"] = self.fixed.limits_hold()
            if self.fixed.result.error:
                out["fixed_run_error"] = self.fixed.result.error
            if self.fixed.result.trouble:
                out["fixed_run_messages"] = list(self.fixed.result.trouble)
        return dict(sorted(out.items()))


def _negate(value: bool | None) -> bool | None:
    return None if value is None else not value


def _json_number(value: float) -> float | str:
    if math.isfinite(value):
        return value
    return "inf" if value > 0 else "-inf"


def _limit_json(limit: Limit) -> dict[str, object]:
    return {
        "measure": limit.measure,
        "bound": _json_number(limit.bound),
        "holds_when": limit.holds_when,
        "unit": limit.unit,
        "what": limit.what,
    }


def _measured_json(deck: WrittenDeck) -> dict[str, object]:
    out: dict[str, object] = {}
    for claim in deck.claims:
        measured = deck.measured(claim.key)
        ratio = measured / claim.value if measured is not None and claim.value else None
        out[claim.key] = {
            "value": _json_number(claim.value),
            "unit": claim.unit,
            "measured": measured,
            "ratio": ratio,
            "sense": claim.sense,
            "status": claim.verdict(measured),
        }
    for limit in deck.limits:
        if limit.measure not in out:
            out[limit.measure] = {"measured": deck.measured(limit.measure), "unit": limit.unit}
    return dict(sorted(out.items()))


@dataclass(slots=True)
class Outcome:
    records: list[Record] = field(default_factory=list)
    diagnostics: list[Diagnostic] = field(default_factory=list)
    failed: bool = False  # a file not checked, a deck not written, a run not completed


# -- names ------------------------------------------------------------------------------------


_UNSAFE = re.compile(r"[^a-z0-9_.+-]")


def safe_name(name: str) -> str:
    """A file name from a device or netlist name: lower case, no path separators, no
    ``..``, no leading dot, bounded; characters SPICE allows but file systems dislike
    (``$``, ``/``, ``:``, spaces …) become ``_``."""
    text = _UNSAFE.sub("_", name.lower())
    text = re.sub(r"\.{2,}", "_", text).lstrip(".-") or "_"
    if len(text) > MAX_NAME:
        import hashlib

        digest = hashlib.sha256(name.encode("utf-8")).hexdigest()[:8]
        text = f"{text[: MAX_NAME - 9]}-{digest}"
    return text


# -- writing ---------------------------------------------------------------------------------------


class OutputError(OSError):
    """A file that cannot be written where it belongs."""


def write_atomically(root: Path, target: Path, text: str) -> None:
    """Write ``target`` (inside ``root``) through a temporary file and a rename."""
    folder = target.parent
    if folder.is_symlink() or not folder.resolve().is_relative_to(root.resolve()):
        raise OutputError(f"{folder} is not a folder inside {root}; not written")
    folder.mkdir(parents=True, exist_ok=True)
    fd, temporary = tempfile.mkstemp(dir=folder, prefix=".tb-", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def parts_text(library: PartsLibrary, names: set[str], origin: str) -> str | None:
    """The parts of ``library`` that the design uses, as a TOML parts library."""
    used = sorted(n for n in library.parts if n in names)
    if not used:
        return None
    out = [
        "# The parts of the design's parts library that its testbenches use, copied so",
        f"# that drivelint checks these decks with the same ratings ({origin}).",
    ]
    for name in used:
        part = library.parts[name]
        out += ["", f"[part.{_toml_key(name)}]", f"kind = {_toml_value(part.kind)}"]
        for key, value in sorted(part.values.items()):
            out.append(f"{_toml_key(key)} = {_toml_value(value)}")
        if part.pins:
            pins = ", ".join(
                f"{_toml_key(port)} = {_toml_value(role)}"
                for port, role in sorted(part.pins.items())
            )
            out.append(f"pins = {{ {pins} }}")
    return "\n".join(out) + "\n"


def _toml_key(key: str) -> str:
    return key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else _toml_value(key)


def _toml_value(value: object) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, float)):
        return repr(value)
    text = str(value).replace("\\", "\\\\").replace('"', '\\"')
    return f'"{text}"'


# -- the time bound ------------------------------------------------------------------------------


class _TimeLimit(Exception):
    pass


@contextmanager
def time_limit(seconds: float) -> Iterator[None]:
    """Interrupt the work after ``seconds`` (POSIX interval timer; main thread only)."""
    import threading

    if (
        seconds <= 0
        or not hasattr(signal, "setitimer")
        or threading.current_thread() is not threading.main_thread()
    ):
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


# -- the work ------------------------------------------------------------------------------------


def _diagnostic(path: Path, message: str, code: str) -> Diagnostic:
    return Diagnostic(Severity.ERROR, Span(str(path), 1, 1), message, "", code)


class _Folders:
    """One output folder per netlist, named after its stem; a second netlist with the same
    stem gets ``-2``, and so on, in the order the netlists were given."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.taken: dict[str, Path] = {}

    def folder(self, netlist: Path) -> Path:
        stem = safe_name(netlist.stem)
        key = str(netlist.resolve())
        candidate, number = stem, 1
        while candidate in self.taken and self.taken[candidate] != Path(key):
            number += 1
            candidate = f"{stem}-{number}"
        self.taken[candidate] = Path(key)
        return self.root / candidate


def make_testbenches(jobs: Sequence[Job], options: BenchOptions) -> Outcome:
    """Write the testbench decks of every finding of ``jobs`` (planned as ``check`` plans
    them: each with its configuration and the sandbox it may use)."""
    outcome = Outcome()
    folders = _Folders(options.output)
    for job in jobs:
        _one_file(job, options, folders, outcome)
    if options.run:
        _run_all(outcome, options)
        _waveforms(outcome, options)
    outcome.records.sort(key=Record.sort_key)
    if outcome.records:
        write_atomically(options.output, options.output / INDEX_NAME, records_json(outcome))
    return outcome


def records_json(outcome: Outcome) -> str:
    """What ``--format json`` prints, and ``DIR/testbench.json`` holds: one object per
    finding, sorted by path, line and rule."""
    import json

    return json.dumps([r.to_json() for r in outcome.records], indent=2, sort_keys=True) + "\n"


def _waveforms(outcome: Outcome, options: BenchOptions) -> None:
    """Run each design deck that ran once more for its waveform file (testbench.waveform)."""
    from drivelint.testbench.ngspice import run_vectors
    from drivelint.testbench.waveform import waveform_text

    records = [
        r
        for r in outcome.records
        if r.deck is not None and r.deck.result is not None and r.deck.result.error is None
    ]

    def run(record: Record) -> dict[str, tuple[float, ...]] | str:
        assert record.deck is not None
        vectors = {v for t in record.deck.traces for v in t.vectors}
        if not vectors:
            return "the deck names no waveform"
        return run_vectors(
            record.deck.path, vectors, options.run_timeout, executable=options.ngspice
        )

    with ThreadPoolExecutor(max_workers=max(1, options.jobs)) as pool:
        for record, found in zip(records, pool.map(run, records)):
            deck = record.deck
            assert deck is not None
            if isinstance(found, str):
                record.waveform_reason = found
                continue
            claim = (
                deck.claims[0].key
                if deck.claims
                else (deck.limits[0].measure if deck.limits else None)
            )
            path = deck.path.with_name(deck.path.name.removesuffix(".cir") + ".wave.json")
            write_atomically(options.output, path, waveform_text(deck.traces, found, claim))
            record.waveform = path.relative_to(options.output).as_posix()


def _one_file(job: Job, options: BenchOptions, folders: _Folders, outcome: Outcome) -> None:
    path = job.path
    batch = BatchOptions(parts=options.parts, seconds_per_file=options.seconds_per_file)
    seconds = job.seconds(batch)
    result = check_job(job, batch)
    # A directive in a comment that cannot be read does not change what a simulator does;
    # any other error would leave a deck that does not run.
    errors = [
        d for d in result.diagnostics if d.severity is Severity.ERROR and d.code != "directive"
    ]
    if errors:
        outcome.diagnostics.extend(errors)
        outcome.failed = True
        return
    findings = [f for f in result.findings if _wanted(f, options)]
    if not findings:
        return
    try:
        with time_limit(seconds):
            _decks_for(job, options, folders.folder(path), result, findings, outcome)
    except _TimeLimit:
        outcome.diagnostics.append(
            _diagnostic(
                path,
                f"writing testbenches took longer than {seconds:g} s "
                "(limit max_seconds_per_file); file skipped",
                "limit",
            )
        )
        outcome.failed = True
    except OSError as exc:
        outcome.diagnostics.append(_diagnostic(path, f"cannot write testbenches: {exc}", "output"))
        outcome.failed = True


def _wanted(finding: Finding, options: BenchOptions) -> bool:
    if options.rule is not None and finding.rule != options.rule:
        return False
    device = options.device.lower() if options.device else None
    return device is None or device in (finding.device, finding.switch)


def _decks_for(
    job: Job,
    options: BenchOptions,
    folder: Path,
    result: CheckResult,
    findings: list[Finding],
    outcome: Outcome,
) -> None:
    from drivelint.netlist.reader import ReadOptions, read_deck
    from drivelint.pipeline import find_project_root, parts_for

    path, config = job.path, job.config
    circuit = result.circuit
    load = load_options(job)
    read = ReadOptions(
        root=load.root or find_project_root(path),
        allow_outside_root=load.allow_outside_root,
        search_path=load.search_path,
        limits=load.limits,
        allow_hidden_includes=load.allow_hidden_includes,
    )
    design = Design(read_deck(path, read), circuit)
    library = parts_for(path, (*config.parts, *options.parts))
    rules = registry()
    directives = parse_directives(circuit.directives, circuit.line_text, known_rules=rules.keys())
    ratings = Ratings(library, directives)
    conditions = {
        key: Value(value, CONDITION_KEYS[key], origin)
        for key, (value, origin) in config.conditions_for_file(path).items()
    }
    # The rules see the circuit recognition saw, wires (ammeters, strays, shunts) merged;
    # the facts must be the rules' own, so they are built on the same one.
    from drivelint.stages.wires import collapse_wires

    merged = collapse_wires(circuit).circuit
    by_net = devices_by_net(merged)
    used_names: dict[str, int] = {}
    for finding in findings:
        stage = next((s for s in result.stages if s.switch == finding.switch), None)
        record = Record(finding)
        outcome.records.append(record)
        if stage is None:
            record.reason = "the finding's stage was not recognised again"
            continue
        facts = StageFacts(stage, merged, ratings, directives, conditions, by_net)
        setting = config.rules.get(finding.rule, RuleSetting())
        rule = rules.get(finding.rule)
        rule_options = rule.option_values(setting.options) if rule else {}
        ctx = BenchContext(finding, stage, facts, design, rule_options)
        stem = f"{safe_name(finding.rule)}__{safe_name(finding.device)}"
        count = used_names[stem] = used_names.get(stem, 0) + 1
        if count > 1:
            stem = f"{stem}__{count}"
        try:
            _build(ctx, record, folder, stem, options, conditions)
        except (OSError, _TimeLimit):
            raise
        except Exception as exc:  # a bug must cost one finding's deck, not the batch
            import traceback

            where = traceback.extract_tb(exc.__traceback__)[-1]
            record.reason = (
                f"internal error: {type(exc).__name__}: {exc} ({Path(where.filename).name}:"
                f"{where.lineno}); please report it"
            )
            outcome.failed = True
    names = {d.model_name.lower() for d in circuit.devices.values() if d.model_name}
    names |= {i.subckt.lower() for i in circuit.instances.values()}
    parts = parts_text(library, names, ", ".join(library.files) or "no parts file")
    if parts is not None and any(r.deck for r in outcome.records):
        write_atomically(options.output, folder / "parts.toml", parts)


def _written(path: Path, bench: Bench, traces: tuple[Trace, ...] = ()) -> WrittenDeck:
    """The record of a deck written from ``bench`` (the fixed deck draws no waveform)."""
    return WrittenDeck(
        path,
        bench.claims,
        bench.limits,
        tuple(c.name for c in bench.cards),
        corner=bench.corner,
        corner_side=bench.corner_side,
        corner_values=dict(bench.corner_values),
        traces=traces,
    )


def _build(
    ctx: BenchContext,
    record: Record,
    folder: Path,
    stem: str,
    options: BenchOptions,
    conditions: dict[str, Value],
) -> None:
    if ctx.finding.rule not in BUILDERS:
        record.reason = NOT_SIMULATED.get(ctx.finding.rule, "no testbench builder for this rule")
        return
    try:
        bench = build(ctx)
        fix: Fix | Declined = (
            APPLIERS[ctx.finding.rule](ctx)
            if ctx.finding.rule in APPLIERS
            else Declined("no fix applier for this rule")
        )
        fixed_bench: Bench | Declined | None = None
        if isinstance(bench, Bench) and isinstance(fix, Fix):
            fixed_bench = build(replace(ctx, fix=fix))
            if isinstance(fixed_bench, Bench) and fix.bounds:
                moved = tuple(
                    replace(limit, bound=fix.bounds.get(limit.measure, limit.bound))
                    for limit in fixed_bench.limits
                )
                fixed_bench = replace(fixed_bench, limits=moved)
    except DesignError as exc:
        record.reason = f"the design cannot be edited: {exc}"
        return
    if isinstance(bench, Declined):
        record.reason = bench.reason
        return
    deck_path = folder / f"{stem}.cir"
    fixed_path = folder / f"{stem}.fixed.cir"
    fixed_ok = isinstance(fix, Fix) and isinstance(fixed_bench, Bench)
    if isinstance(fix, Declined):
        record.fixed_reason = fix.reason
    elif isinstance(fixed_bench, Declined):
        record.fixed_reason = fixed_bench.reason
    try:
        text = render(
            finding=ctx.finding,
            design=ctx.design,
            bench=bench,
            file_name=deck_path.name,
            conditions=conditions,
            fixed_file=fixed_path.name if fixed_ok else None,
            fix_reason=record.fixed_reason,
        )
        fixed_text = (
            render(
                finding=ctx.finding,
                design=ctx.design,
                bench=fixed_bench,
                file_name=fixed_path.name,
                conditions=conditions,
                fix=fix,
            )
            if isinstance(fix, Fix) and isinstance(fixed_bench, Bench)
            else None
        )
    except DesignError as exc:
        record.reason = f"the design cannot be edited: {exc}"
        return
    write_atomically(options.output, deck_path, text)
    record.deck = _written(deck_path, bench, traces=bench.traces)
    if fixed_text is not None and isinstance(fix, Fix) and isinstance(fixed_bench, Bench):
        write_atomically(options.output, fixed_path, fixed_text)
        record.fix = fix.description
        record.fixed = _written(fixed_path, fixed_bench)


def _run_all(outcome: Outcome, options: BenchOptions) -> None:
    decks = [d for r in outcome.records for d in (r.deck, r.fixed) if d is not None]

    def run(deck: WrittenDeck) -> RunResult:
        return run_deck(
            deck.path, deck.cards, options.run_timeout, options.max_output, options.ngspice
        )

    with ThreadPoolExecutor(max_workers=max(1, options.jobs)) as pool:
        for deck, result in zip(decks, pool.map(run, decks)):
            deck.result = result
            if result.error:
                outcome.failed = True


# -- text output ----------------------------------------------------------------------------------


def _amount(value: float | None, unit: str) -> str:
    if value is None:
        return "not measured"
    if unit in ("", "1"):
        return f"{value:.4g}"
    return format_si(value, "Ohm" if unit == "Ohm" else unit)


def record_text(record: Record) -> list[str]:
    finding = record.finding
    head = f"{finding.span.path}:{finding.span.line}: {finding.rule} {finding.device}"
    lines = [head]
    deck = record.deck
    if deck is None:
        return [*lines, f"    no deck: {record.reason}"]
    lines.append(f"    deck: {deck.path}")
    for claim in deck.claims:
        text = f"    {claim.key}: claimed {_amount(claim.value, claim.unit)}"
        if claim.sense != "estimate":
            text += f" ({claim.sense})"
        if deck.result is not None:
            measured = deck.measured(claim.key)
            text += f", measured {_amount(measured, claim.unit)}"
            if measured is not None and claim.value:
                text += f" ({measured / claim.value:.2f}x)"
            text += f": {claim.verdict(measured)}"
        lines.append(text)
    if deck.result is not None:
        lines += _limit_lines(deck, "failure shown", "failure not shown")
        if deck.result.error:
            lines.append(f"    run failed: {deck.result.error}")
        lines += [f"    ngspice: {message}" for message in deck.result.trouble]
    if record.fixed is not None:
        lines.append(f"    fixed deck: {record.fixed.path}: {record.fix}")
        if record.fixed.result is not None:
            lines += _limit_lines(record.fixed, "still fails", "failure gone", fixed=True)
            if record.fixed.result.error:
                lines.append(f"    fixed run failed: {record.fixed.result.error}")
            lines += [f"    ngspice (fixed deck): {m}" for m in record.fixed.result.trouble]
    elif record.fixed_reason:
        lines.append(f"    no fixed deck: {record.fixed_reason}")
    return lines


def _limit_lines(deck: WrittenDeck, broken: str, kept: str, fixed: bool = False) -> list[str]:
    out = []
    for limit in deck.limits:
        measured = deck.measured(limit.measure)
        holds = limit.holds(measured)
        verdict = "not measured" if holds is None else (kept if holds else broken)
        prefix = "fixed deck" if fixed else "deck"
        out.append(
            f"    {prefix}: {verdict}: {limit.what} ({limit.measure} = "
            f"{_amount(measured, limit.unit)}, must be {limit.holds_when} "
            f"{_amount(limit.bound, limit.unit)})"
        )
    return out
