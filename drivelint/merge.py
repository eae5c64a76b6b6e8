"""``drivelint merge``: the JSON reports of a CI matrix's shards joined into one report.

A JSON report (version 2) holds each file's whole result in the codec's form and a ``run``
header (:class:`drivelint.report.run.RunRecord`). Merging decodes the results with the
result cache's typed decoder (never running a check again), refuses reports that are not
slices of one run — another drivelint, other settings, a configuration or parts file
whose content changed, the same file or shard twice, a shard missing — and puts the
files back in the order the whole run would have had, so any format rendered from the
merged results is byte for byte what ``drivelint check`` over the whole library writes.
Reports are untrusted input: bounded in size, parsed as JSON only, every value checked by
type; a bad one is a :class:`MergeError` naming the file.
"""

from __future__ import annotations

import itertools
import json
import os
from collections.abc import Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from drivelint import __version__
from drivelint.cache import digest, file_digest
from drivelint.checks.runner import CheckResult
from drivelint.codec import CodecError, decode_result, from_fields, prepare
from drivelint.diagnostics import Severity, printable
from drivelint.limits import MAX_REPORT_BYTES
from drivelint.report.findings import JSON_VERSION
from drivelint.report.run import RunRecord
from drivelint.report.sarif import portable_path

if TYPE_CHECKING:
    from drivelint.batch import BatchOptions, Job
    from drivelint.report.formats import ReportOptions


class MergeError(Exception):
    """Reports that cannot be merged; the message names the file(s) and why."""


# -- the header a check writes --------------------------------------------------------------


def fail_on_labels(severities: Sequence[Severity]) -> tuple[str, ...]:
    return tuple(s.label for s in sorted(set(severities), reverse=True))


def run_record(
    named: Sequence[Path],
    shard: tuple[int, int] | None,
    planned: Sequence[Job],
    options: BatchOptions,
    rules: frozenset[str] | None,
    stdin: str | None,
) -> tuple[RunRecord, tuple[int, ...]]:
    """The header of a check run over ``named`` (the files before sharding) and each
    planned job's position among them (standard input comes after them all)."""
    from drivelint.batch import code_digest

    positions: dict[Path, int] = {}
    for number, path in enumerate(named):
        positions.setdefault(path, number)
    order = tuple(
        len(named) if job.text is not None else positions.get(job.path, len(named))
        for job in planned
    )
    inputs: dict[str, str] = {}
    for job in planned:
        files = [*job.config.parts, *options.parts]
        if job.config.path is not None:
            files.append(job.config.path)
        beside = job.path.parent / "parts.toml"
        if beside.is_file():
            files.append(beside)
        for file in files:
            key = portable_path(str(file))
            if key not in inputs:
                inputs[key] = file_digest(file)
    record = RunRecord(
        code=code_digest(),
        shard=shard,
        files=len(named),
        library=digest(*(os.fsencode(str(p)) for p in named)),
        config=str(options.config_file) if options.config_file is not None else None,
        parts=tuple(str(p) for p in options.parts),
        allow_outside_root=options.allow_outside_root,
        allow_hidden_includes=options.allow_hidden_includes,
        rules=tuple(sorted(rules)) if rules is not None else None,
        stdin=stdin,
        inputs=dict(sorted(inputs.items())),
        fail_on=fail_on_labels([job.config.fail_on for job in planned]),
    )
    return record, order


# -- reading a report -----------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class ShardReport:
    path: Path
    version: str  # drivelint's version
    run: RunRecord
    results: tuple[tuple[int, CheckResult], ...]  # (position in the library, result)


def _name(path: Path) -> str:
    return printable(str(path))


def read_report(path: Path, max_bytes: int | None = None) -> ShardReport:
    """A JSON report of ``drivelint check``, checked from its bytes to its last field."""
    from drivelint.netlist.reader import read_bounded

    if max_bytes is None:
        max_bytes = MAX_REPORT_BYTES

    data = read_bounded(path, max_bytes)
    if not isinstance(data, bytes):
        if data.code == "limit":
            raise MergeError(f"{_name(path)}: larger than {max_bytes} bytes; not read")
        raise MergeError(data.message.format(shown=_name(path)))
    if len(data) > max_bytes:
        raise MergeError(f"{_name(path)}: larger than {max_bytes} bytes; not read")
    try:
        payload = json.loads(data)
    except RecursionError:
        raise MergeError(f"{_name(path)}: not a report: JSON nested too deeply") from None
    except ValueError as exc:  # JSONDecodeError and UnicodeDecodeError
        raise MergeError(f"{_name(path)}: not a report: not JSON ({exc})") from None
    try:
        return _report(path, payload)
    except CodecError as exc:
        raise MergeError(f"{_name(path)}: not a whole report: {printable(str(exc))}") from None
    except RecursionError:
        raise MergeError(f"{_name(path)}: not a report: nested too deeply") from None


