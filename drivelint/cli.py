"""The ``drivelint`` command. A thin shell: each command calls the pipeline and a formatter.

Heavy modules are imported inside the commands, so ``drivelint --help`` and a
pre-commit run on no files stay fast.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import TYPE_CHECKING

import click

from drivelint import __version__

if TYPE_CHECKING:
    from drivelint.config import Config

EXIT_OK = 0
EXIT_FINDINGS = 1
EXIT_ERROR = 2

FORMATS = click.Choice(["text", "json"])


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="drivelint")
def main() -> None:
    """Check the floating gate drives of switching power stages in SPICE netlists."""


@main.command("netlist")
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--format", "fmt", type=FORMATS, default="text", show_default=True)
@click.option("--allow-outside-root", is_flag=True, help="Let includes leave the project root.")
def netlist_command(files: tuple[Path, ...], fmt: str, allow_outside_root: bool) -> None:
    """Show what was read: devices, nets, DC rails, sources and diagnostics.

    FILES are netlists or folders (searched for .cir .net .sp .spi .spice .ckt).
    """
    from drivelint.diagnostics import Severity
    from drivelint.pipeline import LoadOptions, collect_paths, load_circuit
    from drivelint.report.netlist import netlist_json, netlist_text

    options = LoadOptions(allow_outside_root=allow_outside_root)
    circuits = [load_circuit(path, options) for path in collect_paths(files)]
    if fmt == "json":
        import json

        payload = (
            netlist_json(circuits[0])
            if len(circuits) == 1
            else {"decks": [netlist_json(c) for c in circuits]}
        )
        click.echo(json.dumps(payload, indent=2, sort_keys=False))
    else:
        click.echo("\n\n".join(netlist_text(c) for c in circuits))
    failed = any(d.severity is Severity.ERROR for c in circuits for d in c.diagnostics)
    sys.exit(EXIT_ERROR if failed else EXIT_OK)


@main.command("stages")
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--format", "fmt", type=FORMATS, default="text", show_default=True)
@click.option(
    "--parts",
    "parts",
    multiple=True,
    type=click.Path(path_type=Path, dir_okay=False),
    help="A parts library (TOML); repeatable. A parts.toml beside the netlist is read too.",
)
@click.option("--all", "show_all", is_flag=True, help="Also show switches that do not float.")
def stages_command(
    files: tuple[Path, ...], fmt: str, parts: tuple[Path, ...], show_all: bool
) -> None:
    """Show the gate-drive stages drivelint recognises, so you can see what it sees.

    FILES are netlists or folders (searched for .cir .net .sp .spi .spice .ckt).
    """
    from drivelint.diagnostics import Severity
    from drivelint.pipeline import collect_paths, load_stages
    from drivelint.ratings.parts import PartsError
    from drivelint.report.stages import stages_text
    from drivelint.stages.recognise import stages_json

    results = []
    failed = False
    for path in collect_paths(files):
        try:
            circuit, stages = load_stages(path, parts=parts)
        except PartsError as exc:
            click.echo(f"drivelint: {exc}", err=True)
            sys.exit(EXIT_ERROR)
        failed |= any(d.severity is Severity.ERROR for d in circuit.diagnostics)
        results.append((circuit, stages))
    if fmt == "json":
        import json

        payload = stages_json([s for _, stages in results for s in stages])
        click.echo(json.dumps(payload, indent=2))
    else:
        click.echo("\n\n".join(stages_text(c, s, show_all) for c, s in results))
    sys.exit(EXIT_ERROR if failed else EXIT_OK)


@main.command("check")
@click.argument("files", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--format", "fmt", type=FORMATS, default="text", show_default=True)
@click.option(
    "--parts",
    "parts",
    multiple=True,
    type=click.Path(path_type=Path, dir_okay=False),
    help="A parts library (TOML); repeatable. A parts.toml beside the netlist is read too.",
)
@click.option("--explain", is_flag=True, help="Show each finding's inputs, origins and formula.")
@click.option(
    "--fail-on",
    type=click.Choice(["error", "warning", "note"]),
    default=None,
    help="The lowest severity that makes the exit code 1 (default: the config's, else warning).",
)
@click.option(
    "--config",
    "config_file",
    type=click.Path(path_type=Path, dir_okay=False, exists=True),
    help="Use this configuration file instead of discovering one.",
)
def check_command(
    files: tuple[Path, ...],
    fmt: str,
    parts: tuple[Path, ...],
    explain: bool,
    fail_on: str | None,
    config_file: Path | None,
) -> None:
    """Check the floating gate drives in netlists and report what will fail."""
    from drivelint.checks.registry import RuleError
    from drivelint.config import ConfigError, find_config, load_config
    from drivelint.diagnostics import Severity
    from drivelint.pipeline import check_path, collect_paths
    from drivelint.ratings.parts import PartsError
    from drivelint.report.findings import results_json, results_text

    results = []
    configs: dict[Path | None, Config] = {}
    threshold = Severity.parse(fail_on) if fail_on else None
    try:
        for path in collect_paths(files):
            where = config_file or find_config(path)
            if where not in configs:
                configs[where] = load_config(where)
            config = configs[where]
            if config.excluded(path):
                continue
            threshold = threshold or config.fail_on
            results.append(check_path(path, config, parts))
    except (PartsError, RuleError, ConfigError) as exc:
        click.echo(f"drivelint: {exc}", err=True)
        sys.exit(EXIT_ERROR)
    if fmt == "json":
        import json

        click.echo(json.dumps(results_json(results), indent=2))
    else:
        click.echo(results_text(results, explain))
    threshold = threshold or Severity.WARNING
    if any(d.severity is Severity.ERROR for r in results for d in r.diagnostics):
        sys.exit(EXIT_ERROR)
    if any(f.severity >= threshold for r in results for f in r.findings):
        sys.exit(EXIT_FINDINGS)
    sys.exit(EXIT_OK)


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
        click.echo(f"drivelint: {exc}", err=True)
        sys.exit(EXIT_ERROR)
    click.echo(describe(config))
