"""Lab codes: the rule (characters, length, NFKC, case), the file names made from them, and clashes.

Source of expected values: the tool's own documented rule (roundscore.model.labcodes, roundscore.support.filenames,
README "Inputs roundscore refuses"); Unicode facts from the Unicode Standard (UAX #15 normalisation
forms, Table 4-1 general categories; checked with Python's unicodedata); Windows reserved device names
from Microsoft's "Naming Files, Paths, and Namespaces" (from memory); file-name length limits (255 bytes
for ext4 and APFS, 255 UTF-16 units for NTFS) common practice.
"""

from __future__ import annotations

import datetime as dt
import unicodedata

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from roundscore.support.filenames import MAX_STEM_BYTES, WINDOWS_RESERVED, file_stem, lab_file_name
from roundscore.intake.forms import form_file_name
from roundscore.model.labcodes import MAX_LAB_CODE, clash_problems, lab_key, read_lab_code

# ------------------------------------------------------------------------------------------- the rule


@pytest.mark.parametrize("raw, code", [
    ("K01", "K01"),
    ("  K01 ", "K01"),
    (101, "101"),
    (101.0, "101"),                     # a number cell of a workbook
    ("Ｋ０１", "K01"),                    # full-width forms: NFKC
    ("A\u0308x", "\u00c4x"),            # decomposed Ä composed (NFKC includes canonical composition)
    ("a/b", "a/b"), ("a\\b", "a\\b"), ("a:b", "a:b"), ("a b", "a b"), ("%", "%"), ("~", "~"),
    ("מעבדה-7", "מעבדה-7"),             # right-to-left letters
    ("🧪🔬", "🧪🔬"),                      # symbols (So)
    ("X" * MAX_LAB_CODE, "X" * MAX_LAB_CODE),
])
def test_allowed_codes(raw, code):
    assert read_lab_code(raw) == (code, None)


@pytest.mark.parametrize("raw, words", [
    ("X" * (MAX_LAB_CODE + 1), f"{MAX_LAB_CODE + 1} characters long"),
    ("K\x1b[31m01", "control character \\x1b"),
    ("K\n01", "control character \\x0a"),
    ("K\t01", "control character"),
    ("K\x85", "control character \\x85"),          # C1 (NEL)
    ("K\u202e10", "formatting character"),          # right-to-left override
    ("K\u200b01", "formatting character"),          # zero-width space
    ("K\ue000", "private-use"),
    ("K\u2028", "separator"),
    (True, "truth value"),
    (dt.date(2026, 1, 1), "date"),
    (dt.datetime(2026, 1, 1, 8, 0), "date"),
    (3.5, "not a whole number"),
    (1e20, "not a whole number"),
    ("=1+1", "formula"), ("+K01", "formula"), ("-5", "formula"), (-5, "formula"), ("@K", "formula"),
])
def test_refused_codes_say_why(raw, words):
    code, why = read_lab_code(raw)
    assert code is None
    assert words in why
    assert str(MAX_LAB_CODE) in why  # and the rule is stated


@pytest.mark.parametrize("raw", [None, "", "   ", float("nan")])
def test_blank_is_no_code_and_no_reason(raw):
    assert read_lab_code(raw) == (None, None)


def test_lab_key_folds_case_and_forms():
    assert lab_key("K01") == lab_key("k01")
    assert lab_key("STRASSE") == lab_key("straße")       # full case folding (ß → ss)
    assert lab_key("K01") != lab_key("K02")
    assert lab_key("\u00c5") == lab_key("\u212b")        # Å and ANGSTROM SIGN


def test_clashes_name_both_places():
    places = {"K01": {"file": "results.csv", "row": 2, "column": "lab"},
              "k01": {"file": "results.csv", "row": 9, "column": "lab"},
              "K02": {"file": "results.csv", "row": 3, "column": "lab"}}
    (p,) = clash_problems(places)
    text = str(p)
    assert "line 9" in text and "line 2" in text and "'K01'" in text and "'k01'" in text
    assert "letter case" in text
    other = clash_problems({"K02": {"file": "a.csv"}}, also={"k02": {"file": "participants.csv", "row": 4}})
    assert len(other) == 1 and "participants.csv" in str(other[0]) and "a.csv" in str(other[0])
    assert clash_problems({"K01": {}, "K02": {}}) == []


