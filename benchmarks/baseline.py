"""The straightforward baseline: the round scored as a capable analyst would in a notebook.

It is deliberately plain, not deliberately slow: pandas.read_excel with
openpyxl per returned form, a per-measurand Python loop running Algorithm A
on that measurand's lab means, the scores with pandas, and openpyxl writing
each lab's score sheet (with a bar chart of its scores) and the summary.
It implements the same settings as the round file (consensus by Algorithm A
or the median, reference values; σ_pt fixed, Horwitz or the robust SD;
z, z′, ζ, En), so its work is comparable to the tool's, without the tool's
checks, audit trail, figures or report.

Invented data only (the round comes from ``roundscore.demo.big_round``).
"""

from __future__ import annotations

import math
import time
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd

__all__ = ["run_baseline"]


def _algorithm_a(x: np.ndarray) -> tuple[float, float]:
    """ISO 13528 Algorithm A on one set of lab means, iterated until nothing changes (1e-10 × s*)."""
    m = float(np.median(x))
    s = 1.483 * float(np.median(np.abs(x - m)))
    if s == 0:
        return m, 0.0
    for _ in range(2000):
        w = np.clip(x, m - 1.5 * s, m + 1.5 * s)
        new_m = float(w.mean())
        new_s = 1.134 * float(w.std(ddof=1))
        done = abs(new_m - m) <= 1e-10 * s and abs(new_s - s) <= 1e-10 * s
        m, s = new_m, new_s
        if done:
            break
    return m, s


def _horwitz(c: float) -> float:
    # Thompson's modification of the Horwitz function (c as a mass fraction).
    if c < 1.2e-7:
        return 0.22 * c
    if c > 0.138:
        return 0.01 * c ** 0.5
    return 0.02 * c ** 0.8495


def _read(folder: Path) -> tuple[pd.DataFrame, dict]:
    settings = tomllib.loads((folder / "round.toml").read_text(encoding="utf-8"))
    frames = []
    for path in sorted((folder / settings["round"]["results"]).glob("*.xlsx")):
        sheets = pd.read_excel(path, sheet_name=["Results", "form-info"], header=None, engine="openpyxl")
        info = dict(zip(sheets["form-info"][0], sheets["form-info"][1]))
        res = sheets["Results"]
        table = res.iloc[9:].copy()
        table.columns = list(res.iloc[8])
        table = table[table["Measurand"].isin(settings["measurand"].keys())]
        table["lab"] = info["lab"]
        frames.append(table)
    data = pd.concat(frames, ignore_index=True)
    return data, settings


