"""The committed demo round equals what its seeded generator makes (internal check; invented data)."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

from roundscore.demo.demo_round import make_demo_round

from .conftest import DEMO


def test_committed_demo_matches_generator(tmp_path):
    made = make_demo_round(tmp_path / "d")
    names = sorted(p.name for p in DEMO.iterdir() if p.is_file())
    assert names == sorted(p.name for p in made.iterdir() if p.is_file())
    for name in names:
        assert (made / name).read_bytes() == (DEMO / name).read_bytes(), f"run python rounds/make_demo.py ({name})"
