"""Rewrite the demo round in rounds/skw-2026-14 from the seeded generator in roundscore.demo.demo_round.

Run from the project root: python rounds/make_demo.py
"""

from pathlib import Path

from roundscore.demo.demo_round import make_demo_round

if __name__ == "__main__":
    folder = make_demo_round(Path(__file__).parent / "skw-2026-14")
    print(f"wrote {folder}")
