"""Shared fixtures: the demo models, calibrated once per test session."""

from __future__ import annotations

from pathlib import Path

import pytest
from partload.plant.model import load_model

ROOT = Path(__file__).resolve().parent.parent
MODELS = ROOT / "models"
CASES = ROOT / "cases"


@pytest.fixture(scope="session")
def reheat_model():
    return load_model(MODELS / "demo_reheat_unit.toml")


@pytest.fixture(scope="session")
def industrial_model():
    return load_model(MODELS / "demo_industrial_unit.toml")
