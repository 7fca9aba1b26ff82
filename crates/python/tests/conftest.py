"""Shared fixtures: the repository, the command-line binary, quick engine settings."""

import os
import pathlib
import shutil
import subprocess

import pytest

REPO = pathlib.Path(__file__).resolve().parents[3]
DEMO = REPO / "demo-data" / "sound.csv"
SMALL_SPEC = REPO / "training-sim" / "specs" / "small.toml"

# Small settings so that each scan takes about a second; equality with the command line does
# not depend on them.
QUICK = {"replicates": 10, "surrogates": 5, "sizes": 5}
QUICK_FLAGS = ["--replicates", "10", "--surrogates", "5", "--sizes", "5"]


def _binary() -> str:
    given = os.environ.get("CCM_TRIAGE_BIN")
    if given:
        return given
    for profile in ("debug", "release"):
        p = REPO / "target" / profile / "ccm-triage"
        if p.exists():
            return str(p)
    found = shutil.which("ccm-triage")
    if found:
        return found
    pytest.fail("no ccm-triage binary: run `cargo build` or set CCM_TRIAGE_BIN")


@pytest.fixture(scope="session")
def cli():
    """Run the command line; returns the CompletedProcess (stdout and stderr as text)."""
    binary = _binary()

    def run(*args, check=True):
        p = subprocess.run([binary, "--quiet", *map(str, args)], capture_output=True,
                           text=True)
        if check and p.returncode != 0:
            raise AssertionError(f"ccm-triage {' '.join(map(str, args))} failed:\n{p.stderr}")
        return p

    return run