def _evaluate(data: pd.DataFrame, settings: dict) -> tuple[pd.DataFrame, pd.DataFrame]:
    reps = [c for c in data.columns if str(c).startswith("Result ")]
    values = data[reps].apply(pd.to_numeric, errors="coerce")
    data = data.assign(mean=values.mean(axis=1), u=pd.to_numeric(data["Standard uncertainty u"], errors="coerce"),
                       U=pd.to_numeric(data["Expanded uncertainty U"], errors="coerce"))
    data.loc[values.isna().any(axis=1), "mean"] = np.nan  # a censored or missing replicate
    data["u"] = data["u"].fillna(data["U"] / 2)
    stats_rows, score_frames = [], []
    for name, m in settings["measurand"].items():
        d = data[data["Measurand"] == name]
        x = d["mean"].dropna().to_numpy(float)
        xs, ss = _algorithm_a(x)
        if m["assigned"] == "algorithm-a":
            x_pt, u_pt = xs, 1.25 * ss / math.sqrt(len(x))
        elif m["assigned"] == "median":
            med = float(np.median(x))
            x_pt, u_pt = med, 1.25 * 1.483 * float(np.median(np.abs(x - med))) / math.sqrt(len(x))
        else:
            x_pt, u_pt = float(m["assigned"]), float(m.get("u_assigned", 0.0))
        sig = m["sigma_pt"]
        s_pt = ss if sig == "robust-sd" else (_horwitz(x_pt * 1e-6) / 1e-6 if sig == "horwitz" else float(sig))
        score = m.get("score", "z")
        out = pd.DataFrame({"lab": d["lab"], "measurand": name, "result": d["mean"], "assigned": x_pt,
                            "u_assigned": u_pt, "sigma_pt": s_pt})
        out["z"] = (out["result"] - x_pt) / s_pt
        out["z_prime"] = (out["result"] - x_pt) / math.sqrt(s_pt ** 2 + u_pt ** 2)
        out["zeta"] = (out["result"] - x_pt) / np.sqrt(d["u"] ** 2 + u_pt ** 2)
        out["en"] = (out["result"] - x_pt) / np.sqrt((2 * d["u"]) ** 2 + (2 * u_pt) ** 2)
        col = {"z": "z", "z-prime": "z_prime", "zeta": "zeta", "en": "en"}[score]
        lim = (1.0, 1.0) if score == "en" else (2.0, 3.0)
        a = out[col].abs()
        out["signal"] = np.where(a.isna(), "not scored", np.where(a <= lim[0], "acceptable",
                                                                  np.where(a < lim[1], "warning", "action")))
        out["score"] = out[col]
        score_frames.append(out)
        stats_rows.append({"measurand": name, "p": len(x), "assigned": x_pt, "u_assigned": u_pt, "sigma_pt": s_pt,
                           "robust_mean": xs, "robust_sd": ss})
    return pd.concat(score_frames, ignore_index=True), pd.DataFrame(stats_rows)


def _write(scores: pd.DataFrame, stats: pd.DataFrame, out: Path) -> None:
    from openpyxl import Workbook
    from openpyxl.chart import BarChart, Reference

    out.mkdir(parents=True, exist_ok=True)
    (out / "labs").mkdir(exist_ok=True)
    scores.to_csv(out / "scores.csv", index=False)
    stats.to_csv(out / "statistics.csv", index=False)
    with pd.ExcelWriter(out / "round-summary.xlsx", engine="openpyxl") as xw:
        stats.to_excel(xw, sheet_name="Statistics", index=False)
        scores.to_excel(xw, sheet_name="Scores", index=False)
    cols = list(scores.columns)
    for lab, own in scores.groupby("lab", sort=True):
        wb = Workbook()
        ws = wb.active
        ws.title = "Scores"
        ws.append(cols)
        for row in own.itertuples(index=False):
            ws.append([None if isinstance(v, float) and math.isnan(v) else v for v in row])
        chart = BarChart()
        chart.type = "bar"
        chart.title = f"Laboratory {lab}: scores by measurand"
        chart.add_data(Reference(ws, min_col=cols.index("score") + 1, min_row=1, max_row=len(own) + 1),
                       titles_from_data=True)
        chart.set_categories(Reference(ws, min_col=2, min_row=2, max_row=len(own) + 1))
        ws.add_chart(chart, "N2")
        st = wb.create_sheet("Round statistics")
        st.append(list(stats.columns))
        for row in stats.itertuples(index=False):
            st.append(list(row))
        wb.save(out / "labs" / f"{lab}.xlsx")


def run_baseline(folder: str | Path, out: str | Path) -> dict[str, float]:
    """Read, evaluate and write the round at ``folder`` the notebook way; seconds per stage."""
    folder, out = Path(folder), Path(out)
    t0 = time.perf_counter()
    data, settings = _read(folder)
    t1 = time.perf_counter()
    scores, stats = _evaluate(data, settings)
    t2 = time.perf_counter()
    _write(scores, stats, out)
    t3 = time.perf_counter()
    return {"read": t1 - t0, "evaluate": t2 - t1, "write": t3 - t2, "total": t3 - t0,
            "labs": int(scores["lab"].nunique())}
