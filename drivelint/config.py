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
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import Any

from drivelint.checks.settings import RuleError as RuleError
from drivelint.checks.settings import RuleSetting as RuleSetting
from drivelint.diagnostics import Severity
from drivelint.limits import Limits
from drivelint.paths import NETLIST_SUFFIXES

# Operating conditions are read and ranged in one place for directives and configuration.
from drivelint.ratings.conditions import CONDITION_RANGES as CONDITION_RANGES
from drivelint.ratings.conditions import out_of_range as _in_range

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
        "select",
        "ignore",
        "rules_for",
    }
)
DEFAULT_SUFFIXES = NETLIST_SUFFIXES  # what a folder is searched for


class ConfigError(ValueError):
    """A configuration that cannot be used; the message names the file and the key."""


@dataclass(frozen=True, slots=True)
class Config:
    """One file's settings: where they came from, the parts files, include paths and rule
    settings.
    """

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
    select: frozenset[str] | None = None  # None: every rule
    ignore: frozenset[str] = frozenset()
    rules_for: tuple[RuleScope, ...] = ()

    @property
    def root(self) -> Path | None:
        return self.path.parent if self.path else None

    def conditions_for_file(self, path: Path) -> dict[str, tuple[float, str]]:
        merged = dict(self.conditions)
        if not self.conditions_for:
            return merged
        relative = _relative(path, self.root)
        for pattern, values in self.conditions_for:
            if fnmatch.fnmatch(relative, pattern):
                merged.update(values)
        return merged

    def rules_for_file(self, path: Path) -> dict[str, RuleSetting]:
        """The rule settings for one file: ``[rule.*]``, then every ``[[rules_for]]`` whose
        glob matches (later ones win), with ``select``/``ignore`` switching rules off."""
        from drivelint.checks.registry import registry

        settings = dict(self.rules)
        select, ignore = self.select, set(self.ignore)
        relative = _relative(path, self.root)
        for scope in self.rules_for:
            if not fnmatch.fnmatch(relative, scope.glob):
                continue
            for rule_id, setting in scope.rules.items():
                settings[rule_id] = _merged(settings.get(rule_id), setting, scope.given[rule_id])
            if scope.select is not None:
                select = scope.select
            ignore |= scope.ignore
        if select is None and not ignore:
            return settings
        for rule_id in registry():
            if (select is not None and rule_id not in select) or rule_id in ignore:
                settings[rule_id] = replace(settings.get(rule_id, RuleSetting()), enabled=False)
        return settings

    def excluded(self, path: Path) -> bool:
        if not self.exclude:
            return False
        relative = _relative(path, self.root)
        return any(_matches(relative, pattern) for pattern in self.exclude)


@dataclass(frozen=True, slots=True)
class RuleScope:
    """A ``[[rules_for]]`` entry: rule settings for the files matching a glob."""

    glob: str
    select: frozenset[str] | None = None
    ignore: frozenset[str] = frozenset()
    rules: Mapping[str, RuleSetting] = field(default_factory=dict)
    given: Mapping[str, frozenset[str]] = field(default_factory=dict)  # keys set, per rule


def _merged(base: RuleSetting | None, override: RuleSetting, given: frozenset[str]) -> RuleSetting:
    """``override``'s given keys (enabled, severity, options) over ``base``."""
    base = base or RuleSetting()
    return RuleSetting(
        override.enabled if "enabled" in given else base.enabled,
        override.severity if "severity" in given else base.severity,
        {**base.options, **override.options},
    )


def _relative(path: Path, root: Path | None) -> str:
    from drivelint.paths import resolved as resolve

    resolved, top = resolve(path), resolve(root) if root is not None else None
    if top is not None and resolved.is_relative_to(top):
        return resolved.relative_to(top).as_posix()
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
    from drivelint.paths import find_project_root

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
    from drivelint.paths import resolved

    folder = resolved(start)
    folder = folder if folder.is_dir() else folder.parent
    for candidate in (folder, *folder.parents):
        own = candidate / "drivelint.toml"
        if own.is_file():
            return own
        project = candidate / "pyproject.toml"
        if project.is_file():
            tool = _read(project).get("tool", {})
            if isinstance(tool, dict) and "drivelint" in tool:
                return project
    return None


def _read(path: Path) -> dict[str, Any]:
    return _read_with_lines(path)[0]


