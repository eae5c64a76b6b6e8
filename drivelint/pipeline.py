"""The pipeline's entry points: a path in, a circuit (and later findings) out.

The command line and the tests go through these functions, so every way in reads,
bounds and elaborates a netlist the same way.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

from drivelint.circuit.elaborate import DEFAULT_GROUND_ALIASES, ElaborateOptions, elaborate
from drivelint.circuit.model import Circuit
from drivelint.limits import Limits
from drivelint.netlist.reader import ReadOptions, read_deck

# where a project's files are found (kept light, for the commands' start-up)
from drivelint.paths import NETLIST_SUFFIXES as NETLIST_SUFFIXES
from drivelint.paths import ROOT_MARKERS as ROOT_MARKERS
from drivelint.paths import collect_paths as collect_paths
from drivelint.paths import find_project_root as find_project_root

if TYPE_CHECKING:
    from collections.abc import Mapping, Sequence

    from drivelint.checks.runner import CheckResult
    from drivelint.config import Config, RuleSetting
    from drivelint.netlist.statements import Statement
    from drivelint.ratings.parts import PartsLibrary
    from drivelint.stages.model import DriveStage

# Netlists read by this process, by path: lets tests see that the cache avoided a read.
READS: Counter[str] = Counter()


@dataclass(frozen=True, slots=True)
class LoadOptions:
    """How a netlist is read: project root, include search path, ground names, limits."""

    root: Path | None = None  # None: found by walking up from the netlist
    allow_outside_root: bool = False
    search_path: tuple[Path, ...] = ()
    ground_aliases: frozenset[str] = DEFAULT_GROUND_ALIASES
    limits: Limits = field(default_factory=Limits)
    allow_hidden_includes: bool = False


def load_circuit(
    path: str | Path,
    options: LoadOptions | None = None,
    text: str | bytes | None = None,
    inputs: list[tuple[str, str, str]] | None = None,
) -> Circuit:
    """Read and elaborate one netlist. Bad input becomes diagnostics, never an exception.

    ``inputs``, when given, receives what the result depends on besides the netlist's
    text: each file read and each include lookup (see ``Deck.inputs``).
    """
    from drivelint._gc import paused_gc

    options = options or LoadOptions()
    READS[str(path)] += 1
    root = options.root or find_project_root(Path(path))
    read = ReadOptions(
        root=root,
        allow_outside_root=options.allow_outside_root,
        search_path=options.search_path,
        limits=options.limits,
        allow_hidden_includes=options.allow_hidden_includes,
    )
    with paused_gc():
        deck = read_deck(path, read, text=text)
        if inputs is not None:
            inputs.extend(deck.inputs)
        circuit = elaborate(deck, ElaborateOptions(options.ground_aliases, options.limits))
    return _with_emptiness(circuit, deck.statements)


def _with_emptiness(circuit: Circuit, statements: Sequence[Statement]) -> Circuit:
    """A netlist that read without errors but holds no device is said to be empty: a
    check of nothing must not pass as a clean design. A library (models and subcircuits
    defined, none placed) is not empty: it is said to hold nothing to check."""
    from dataclasses import replace

    from drivelint.diagnostics import Diagnostic, Severity, Span
    from drivelint.netlist.statements import ModelCard, Subckt

    if circuit.devices or any(d.severity is Severity.ERROR for d in circuit.diagnostics):
        return circuit
    span = Span(circuit.path, 1, 1)
    if any(isinstance(s, (Subckt, ModelCard)) for s in statements):
        empty = Diagnostic(
            Severity.NOTE,
            span,
            "a library: models and subcircuits are defined but none is placed, so there is "
            "no stage to check",
            circuit.line_text(span),
            "library",
        )
    else:
        empty = Diagnostic(
            Severity.ERROR,
            span,
            "netlist holds no devices: nothing to check",
            circuit.line_text(span),
            "empty",
        )
    return replace(circuit, diagnostics=(*circuit.diagnostics, empty))


def parts_for(path: Path, extra: tuple[Path, ...] = ()) -> PartsLibrary:
    """The parts library for a netlist: a ``parts.toml`` beside it, then ``extra`` files."""
    from drivelint.ratings.parts import load_libraries

    beside = path.parent / "parts.toml"
    files = ([beside] if beside.is_file() else []) + list(extra)
    return load_libraries(files)


def load_stages(
    path: str | Path,
    options: LoadOptions | None = None,
    parts: tuple[Path, ...] = (),
    text: str | bytes | None = None,
) -> tuple[Circuit, tuple[DriveStage, ...]]:
    """Read, elaborate and recognise one netlist."""
    from drivelint.stages.recognise import recognise

    circuit = load_circuit(path, options, text=text)
    return circuit, recognise(circuit, parts_for(Path(path), parts))


def options_from(config: Config, allow_outside_root: bool | None = None) -> LoadOptions:
    """Reading options from a configuration. Widening the sandbox is the caller's decision
    (the command line, or ``config.may_widen``): ``None`` takes the configuration's word
    only where it may give it."""
    from drivelint.config import may_widen

    if allow_outside_root is None:
        allow_outside_root = config.path is not None and may_widen(config, config.path, ())
    return LoadOptions(
        root=None,
        allow_outside_root=allow_outside_root,
        search_path=config.include_paths,
        ground_aliases=config.ground,
        limits=config.limits,
    )


def check_path(
    path: str | Path,
    config: Config | None = None,
    parts: tuple[Path, ...] = (),
    text: str | bytes | None = None,
    load: LoadOptions | None = None,
    inputs: list[tuple[str, str, str]] | None = None,
) -> CheckResult:
    """The whole job for one netlist: read, elaborate, recognise, check.

    ``config`` None means: discover it by walking up from ``path``. ``load`` overrides the
    reading options drawn from the configuration (the batch passes the sandbox it decided).
    """
    from drivelint.checks.runner import check_circuit
    from drivelint.config import find_config, load_config, may_widen
    from drivelint.ratings.parts import PartsError
    from drivelint.ratings.values import Value
    from drivelint.stages.recognise import recognise

    target = Path(path)
    if config is None:
        config = load_config(find_config(target))
    if load is None:
        load = options_from(config, may_widen(config, target, (target,)))
    circuit = load_circuit(target, load, text=text, inputs=inputs)
    try:
        library = parts_for(target, (*config.parts, *parts))
    except PartsError as exc:
        # A parts.toml beside the netlist that cannot be used: this file is not checked
        # (checking against defaults would report what the library would have settled).
        from dataclasses import replace

        from drivelint.checks.runner import CheckResult
        from drivelint.diagnostics import Diagnostic, Severity, Span

        problem = Diagnostic(Severity.ERROR, Span(str(target), 1, 1), str(exc), "", "parts")
        circuit = replace(circuit, diagnostics=(*circuit.diagnostics, problem))
        return CheckResult(circuit, (), (), circuit.diagnostics)
    stages = recognise(circuit, library)
    from drivelint.ratings.directives import CONDITION_KEYS

    conditions = {
        key: Value(value, CONDITION_KEYS[key], origin)
        for key, (value, origin) in config.conditions_for_file(target).items()
    }
    return check_circuit(circuit, stages, library, config.rules_for_file(target), conditions)


def check_text(
    text: str,
    path: str = "deck.cir",
    parts: PartsLibrary | None = None,
    settings: Mapping[str, RuleSetting] | None = None,
    options: LoadOptions | None = None,
) -> CheckResult:
    """The whole job on netlist text (tests and tools): no files needed."""
    from drivelint.checks.runner import check_circuit
    from drivelint.ratings.parts import PartsLibrary as Library
    from drivelint.stages.recognise import recognise

    circuit = load_circuit(path, options, text=text)
    library = parts or Library()
    return check_circuit(circuit, recognise(circuit, library), library, settings)
