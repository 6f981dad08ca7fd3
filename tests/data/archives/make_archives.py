"""Write the reference archives of this folder with the roundscore of the working tree.

Run once, at commit b1f2b4f (the last commit before the archive store interface), from the
repository root:

    python tests/data/archives/make_archives.py

It writes the inputs (invented data: a water scheme "AQ" and a soil scheme "SOIL", made-up lab
codes), stores them through the public functions of that version, and records what that version
reads back (expected.json) and the schema it wrote (schema.sql).  The archives at schema
versions 1 and 2 are made with that version's own migrations (``MIGRATIONS[:1]``,
``MIGRATIONS[:2]``), as a file released at that version would be.  Do not run it again on a later
version: the files are the "before" side of tests/test_archive_formats.py.
"""

from __future__ import annotations

import json
import math
import shutil
import sqlite3
import sys
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[2]))

from roundscore.history import store as archive  # noqa: E402

INPUTS = HERE / "inputs"


def scores(*, scheme, round_id, date, labs, measurands, shift=0.0, score="z", note=""):
    """Internally consistent score rows (z = d / sigma_pt, z' = d / sqrt(sigma_pt^2 + u^2), ISO 13528 §9)."""
    rows = []
    for i, lab in enumerate(labs):
        for j, m in enumerate(measurands):
            d = round(-1.0 + 0.7 * i + 0.3 * j + shift, 6)
            z = d / 1.0
            value = {"z": z, "zeta": 1.5 * z}[score]
            rows.append(dict(
                lab=lab, measurand=m, unit="mg/L", n_replicates=2, result=10.0 + d,
                assigned=10.0, u_assigned=0.05, sigma_pt=1.0, z=z, z_prime=d / math.hypot(1.0, 0.05),
                zeta=1.5 * z, en=np.nan, d=d, d_percent=10.0 * d,
                signal="acceptable" if abs(value) <= 2 else ("warning" if abs(value) < 3 else "action"),
                note=note, score=score, scheme=scheme, round=round_id, round_date=date))
    return pd.DataFrame(rows, columns=list(archive.SCORE_COLUMNS))


def write_inputs() -> None:
    INPUTS.mkdir(exist_ok=True)
    aq = scores(scheme="AQ", round_id="2024-1", date="2024-03-04", labs=("L01", "L02", "L03"),
                measurands=("nitrate", "lead"))
    aq.to_csv(INPUTS / "aq-2024-1-scores.csv", index=False)
    corrected = scores(scheme="AQ", round_id="2024-1", date="2024-03-04",
                       labs=("L01", "L02", "L03"), measurands=("nitrate", "lead"), shift=0.25)
    corrected.to_csv(INPUTS / "aq-2024-1-scores-corrected.csv", index=False)
    soil = scores(scheme="SOIL", round_id="2024-2", date="2024-06-10", labs=("L01", "S-ü7"),
                  measurands=("cadmium",), score="zeta", note="Probe nachgemessen – ok")
    soil = soil.astype({"result": object})
    soil.loc[1, ["result", "z", "z_prime", "zeta", "d", "d_percent"]] = ["<0.1"] + [np.nan] * 5
    soil.loc[1, "signal"] = "not-scored"
    soil.to_csv(INPUTS / "soil-2024-2-scores.csv", index=False)
    lab = scores(scheme="AQ", round_id="2023-4", date="2023-11-20", labs=("L02",),
                 measurands=("nitrate", "lead"), shift=-0.4, note="'=neutralised")
    lab.to_csv(INPUTS / "lab-L02-aq-2023-4-scores.csv", index=False)
    pd.DataFrame({"measurand": ["nitrate", "lead"], "assigned": [10.0, 10.0], "n": [3, 3]}) \
        .to_csv(INPUTS / "aq-2024-1-statistics.csv", index=False)
    pd.DataFrame({"measurand": ["nitrate", "lead"], "s_r": [0.11, 0.02], "s_R": [0.31, 0.05]}) \
        .to_csv(INPUTS / "aq-2024-1-precision.csv", index=False)
    pd.DataFrame({"measurand": ["cadmium"], "assigned": [10.0], "n": [2]}) \
        .to_csv(INPUTS / "soil-2024-2-statistics.csv", index=False)
    (INPUTS / "settings.json").write_text(json.dumps(
        {"AQ": {"sigma_pt": "fixed", "score": "z", "levels": [1, 2]},
         "SOIL": {"sigma_pt": "horwitz", "score": "zeta"}}, indent=1) + "\n", encoding="utf-8")


def read(name: str) -> pd.DataFrame:
    return pd.read_csv(INPUTS / name, keep_default_na=True)


def store_everything(db: Path) -> list[str]:
    """Store the inputs into ``db`` as a provider and a lab would; the outcomes' statuses."""
    settings = json.loads((INPUTS / "settings.json").read_text(encoding="utf-8"))
    out = []
    aq = dict(scheme="AQ", round_id="2024-1", round_date="2024-03-04", title="Invented water round",
              settings=settings["AQ"], statistics=read("aq-2024-1-statistics.csv"),
              precision=read("aq-2024-1-precision.csv"))
    out.append(archive.store_round(db, scores=read("aq-2024-1-scores.csv"), **aq).status)
    out.append(archive.store_round(db, scores=read("aq-2024-1-scores-corrected.csv"), replace=True,
                                   reason="assigned value corrected", **aq).status)
    out.append(archive.store_round(db, scheme="SOIL", round_id="2024-2", round_date="2024-06-10",
                                   title="Invented soil round", settings=settings["SOIL"],
                                   statistics=read("soil-2024-2-statistics.csv"),
                                   scores=read("soil-2024-2-scores.csv")).status)
    out += [o.status for o in archive.add_files(db, [INPUTS / "lab-L02-aq-2023-4-scores.csv"])]
    return out


