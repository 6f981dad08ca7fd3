"""A small invented round for the reported-uncertainty check: one lab for each thing the check can say.

Measurand ``cu`` (σ_pt = 0.4 mg/kg stated, Algorithm A consensus, scored with ζ) has twelve ordinary labs
L01-L12 reporting u = 0.2 (L12 withheld by an ``[[exclude]]``) and:

* S1: u = 0.01, below u(x_pt) (about 0.05 here): too small;
* R1: u = 0.055, above u(x_pt) but below 0.3 s_R (s_R about 0.20 from 17 labs): too small by the s_R bound;
* Z1: u = 0, always too small;
* B1: u = 0.9, above 1.5 σ_pt = 0.6: too large;
* N1: no u: "no uncertainty reported";
* J1: x = 10.6 (z about 1.5), u = 0.15: z acceptable, ζ an action signal (an understated uncertainty);
* J2: x = 11.4 (z about 3.5), u = 0.8: z an action signal, ζ acceptable (not fit for purpose; u too large);
* C1: a censored result "<9.5" with u = 0.2: no row.

Measurand ``zn``: nobody gives an uncertainty, so it has no rows. Each lab's two replicates are its mean ∓ 0.05,
so its mean is the value below. The expected values of the tests are computed from the definitions
(ISO 13528:2015 §9.8 from memory; README "Laboratories' reported uncertainties").
"""

from __future__ import annotations

from pathlib import Path

from .conftest import write_round

SIGMA_PT = 0.4
OFFSETS = (-0.3, -0.2, -0.15, -0.1, -0.05, 0.0, 0.0, 0.05, 0.1, 0.15, 0.2, 0.3)
#: lab → (mean of its cu replicates, or a censored text; its u, None when not given).
LABS: dict[str, tuple[float | str, float | None]] = {
    **{f"L{i:02d}": (10 + o, 0.2) for i, o in enumerate(OFFSETS, start=1)},
    "S1": (10.1, 0.01), "R1": (10.0, 0.055), "B1": (9.9, 0.9), "N1": (10.05, None), "Z1": (9.95, 0.0),
    "J1": (10.6, 0.15), "J2": (11.4, 0.8), "C1": ("<9.5", 0.2),
}
WITHHELD = "L12"
TOML = f"""[round]
id = "U1"
title = "Invented round for the uncertainty check"
[measurand.cu]
unit = "mg/kg"
sigma_pt = {SIGMA_PT}
score = "zeta"
decimals = 2
[measurand.zn]
unit = "mg/kg"
sigma_pt = 0.1
decimals = 2
[[exclude]]
lab = "{WITHHELD}"
measurand = "cu"
reason = "sample damaged"
scored = false
"""


def results() -> str:
    lines = ["lab,measurand,replicate,value,u"]
    for lab, (mean, u) in LABS.items():
        for rep, dv in ((1, -0.05), (2, 0.05)):
            value = mean if isinstance(mean, str) else f"{mean + dv:.4f}"
            lines.append(f"{lab},cu,{rep},{value},{'' if u is None else u}")
        lines.append(f"{lab},zn,1,{5 + (sum(map(ord, lab)) % 7) * 0.01:.2f},")
    return "\n".join(lines) + "\n"


def write(folder: Path) -> Path:
    """The round folder (round.toml and results.csv)."""
    return write_round(folder, TOML, results())