def _read_with_lines(path: Path) -> tuple[dict[str, Any], Any]:
    from drivelint.ratings.tomlfile import read_toml

    try:
        data, lines, _ = read_toml(path, str(path))
    except ValueError as exc:
        raise ConfigError(str(exc)) from None
    return data, lines


# The most any configuration may raise a limit to: enough for the largest real designs,
# small enough that a hostile drivelint.toml cannot remove a bound.
LIMIT_CEILINGS: Mapping[str, int] = {
    "max_file_bytes": 1 << 30,
    "max_total_bytes": 4 << 30,
    "max_line_chars": 100_000_000,
    "max_include_depth": 256,
    "max_files": 100_000,
    "max_subckt_nesting": 256,
    "max_instance_depth": 256,
    "max_expression_chars": 1_000_000,
    "max_word_chars": 1_000_000,
    "max_expression_depth": 500,
    "max_param_recursion": 500,
    "max_devices": 50_000_000,
    "max_lines_read": 100_000_000,
    "max_seconds_per_file": 3600,
    "max_if_nesting": 256,
    "max_function_depth": 500,
    "max_pwl_points": 100_000_000,
    "max_poly_dimensions": 64,
}

# Ranges of rule options by name; any other option must be finite and not negative.
OPTION_RANGES: Mapping[str, tuple[float, float, bool]] = {
    "margin": (1.0, 1e3, True),  # below 1 accepts a capacitor smaller than its charge needs
    "derating": (0.0, 1.0, False),  # above 1 uses more than the rating
    "off_time_fraction": (0.0, 1.0, False),
    "zener_tolerance": (0.0, 0.5, True),
}
_ANY_OPTION = (0.0, float("inf"), True)


def load_config(path: Path | None, known_rules: Mapping[str, Any] | None = None) -> Config:
    """Read one configuration file (None: the defaults)."""
    if path is None:
        return Config()
    data, lines = _read_with_lines(path)
    prefix: tuple[str, ...] = ()
    if path.name == "pyproject.toml":
        tool = data.get("tool", {})
        data = tool.get("drivelint", {}) if isinstance(tool, dict) else {}
        prefix = ("tool", "drivelint")
        if not isinstance(data, dict):
            line = lines.line(prefix)
            raise ConfigError(f"{path}:{line}: tool.drivelint: expected a table")
    return _parse(path, data, prefix, known_rules, lines)