def frame_json(frame: pd.DataFrame) -> dict:
    """A frame as plain JSON: columns, dtype kinds (numpy's one-letter codes: f float, i integer,
    O object or text, whatever the pandas version calls them), and rows (NaN as null)."""
    def cell(v):
        if isinstance(v, (float, np.floating)):
            return None if math.isnan(v) else float(v)
        if isinstance(v, np.integer):
            return int(v)
        return v
    return {"columns": list(frame.columns), "kinds": "".join(t.kind for t in frame.dtypes),
            "rows": [[cell(v) for v in row] for row in frame.itertuples(index=False)]}


def dumps(value, depth: int = 0) -> str:
    """JSON with one frame row per line (easier to review than one value per line)."""
    pad = " " * depth
    if isinstance(value, dict) and value:
        items = [f'{pad} {json.dumps(k, ensure_ascii=False)}: {dumps(v, depth + 1).lstrip()}'
                 for k, v in value.items()]
        return pad + "{\n" + ",\n".join(items) + "\n" + pad + "}" + ("\n" if not depth else "")
    if isinstance(value, list) and value and all(isinstance(v, list) for v in value):
        rows = [pad + "  " + json.dumps(v, ensure_ascii=False) for v in value]
        return pad + "[\n" + ",\n".join(rows) + "\n" + pad + "]"
    return pad + json.dumps(value, ensure_ascii=False)


def reads(db: Path) -> dict:
    """What the archive gives back through the public reading functions."""
    hist = archive.round_history(db, scheme="AQ", labs=["L01", "L02", "L03"], round_id="2025-1",
                                 round_date="2025-01-01", last=8)
    return {
        "archived_labs": archive.archived_labs(db),
        "lab_history L01": frame_json(archive.lab_history(db, lab="L01")),
        "lab_history L02 AQ since 2024-01-01": frame_json(
            archive.lab_history(db, lab="L02", scheme="AQ", since="2024-01-01")),
        "lab_history S-ü7": frame_json(archive.lab_history(db, lab="S-ü7")),
        "lab_history L02,L03 last 1": frame_json(archive.lab_history(db, lab=["L02", "L03"], last=1)),
        "round_history AQ 2025-1": {lab: frame_json(f) for lab, f in sorted(hist.items())},
    }


def schema(db: Path) -> str:
    """The schema as SQLite keeps it (sqlite_master), with the header's version and id."""
    with sqlite3.connect(db) as conn:
        lines = [f"-- PRAGMA user_version = {conn.execute('PRAGMA user_version').fetchone()[0]}",
                 f"-- PRAGMA application_id = {conn.execute('PRAGMA application_id').fetchone()[0]}"]
        for kind, name, sql in conn.execute(
                "SELECT type, name, sql FROM sqlite_master ORDER BY type, name"):
            lines.append(f"-- {kind} {name}")
            lines.append(f"{sql};" if sql else "-- (made by SQLite)")
    conn.close()
    return "\n".join(lines) + "\n"


def old_version(db: Path, version: int) -> None:
    """An archive at schema ``version`` (1 or 2), one lab's round in it, by that version's own migrations."""
    with archive._connect(db, create=True, migrations=archive.MIGRATIONS[:version]) as conn:
        conn.execute("INSERT INTO rounds (scheme, round_id, round_date, title, settings, "
                     "stored_at) VALUES ('AQ', 'R0', '2022-05-01', 'old', '{}', '2022-05-02T08:00:00+00:00')")
        conn.execute("INSERT INTO scores (scheme, round_id, lab, measurand, z, signal, score) "
                     "VALUES ('AQ', 'R0', 'L01', 'lead', 2.5, 'warning', 'z')")


def main() -> None:
    write_inputs()
    for name in ("archive-v1.sqlite", "archive-v2.sqlite", "archive-v3.sqlite"):
        for p in (HERE / name, HERE / f"{name}-wal", HERE / f"{name}-shm"):
            p.unlink(missing_ok=True)
    db = HERE / "archive-v3.sqlite"
    statuses = store_everything(db)
    assert statuses == ["added", "replaced", "added", "added"], statuses
    expected = {"statuses": statuses, "reads": reads(db)}
    (HERE / "expected.json").write_text(dumps(expected), encoding="utf-8")
    (HERE / "schema.sql").write_text(schema(db), encoding="utf-8")
    for version in (1, 2):
        old_version(HERE / f"archive-v{version}.sqlite", version)
    for name in ("archive-v1.sqlite", "archive-v2.sqlite", "archive-v3.sqlite"):
        assert not (HERE / f"{name}-wal").exists(), name  # every change is in the file itself
    shutil.rmtree(HERE / "__pycache__", ignore_errors=True)


if __name__ == "__main__":
    main()
