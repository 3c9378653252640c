"""Helpers for the session tests: the fixture session and a way to make variants of it in tmp_path."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

SESSIONS = Path(__file__).resolve().parents[1] / "fixtures" / "sessions"
WALK_OK = SESSIONS / "walk_ok"
BROKEN = SESSIONS / "broken"


@pytest.fixture
def walk_ok() -> Path:
    return WALK_OK


@pytest.fixture
def walk_copy(tmp_path) -> Path:
    """A private copy of the fixture session that a test may edit."""
    dst = tmp_path / "walk"
    shutil.copytree(WALK_OK, dst)
    return dst


def edit_manifest(folder: Path, old: str, new: str) -> None:
    p = folder / "session.toml"
    text = p.read_text(encoding="utf-8")
    assert old in text, f"{old!r} not in the manifest"
    p.write_text(text.replace(old, new, 1), encoding="utf-8")