def _report(path: Path, payload: Any) -> ShardReport:
    tool = payload.get("tool") if type(payload) is dict else None
    if type(tool) is not dict or tool.get("name") != "drivelint":
        raise MergeError(f"{_name(path)}: not a drivelint JSON report")
    version = tool.get("version")
    if type(version) is not str:
        raise MergeError(f"{_name(path)}: not a whole report: no drivelint version")
    if payload.get("version") != JSON_VERSION:
        raise MergeError(
            f"{_name(path)}: report format {printable(repr(payload.get('version')))} "
            f"(drivelint {printable(version)}); merge reads format {JSON_VERSION}: check "
            f"again with drivelint {__version__} --format json"
        )
    if payload.get("run") is None:
        raise MergeError(
            f"{_name(path)}: no run header (not written by `drivelint check --format json`)"
        )
    run = from_fields(RunRecord, payload["run"])
    if not set(run.fail_on) <= {s.label for s in Severity}:
        raise MergeError(f"{_name(path)}: not a whole report: fail_on holds an unknown severity")
    if run.shard is not None and not 1 <= run.shard[0] <= run.shard[1]:
        raise MergeError(f"{_name(path)}: shard {run.shard[0]}/{run.shard[1]} is not I/N")
    files = payload.get("files")
    if type(files) is not list:
        raise MergeError(f"{_name(path)}: not a whole report: no list of files")
    prepare()
    results = []
    for number, entry in enumerate(files):
        where = f"{_name(path)}: file {number + 1}"
        if type(entry) is not dict or "result" not in entry:
            raise MergeError(f"{where}: no result (not a report of format {JSON_VERSION})")
        order = entry.get("order")
        limit = run.files + (run.stdin is not None)
        if type(order) is not int or not 0 <= order < max(limit, 1):
            raise MergeError(f"{where}: position {printable(repr(order))} is not in the library")
        try:
            result = decode_result(entry["result"])
        except CodecError as exc:
            raise MergeError(f"{where}: not a whole result: {printable(str(exc))}") from None
        if entry.get("path") != result.circuit.path:
            raise MergeError(f"{where}: its path and its result's path differ")
        results.append((order, result))
    return ShardReport(path, version, run, tuple(results))


# -- merging --------------------------------------------------------------------------------

# Header fields every shard of one run shares, with what a difference means.
_SAME = (
    ("files", "libraries of different sizes (a different set of files was named)"),
    ("library", "different libraries (other paths, or the same in another order)"),
    ("config", "different --config"),
    ("parts", "different --parts"),
    ("allow_outside_root", "different --allow-outside-root"),
    ("allow_hidden_includes", "different --allow-hidden-includes"),
    ("rules", "different rule selections (--select/--ignore)"),
    ("stdin", "different standard input (--stdin-name or '-')"),
)


