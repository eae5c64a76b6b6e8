"""Shared test support lives beside this file (tests/simulator.py); pytest puts this
folder on the import path because of this conftest."""

import os

from hypothesis import settings

# The suite draws the same examples on every run ("repeatable"), so a CI result can be
# reproduced anywhere and a submission is never failed by a draw nobody can repeat.
# HYPOTHESIS_PROFILE=explore draws fresh examples each run: run it to hunt for new
# failures, and keep each one found as an explicit test.
settings.register_profile("repeatable", derandomize=True, database=None)
settings.register_profile("explore", derandomize=False)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "repeatable"))
