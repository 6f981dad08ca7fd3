"""File names after lab codes (and round ids): one name per code, each a safe single path component.

Every writer that names a file after a lab (``labs/LAB.xlsx``, ``labs/LAB.html``,
the blank forms ``ROUND-LAB.xlsx``) calls :func:`file_stem`. The rule:

* letters and digits (of any script), ``-``, ``_`` and ``.`` are kept, so an
  ordinary code keeps its plain name (``K01`` → ``K01``, ``a_b`` → ``a_b``);
* every other character is written as ``%`` and the two hexadecimal digits
  of each of its UTF-8 bytes (``a/b`` → ``a%2Fb``, ``a b`` → ``a%20b``,
  ``%`` → ``%25``). A kept character never is ``%``, so a name decodes to
  one code only: different codes give different names;
* a leading dot (a hidden file, or ``.``/``..``), a trailing dot, and the
  first character of a name Windows reserves for a device (``CON``, ``NUL``,
  ``COM1``…, with or without an extension, in any case) are escaped the same
  way (``CON`` → ``%43ON``);
* a name longer than :data:`MAX_STEM_BYTES` bytes (in UTF-8, after the
  decomposition macOS applies) keeps its first part and ends in ``~`` and 16
  hexadecimal digits of the code's SHA-256. ``~`` is always escaped
  elsewhere, so such a name cannot equal an unshortened one; two shortened
  names are equal only if the two codes' digests agree in 64 bits.

Codes that differ only in letter case are refused at import
(:mod:`roundscore.model.labcodes`), so the names are distinct on case-insensitive
file systems too.
"""

from __future__ import annotations

import hashlib
import re
import unicodedata

__all__ = ["file_stem", "lab_file_name", "MAX_STEM_BYTES", "WINDOWS_RESERVED"]

#: Longest stem, in UTF-8 bytes of its NFD form (what macOS stores). Names are at most 255 bytes (ext4, APFS)
#: or 255 UTF-16 units (NTFS); a form's name joins two stems, an extension and a hyphen, and stays under 200.
#: Any ASCII code of up to 32 characters fits, even with every character escaped (3 bytes each).
MAX_STEM_BYTES = 96
_DIGEST_HEX = 16

#: Device names Windows reserves in every folder, with or without an extension (compared without case).
WINDOWS_RESERVED = frozenset(
    ["CON", "PRN", "AUX", "NUL"]
    + [f"{d}{i}" for d in ("COM", "LPT") for i in list("0123456789") + ["\u00b9", "\u00b2", "\u00b3"]])

_PLAIN = re.compile(r"[A-Za-z0-9_-][A-Za-z0-9._-]*")


def _kept(ch: str) -> bool:
    if ch.isascii():
        return ch.isalnum() or ch in "-_."
    return unicodedata.category(ch)[0] in "LN"


def _escape(ch: str) -> str:
    return "".join(f"%{b:02X}" for b in ch.encode("utf-8", "surrogatepass"))


def _reserved(stem: str) -> bool:
    base = stem.split(".", 1)[0].rstrip(" ")
    return base.upper() in WINDOWS_RESERVED


def file_stem(code: str) -> str:
    """The file name (without extension) for a lab code or round id: injective, safe, bounded.

    >>> [file_stem(c) for c in ("K01", "a/b", "a_b", "a\\\\b", "a:b", "CON", ".hidden")]
    ['K01', 'a%2Fb', 'a_b', 'a%5Cb', 'a%3Ab', '%43ON', '%2Ehidden']
    """
    code = str(code)
    if _PLAIN.fullmatch(code) and not code.endswith(".") and not _reserved(code) and len(code) <= MAX_STEM_BYTES:
        return code  # the common case: unchanged
    parts = [ch if _kept(ch) else _escape(ch) for ch in code]
    if parts and parts[0] == ".":
        parts[0] = _escape(".")
    if parts and parts[-1] == ".":
        parts[-1] = _escape(".")
    if parts and _reserved("".join(parts)):
        parts[0] = _escape(code[0])
    stem = "".join(parts)
    if _size(stem) <= MAX_STEM_BYTES:
        return stem
    digest = "~" + hashlib.sha256(code.encode("utf-8", "surrogatepass")).hexdigest()[:_DIGEST_HEX]
    room = MAX_STEM_BYTES - len(digest)
    keep, used = [], 0
    for part in parts:  # whole characters or whole escapes only
        n = _size(part)
        if used + n > room:
            break
        keep.append(part)
        used += n
    return "".join(keep) + digest


def _size(text: str) -> int:
    if text.isascii():
        return len(text)
    return len(unicodedata.normalize("NFD", text).encode("utf-8", "surrogatepass"))


def lab_file_name(code: str, suffix: str) -> str:
    """``file_stem(code) + suffix`` (``suffix`` such as ``".xlsx"``)."""
    return file_stem(code) + suffix
