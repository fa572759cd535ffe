"""Style: ruff (lint) on the package and the tests, as configured in pyproject.toml."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.skipif(shutil.which("ruff") is None, reason="ruff is in the test extra")
def test_ruff_clean():
    proc = subprocess.run(["ruff", "check", "simulator", "tests", "benchmarks"], cwd=ROOT,
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stdout + proc.stderr
