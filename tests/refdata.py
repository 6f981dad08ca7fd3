"""The one reader of the reference data under tests/data/ (provenance in each folder's README).

NIST StRD one-way ANOVA files (``tests/data/nist_strd_anova``): :func:`nist_anova` checks the file's
SHA-256 digest against ``SHA256SUMS`` (the copy is NIST's file unchanged), then :func:`parse_nist_anova`
reads it strictly: the certified values and the data from the line ranges the file's own header gives,
every one of the nine certified values present, and the data's shape equal to the header's counts of
treatments, replicates and observations. Anything else raises :class:`RefDataError` naming the file and
line, so a damaged or misread file cannot pass as a reference.
"""

from __future__ import annotations

import hashlib
import re
from collections import Counter
from dataclasses import dataclass
from functools import cache
from pathlib import Path

import numpy as np

DATA = Path(__file__).resolve().parent / "data"
NIST_ANOVA_DIR = DATA / "nist_strd_anova"
#: The eleven NIST StRD one-way ANOVA data sets, in NIST's order of difficulty (lower, average, higher).
NIST_ANOVA_FILES = ("SiRstv", "SmLs01", "SmLs02", "SmLs03", "AtmWtAg", "SmLs04", "SmLs05", "SmLs06",
                    "SmLs07", "SmLs08", "SmLs09")
#: The values every NIST StRD ANOVA file certifies (its "Certified Values" block).
CERTIFIED_KEYS = ("df_between", "ss_between", "ms_between", "f", "df_within", "ss_within", "ms_within",
                  "r_squared", "residual_sd")


class RefDataError(ValueError):
    """A reference file that is not what it should be (digest, layout or counts)."""


@dataclass(frozen=True, slots=True, kw_only=True)
class NistAnova:
    """One NIST StRD one-way ANOVA data set.

    Attributes
    ----------
    name : str
        The data set's name (``SmLs01``).
    groups : tuple of str
        The treatment label of each observation, as written in the file.
    texts : tuple of str
        Each response as written (the certified values are for these decimals, not for their doubles).
    certified : dict
        The nine certified values (:data:`CERTIFIED_KEYS`): degrees of freedom as int, the rest as float.
    treatments, replicates, observations, leading_digits : int
        The counts the file's header states (checked against the data).
    """

    name: str
    groups: tuple[str, ...]
    texts: tuple[str, ...]
    certified: dict[str, float]
    treatments: int
    replicates: int
    observations: int
    leading_digits: int

    @property
    def values(self) -> np.ndarray:
        """The responses as doubles."""
        return np.array([float(t) for t in self.texts])

    @property
    def labels(self) -> np.ndarray:
        """The treatment labels as an array (one per observation)."""
        return np.array(self.groups)


def digests(folder: Path = NIST_ANOVA_DIR) -> dict[str, str]:
    """File name → SHA-256 from the folder's ``SHA256SUMS`` (``sha256sum`` format)."""
    out = {}
    for line in (folder / "SHA256SUMS").read_text(encoding="ascii").splitlines():
        digest, name = line.split(maxsplit=1)
        out[name.lstrip("*")] = digest
    return out


@cache
def nist_anova(name: str, folder: Path = NIST_ANOVA_DIR) -> NistAnova:
    """The data set ``name`` from tests/data/nist_strd_anova, its digest checked (read once per session)."""
    path = folder / f"{name}.dat"
    want = digests(folder).get(path.name)
    if want is None:
        raise RefDataError(f"{path}: not listed in {folder / 'SHA256SUMS'}")
    got = hashlib.sha256(path.read_bytes()).hexdigest()
    if got != want:
        raise RefDataError(f"{path}: SHA-256 {got} differs from SHA256SUMS ({want}): not the NIST file")
    return parse_nist_anova(path)


