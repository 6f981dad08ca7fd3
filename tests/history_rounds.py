"""A small invented archive for the investigation and lab-pack tests: nine water rounds and two soil rounds.

Every round is a small round folder (``conftest.write_round``, as ``make_round`` writes them) scored by the
pipeline with CSV outputs only, into one archive. The assigned values and σ_pt are fixed numbers in
round.toml, so each z-score is (x − x_pt) / σ_pt by construction (ISO 13528:2022 §9.4) and the series below
are the planted scores:

* lab L01, lead: a drift, every score above 0, so the run rule fires at the ninth round (rule 3: nine in a
  row on one side, Nelson 1984 test 2) and the upper CUSUM (k = 0.5, h = 4, Page 1954) passes h at round 8:
  the sums z − 0.5 add to 0, 0.3, 1.0, 1.6, 2.4, 3.1, 3.9, 4.9 (> 4: alarm, restart), 0.8;
* lab L01, nitrate: one action signal, z = 3.6 in round 4 (ISO 13528:2022: |z| ≥ 3);
* labs L02 to L05: ordinary scores, with a warning signal or two, so the counts are not all one signal;
* the soil scheme: the same laboratory takes part as ``S-17`` (recorded with ``history alias``).
"""

from __future__ import annotations

import contextlib
import io
from dataclasses import dataclass
from pathlib import Path

from roundscore.cli import main

from .conftest import write_round

WATER_ROUNDS = tuple((f"AQ-25-{i:02d}", f"2025-{i:02d}-15") for i in range(1, 10))
SOIL_ROUNDS = (("SL-25-A", "2025-03-20"), ("SL-25-B", "2025-09-20"))
#: Planted z-scores by (lab, measurand), one per water round.
WATER_Z = {
    ("L01", "lead"): (0.4, 0.8, 1.2, 1.1, 1.3, 1.2, 1.3, 1.5, 1.3),
    ("L01", "nitrate"): (0.2, -0.5, 0.1, 3.6, -0.2, 0.3, -0.1, 0.4, -0.3),
    ("L02", "lead"): (-0.6, 0.3, -1.1, 0.9, -0.2, 2.4, -0.8, 0.1, 0.5),
    ("L02", "nitrate"): (1.0, -0.4, 0.6, -1.3, 0.2, -0.7, 1.1, -0.2, 0.0),
    ("L03", "lead"): (0.7, -1.4, 0.2, -0.3, 1.6, -0.9, 0.4, -2.2, 0.6),
    ("L03", "nitrate"): (-0.8, 1.2, -0.1, 0.5, -1.6, 0.9, -0.4, 1.3, -0.5),
    ("L04", "lead"): (1.5, -0.2, 0.8, -1.7, 0.3, 0.6, -1.2, 0.9, -0.4),
    ("L04", "nitrate"): (-0.3, 0.7, -2.6, 0.2, 0.8, -0.6, 0.3, -0.9, 1.4),
    ("L05", "lead"): (-1.2, 0.5, -0.4, 0.6, -0.7, 0.2, 1.0, -0.5, -0.9),
    ("L05", "nitrate"): (0.5, -1.1, 0.9, -0.6, 1.3, -0.2, -0.8, 0.6, -1.0),
}
#: Planted z-scores of the soil scheme (lab S-17 is L01's laboratory; S-02 another one).
SOIL_Z = {("S-17", "copper"): (0.6, -2.3), ("S-02", "copper"): (-0.4, 0.9), ("S-03", "copper"): (0.1, -0.2)}
ASSIGNED = {"lead": 10.0, "nitrate": 25.0, "copper": 40.0}
SIGMA = {"lead": 0.5, "nitrate": 2.0, "copper": 4.0}

TOML = """\
[round]
id = "{id}"
title = "{title}"
scheme = "{scheme}"
date = "{date}"
results = "results.csv"
replicates = 1
{measurands}
"""
MEASURAND = """
[measurand.{name}]
unit = "mg/L"
assigned = {assigned}
sigma_pt = {sigma}
u_assigned = 0.0
decimals = 2
"""


def run_cli(*argv: object) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


@dataclass(frozen=True)
class SmallArchive:
    """The archive and each round's scores.csv, by round id."""

    archive: Path
    scores: dict[str, Path]


def _round(folder: Path, *, round_id: str, date: str, scheme: str, title: str,
           planted: dict[tuple[str, str], tuple[float, ...]], k: int) -> Path:
    names = sorted({m for _, m in planted})
    toml = TOML.format(id=round_id, title=title, scheme=scheme, date=date, measurands="".join(
        MEASURAND.format(name=m, assigned=ASSIGNED[m], sigma=SIGMA[m]) for m in names))
    lines = ["lab,measurand,replicate,value"]
    for (lab, m), zs in sorted(planted.items()):
        lines.append(f"{lab},{m},1,{ASSIGNED[m] + SIGMA[m] * zs[k]:.4f}")
    return write_round(folder, toml, "\n".join(lines) + "\n")


def build(base: Path) -> SmallArchive:
    """Score every round into ``base/archive.sqlite`` (CSV outputs only) and name S-17's laboratory."""
    db = base / "archive.sqlite"
    scores = {}
    for scheme, rounds, planted, title in (("AQ", WATER_ROUNDS, WATER_Z, "Invented water round"),
                                           ("SOIL", SOIL_ROUNDS, SOIL_Z, "Invented soil round")):
        for k, (round_id, date) in enumerate(rounds):
            folder = _round(base / round_id, round_id=round_id, date=date, scheme=scheme, title=title,
                            planted=planted, k=k)
            code, _, err = run_cli("score", folder, "--archive", db, "--out", folder / "out",
                                   "--formats", "csv")
            assert code == 0, err
            scores[round_id] = folder / "out" / "scores.csv"
    for scheme, lab in (("AQ", "L01"), ("SOIL", "S-17")):
        code, _, err = run_cli("history", "alias", "--archive", db, "--scheme", scheme, "--lab", lab,
                               "--name", "Riverside Water Laboratory")
        assert code == 0, err
    return SmallArchive(archive=db, scores=scores)
