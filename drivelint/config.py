"""Configuration: ``[tool.drivelint]`` in ``pyproject.toml``, or a ``drivelint.toml``.

Found by walking up from each checked path (the nearest file wins); ``--config FILE``
overrides discovery. Every key is checked: an unknown key, an unknown rule id, an unknown
option or a value with the wrong unit is a :class:`ConfigError` naming the file and key.

Keys (in ``drivelint.toml`` at the top level; in ``pyproject.toml`` under
``[tool.drivelint]``)::

    parts = ["parts.toml"]            # parts libraries, relative to the config file
    include_paths = ["models"]        # searched after the including file's folder
    allow_outside_root = false        # may includes leave the project root?
    ground = ["0", "gnd"]             # ground aliases
    fail_on = "warning"               # error | warning | note
    exclude = ["build/**"]            # .gitignore-style patterns, relative to the config file
    suffixes = [".cir", ".net", ".sp", ".spi", ".spice", ".ckt"]
    [limits]                          # any field of drivelint.limits.Limits
    max_file_bytes = 33554432
    [conditions]                      # operating conditions for every file
    fsw = "100 kHz"
    [[conditions_for]]                # operating conditions for files matching a glob
    glob = "motor/*.cir"
    duty_max = "0.95"
    [rule.dc-hold]                    # per rule: enabled, severity, options with units
    severity = "warning"
"""

from __future__ import annotations

import fnmatch
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

from drivelint.checks.runner import RuleSetting
from drivelint.diagnostics import Severity
from drivelint.limits import Limits

CONFIG_FILES = ("drivelint.toml", "pyproject.toml")
TOP_KEYS = frozenset(
    {
        "parts",
        "include_paths",
        "allow_outside_root",
        "ground",
        "fail_on",
        "exclude",
        "suffixes",
        "limits",
        "conditions",
        "conditions_for",
        "rule",
    }
)
DEFAULT_SUFFIXES = (".cir", ".net", ".sp", ".spi", ".spice", ".ckt")


class ConfigError(ValueError):
    """A configuration that cannot be used; the message names the file and the key."""


@dataclass(frozen=True, slots=True)
class Config:
    path: Path | None = None
    parts: tuple[Path, ...] = ()
    include_paths: tuple[Path, ...] = ()
    allow_outside_root: bool = False
    ground: frozenset[str] = frozenset({"0", "gnd"})
    fail_on: Severity = Severity.WARNING
    exclude: tuple[str, ...] = ()
    suffixes: tuple[str, ...] = DEFAULT_SUFFIXES
    limits: Limits = field(default_factory=Limits)
    conditions: Mapping[str, tuple[float, str]] = field(default_factory=dict)
    conditions_for: tuple[tuple[str, Mapping[str, tuple[float, str]]], ...] = ()
    rules: Mapping[str, RuleSetting] = field(default_factory=dict)
    origins: Mapping[str, str] = field(default_factory=dict)

    @property
    def root(self) -> Path | None:
        return self.path.parent if self.path else None

    def conditions_for_file(self, path: Path) -> dict[str, tuple[float, str]]:
        merged = dict(self.conditions)
        relative = _relative(path, self.root)
        for pattern, values in self.conditions_for:
            if fnmatch.fnmatch(relative, pattern):
                merged.update(values)
        return merged

    def excluded(self, path: Path) -> bool:
        relative = _relative(path, self.root)
        return any(_matches(relative, pattern) for pattern in self.exclude)


def _relative(path: Path, root: Path | None) -> str:
    resolved = path.resolve()
    if root is not None and resolved.is_relative_to(root.resolve()):
        return resolved.relative_to(root.resolve()).as_posix()
    return path.as_posix()


def _matches(relative: str, pattern: str) -> bool:
    """A small subset of .gitignore: ``dir/``, ``*.cir``, ``**/x``, ``a/**``."""
    pattern = pattern.strip()
    if not pattern or pattern.startswith("#"):
        return False
    if pattern.endswith("/"):
        pattern += "**"
    anchored = "/" in pattern.rstrip("/*")
    pattern = pattern.lstrip("/")
    candidates = [relative] if anchored else [relative, *_suffixes(relative)]
    return any(
        fnmatch.fnmatch(c, pattern) or fnmatch.fnmatch(c, pattern.replace("**/", ""))
        for c in candidates
    )


def _suffixes(relative: str) -> list[str]:
    parts = relative.split("/")
    return ["/".join(parts[i:]) for i in range(1, len(parts))]


