"""The digests of a lab's score sheet: each ``data`` row and the whole sheet, over cell values as read back.

The lab sheet's ``data`` sheet carries a digest of each row (column
:data:`ROW_DIGEST_COLUMN`) and the ``round`` sheet one of the whole (key
:data:`DIGEST_KEY`), so an edit that keeps a row consistent is still found,
and the row is named. The digests are over the cell *values as read back*,
canonicalised (numbers to :data:`DIGITS` significant digits, text stripped,
empty cells as nothing), never over file bytes: opening a sheet and saving it
again in a spreadsheet program changes its bytes but not these values. The
writer (:mod:`roundscore.outputs.lab_workbook`) rounds the numbers of the
``data`` sheet to :data:`DIGITS` digits, so a program that keeps 15 (Excel,
LibreOffice) gives back the same values; ``history add``
(:mod:`roundscore.history.sheets`) checks them.

The digest catches accidental and casual edits; it is not a signature:
anyone can compute it again.

References
----------
.. [1] Microsoft, "Floating-point arithmetic may give inaccurate results in
   Excel" (15 significant digits kept).
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import math
from collections.abc import Iterable, Sequence

import numpy as np

__all__ = ["DIGITS", "DIGEST_KEY", "ROW_DIGEST_COLUMN", "canonical", "sheet_value", "row_digest", "sheet_digest"]

#: Significant digits kept in the ``data`` sheet and compared by the digests: the precision of
#: ``scores.csv`` and of the archive's content hash (roundscore.history.store.HASH_DIGITS).
DIGITS = 12
#: Key of the whole sheet's digest in the ``round`` sheet.
DIGEST_KEY = "digest"
#: Column of each row's digest in the ``data`` sheet (after the score columns).
ROW_DIGEST_COLUMN = "row_digest"
#: Hex digits of a row digest (64 bits: an accidental match is out of the question).
_ROW_HEX = 16


def canonical(value: object) -> str | None:
    """A cell value as the digests see it: numbers to :data:`DIGITS` digits, text stripped.

    Empty cells, empty text and non-finite numbers are ``None``; ``-0`` is ``0``.
    """
    if value is None:
        return None
    if isinstance(value, (bool, np.bool_)):
        return "TRUE" if value else "FALSE"
    if isinstance(value, (int, float, np.integer, np.floating)):
        number = float(value)
        return f"{number + 0.0:.{DIGITS}g}" if math.isfinite(number) else None
    if isinstance(value, (_dt.datetime, _dt.date)):
        return value.isoformat()
    text = str(value).strip()
    return text or None


def sheet_value(value: object) -> object:
    """A value as the writer puts it into the ``data`` sheet: numbers rounded to :data:`DIGITS`
    digits (non-finite ones left out), anything else unchanged."""
    if isinstance(value, (bool, np.bool_)) or value is None:
        return value
    if isinstance(value, (int, float, np.integer, np.floating)):
        number = float(value)
        return float(f"{number:.{DIGITS}g}") + 0.0 if math.isfinite(number) else None
    return value


def _hash(obj: object) -> str:
    text = json.dumps(obj, ensure_ascii=False, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def row_digest(values: Sequence[object]) -> str:
    """The digest of one ``data`` row: its score-column values, in column order."""
    return _hash([canonical(v) for v in values])[:_ROW_HEX]


def sheet_digest(meta: Iterable[tuple[object, object]], row_digests: Iterable[object]) -> str:
    """The digest of a whole sheet: the ``round`` sheet's pairs (but the digest) and the rows'
    digests, both sorted, so sorting the rows in a spreadsheet program is not an edit."""
    pairs = sorted([canonical(k) or "", canonical(v)] for k, v in meta
                   if canonical(k) != DIGEST_KEY)
    rows = sorted(canonical(d) or "" for d in row_digests)
    return _hash({"round": pairs, "rows": rows})