def _parse(
    path: Path,
    data: dict[str, Any],
    prefix: tuple[str, ...],
    known_rules: Mapping[str, Any] | None,
    lines: Any,
) -> Config:
    from drivelint.ratings.conditions import CONDITION_KEYS, read_condition
    from drivelint.ratings.units import UnitError

    dotted = ".".join(prefix) + "." if prefix else ""

    def fail(key: str | tuple[str | int, ...], message: str) -> ConfigError:
        keys = key if isinstance(key, tuple) else tuple(key.split("."))
        name = "".join(f"[{k}]" if isinstance(k, int) else f".{k}" for k in keys).lstrip(".")
        line = lines.line((*prefix, *keys))
        return ConfigError(f"{path}:{line}: {dotted}{name}: {message}")

    def origin(key: str) -> str:
        return f"{path}: {dotted}{key}"

    def table(value: object, key: str | tuple[str | int, ...]) -> dict[str, Any]:
        if not isinstance(value, dict):
            raise fail(key, f"expected a table, not {_kind(value)}")
        return value

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
        if any("\x00" in v for v in value):
            raise fail(key, "a string holds a NUL character")
        origins[key] = origin(key)
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
        origins["allow_outside_root"] = origin("allow_outside_root")
    if "fail_on" in data:
        if not isinstance(data["fail_on"], str):
            raise fail("fail_on", f"expected a string, not {_kind(data['fail_on'])}")
        try:
            config = replace(config, fail_on=Severity.parse(data["fail_on"]))
        except ValueError as exc:
            raise fail("fail_on", str(exc)) from None
        origins["fail_on"] = origin("fail_on")
    if "limits" in data:
        names = {f.name for f in fields(Limits)}
        values = table(data["limits"], "limits")
        for key, value in values.items():
            if key not in names:
                raise fail(
                    ("limits", key), "unknown limit; expected one of " + ", ".join(sorted(names))
                )
            if not isinstance(value, int) or isinstance(value, bool) or value <= 0:
                raise fail(("limits", key), "expected a positive integer")
            if value > LIMIT_CEILINGS[key]:
                # A configuration inside a scanned tree must not switch its bounds off.
                raise fail(("limits", key), f"{value} is over the ceiling of {LIMIT_CEILINGS[key]}")
            origins[f"limits.{key}"] = origin(f"limits.{key}")
        config = replace(config, limits=replace(Limits(), **values))

    def conditions(
        given: Mapping[str, Any], where: tuple[str | int, ...]
    ) -> dict[str, tuple[float, str]]:
        out: dict[str, tuple[float, str]] = {}
        shown = "".join(f"[{k}]" if isinstance(k, int) else f".{k}" for k in where).lstrip(".")
        for key, raw in given.items():
            if key not in CONDITION_KEYS:
                raise fail(
                    (*where, key),
                    "unknown condition; expected one of " + ", ".join(sorted(CONDITION_KEYS)),
                )
            if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
                raise fail((*where, key), f"expected a quantity string, not {_kind(raw)}")
            try:
                value = read_condition(key, raw)
            except UnitError as exc:
                raise fail((*where, key), str(exc)) from None
            out[key] = (value, f"{path}: {dotted}{shown}.{key}")
        return out

    if "conditions" in data:
        config = replace(
            config, conditions=conditions(table(data["conditions"], "conditions"), ("conditions",))
        )
    if "conditions_for" in data:
        entries = data["conditions_for"]
        if not isinstance(entries, list):
            raise fail("conditions_for", "expected an array of tables ([[conditions_for]])")
        per_glob = []
        for index, entry in enumerate(entries):
            entry = dict(table(entry, ("conditions_for", index)))
            glob = entry.pop("glob", None)
            if not isinstance(glob, str):
                raise fail(("conditions_for", index, "glob"), "each entry needs a glob")
            per_glob.append((glob, conditions(entry, ("conditions_for", index))))
        config = replace(config, conditions_for=tuple(per_glob))

    def rule_list(key: tuple[str | int, ...], value: object) -> frozenset[str]:
        from drivelint.checks.registry import registry
        from drivelint.checks.runner import expand_rule_patterns

        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise fail(key, "expected a list of rule ids (or their first words)")
        try:
            return expand_rule_patterns(value, list(known_rules or registry()))
        except ValueError as exc:
            raise fail(key, str(exc)) from None

    def rule_tables(value: object, key: tuple[str | int, ...]) -> dict[str, Any]:
        rules = table(value, key)
        for rule_id, entry in rules.items():
            table(entry, (*key, rule_id))
        return rules

    if "rule" in data:
        rules = rule_tables(data["rule"], ("rule",))
        config = replace(config, rules=_rules(rules, fail, known_rules, origins, origin))
    if "select" in data:
        config = replace(config, select=rule_list(("select",), data["select"]))
        origins["select"] = origin("select")
    if "ignore" in data:
        config = replace(config, ignore=rule_list(("ignore",), data["ignore"]))
        origins["ignore"] = origin("ignore")
    if "rules_for" in data:
        entries = data["rules_for"]
        if not isinstance(entries, list):
            raise fail("rules_for", "expected an array of tables ([[rules_for]])")
        scopes = []
        for index, entry in enumerate(entries):
            entry = dict(table(entry, ("rules_for", index)))
            glob = entry.pop("glob", None)
            if not isinstance(glob, str):
                raise fail(("rules_for", index, "glob"), "each entry needs a glob")
            unknown_keys = sorted(set(entry) - {"select", "ignore", "rule"})
            if unknown_keys:
                raise fail(
                    ("rules_for", index, unknown_keys[0]),
                    "unknown key; expected glob, select, ignore or rule",
                )
            select = (
                rule_list(("rules_for", index, "select"), entry["select"])
                if "select" in entry
                else None
            )
            ignore = (
                rule_list(("rules_for", index, "ignore"), entry["ignore"])
                if "ignore" in entry
                else frozenset()
            )
            tables = rule_tables(entry.get("rule", {}), ("rules_for", index, "rule"))

            def scoped(
                key: str | tuple[str | int, ...], message: str, index: int = index
            ) -> ConfigError:
                keys = key if isinstance(key, tuple) else tuple(key.split("."))
                return fail(("rules_for", index, *keys), message)

            settings = _rules(tables, scoped, known_rules, {}, origin)
            given = {
                rule_id: frozenset(
                    k if k in ("enabled", "severity") else "option" for k in tables[rule_id]
                )
                for rule_id in tables
            }
            scopes.append(RuleScope(glob, select, ignore, settings, given))
        config = replace(config, rules_for=tuple(scopes))
        origins["rules_for"] = origin("rules_for")
    return replace(config, origins=origins)