def may_widen(config: Config, netlist: Path, scan_roots: tuple[Path, ...] | list[Path]) -> bool:
    """Whether ``config`` may let includes of ``netlist`` leave its project root.

    Only a configuration from outside what is being checked may: one whose folder lies
    neither inside the netlist's project root nor inside any path named to be scanned
    (a user-level file above the project, or the invoking project's own file when it
    checks a tree below it). A scanned tree's own ``drivelint.toml`` cannot widen its
    own sandbox; ``--allow-outside-root`` on the command line always can.
    """
    if config.path is None or not config.allow_outside_root:
        return False
    from drivelint.pipeline import find_project_root

    try:
        folder = config.path.parent.resolve()
        root = find_project_root(netlist)
        scanned = [p.resolve() for p in scan_roots]
    except (OSError, RuntimeError):
        return False
    if folder.is_relative_to(root):
        return False
    return not any(folder.is_relative_to(s) for s in scanned)


def find_config(start: Path) -> Path | None:
    """The nearest drivelint.toml, or pyproject.toml with a [tool.drivelint] table."""
    folder = start.resolve()
    folder = folder if folder.is_dir() else folder.parent
    for candidate in (folder, *folder.parents):
        own = candidate / "drivelint.toml"
        if own.is_file():
            return own
        project = candidate / "pyproject.toml"
        if project.is_file() and "drivelint" in _read(project).get("tool", {}):
            return project
    return None


def _read(path: Path) -> dict[str, Any]:
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: not valid TOML: {exc}") from None
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read: {exc.strerror}") from None


def load_config(path: Path | None, known_rules: Mapping[str, Any] | None = None) -> Config:
    """Read one configuration file (None: the defaults)."""
    if path is None:
        return Config()
    data = _read(path)
    prefix = ""
    if path.name == "pyproject.toml":
        data = data.get("tool", {}).get("drivelint", {})
        prefix = "tool.drivelint."
    return _parse(path, data, prefix, known_rules)


def _parse(
    path: Path, data: dict[str, Any], prefix: str, known_rules: Mapping[str, Any] | None
) -> Config:
    from drivelint.ratings.directives import CONDITION_KEYS
    from drivelint.ratings.units import UnitError, parse_quantity

    def fail(key: str, message: str) -> ConfigError:
        return ConfigError(f"{path}: {prefix}{key}: {message}")

    unknown = sorted(set(data) - TOP_KEYS)
    if unknown:
        raise fail(unknown[0], "unknown key; expected one of " + ", ".join(sorted(TOP_KEYS)))
    base = path.parent
    origins: dict[str, str] = {}
    config = Config(path=path)

    def strings(key: str) -> list[str]:
        value = data[key]
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise fail(key, "expected a list of strings")
        origins[key] = f"{path}: {prefix}{key}"
        return value

    if "parts" in data:
        config = replace(config, parts=tuple(base / p for p in strings("parts")))
    if "include_paths" in data:
        config = replace(config, include_paths=tuple(base / p for p in strings("include_paths")))
    if "ground" in data:
        config = replace(config, ground=frozenset(g.lower() for g in strings("ground")) | {"0"})
    if "exclude" in data:
        config = replace(config, exclude=tuple(strings("exclude")))
    if "suffixes" in data:
        config = replace(config, suffixes=tuple(s.lower() for s in strings("suffixes")))
    if "allow_outside_root" in data:
        if not isinstance(data["allow_outside_root"], bool):
            raise fail("allow_outside_root", "expected true or false")
        config = replace(config, allow_outside_root=data["allow_outside_root"])
        origins["allow_outside_root"] = f"{path}: {prefix}allow_outside_root"
    if "fail_on" in data:
        try:
            config = replace(config, fail_on=Severity.parse(str(data["fail_on"])))
        except ValueError as exc:
            raise fail("fail_on", str(exc)) from None
        origins["fail_on"] = f"{path}: {prefix}fail_on"
    if "limits" in data:
        names = {f.name for f in fields(Limits)}
        values = dict(data["limits"])
        for key, value in values.items():
            if key not in names:
                raise fail(
                    f"limits.{key}", "unknown limit; expected one of " + ", ".join(sorted(names))
                )
            if not isinstance(value, int) or isinstance(value, bool) or value <= 0:
                raise fail(f"limits.{key}", "expected a positive integer")
            origins[f"limits.{key}"] = f"{path}: {prefix}limits.{key}"
        config = replace(config, limits=replace(Limits(), **values))

    def conditions(table: Mapping[str, Any], where: str) -> dict[str, tuple[float, str]]:
        out: dict[str, tuple[float, str]] = {}
        for key, raw in table.items():
            if key not in CONDITION_KEYS:
                raise fail(
                    f"{where}.{key}",
                    "unknown condition; expected one of " + ", ".join(sorted(CONDITION_KEYS)),
                )
            try:
                out[key] = (
                    parse_quantity(raw, CONDITION_KEYS[key]),
                    f"{path}: {prefix}{where}.{key}",
                )
            except UnitError as exc:
                raise fail(f"{where}.{key}", str(exc)) from None
        return out

    if "conditions" in data:
        config = replace(config, conditions=conditions(dict(data["conditions"]), "conditions"))
    if "conditions_for" in data:
        per_glob = []
        for index, table in enumerate(data["conditions_for"]):
            table = dict(table)
            glob = table.pop("glob", None)
            if not isinstance(glob, str):
                raise fail(f"conditions_for[{index}].glob", "each entry needs a glob")
            per_glob.append((glob, conditions(table, f"conditions_for[{index}]")))
        config = replace(config, conditions_for=tuple(per_glob))
    if "rule" in data:
        config = replace(
            config, rules=_rules(dict(data["rule"]), fail, known_rules, origins, path, prefix)
        )
    return replace(config, origins=origins)


