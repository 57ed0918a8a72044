"""Shared test fixtures (owned by the foundation; other test files keep their own)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = ROOT / "examples"
ARTIFACTS = ROOT / "artifacts"

# a private code-generation cache unless the caller chose one (tools/test.sh does)
os.environ.setdefault("CABLEKIT_CACHE_DIR", tempfile.mkdtemp(prefix="cablekit-test-cache-"))


def example_paths() -> list[Path]:
    return sorted(EXAMPLES.glob("*.toml"))


@pytest.fixture(scope="session")
def examples_dir() -> Path:
    return EXAMPLES


@pytest.fixture(scope="session")
def artifacts_dir() -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS


@pytest.fixture(scope="session")
def greenhouse():
    from cablekit.design import load_design

    return load_design(EXAMPLES / "greenhouse_tray_3cable.toml")


@pytest.fixture(scope="session")
def camera4():
    from cablekit.design import load_design

    return load_design(EXAMPLES / "workshop_camera_4cable.toml")


@pytest.fixture(scope="session")
def sander8():
    from cablekit.design import load_design

    return load_design(EXAMPLES / "hall_sander_8cable.toml")
