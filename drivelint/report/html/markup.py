"""What every part of the HTML report writes with: escaping and the SVG primitives.

Every text that reaches the page goes through :func:`esc`: control characters become
visible escapes (``diagnostics.printable``) and then HTML's own characters are escaped,
so nothing from a netlist, a file name or a testbench file can add markup.
"""

from __future__ import annotations

from collections.abc import Sequence
from html import escape

from drivelint.diagnostics import printable


def esc(text: object) -> str:
    return escape(printable(str(text)), quote=True)


def wire(x1: float, y1: float, x2: float, y2: float, cls: str = "wire") -> str:
    return f'<line class="{cls}" x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" y2="{y2:.1f}"/>'


def dot(x: float, y: float) -> str:
    return f'<circle class="dot" cx="{x:.1f}" cy="{y:.1f}" r="3"/>'


def terminal(x: float, y: float) -> str:
    return f'<circle class="term" cx="{x:.1f}" cy="{y:.1f}" r="3.5"/>'


def label(x: float, y: float, text: str, anchor: str = "start", cls: str = "net") -> str:
    return f'<text class="{cls}" x="{x:.1f}" y="{y:.1f}" text-anchor="{anchor}">{esc(text)}</text>'


def ground(x: float, y: float) -> str:
    return (
        f'<path class="gnd" d="M{x - 10:.1f},{y:.1f} H{x + 10:.1f} '
        f'M{x - 6:.1f},{y + 4:.1f} H{x + 6:.1f} M{x - 2.5:.1f},{y + 8:.1f} H{x + 2.5:.1f}"/>'
    )


def polyline(cls: str, points: Sequence[tuple[float, float]]) -> str:
    return (
        f'<polyline class="{cls}" points="'
        + " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
        + '"/>'
    )