# ------------------------------------------------------------------------------------------ file names


@pytest.mark.parametrize("code, stem", [
    ("K01", "K01"), ("a_b", "a_b"), ("lab-7", "lab-7"), ("a.b", "a.b"), ("101", "101"),  # today's names
    ("Ärzte", "Ärzte"), ("研究所", "研究所"),             # letters of any script are kept
    ("a/b", "a%2Fb"), ("a\\b", "a%5Cb"), ("a:b", "a%3Ab"), ("a b", "a%20b"), ("a%2Fb", "a%252Fb"),
    ("CON", "%43ON"), ("con", "%63on"), ("Nul.1", "%4Eul.1"), ("COM1", "%43OM1"), ("LPT9", "%4CPT9"),
    (".hidden", "%2Ehidden"), ("..", "%2E%2E"), (".", "%2E"), ("trail.", "trail%2E"),
    ("🧪", "%F0%9F%A7%AA"),
])
def test_file_stems(code, stem):
    assert file_stem(code) == stem
    assert lab_file_name(code, ".xlsx") == stem + ".xlsx"


def test_long_stems_are_shortened_with_a_digest():
    a, b = "🧪" * 31 + "A", "🧪" * 31 + "B"
    sa, sb = file_stem(a), file_stem(b)
    assert sa != sb
    assert "~" in sa and len(sa.encode()) <= MAX_STEM_BYTES
    hangul = "한" * MAX_LAB_CODE  # 3 bytes each, 9 once macOS decomposes them
    assert len(unicodedata.normalize("NFD", file_stem(hangul)).encode()) <= MAX_STEM_BYTES


def test_form_names_are_bounded_and_safe():
    name = form_file_name("R/" + "9" * 62, "🧪" * MAX_LAB_CODE)
    assert "/" not in name and len(name.encode()) <= 2 * MAX_STEM_BYTES + 6


_FORBIDDEN = set('/\\:*?"<>|\x00')  # not allowed in a Windows name; "/" and NUL nowhere


def fs_key(name: str) -> str:
    """How a case-insensitive, normalisation-insensitive file system (NTFS, APFS) compares two names."""
    return unicodedata.normalize("NFD", unicodedata.normalize("NFD", name).casefold())


def _safe_component(stem: str, suffix: str) -> None:
    name = stem + suffix
    assert name not in (".", "..") and not stem.startswith(".")
    assert not stem.endswith((".", " "))
    assert not (_FORBIDDEN & set(name))
    assert all(unicodedata.category(ch)[0] != "C" for ch in name)
    assert name.split(".", 1)[0].rstrip(" ").upper() not in WINDOWS_RESERVED
    assert len(unicodedata.normalize("NFD", stem).encode()) <= MAX_STEM_BYTES
    assert len(name.encode("utf-16-le")) // 2 <= 255


# Codes as labs write them, and as an adversary would: ASCII, punctuation that is unsafe in file names,
# letters of other scripts, marks, full-width and compatibility forms, symbols, reserved device names.
_ALPHABET = st.sampled_from(
    list("Kk01Ll9aAzZ-_. /\\:*?\"<>|%~#&'()[]{}!$,;=+@^`") +
    ["ß", "ẞ", "Ä", "ä", "A\u0308", "\u0308", "Å", "\u212b", "ﬁ", "Ｋ", "１", "²", "Ⅳ", "ı", "İ", "σ", "ς", "Σ",
     "한", "ᄒ", "研", "מ", "ب", "٣", "🧪", "🔬", "€", "\u00a0", "\u3000", "Ω", "\u2126", "ǅ"])
