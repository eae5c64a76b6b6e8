"""One self-contained HTML page for a library scan.

The page carries a summary, filters and a sortable table of designs, every design's
stages and findings (collapsed until opened) with their numbers, origins and fixes, a
block diagram of each recognised stage with findings, for the bootstrap hold rules a plot
of the boot voltage over the on-time, and, with ``--testbench DIR``, links to each
finding's simulation decks and its simulated waveform.

The package is split along its seams: :mod:`.page` (the page and its parts), :mod:`.diagram`
(the stage sketch), :mod:`.plots` (the boot-voltage plot and simulated waveforms),
:mod:`.testbench` (reading a testbench folder's index, defensively) and :mod:`.markup`
(escaping and SVG primitives every part uses).
"""

from __future__ import annotations

from drivelint.report.html.diagram import drawn_devices, stage_svg
from drivelint.report.html.page import format_html
from drivelint.report.html.plots import PLOT_RULES, boot_droop, boot_plot_svg

__all__ = ["PLOT_RULES", "boot_droop", "boot_plot_svg", "drawn_devices", "format_html", "stage_svg"]
