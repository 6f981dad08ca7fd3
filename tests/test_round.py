"""round.toml validation (roundscore.model.round): every mistake names the file, key, what was found and allowed."""
# Source of expected values: the tool's own contract (internal behaviour); no outside reference values here.

from __future__ import annotations

import pytest

from roundscore.errors import RoundFileError
from roundscore.intake.roundfile import load_round, result_files

GOOD = """
[round]
id = "R1"
date = 2026-03-01

[measurand.lead]
unit = "mg/kg"
assigned = 0.5
u_assigned = 0.01
sigma_pt = { s_R = 0.06, s_r = 0.03, replicates = 2 }
score = "zeta"
"""


def test_good_round(make_round):
    rnd = load_round(make_round(GOOD))
    m = rnd.measurands["lead"]
    assert rnd.id == "R1" and rnd.date == "2026-03-01"
    assert m.assigned == 0.5 and m.u_assigned == 0.01 and m.score == "zeta"
    assert m.sigma_pt.kind == "precision" and m.sigma_pt.replicates == 2
    assert rnd.warnings == ()
    assert rnd.paper == "a4" and rnd.return_by == ""  # the defaults


@pytest.mark.parametrize("line, paper, return_by", [
    ('paper = "letter"\nreturn_by = 2026-11-30', "letter", "2026-11-30"),  # a TOML date
    ('paper = "a4"\nreturn_by = "2026-11-30"', "a4", "2026-11-30"),  # a date as text
])
def test_paper_and_return_by(make_round, line, paper, return_by):
    rnd = load_round(make_round(GOOD.replace('date = 2026-03-01', 'date = 2026-03-01\n' + line)))
    assert (rnd.paper, rnd.return_by) == (paper, return_by) and rnd.warnings == ()


@pytest.mark.parametrize("toml, words", [
    ('[round]\ntitle="x"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1', ["'round.id' is required"]),
    ('[round]\nid="R"\n[measurand.a]\nunit="mg/kg"\nsigma_pt="wild"',
     ["measurand.a.sigma_pt", "'wild'", "horwitz"]),
    ('[round]\nid="R"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1\nscore="t"', ["measurand.a.score", "'z-prime'"]),
    ('[round]\nid="R"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1\nassigned=3.2',
     ["u_assigned", "required when assigned is a number"]),
    ('[round]\nid="R"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=-2', ["a number > 0", "-2"]),
    ('[round]\nid="R"\n[measurand.a]\nunit="mg/kg"\nsigma_pt={ s_R = 1, s_r = 2, replicates = 2 }',
     ["s_R must exceed s_r"]),
    ('[round]\nid="R"\nresults="../elsewhere.csv"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1',
     ["round.results", "inside the round folder"]),
    ('[round]\nid="R"\n', ["at least one [measurand.NAME]"]),
    ('[round]\nid="R"\nreplicates="two"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1',
     ["round.replicates", "whole number"]),
    ('[round\nid="R"', ["not valid TOML"]),
    ('[round]\nid="R"\npaper="a3"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1', ["round.paper", "'a3'", "'letter'"]),
    ('[round]\nid="R"\nreturn_by="next week"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1',
     ["round.return_by", "'next week'", "2026-10-14"]),
])
def test_mistakes_are_named(make_round, toml, words):
    folder = make_round(toml)
    with pytest.raises(RoundFileError) as info:
        load_round(folder)
    text = str(info.value)
    assert "round.toml" in text
    for w in words:
        assert w in text


def test_all_mistakes_listed_together(make_round):
    folder = make_round('[round]\nid="R"\n[measurand.a]\nunit="mg/kg"\nsigma_pt="x"\nscore="q"\n'
                        '[measurand.b]\nsigma_pt=1\n')
    with pytest.raises(RoundFileError) as info:
        load_round(folder)
    assert len(info.value.problems) == 3  # sigma_pt, score, and b's missing unit


def test_unknown_key_warns_with_nearest(make_round):
    rnd = load_round(make_round('[round]\nid="R"\ntitel="x"\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1\nsigmapt=2\n'))
    text = " ".join(rnd.warnings)
    assert "'titel'" in text and "did you mean 'title'" in text
    assert "did you mean 'sigma_pt'" in text


def test_exclusions(make_round):
    rnd = load_round(make_round(GOOD + '\n[[exclude]]\nlab = "L3"\nreason = "sample thawed"\nscored = false\n'))
    (e,) = rnd.exclusions
    assert e.lab == "L3" and e.measurand is None and not e.scored
    with pytest.raises(RoundFileError, match=r"exclude\[1\].reason"):
        load_round(make_round(GOOD + '\n[[exclude]]\nlab = "L3"\n'))


def test_missing_round_file(tmp_path):
    with pytest.raises(RoundFileError, match="round file not found"):
        load_round(tmp_path)


def test_missing_results_file_named(make_round):
    rnd = load_round(make_round(GOOD))
    with pytest.raises(RoundFileError, match=r"'results.csv' not found"):
        result_files(rnd)


def test_limits_table_configures_the_readers(make_round):
    # Internal behaviour: [limits] sizes in MiB reach the readers (roundscore.model.limits.ReadLimits).
    from roundscore.errors import InputError
    from roundscore.intake.readers import read_results

    rows = "lab,measurand,replicate,value\n" + "".join(f"L{i},a,1,{i}.5\n" for i in range(150))
    folder = make_round('[round]\nid="R"\n[limits]\nmax_text_mib = 0.001\ntimeout = 3\n'
                        '[measurand.a]\nunit="mg/kg"\nsigma_pt=1\n', rows)
    rnd = load_round(folder)
    assert rnd.limits.max_text_bytes == int(0.001 * (1 << 20))
    assert any("did you mean 'timeout_s'" in w for w in rnd.warnings)
    with pytest.raises(InputError, match="MiB"):
        read_results(rnd)
    with pytest.raises(RoundFileError, match=r"limits.memory_mib"):
        load_round(make_round('[round]\nid="R"\n[limits]\nmemory_mib = -1\n[measurand.a]\nunit="mg/kg"\nsigma_pt=1\n'))
