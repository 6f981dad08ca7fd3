"""The bundled demo round, made by a seeded generator (invented data).

Scenario (invented): *Skerrywater Proficiency Services* runs the seaweed
scheme SKW; round SKW-2026-14 sent portions of a dried kelp meal to 31
laboratories, who measured iodine, cadmium, total arsenic, lead, mercury and
moisture in duplicate. The data hold a few planted features for the tools to
find: two outlying labs, one result reported in the wrong unit (a unit slip),
one censored result, a lab that reports arsenic in µg/g (converted), a lab
that did not report moisture, and two method groups for iodine that differ a
little. Before the round the provider checked ten bottles of the kelp meal
in duplicate for iodine, cadmium and lead (``homogeneity.csv``): iodine and
lead pass easily, cadmium is borderline (it fails the simple criterion
s_s ≤ 0.3 σ_pt and passes the expanded one, so σ_pt is widened). Iodine's
checks are reported only: each lab had its own bottle, so the consensus
value's uncertainty already holds the between-bottle spread. Stability
(``stability.csv``): iodine before and after the round, and mercury in
bottles kept frozen against bottles kept two weeks at 40 °C (with the
uncertainty of each mean, so the expanded criterion is used). Results are due
by 2026-10-07 (``return_by``, printed on the blank forms); three labs say when
their sample arrived, in what condition and when they analysed it (the
results table's optional columns ``arrived``, ``condition``, ``analysed``):
K08's cool box came with its ice packs melted.

Two qualitative measurands share the round: *Salmonella* in 25 g (nominal: detected / not detected) on
two test items, KM-14S (spiked) and KM-14B (a blank), with one false negative (K09), one false positive
(K22), results typed as "pos", "+" or "ND" (mapped by the round file's aliases) and two methods (culture
and real-time PCR); and a graded sand-and-grit test (ordinal: none < trace < some < much) whose assigned
grade is the participants' median, with one lab (K26) two grades off.

``python rounds/make_demo.py`` rewrites ``rounds/skw-2026-14`` from this
module; a test checks that the committed files equal what it makes.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

__all__ = ["make_demo_round", "DEMO_ID", "DEMO_SEED"]

DEMO_ID = "SKW-2026-14"
DEMO_SEED = 20261014

ROUND_TOML = """\
# Demo round (invented data): dried kelp meal, six measurands, 31 laboratories.
[round]
id = "SKW-2026-14"
title = "Seaweed scheme round 14: elements and moisture in dried kelp meal"
scheme = "SKW"
date = "2026-10-14"
provider = "Skerrywater Proficiency Services"
material = "Dried kelp meal, test item KM-14"
results = "results.csv"
participants = "participants.csv"
replicates = 2
# The date results are due, printed on the blank forms (roundscore forms).
return_by = "2026-10-07"
# Numbers typed as text use a decimal point (1.012 is one point zero one two); one lab types decimal
# commas (0,838), which have only one reading and are read as such.
decimal = "point"

[measurand.iodine]
unit = "mg/kg"
assigned = "algorithm-a"
sigma_pt = "horwitz"
score = "z"
decimals = 0
homogeneity = "homogeneity.csv"
stability = "stability.csv"
# Each lab had its own bottle, so the consensus value's u already holds the between-bottle spread.
item_checks = "report"

[measurand.cadmium]
unit = "mg/kg"
assigned = "algorithm-a"
sigma_pt = 0.12
decimals = 3
homogeneity = "homogeneity.csv"
item_checks = "widen-sigma"

[measurand.arsenic]
label = "total arsenic"
unit = "mg/kg"
assigned = "algorithm-a"
sigma_pt = { s_R = 4.1, s_r = 1.6, replicates = 2 }
decimals = 1

[measurand.lead]
unit = "mg/kg"
assigned = 0.512
u_assigned = 0.012
sigma_pt = 0.06
score = "zeta"
decimals = 3
homogeneity = "homogeneity.csv"
item_checks = "uncertainty"

[measurand.mercury]
unit = "mg/kg"
assigned = 0.087
u_assigned = 0.003
sigma_pt = 0.013
score = "en"
decimals = 3
stability = "stability.csv"
item_checks = "uncertainty"

[measurand.moisture]
unit = "g/100 g"
assigned = "median"
sigma_pt = "robust-sd"
score = "z-prime"
decimals = 2

