"""What `roundscore check` says changed since the previous check (roundscore/commands/changes.py)."""
# Source of expected values: the tool's own contract (the two checks' own evaluations); no outside reference values.

from __future__ import annotations

import json
import re
import shutil

import pytest

from roundscore.cli import main
from roundscore.commands.changes import SUMMARY_NAME, compare, changes_text, check_summary
from roundscore.demo.big_round import make_big_round
from roundscore.intake.cache import CACHE_FOLDER
from roundscore.pipeline import load_and_evaluate


@pytest.fixture(scope="module")
def big(tmp_path_factory):
    return make_big_round(tmp_path_factory.mktemp("ch") / "r", labs=12, measurands=4, replicates=2, jobs=1).folder


def test_first_check_has_nothing_to_compare_then_an_exclusion_shows(big, tmp_path, capsys):
    rnd = tmp_path / "r"
    shutil.copytree(big, rnd)
    main(["check", str(rnd), "--jobs", "1"])
    assert "no earlier check of this round" in capsys.readouterr().out
    main(["check", str(rnd), "--jobs", "1"])
    out = capsys.readouterr().out
    assert "no assigned value or σ_pt moved" in out and "no lab changed signal" in out
    before = load_and_evaluate(rnd, jobs=1)
    lab = before.scores.sort_values("z", key=abs, ascending=False)["lab"].iloc[0]  # the most outlying lab
    toml = rnd / "round.toml"
    text = toml.read_text(encoding="utf-8")
    fixed = re.search(r"^sigma_pt = ([0-9.]+)$", text, re.M)  # the first fixed σ_pt, made ten times smaller
    text = text[:fixed.start(1)] + repr(float(fixed.group(1)) / 10) + text[fixed.end(1):]
    toml.write_text(text + f'\n[[exclude]]\nlab = "{lab}"\nreason = "late return"\n', encoding="utf-8")
    after = load_and_evaluate(rnd, jobs=1)
    main(["check", str(rnd), "--jobs", "1"])
    out = capsys.readouterr().out
    moved = 0
    for name, m in after.measurands.items():
        d = m.settings.decimals
        old, new = before.measurands[name].assigned, m.assigned
        line = f"{name}: assigned {old:.{d}f} → {new:.{d}f}"
        if f"{old:.{d}f}" != f"{new:.{d}f}":
            moved += 1
            assert line in out, out
        else:
            assert f"{name}: assigned" not in out
    assert moved, "excluding the most outlying lab moves a consensus value"
    changed = compare(check_summary(before), after)
    assert changed.labs > 0  # a σ_pt ten times smaller changes signals
    assert f"  {changed.labs} lab{'s' if changed.labs > 1 else ''} changed signal ({len(changed.signals)} score" in out
    assert "--changes lists them" in out
    sigma = [n for n, m in after.measurands.items() if m.sigma_pt != before.measurands[n].sigma_pt]
    assert sigma and all(f"{n}: σ_pt " in out for n in sigma)
    # The summary was replaced by this check's: checking again shows no change, and --changes lists none.
    main(["check", str(rnd), "--jobs", "1", "--changes"])
    assert "no lab changed signal" in capsys.readouterr().out
    listed = changes_text(changed, listed=True)
    assert all(f"    {lab_} {m}: " in listed for lab_, m, _, _ in changed.signals)


def test_a_damaged_or_foreign_summary_is_no_previous_check(big, tmp_path, capsys):
    rnd = tmp_path / "r"
    shutil.copytree(big, rnd)
    main(["check", str(rnd), "--jobs", "1"])
    path = rnd / "out" / CACHE_FOLDER / SUMMARY_NAME
    data = json.loads(path.read_text(encoding="utf-8"))
    for bad in ("{not json", json.dumps({**data, "round": "OTHER-1"}),
                json.dumps({**data, "measurands": {"iron": {"assigned": "1e999", "sigma_pt": 1, "decimals": 2}}})):
        path.write_text(bad, encoding="utf-8")
        capsys.readouterr()
        main(["check", str(rnd), "--jobs", "1"])
        assert "no earlier check of this round" in capsys.readouterr().out
