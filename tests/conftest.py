"""Shared fixtures: tiny corpora written inside the tests, and the open corpora when fetched."""

from __future__ import annotations

from pathlib import Path

import pytest

TOPICS = {
    "garden": ["soil", "compost", "seedling", "watering", "spade", "mulch", "greenhouse", "pruning"],
    "bicycle": ["chain", "saddle", "pedal", "spoke", "brake", "gear", "puncture", "handlebar"],
    "kitchen": ["oven", "flour", "dough", "whisk", "simmer", "saucepan", "recipe", "butter"],
}


def write_topic_folder(folder: Path, per_topic: int = 20, seed: int = 1) -> dict[str, str]:
    """Three well-separated invented topics as .txt files; returns file name -> topic."""
    import random

    rng = random.Random(seed)
    folder.mkdir(parents=True, exist_ok=True)
    truth = {}
    for topic, words in TOPICS.items():
        for i in range(per_topic):
            body = " ".join(rng.choice(words) for _ in range(30))
            name = f"{topic}-{i:02d}.txt"
            (folder / name).write_text(f"A note on {topic} number {i}\n{body}\n", encoding="utf-8")
            truth[name] = topic
    return truth


@pytest.fixture
def topic_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "notes"
    write_topic_folder(folder)
    return folder
