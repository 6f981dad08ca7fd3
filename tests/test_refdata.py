"""The reader of the reference data (tests/refdata.py): the copies are the listed files, every file reads,
and a damaged copy is refused, so a reference check cannot pass on a misread file.

Source of expected values: the NIST StRD files' own headers (counts of treatments, replicates and
observations) and certified values (tests/data/nist_strd_anova/README.md); the damaged copies are made here.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from .refdata import (CERTIFIED_KEYS, NIST_ANOVA_DIR, NIST_ANOVA_FILES, RefDataError, digests, nist_anova,
                      parse_nist_anova)


def test_the_folder_holds_exactly_the_listed_files():
    present = sorted(p.name for p in NIST_ANOVA_DIR.glob("*.dat"))
    assert present == sorted(digests()) == sorted(f"{n}.dat" for n in NIST_ANOVA_FILES)
    assert (NIST_ANOVA_DIR / "README.md").is_file()


@pytest.mark.parametrize("name", NIST_ANOVA_FILES)
def test_every_file_reads_with_its_header_counts(name):
    data = nist_anova(name)
    assert data.name == name and set(data.certified) == set(CERTIFIED_KEYS)
    assert data.observations == data.treatments * data.replicates == len(data.texts) == len(data.groups)
    assert len(set(data.groups)) == data.treatments
    # The certified degrees of freedom of a one-way layout: k - 1 and N - k.
    assert data.certified["df_between"] == data.treatments - 1
    assert data.certified["df_within"] == data.observations - data.treatments
    # SS = df x MS for both rows, to the 15 digits given (NIST prints all three).
    for row in ("between", "within"):
        assert data.certified[f"ss_{row}"] == pytest.approx(
            data.certified[f"df_{row}"] * data.certified[f"ms_{row}"], rel=1e-13)


def test_counts_of_the_largest_file():
    # SmLs09: 9 treatments x 2001 replicates = 18009 observations, 13 constant leading digits (file header).
    data = nist_anova("SmLs09")
    assert (data.treatments, data.replicates, data.observations, data.leading_digits) == (9, 2001, 18009, 13)
    assert data.texts[0] == "1000000000000.4"  # the first response as typed in the file


@pytest.fixture
def copy(tmp_path):
    """A writable copy of the folder (SHA256SUMS included)."""
    folder = tmp_path / "nist"
    shutil.copytree(NIST_ANOVA_DIR, folder)
    return folder


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text(encoding="ascii")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="ascii")


def test_a_changed_byte_is_refused_by_its_digest(copy):
    _edit(copy / "SmLs01.dat", "           1         1.4\n", "           1         1.5\n")
    parse_nist_anova(copy / "SmLs01.dat")  # still well formed: only the digest can tell
    with pytest.raises(RefDataError, match=r"SHA-256 .* differs from SHA256SUMS"):
        nist_anova("SmLs01", copy)


def test_an_unlisted_file_is_refused(copy):
    shutil.copyfile(copy / "SmLs01.dat", copy / "Extra.dat")
    with pytest.raises(RefDataError, match="not listed"):
        nist_anova("Extra", copy)


@pytest.mark.parametrize("old, new, words", [
    ("           1         1.4\n", "           2         1.4\n", "treatment sizes .* do not match the header"),
    ("           1         1.4\n", "", "the data should end at line 249; the file has 248 lines"),
    ("           9         1.6\n           9         1.4\n           9         1.6\n",
     "           9         1.6\n           9         1.4\n           9         1.6\n           9         1.6\n",
     "the data should end at line 249"),
    ("           1         1.4\n", "           1         one\n", r"line 61: not a data line"),
    ("Within Treatment  180", "Inside Treatment  180", r"\['df_within', 'ss_within', 'ms_within'\] not found"),
    ("                  Standard Deviation  1.00000000000000E-01\n", "\n", r"\['residual_sd'\] not found"),
    ("Between Treatment   8", "Between Treatment   7", "degrees of freedom do not match"),
    ("                189 Observations\n", "\n", r"the header lacks \['Observations'\]"),
    ("                Data               (lines 61 to 249)", "", "does not give the lines"),
])
def test_a_damaged_file_is_refused_naming_it(copy, old, new, words):
    path = copy / "SmLs01.dat"
    _edit(path, old, new)
    with pytest.raises(RefDataError, match=words) as info:
        parse_nist_anova(path)
    assert str(path) in str(info.value)