_RANGE = re.compile(r"^\s*(?:File Format:\s*ASCII\s*)?(Certified Values|Data)\s+\(lines (\d+) to (\d+)\)\s*$")
_COUNT = re.compile(r"^\s*(?:Data:\s*)?(\d+)\s+(Treatments|Replicates/Cell|Observations|Constant Leading Digits?)\s*$")
_NUMBER = r"([-+]?\d+(?:\.\d*)?(?:[Ee][-+]?\d+)?)"
_CERTIFIED = (
    (re.compile(rf"^\s*Between \w+\s+(\d+)\s+{_NUMBER}\s+{_NUMBER}\s+{_NUMBER}\s*$"),
     ("df_between", "ss_between", "ms_between", "f")),
    (re.compile(rf"^\s*Within \w+\s+(\d+)\s+{_NUMBER}\s+{_NUMBER}\s*$"), ("df_within", "ss_within", "ms_within")),
    (re.compile(rf"^\s*Certified R-Squared\s+{_NUMBER}\s*$"), ("r_squared",)),
    (re.compile(rf"^\s*Standard Deviation\s+{_NUMBER}\s*$"), ("residual_sd",)),
)
_DATA_LINE = re.compile(rf"^\s*(\d+)\s+{_NUMBER}\s*$")


def parse_nist_anova(path: Path) -> NistAnova:
    """Read a NIST StRD one-way ANOVA file strictly (no digest check: see :func:`nist_anova`)."""
    lines = Path(path).read_text(encoding="ascii").splitlines()

    def fail(message: str, line: int | None = None) -> RefDataError:
        return RefDataError(f"{path}{f', line {line}' if line else ''}: {message}")

    top = next((i for i, s in enumerate(lines) if s.startswith("Certified Values:")), None)
    if top is None:
        raise fail("no 'Certified Values:' heading")
    ranges: dict[str, tuple[int, int]] = {}  # 1-based, inclusive, as the header states them
    counts: dict[str, int] = {}
    for line in lines[:top]:  # the header
        if m := _RANGE.match(line):
            ranges[m[1]] = (int(m[2]), int(m[3]))
        elif m := _COUNT.match(line):
            counts["Constant Leading Digits" if m[2].startswith("Constant") else m[2]] = int(m[1])
    if set(ranges) != {"Certified Values", "Data"}:
        raise fail("the header does not give the lines of the certified values and of the data")
    need = {"Treatments", "Replicates/Cell", "Observations", "Constant Leading Digits"}
    if set(counts) != need:
        raise fail(f"the header lacks {sorted(need - set(counts))}")
    # The certified block: the lines between its heading and the data's heading. (AtmWtAg's header says
    # lines 41 to 47, but its block sits one line lower, so the stated range is not used for it.)
    first, last = ranges["Data"]
    if not 0 < first - 1 <= len(lines) or not lines[first - 2].startswith("Data:"):
        raise fail("no 'Data:' heading just above the data", first - 1)
    certified: dict[str, float] = {}
    for number in range(top + 2, first - 1):
        for pattern, keys in _CERTIFIED:
            if m := pattern.match(lines[number - 1]):
                for key, text in zip(keys, m.groups()):
                    if key in certified:
                        raise fail(f"{key} certified twice", number)
                    certified[key] = int(text) if key.startswith("df") else float(text)
    if missing := [k for k in CERTIFIED_KEYS if k not in certified]:
        raise fail(f"certified value(s) {missing} not found in lines {top + 2} to {first - 2}")
    if last > len(lines) or any(s.strip() for s in lines[last:]):
        raise fail(f"the data should end at line {last}; the file has {len(lines)} lines")
    groups, texts = [], []
    for number in range(first, last + 1):
        m = _DATA_LINE.match(lines[number - 1])
        if not m:
            raise fail(f"not a data line (treatment, response): {lines[number - 1]!r}", number)
        groups.append(m[1])
        texts.append(m[2])
    sizes = dict(Counter(groups))
    if (len(texts), len(sizes), set(sizes.values())) != (
            counts["Observations"], counts["Treatments"], {counts["Replicates/Cell"]}):
        raise fail(f"the data ({len(texts)} observations, treatment sizes {sizes}) do not match the header "
                   f"({counts['Observations']} observations, {counts['Treatments']} treatments × "
                   f"{counts['Replicates/Cell']} replicates)")
    if (certified["df_between"], certified["df_within"]) != (len(sizes) - 1, len(texts) - len(sizes)):
        raise fail("the certified degrees of freedom do not match the data's shape")
    return NistAnova(name=Path(path).stem, groups=tuple(groups), texts=tuple(texts), certified=certified,
                     treatments=counts["Treatments"], replicates=counts["Replicates/Cell"],
                     observations=counts["Observations"], leading_digits=counts["Constant Leading Digits"])
