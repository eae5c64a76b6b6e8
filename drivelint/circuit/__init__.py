"""Elaboration: a deck of statements becomes a flat circuit with a graph."""
