"""``circulation.csv``: what to send each lab, one row per lab, ready for a mail merge. Nothing is sent.

Columns: ``lab``, ``name``, ``contact`` (from the participants file; empty when
not given), ``files`` (the lab's own files, paths relative to the output folder,
``;``-separated, in the order xlsx, html, pdf), one column ``file_FORMAT`` per
format of lab file written (a mail-merge tool attaches one path per column), and
``shared`` (the round's files every participant receives: the summary workbook and
the round report, as written). Only files actually written are listed, so the
file follows ``--formats``. Written through :mod:`roundscore.outputs.csvout`
(formula-injection neutralised: names and contacts come from the participants
file). The file holds every lab's name and contact: it is for the provider, not
for circulation itself.
"""

from __future__ import annotations

from pathlib import Path
from collections.abc import Iterable

import pandas as pd

from roundscore.model.evaluation import RoundEvaluation
from roundscore.outputs.csvout import write_csv
from roundscore.support.filenames import lab_file_name

__all__ = ["CIRCULATION_FILE", "LAB_SUFFIXES", "SHARED_FILES", "circulation_frame", "write_circulation"]

CIRCULATION_FILE = "circulation.csv"
#: A lab's own files, in the order listed.
LAB_SUFFIXES = (".xlsx", ".html", ".pdf")
#: The round's files every participant receives (when written).
SHARED_FILES = ("round-summary.xlsx", "report.html", "report.pdf")


def circulation_frame(ev: RoundEvaluation, written: Iterable[str]) -> pd.DataFrame:
    """The rows of ``circulation.csv`` from the evaluation and the files written (paths relative to the
    output folder, with ``/``)."""
    have = set(written)
    suffixes = [s for s in LAB_SUFFIXES if any(f"labs/{lab_file_name(lab, s)}" in have for lab in ev.labs)]
    shared = ";".join(f for f in SHARED_FILES if f in have)
    rows = []
    for lab in ev.labs:
        p = ev.participants.get(lab)
        own = {s: f"labs/{lab_file_name(lab, s)}" for s in suffixes}
        own = {s: f for s, f in own.items() if f in have}
        rows.append({"lab": lab, "name": p.name if p else "", "contact": p.contact if p else "",
                     "files": ";".join(own.values()), **{f"file_{s[1:]}": own.get(s, "") for s in suffixes},
                     "shared": shared})
    columns = ["lab", "name", "contact", "files", *(f"file_{s[1:]}" for s in suffixes), "shared"]
    return pd.DataFrame(rows, columns=columns)


def write_circulation(ev: RoundEvaluation, folder: Path, written: Iterable[Path]) -> Path:
    """Write ``circulation.csv`` into ``folder`` listing the ``written`` files (paths inside ``folder``)."""
    folder = Path(folder)
    rel = [Path(p).relative_to(folder).as_posix() for p in written]
    path = folder / CIRCULATION_FILE
    write_csv(circulation_frame(ev, rel), path)
    return path