[measurand.salmonella]
kind = "nominal"
label = "Salmonella spp. in 25 g"
categories = ["detected", "not detected"]
assigned = { "KM-14S" = "detected", "KM-14B" = "not detected" }
aliases = { "+" = "detected", "pos" = "detected", "-" = "not detected", "ND" = "not detected" }

[measurand.grit]
kind = "ordinal"
label = "Sand and grit (graded by sieving)"
categories = ["none", "trace", "some", "much"]
assigned = "median"
deviation_signals = { warning = 1, action = 2 }
"""

# name: (true value, between-lab SD, within-lab SD, decimals)
_MEASURANDS = {
    "iodine": (2480.0, 95.0, 40.0, 0),
    "cadmium": (0.846, 0.07, 0.025, 3),
    "arsenic": (47.3, 3.6, 1.5, 1),
    "lead": (0.512, 0.045, 0.018, 3),
    "mercury": (0.087, 0.009, 0.004, 3),
    "moisture": (9.62, 0.22, 0.08, 2),
}
_METHODS = {
    "iodine": ("ICP-MS after alkaline extraction", "iodometric titration"),
    "arsenic": ("ICP-MS", "hydride generation AAS"),
}
_NAMES = [
    "Aldgrove Food Laboratory", "Brackenmoor Analytical", "Cairnloch Testing Services", "Dunmere Marine Lab",
    "Eastholm Public Analyst", "Fennick Agri-Food Labs", "Glenvarra Chemical Services", "Harlow Bay Analysis",
    "Inchcroft Laboratories", "Juniper Ridge Testing", "Kestrel Point Analytical", "Lowmoss Food Safety Lab",
    "Marrowdale Environmental", "Northwick Trace Metals", "Orrin Valley Labs", "Pendle Coast Analysis",
    "Quarrystone Scientific", "Ravensford Laboratory", "Saltcote Analytical", "Thornbury Marine Chemistry",
    "Ulverholm Test House", "Vale of Ashby Labs", "Westerlea Analytical", "Yarrowfield Food Lab",
    "Zennor Sound Laboratory", "Amberley Shore Testing", "Birchcliff Analytical", "Coldharbour Labs",
    "Drumlin Chemical", "Elsdon Trace Analysis", "Fairhaven Quality Lab",
]


def _fmt(v: float, d: int) -> str:
    return f"{v:.{d}f}"


# Item checks (invented). name: (level, between-bottle SD, within-bottle SD, decimals written).
_HOMOGENEITY = {
    "iodine": (2480.0, 14.0, 24.0, 0),
    "cadmium": (0.846, 0.058, 0.020, 3),  # borderline: s_s between 0.3 sigma_pt and the expanded allowance
    "lead": (0.512, 0.004, 0.008, 3),
}
_BOTTLES = [f"KM-14-{i:03d}" for i in (3, 17, 29, 41, 58, 66, 72, 85, 91, 104)]
# name: (level, first set, second set, shift of the second set, within SD, decimals, u of each mean or None)
_STABILITY = {
    "iodine": (2480.0, "before", "after", -18.0, 22.0, 0, None),
    "mercury": (0.087, "frozen", "40 °C", -0.0012, 0.0015, 4, 0.0008),
}


def _write_item_tables(folder: Path, seed: int) -> None:
    """homogeneity.csv and stability.csv from their own generator (results.csv is not disturbed)."""
    rng = np.random.default_rng([seed, 2])
    with open(folder / "homogeneity.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["measurand", "item", "replicate", "value"])
        for name, (level, s_s, s_w, d) in _HOMOGENEITY.items():
            bottle = rng.normal(0.0, s_s, len(_BOTTLES))
            for b, item in zip(bottle, _BOTTLES):
                for rep in (1, 2):
                    w.writerow([name, item, rep, _fmt(level + b + rng.normal(0.0, s_w), d)])
    with open(folder / "stability.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["measurand", "item", "replicate", "value", "set", "u"])
        for name, (level, first, second, shift, s_w, d, u) in _STABILITY.items():
            for set_name, delta, items in ((first, 0.0, _BOTTLES[:3]), (second, shift, _BOTTLES[-3:])):
                for item in items:
                    for rep in (1, 2):
                        w.writerow([name, item, rep, _fmt(level + delta + rng.normal(0.0, s_w), d), set_name,
                                    "" if u is None else _fmt(u, d + 1)])


def _qualitative_rows(labs: list[str], seed: int) -> list[list[object]]:
    """The salmonella and grit results, from their own generator (the numbers' results are not disturbed)."""
    rng = np.random.default_rng([seed, 3])
    rows: list[list[object]] = []
    for li, lab in enumerate(labs):
        method = "real-time PCR" if li % 3 == 1 else "culture"
        for item, truth in (("KM-14S", "detected"), ("KM-14B", "not detected")):
            word = truth
            if (lab, item) == ("K09", "KM-14S"):
                word = "not detected"  # a false negative
            if (lab, item) == ("K22", "KM-14B"):
                word = "detected"  # a false positive
            if lab == "K05":
                word = {"detected": "pos", "not detected": "ND"}[word]  # other spellings, mapped by aliases
            if lab == "K17":
                word = {"detected": "+", "not detected": "Not Detected"}[word]
            rows.append([lab, "salmonella", 1, word, "", "", "", "", method, item])
        grade = ["none", "trace", "some"][int(rng.choice(3, p=[0.15, 0.7, 0.15]))]
        if lab == "K26":
            grade = "much"  # two grades above the median
        rows.append([lab, "grit", 1, grade, "", "", "", "", "", ""])
    return rows


#: The sample receipts some labs gave (invented): the results table's optional columns arrived, condition and
#: analysed, on the lab's first row; they reach the audit trail and the lab's score sheet and page.
_RECEIPTS = {"K03": ("2026-09-22", "intact", "2026-09-29"),
             "K08": ("2026-09-25", "cool box, ice packs melted", "2026-09-30"),
             "K21": ("2026-09-23", "", "")}


def make_demo_round(folder: str | Path, *, seed: int = DEMO_SEED) -> Path:
    """Write the demo round (round.toml, results.csv, participants.csv, item tables) into ``folder``."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    labs = [f"K{i:02d}" for i in range(1, len(_NAMES) + 1)]
    rows: list[list[object]] = []
    for name, (true, s_L, s_r, d) in _MEASURANDS.items():
        bias = rng.normal(0.0, s_L, len(labs))
        for li, lab in enumerate(labs):
            method = ""
            if name in _METHODS:
                group = li % 3 == 0  # about a third use the second method
                method = _METHODS[name][1 if group else 0]
                if name == "iodine" and group:
                    bias[li] += 0.9 * s_L  # the titration group reads a little high
            unit = "mg/kg" if name != "moisture" else "g/100 g"
            u_txt = U_txt = k_txt = ""
            for rep in (1, 2):
                v = true + bias[li] + rng.normal(0.0, s_r)
                text = _fmt(v, d)
                if name == "iodine" and lab == "K07":
                    text = _fmt(v + 6.5 * s_L, d)  # outlying high
                if name == "cadmium" and lab == "K19":
                    text = _fmt(v * 1000.0, 0)  # reported in µg/kg under mg/kg: a unit slip
                if name == "cadmium" and lab == "K11":
                    text = _fmt(v - 5.0 * s_L, d)  # outlying low
                if name == "arsenic" and lab == "K04":
                    unit = "µg/g"  # same quantity, another spelling: converted
                if name == "mercury" and lab == "K23":
                    text = "<0.1"  # censored: the lab's limit is above the level
                if name == "moisture" and lab == "K30":
                    text = ""  # not reported
                if name == "lead" and li % 4 != 1:
                    u_txt = _fmt(max(0.6 * s_L, 0.01), 3)
                if name == "mercury" and li % 3 != 2:
                    U_txt, k_txt = _fmt(max(1.6 * s_L, 0.004), 3), "2"
                if name in ("cadmium", "lead") and lab == "K15":
                    text = text.replace(".", ",")  # decimal comma, as some labs type it
                rows.append([lab, name, rep, text, unit, u_txt, U_txt, k_txt, method, ""])
    rows += _qualitative_rows(labs, seed)
    first: dict[object, int] = {}
    for i, row in enumerate(rows):
        first.setdefault(row[0], i)
    rows = [row + list(_RECEIPTS[row[0]] if row[0] in _RECEIPTS and first[row[0]] == i else ("", "", ""))
            for i, row in enumerate(rows)]
    with open(folder / "results.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["lab", "measurand", "replicate", "value", "unit", "u", "U", "k", "method", "item", "arrived",
                    "condition", "analysed"])
        w.writerows(rows)
    with open(folder / "participants.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["lab", "name", "contact"])
        for lab, nm in zip(labs, _NAMES):
            slug = nm.lower().replace(" ", "-").replace("'", "")
            w.writerow([lab, nm, f"pt-contact@{slug}.example"])
    _write_item_tables(folder, seed)
    (folder / "round.toml").write_text(ROUND_TOML, encoding="utf-8")
    return folder
