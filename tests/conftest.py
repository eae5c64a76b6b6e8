"""Shared test support lives beside this file (tests/simulator.py); pytest puts this
folder on the import path because of this conftest."""
