"""The sensitivity table of the assigned value and the laboratories' reported uncertainties, as page blocks.

For the round report (labs by code only): :func:`sensitivity_section`, the estimates of ``consensus.csv``
side by side per measurand (value, u, the robust SD each implies, the chosen one marked, the flag and why),
and :func:`uncertainty_blocks`, the count of implausible reported uncertainties and the rows found so. For a
lab's own page: :func:`lab_uncertainty_section`, its uncertainty check beside its ζ and En. HTML and PDF draw
the same blocks; everything is read from the evaluation's extras (nothing is recomputed).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from roundscore.evaluation.consensus import SENSITIVITY_SIGMA_FACTOR, SENSITIVITY_U_FACTOR
from roundscore.evaluation.uncertainty import FLAGGED, LAB_EXPLANATION, RULE, counts
from roundscore.model.scores import SCORES
from roundscore.outputs.document import Block, Bullets, Cell, Column, Heading, Paragraph, Section, Table
from roundscore.outputs.headings import heading
from roundscore.outputs.frames import frame_table, more_places, number_text

__all__ = ["sensitivity_section", "uncertainty_blocks", "lab_uncertainty_section", "SENSITIVITY_TABLE_MAX_ROWS",
           "UNCERTAINTY_TABLE_MAX_ROWS"]

#: Above this many rows (measurands × 5 estimates) the report lists only the flagged measurands' rows; every row
#: is in consensus.csv (common practice, as for Mandel's table: thousands of rows are read in a spreadsheet).
SENSITIVITY_TABLE_MAX_ROWS = 1000
#: At most this many implausible uncertainties are listed in the report; every row is in uncertainties.csv.
UNCERTAINTY_TABLE_MAX_ROWS = 1000

_SENSITIVITY_COLUMNS = ("measurand", "method", "value", "u", "robust_sd", "sigma_pt", "chosen", "n", "flag")


def sensitivity_section(ev) -> Section | None:
    """The round report's section "Sensitivity of the assigned value" (None without a consensus table)."""
    c = ev.extras.get("consensus")
    if c is None or not len(c):
        return None
    blocks: list[Block] = [Paragraph(text=(
        "For every measurand, the assigned value each estimator gives on the same laboratories' results, with "
        "its standard uncertainty u and the robust SD it implies (s* for Algorithm A and Q/Hampel, MADe for the "
        "median). The estimator the round file chooses is marked chosen, and so is the last row of each "
        "measurand: the assigned value the scores use (a stated value, or the estimate with any allowance for "
        "the test items in its u). A "
        f"measurand is flagged when two estimates differ by more than {SENSITIVITY_U_FACTOR:g}·√(u₁² + u₂²) "
        f"(where both u are known) or by more than {SENSITIVITY_SIGMA_FACTOR:g} σ_pt (roundscore's rule): the "
        "choice of estimator then matters and is worth justifying. The kernel mode's u, its bootstrap standard "
        "error, is computed only when it is the assigned value."))]
    flagged = c[c["flag"].astype(bool)]
    shown = c
    if len(c) > SENSITIVITY_TABLE_MAX_ROWS:
        shown = flagged
        blocks.append(Paragraph(text=f"{flagged['measurand'].nunique()} of {c['measurand'].nunique()} measurands "
                                     "are flagged and listed here; every estimate is in consensus.csv.",
                                style="note"))
    if len(shown):
        frame = shown.assign(chosen=["chosen" if v else "" for v in shown["chosen"].astype(bool)],
                             flag=["flagged" if v else "no" for v in shown["flag"].astype(bool)])
        blocks.append(frame_table(ev, frame, _SENSITIVITY_COLUMNS, decimals={"n": 0}, key_columns=2,
                                  table="consensus"))
    whys = flagged.drop_duplicates("measurand")
    if len(whys):
        blocks += [Heading(text="Why flagged", level=3),
                   Bullets(items=tuple(f"{m}: {w}" for m, w in zip(whys["measurand"], whys["why"])))]
    else:
        blocks.append(Paragraph(text="No measurand is flagged: the estimates agree within the rule.", style="note"))
    return Section(heading=Heading(text="Sensitivity of the assigned value to the estimator", level=2,
                                   anchor="sensitivity"), blocks=tuple(blocks))


def uncertainty_blocks(ev) -> list[Block]:
    """The round report's blocks on the reported uncertainties: the count, the rule, the rows found
    implausible or noted for z and ζ (empty when no laboratory reported an uncertainty)."""
    t = ev.extras.get("uncertainties")
    got = counts(t)
    if t is None or got is None:
        return []
    blocks: list[Block] = [Heading(text="Laboratories' reported uncertainties", level=3),
                           Paragraph(text=got.line(capital=True) + "."), Paragraph(text=RULE, style="note")]
    noted = t[t["check"].isin(FLAGGED) | (t["joint"].astype(str) != "")]
    if len(noted) > UNCERTAINTY_TABLE_MAX_ROWS:
        blocks.append(Paragraph(text=f"The first {UNCERTAINTY_TABLE_MAX_ROWS} of {len(noted)} rows are listed; "
                                     "every row is in uncertainties.csv.", style="note"))
        noted = noted.iloc[:UNCERTAINTY_TABLE_MAX_ROWS]
    if len(noted):
        blocks.append(frame_table(ev, noted, ["lab", "measurand", "u", "u_min", "u_max", "reading", "joint"],
                                  key_columns=2, table="uncertainties"))
    return blocks


def lab_uncertainty_section(ev, lab: str, rows: Sequence[dict[str, Any]],
                            scores: Sequence[dict[str, Any]]) -> Section | None:
    """A lab's section "Your reported uncertainties": per measurand its u, the plausible range, its ζ and En
    and what they say, in plain words (None when the lab has no row in the ``uncertainties`` table)."""
    if not rows:
        return None
    places = {n: m.decimals for n, m in ev.round.measurands.items()}
    by_measurand = {rec["measurand"]: rec for rec in scores}
    zeta, en = SCORES["zeta"], SCORES["en"]
    columns = (Column(title="Measurand"), Column(title="Your u", numeric=True),
               Column(title=heading("u_min"), numeric=True), Column(title=heading("u_max"), numeric=True),
               Column(title=zeta.symbol, numeric=True), Column(title=en.symbol, numeric=True),
               Column(title="Reading"), Column(title="What it asks of you"))
    body = []
    for rec in rows:
        m = rec["measurand"]
        d = more_places(places.get(m))
        score = by_measurand.get(m, {})
        joint = str(rec.get("joint") or "")
        reading = str(rec["reading"] or "") + (f"; z and ζ read together: {joint}" if joint else "")
        body.append((Cell(text=m), Cell(text=number_text(rec["u"], d)),
                     Cell(text=number_text(rec["u_min"], d)), Cell(text=number_text(rec["u_max"], d)),
                     Cell(text=number_text(score.get(zeta.column), 2)),
                     Cell(text=number_text(score.get(en.column), 2)),
                     Cell(text=reading[:1].upper() + reading[1:]), Cell(text=str(rec.get("advice") or ""))))
    return Section(heading=Heading(text="Your reported uncertainties", level=2, anchor="your-uncertainties"),
                   blocks=(Paragraph(text=LAB_EXPLANATION),
                           Table(columns=columns, rows=tuple(body), key_columns=1)))

