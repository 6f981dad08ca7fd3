"""The display headings (outputs/headings.py) and the "How to read your scores" text (outputs/guidance.py)."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import dataclasses
from types import MappingProxyType

from roundscore.evaluation.precision import MANDEL_COLUMNS, METHODS_COLUMNS, SCREENS_COLUMNS
from roundscore.model.evaluation import AUDIT_COLUMNS, SCORE_COLUMNS, STATISTICS_COLUMNS
from roundscore.model.scores import SCORE_FAMILIES, SCORES
from roundscore.outputs import guidance
from roundscore.outputs.headings import HEADINGS, heading


def test_every_contract_column_has_a_heading_of_its_own():
    for columns in (SCORE_COLUMNS, STATISTICS_COLUMNS, AUDIT_COLUMNS, SCREENS_COLUMNS, MANDEL_COLUMNS,
                    METHODS_COLUMNS):
        for c in columns:
            assert c in HEADINGS, c
    # the standards' notation, not code names
    assert heading("u_assigned") == "u(x_pt)" and heading("sigma_pt") == "σ_pt"
    assert heading("made") == "MADe" and heading("niqr") == "nIQR"
    assert "critical value at 5 %" in heading("h_crit_5")
    for kind in SCORES.values():
        assert heading(kind.column) == kind.symbol


def test_no_heading_is_a_code_name():
    # the code names the issue lists must not reach a person
    for code in ("u_assigned", "robust_sd", "made", "niqr", "h_crit_5", "df2", "untested", "sigma_pt",
                 "d_percent", "n_replicates", "u_check_passed", "critical_5", "p_value"):
        assert code not in heading(code), code


def test_the_limits_are_read_from_the_registry(monkeypatch):
    text = "\n".join(guidance.guidance_lines("signals"))
    assert "|z| ≥ 3 is an action signal" in text and "|En| > 1 is an action signal" in text
    moved = {k: (dataclasses.replace(f, warning=2.5) if f.warning is not None else f)
             for k, f in SCORE_FAMILIES.items()}
    monkeypatch.setattr(guidance, "SCORE_FAMILIES", MappingProxyType(moved))
    text = "\n".join(guidance.guidance_lines("signals"))
    assert "|z| ≤ 2.5 is acceptable" in text and "|z| ≤ 2 is" not in text


def test_the_round_vocabulary_is_used():
    text = "\n".join(guidance.guidance_lines("performance"))
    assert "unsatisfactory" in text and "questionable" in text and "action signal" not in text
