"""Shared fixtures: tiny corpora written inside the tests. Plain helpers are in helpers.py."""

from __future__ import annotations

from pathlib import Path

import pytest

from helpers import write_topic_folder


@pytest.fixture
def topic_folder(tmp_path: Path) -> Path:
    """60 notes on three well-separated invented topics (garden, bicycle, kitchen), 20 each."""
    folder = tmp_path / "notes"
    write_topic_folder(folder)
    return folder
