"""The round-file keys of nominal and ordinal measurands (roundscore.intake.qualitative_keys)."""

from __future__ import annotations

import pytest

from roundscore.errors import RoundFileError
from roundscore.intake.roundfile import load_round
from roundscore.model.round import MEASURAND_KEYS

HEAD = '[round]\nid = "Q1"\n'


def _load(make_round, body: str):
    return load_round(make_round(HEAD + body, "lab,measurand,replicate,value\n"))


def test_nominal_with_items_aliases_and_negative(make_round):
    rnd = _load(make_round, '''
[measurand.salmonella]
kind = "nominal"
label = "Salmonella spp. in 25 g"
categories = ["detected", "not detected"]
assigned = { "QA-1" = "Detected", "QA-2" = "not  detected" }
aliases = { "+" = "detected", "ND" = "not detected" }
''')
    assert rnd.measurands == {}  # quantitative measurands only
    q = rnd.qualitative["salmonella"]
    assert q.kind == "nominal" and q.items == ("QA-1", "QA-2")
    assert dict(q.assigned_items) == {"QA-1": "detected", "QA-2": "not detected"}  # spelt as in categories
    assert q.negative == "not detected"  # NEGATIVE_WORDS (common practice)
    assert q.category_of("nd") == "not detected" and q.category_of("+") == "detected"
    assert rnd.warnings == ()


def test_ordinal_defaults_median_and_steps(make_round):
    rnd = _load(make_round, '''
[measurand.grade]
kind = "ordinal"
categories = ["negative", "weak", "positive"]
deviation_signals = { warning = 1, action = 2 }
''')
    q = rnd.qualitative["grade"]
    assert (q.assigned, q.warning_steps, q.action_steps, q.negative) == ("median", 1, 2, "negative")


@pytest.mark.parametrize(("body", "says"), [
    ('kind = "nominal"\ncategories = ["a", "b"]\n', "assigned"),  # a nominal property needs its assigned category
    ('kind = "nominal"\ncategories = ["a", "b"]\nassigned = "median"\n', "no median"),
    ('kind = "ordinal"\ncategories = ["a", "A "]\n', "letter case"),
    ('kind = "ordinal"\ncategories = ["a"]\n', "from 2 to"),
    ('kind = "ordinal"\ncategories = ["a", "b"]\naliases = { "x" = "c" }\n', "one of the categories"),
    ('kind = "ordinal"\ncategories = ["a", "b"]\naliases = { "A" = "b" }\n', "own name"),
    ('kind = "ordinal"\ncategories = ["a", "b", "c"]\ndeviation_signals = { warning = 2, action = 1 }\n',
     "warning ≤ action"),
    ('kind = "ordinal"\ncategories = ["a", "b"]\nassigned = "z"\n', "a category"),
    ('kind = "binary"\ncategories = ["a", "b"]\n', "'nominal' or 'ordinal'"),
    ('kind = "nominal"\ncategories = ["a", "b"]\nitems = ["Q1"]\nassigned = { "Q2" = "a" }\n', "not Q2"),
    ('kind = "nominal"\ncategories = ["a", "b"]\nitems = ["Q1", "Q2"]\nassigned = { "Q2" = "a" }\n',
     "Q1 has none"),
    ('unit = "mg/kg"\nsigma_pt = 1\ncategories = ["a", "b"]\n', "add kind"),
])
def test_mistakes_name_the_key(make_round, body, says):
    with pytest.raises(RoundFileError) as exc:
        _load(make_round, "[measurand.m]\n" + body)
    assert says in str(exc.value)
    assert "measurand.m" in str(exc.value)


def test_quantitative_keys_are_ignored_with_a_warning(make_round):
    rnd = _load(make_round, '[measurand.m]\nkind = "nominal"\ncategories = ["a", "b"]\nassigned = "a"\n'
                            'sigma_pt = 1\ncategorie = 2\n')
    assert any("'measurand.m.sigma_pt' is ignored" in w for w in rnd.warnings)
    assert any("did you mean 'categories'" in w for w in rnd.warnings)


def test_every_key_is_documented():
    for key in ("kind", "categories", "items", "aliases", "negative", "deviation_signals"):
        assert key in MEASURAND_KEYS


def test_exclusion_may_name_a_qualitative_measurand(make_round):
    rnd = _load(make_round, '[measurand.m]\nkind = "nominal"\ncategories = ["a", "b"]\nassigned = "a"\n'
                            '[[exclude]]\nlab = "L1"\nmeasurand = "m"\nreason = "sample lost"\n')
    assert rnd.exclusions[0].measurand == "m"
