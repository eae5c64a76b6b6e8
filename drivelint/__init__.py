"""drivelint: checks the floating gate drives of switching power stages in SPICE netlists."""

__version__ = "0.2.0"