def _kind(value: object) -> str:
    names = {bool: "a boolean", int: "an integer", float: "a number", str: "a string"}
    names.update({list: "an array", dict: "a table"})
    return names.get(type(value), type(value).__name__)


def _rules(
    tables: dict[str, Any],
    fail: Any,
    known: Mapping[str, Any] | None,
    origins: dict[str, str],
    origin: Any,
) -> dict[str, RuleSetting]:
    from drivelint.checks.registry import parse_option_value, registry

    rules = known if known is not None else registry()
    out: dict[str, RuleSetting] = {}
    for rule_id, table in tables.items():
        rule = rules.get(rule_id)
        if rule is None:
            raise fail(("rule", rule_id), "unknown rule; known rules: " + ", ".join(rules))
        table = dict(table)
        enabled = table.pop("enabled", True)
        if not isinstance(enabled, bool):
            raise fail(("rule", rule_id, "enabled"), "expected true or false")
        severity = None
        if "severity" in table:
            raw = table.pop("severity")
            if not isinstance(raw, str):
                raise fail(("rule", rule_id, "severity"), f"expected a string, not {_kind(raw)}")
            if raw.strip().lower() == "off":
                # "off" is not a severity a finding can have: the rule does not run.
                if "enabled" in tables[rule_id] and enabled:
                    raise fail(("rule", rule_id, "severity"), "'off' contradicts enabled = true")
                enabled = False
            else:
                try:
                    severity = Severity.parse(raw)
                except ValueError:
                    raise fail(
                        ("rule", rule_id, "severity"),
                        f"unknown severity {raw!r}; expected error, warning, note or off",
                    ) from None
        options: dict[str, float] = {}
        for name, raw in table.items():
            option = rule.options.get(name)
            if option is None:
                raise fail(
                    ("rule", rule_id, name),
                    "unknown option; options: " + (", ".join(rule.options) or "none"),
                )
            if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
                raise fail(("rule", rule_id, name), f"expected a quantity, not {_kind(raw)}")
            try:
                value = parse_option_value(raw, option.unit, "")
            except RuleError as exc:
                raise fail(("rule", rule_id, name), str(exc).removeprefix(": ")) from None
            problem = _in_range(value, OPTION_RANGES.get(name, _ANY_OPTION))
            if problem:
                raise fail(("rule", rule_id, name), problem)
            options[name] = value
        given = [k for k in ("enabled", "severity") if k in tables[rule_id]] + list(options)
        for key in given:
            origins[f"rule.{rule_id}.{key}"] = origin(f"rule.{rule_id}.{key}")
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
    if config.select is not None:
        lines.append(row("select", sorted(config.select)))
    if config.ignore:
        lines.append(row("ignore", sorted(config.ignore)))
    for scope in config.rules_for:
        where = origins.get("rules_for", "default")
        if scope.select is not None:
            lines.append(f"rules_for[{scope.glob}].select = {sorted(scope.select)}    # {where}")
        if scope.ignore:
            lines.append(f"rules_for[{scope.glob}].ignore = {sorted(scope.ignore)}    # {where}")
        for rule_id, setting in sorted(scope.rules.items()):
            state = "on" if setting.enabled else "off"
            severity = f", severity {setting.severity.label}" if setting.severity else ""
            options = "".join(f", {k} = {v:g}" for k, v in sorted(setting.options.items()))
            lines.append(f"rules_for[{scope.glob}].rule.{rule_id}: {state}{severity}{options}")
    for rule_id, setting in sorted(config.rules.items()):
        lines.append(row(f"rule.{rule_id}.enabled", setting.enabled))
        if setting.severity:
            lines.append(row(f"rule.{rule_id}.severity", setting.severity.label))
        for name, value in sorted(setting.options.items()):
            lines.append(row(f"rule.{rule_id}.{name}", f"{value:g}"))
    return "\n".join(lines)