def _rules(
    tables: dict[str, Any],
    fail: Any,
    known: Mapping[str, Any] | None,
    origins: dict[str, str],
    path: Path,
    prefix: str,
) -> dict[str, RuleSetting]:
    from drivelint.checks.registry import RuleError, parse_option_value, registry

    rules = known if known is not None else registry()
    out: dict[str, RuleSetting] = {}
    for rule_id, table in tables.items():
        rule = rules.get(rule_id)
        if rule is None:
            raise fail(f"rule.{rule_id}", "unknown rule; known rules: " + ", ".join(rules))
        table = dict(table)
        enabled = table.pop("enabled", True)
        if not isinstance(enabled, bool):
            raise fail(f"rule.{rule_id}.enabled", "expected true or false")
        severity = None
        if "severity" in table:
            try:
                severity = Severity.parse(str(table.pop("severity")))
            except ValueError as exc:
                raise fail(f"rule.{rule_id}.severity", str(exc)) from None
        options: dict[str, float] = {}
        for name, raw in table.items():
            option = rule.options.get(name)
            if option is None:
                raise fail(
                    f"rule.{rule_id}.{name}",
                    "unknown option; options: " + (", ".join(rule.options) or "none"),
                )
            try:
                options[name] = parse_option_value(
                    raw, option.unit, f"{path}: {prefix}rule.{rule_id}.{name}"
                )
            except RuleError as exc:
                raise ConfigError(str(exc)) from None
        given = [k for k in ("enabled", "severity") if k in tables[rule_id]] + list(options)
        for key in given:
            origins[f"rule.{rule_id}.{key}"] = f"{path}: {prefix}rule.{rule_id}.{key}"
        out[rule_id] = RuleSetting(enabled, severity, options)
    return out


def describe(config: Config) -> str:
    """The effective configuration, each value with where it came from (`drivelint config`)."""
    origins = config.origins

    def row(key: str, value: object) -> str:
        return f"{key} = {value}    # {origins.get(key, 'default')}"

    lines = [f"# configuration: {config.path or 'none found (defaults)'}"]
    lines.append(row("parts", [str(p) for p in config.parts]))
    lines.append(row("include_paths", [str(p) for p in config.include_paths]))
    lines.append(row("allow_outside_root", config.allow_outside_root))
    lines.append(row("ground", sorted(config.ground)))
    lines.append(row("fail_on", config.fail_on.label))
    lines.append(row("exclude", list(config.exclude)))
    lines.append(row("suffixes", list(config.suffixes)))
    for limit in fields(Limits):
        lines.append(row(f"limits.{limit.name}", getattr(config.limits, limit.name)))
    for key, (value, origin) in sorted(config.conditions.items()):
        lines.append(f"conditions.{key} = {value:g}    # {origin}")
    for glob, values in config.conditions_for:
        for key, (value, origin) in sorted(values.items()):
            lines.append(f"conditions_for[{glob}].{key} = {value:g}    # {origin}")
    for rule_id, setting in sorted(config.rules.items()):
        lines.append(row(f"rule.{rule_id}.enabled", setting.enabled))
        if setting.severity:
            lines.append(row(f"rule.{rule_id}.severity", setting.severity.label))
        for name, value in sorted(setting.options.items()):
            lines.append(row(f"rule.{rule_id}.{name}", f"{value:g}"))
    return "\n".join(lines)
