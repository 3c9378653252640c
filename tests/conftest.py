"""Shared fixtures. Test data that a test writes goes to ``tmp_path``; nothing in the repo is modified."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
DEMO = REPO / "demo_walks"
FIXTURES = Path(__file__).resolve().parent / "fixtures"

os.environ.setdefault("WALKCOMFORT_NO_PROGRESS", "1")


@pytest.fixture
def repo_root() -> Path:
    return REPO


@pytest.fixture
def demo_dir() -> Path:
    return DEMO


@pytest.fixture
def fixtures_dir() -> Path:
    return FIXTURES


@pytest.fixture
def artifacts_dir() -> Path:
    """Folder for screenshots and other artefacts a person may want to look at after a run."""
    out = REPO / "test-artifacts"
    out.mkdir(exist_ok=True)
    return out
