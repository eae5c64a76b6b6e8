"""Reproducer testbenches: per finding, a self-contained SPICE deck that shows the failure.

The deck starts from the design's own statements (includes inlined, its analysis and
control cards dropped), overrides only what the rule's operating point needs (the control
waveform, a DC enable, a one-shot turn-on), and adds a ``.tran`` and one ``.meas`` per
claimed value, named after the finding's value key. A second deck applies the finding's
own suggested fix where that fix is a value or part change.

``design`` reads and re-emits the netlist through the reader's statements and spans;
``stimulus`` writes control waveforms; ``measure`` writes ``.meas`` cards; ``builders``
holds one testbench builder per rule and ``fixes`` one fix applier per rule; ``deck``
assembles the text; ``ngspice`` runs a deck within bounds; ``command`` is what the
``drivelint testbench`` command calls.
"""