def merge_reports(
    reports: Sequence[ShardReport],
) -> tuple[list[CheckResult], RunRecord, tuple[int, ...]]:
    """The results of the whole run (in its order), its header and the positions."""
    if not reports:
        raise MergeError("no report to merge")
    first = reports[0]
    for other in reports[1:]:
        a, b = _name(first.path), _name(other.path)
        if other.version != first.version:
            raise MergeError(
                f"{a} was written by drivelint {printable(first.version)} and {b} by "
                f"{printable(other.version)}; check every shard with one drivelint"
            )
        if other.run.code != first.run.code:
            raise MergeError(
                f"{a} and {b} were written by different drivelint code (code, rule cards or "
                "grammar differ under one version number); check every shard with one drivelint"
            )
        for field, meaning in _SAME:
            if getattr(other.run, field) != getattr(first.run, field):
                raise MergeError(f"{a} and {b} are not shards of one run: {meaning}")
    inputs: dict[str, str] = {}
    where: dict[str, Path] = {}
    for report in reports:
        for name, value in report.run.inputs.items():
            if name in inputs and inputs[name] != value:
                raise MergeError(
                    f"{_name(where[name])} and {_name(report.path)} read different contents of "
                    f"'{printable(name)}' (a configuration or parts file changed between shards)"
                )
            inputs.setdefault(name, value)
            where.setdefault(name, report.path)
    _check_shards(reports)
    seen: dict[str, Path] = {}
    positions: dict[int, Path] = {}
    merged: list[tuple[int, CheckResult]] = []
    for report in reports:
        for order, result in report.results:
            name = result.circuit.path
            if name in seen and seen[name] == report.path:
                raise MergeError(f"'{printable(name)}' is twice in {_name(report.path)}")
            if name in seen:
                raise MergeError(
                    f"'{printable(name)}' is in both {_name(seen[name])} and {_name(report.path)}"
                    " (overlapping shards)"
                )
            if order in positions:
                raise MergeError(
                    f"{_name(positions[order])} and {_name(report.path)} both hold the file at "
                    f"position {order} (overlapping shards)"
                )
            seen[name] = positions[order] = report.path
            merged.append((order, result))
    merged.sort(key=lambda item: item[0])
    severities = [Severity.parse(label) for r in reports for label in r.run.fail_on]
    run = replace(
        first.run.whole(), inputs=dict(sorted(inputs.items())), fail_on=fail_on_labels(severities)
    )
    return [r for _, r in merged], run, tuple(o for o, _ in merged)


def _check_shards(reports: Sequence[ShardReport]) -> None:
    whole = [r for r in reports if r.run.shard is None]
    if whole:
        if len(reports) > 1:
            other = next(r for r in reports if r is not whole[0])
            raise MergeError(
                f"{_name(whole[0].path)} holds a whole run (no --shard); it cannot be merged "
                f"with {_name(other.path)}"
            )
        return
    counts = {r.run.shard[1] for r in reports if r.run.shard is not None}
    if len(counts) > 1:
        raise MergeError(
            "the reports are slices of different shard counts: "
            + ", ".join(
                f"{_name(r.path)} {r.run.shard[0]}/{r.run.shard[1]}" for r in reports if r.run.shard
            )
        )
    count = counts.pop()
    held: dict[int, Path] = {}
    for report in reports:
        assert report.run.shard is not None
        index = report.run.shard[0]
        if index in held:
            raise MergeError(
                f"{_name(held[index])} and {_name(report.path)} are both shard {index}/{count}"
            )
        held[index] = report.path
    absent = count - len(held)  # every index held is in 1..count, once
    if absent:
        # The first few only: a header may claim any N.
        first = itertools.islice((i for i in range(1, count + 1) if i not in held), 5)
        named = ", ".join(f"{i}/{count}" for i in first) + (", …" if absent > 5 else "")
        raise MergeError(
            f"shard{'s' * (absent > 1)} {named} missing (given: "
            + ", ".join(f"{i}/{count}" for i in sorted(held))
            + ")"
        )


def render(
    fmt: str, results: Sequence[CheckResult], options: ReportOptions, reports: Sequence[ShardReport]
) -> str:
    """The merged report in ``fmt``. A report whose every field has its type but whose parts
    do not fit together (an edited one) could still trip a formatter: that is a
    :class:`MergeError` naming the report that trips it alone, never a traceback."""
    from drivelint.report.formats import formatter

    try:
        return formatter(fmt)(results, options)
    except Exception as exc:  # noqa: BLE001 - any failure of a formatter on decoded data
        why = printable(f"{type(exc).__name__}: {exc}")
        culprits = [r for r in reports if _trips(fmt, r, options)] or list(reports)
        raise MergeError(
            f"{', '.join(_name(r.path) for r in culprits)}: cannot be rendered as {fmt} ({why});"
            " its contents do not fit together (an edited report?): check again"
        ) from None


def _trips(fmt: str, report: ShardReport, options: ReportOptions) -> bool:
    from drivelint.report.formats import formatter

    alone = replace(options, run=None, order=None)
    try:
        formatter(fmt)([r for _, r in report.results], alone)
    except Exception:  # noqa: BLE001
        return True
    return False
