"""Shared fixtures: the demo spec and a built demo packet (built once per test session)."""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import settings

from buildsheet.cli.main import demo_spec_text

# CI machines vary in speed: no per-example deadline, and a fixed example sequence so a run is
# repeatable (property tests still cover many generated cases).
settings.register_profile("buildsheet", deadline=None, derandomize=True)
settings.load_profile("buildsheet")


@pytest.fixture(scope="session")
def demo_spec(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("spec") / "demo.toml"
    path.write_text(demo_spec_text(), encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def demo_packet(tmp_path_factory: pytest.TempPathFactory, demo_spec: Path):
    """The demo packet built with the default model, as the CLI would build it."""
    from buildsheet.build import build

    out = tmp_path_factory.mktemp("packet") / "out"
    return build(demo_spec, out, built_at="2027-03-01T00:00:00Z")
