"""``labs/LAB.pdf`` for every lab and ``report.pdf``: the documents of ``outputs/report.py`` drawn by
``outputs/pdf.py``.

The content is the HTML pages' (one builder, two renderings): a lab's
:class:`~roundscore.outputs.document.Document` from
``outputs.report.lab_document(ev, parts, lab)``, the round's from
``report_document(ev, parts)``, with the shared parts (figures, strips) built
once. The lab files are written in a pool of worker processes, a batch of
:data:`LAB_PDFS_PER_TASK` labs per task; each worker parses the fonts once
(:mod:`roundscore.outputs.pdf`). The paper is the round's (``[round] paper``).
A lab's file is named like its workbook and page
(:func:`roundscore.support.filenames.lab_file_name`) and carries only that lab's identity.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any
from collections.abc import Sequence

from roundscore.outputs.pdf import render_pdf
from roundscore.support.filenames import lab_file_name
from roundscore.support.parallel import Progress, run_batches, shared

__all__ = ["write_pdfs", "REPORT_PDF", "LAB_PDFS_PER_TASK"]

REPORT_PDF = "report.pdf"
#: Lab PDFs per worker task: a lab's file takes tens of milliseconds, so a batch amortises the pickling of
#: results and keeps the progress bar moving (common practice for pools).
LAB_PDFS_PER_TASK = 16


def write_pdfs(ev: Any, folder: Path, parts: Any, *, jobs: int | None = 1, progress: Progress | None = None,
               round_report: bool = True) -> list[Path]:
    """Write ``report.pdf`` (unless not ``round_report``) and ``labs/LAB.pdf`` for each lab; the paths written.

    ``progress("lab PDFs", done, total)`` follows the lab files.
    """
    from roundscore.outputs.report import report_document

    folder = Path(folder)
    written = []
    if round_report:
        path = folder / REPORT_PDF
        path.write_bytes(render_pdf(report_document(ev, parts), ev.round.paper))
        written.append(path)
    labs = list(ev.labs)
    if labs:
        (folder / "labs").mkdir(exist_ok=True)
    written += run_batches(_lab_batch, labs, jobs=jobs, shared=(ev, parts, folder), progress=progress,
                           stage="lab PDFs", batch_size=LAB_PDFS_PER_TASK)
    return written


def _lab_batch(labs: Sequence[str]) -> list[Path]:
    """Worker side: each lab's document rendered and written."""
    from roundscore.outputs.report import lab_document

    ev, parts, folder = shared()
    out = []
    for lab in labs:
        path = folder / "labs" / lab_file_name(lab, ".pdf")
        path.write_bytes(render_pdf(lab_document(ev, parts, lab), ev.round.paper))
        out.append(path)
    return out
