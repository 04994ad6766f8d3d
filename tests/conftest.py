"""Fixtures shared by the workbench tests, and the Hypothesis profiles.

The suite must give the same result on every run, so the default profile
("ci") derandomizes Hypothesis: each property test draws the same examples
every time, and no example database carries failures from one run into the
next.  A randomized search is opt-in, never the default:

    python3 -m pytest --hypothesis-profile=explore      # or
    STAGELEDGER_HYPOTHESIS=explore python3 -m pytest

("explore" draws new examples each run, ten times as many where a test does
not set its own count, and keeps failures in .hypothesis/ to replay them.)
"""

import os
import pathlib
import shutil

import pytest
from hypothesis import settings
from hypothesis.database import DirectoryBasedExampleDatabase

# No deadline: the machines are shared and noisy, and a per-example time limit
# would make a slow moment a failure.  Time is not what these tests check.
settings.register_profile("ci", derandomize=True, database=None, deadline=None, print_blob=True)
settings.register_profile("explore", derandomize=False, deadline=None, print_blob=True,
                          max_examples=1000,
                          database=DirectoryBasedExampleDatabase(".hypothesis/examples"))
# Loaded here, before any test module builds its own settings objects (they
# inherit from the profile loaded when they are made); pytest's
# --hypothesis-profile option, handled later, still overrides it.
settings.load_profile(os.environ.get("STAGELEDGER_HYPOTHESIS", "ci"))

DEMOS = pathlib.Path(__file__).resolve().parent.parent / "saved_designs"


@pytest.fixture
def preamp(tmp_path) -> pathlib.Path:
    """A private copy of the common-emitter demo (no history yet)."""
    path = tmp_path / "preamp.toml"
    shutil.copyfile(DEMOS / "geophone_preamp.toml", path)
    return path
