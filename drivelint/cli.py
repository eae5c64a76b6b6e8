"""The ``drivelint`` command. A thin shell: each command calls the pipeline and a formatter.

Heavy modules are imported inside the commands, so ``drivelint --help`` and a
pre-commit run on no files stay fast.
"""

from __future__ import annotations

import sys
from pathlib import Path

import click

from drivelint import __version__

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
@click.option(
    "--allow-outside-root", is_flag=True, help="Let includes leave the project root."
)
def netlist_command(files: tuple[Path, ...], fmt: str, allow_outside_root: bool) -> None:
    """Show what was read: devices, nets, DC rails, sources and diagnostics."""
    from drivelint.diagnostics import Severity
    from drivelint.pipeline import LoadOptions, load_circuit
    from drivelint.report.netlist import netlist_json, netlist_text

    options = LoadOptions(allow_outside_root=allow_outside_root)
    circuits = [load_circuit(path, options) for path in files]
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
