"""Reporting: turn circuits, stages and findings into text and machine-readable formats."""