_CODES = st.one_of(
    st.lists(_ALPHABET, min_size=1, max_size=MAX_LAB_CODE + 4).map("".join),
    st.sampled_from(sorted(WINDOWS_RESERVED)).flatmap(
        lambda r: st.tuples(st.sampled_from([r, r.lower(), r.title()]), st.sampled_from(["", ".1", " ", ".x.y"]))
        .map("".join)),
)
PROPERTY = settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def _near_pairs(draw):
    """Two codes that differ in one place: one character swapped for another (``a/b`` and ``a_b``), its
    case changed, or the whole code decomposed (NFD): the pairs a careless mapping would merge."""
    chars = draw(st.lists(_ALPHABET, min_size=1, max_size=MAX_LAB_CODE))
    other = list(chars)
    i = draw(st.integers(0, len(chars) - 1))
    how = draw(st.sampled_from(["swap", "case", "nfd"]))
    if how == "swap":
        other[i] = draw(_ALPHABET)
    elif how == "case":
        other[i] = other[i].swapcase()
    a, b = "".join(chars), "".join(other)
    return a, (unicodedata.normalize("NFD", b) if how == "nfd" else b)


def _valid(raw: str) -> str | None:
    return read_lab_code(raw)[0]


@PROPERTY
@given(st.one_of(st.tuples(_CODES, _CODES), _near_pairs()))
def test_file_names_are_distinct_exactly_when_codes_are(pair):
    """For any two allowed codes (after the rule's normalisation): the same name iff the same code,
    and names a case-insensitive file system takes for one file only for codes the import refuses as
    a clash (the same lab_key)."""
    a, b = (_valid(raw) for raw in pair)
    for code in (a, b):
        if code is not None:
            _safe_component(file_stem(code), ".xlsx")
    if a is None or b is None:
        return
    assert (file_stem(a) == file_stem(b)) == (a == b)
    if fs_key(file_stem(a)) == fs_key(file_stem(b)):
        assert lab_key(a) == lab_key(b)


def _decode(stem: str) -> str:
    """The code a stem was made from, read back by the documented rule: %XX are UTF-8 bytes, the rest literal."""
    out, i = bytearray(), 0
    while i < len(stem):
        if stem[i] == "%":
            out.append(int(stem[i + 1:i + 3], 16))
            i += 3
        else:
            out += stem[i].encode()
            i += 1
    return out.decode()


@PROPERTY
@given(_CODES)
def test_a_stem_reads_back_as_its_code(raw):
    """Injectivity, shown per code: a stem decodes to its code alone (a shortened one: a prefix, then
    ``~`` and the code's digest), so no two codes can share a stem."""
    import hashlib

    code = _valid(raw)
    if code is None:
        return
    stem = file_stem(code)
    if "~" in stem:
        prefix, digest = stem.split("~")
        assert code.startswith(_decode(prefix))
        assert digest == hashlib.sha256(code.encode()).hexdigest()[:16]
    else:
        assert _decode(stem) == code


@PROPERTY
@given(st.text(min_size=1, max_size=MAX_LAB_CODE))
def test_any_text_is_refused_or_named_safely(raw):
    code = _valid(raw)
    if code is not None:
        _safe_component(file_stem(code), ".html")
        assert _valid(code) == code  # the rule is idempotent: a normalised code reads back as itself


def test_stems_create_distinct_files(tmp_path):
    """On this machine's file system: one file per code, each found again by its name."""
    codes = ["K01", "a/b", "a_b", "a\\b", "a:b", "a b", "a%2Fb", "CON", ".hidden", "trail.", "~", "%",
             "מעבדה-7", "🧪" * MAX_LAB_CODE, "한" * MAX_LAB_CODE, "X" * MAX_LAB_CODE]
    for code in codes:
        (tmp_path / lab_file_name(code, ".xlsx")).write_text(code, encoding="utf-8")
    found = sorted(p.read_text(encoding="utf-8") for p in tmp_path.iterdir())
    assert found == sorted(codes)
