"""Shared fixtures: the repository, the command-line binary the Python results are compared
with, and a runner for it."""

import json
import os
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
SAMPLES = ROOT / "sample-measurements"


def cli_binary() -> Path:
    """The edgetherm binary: $EDGETHERM_BIN, else the one `cargo test` or `cargo build`
    left in the target folder ($CARGO_TARGET_DIR or ./target)."""
    env = os.environ.get("EDGETHERM_BIN")
    if env:
        return Path(env)
    target = Path(os.environ.get("CARGO_TARGET_DIR", ROOT / "target"))
    for profile in ("debug", "release"):
        p = target / profile / "edgetherm"
        if p.exists():
            return p
    pytest.fail("no edgetherm binary: run `cargo build` first or set EDGETHERM_BIN")


@pytest.fixture(scope="session")
def cli():
    """Run the command line: returns (exit status, stdout, stderr)."""
    binary = cli_binary()

    def run(*args):
        r = subprocess.run([str(binary), *map(str, args)], capture_output=True, text=True)
        return r.returncode, r.stdout, r.stderr

    return run


def read_json(path: Path) -> dict:
    return json.loads(Path(path).read_text())
