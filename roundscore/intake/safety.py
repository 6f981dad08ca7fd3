"""Untrusted workbooks: a cheap structural check before any reader, and reading in isolated processes.

Returned forms come from outside the provider. Two layers keep a hostile or
broken file from harming the run:

1. :func:`inspect_workbook` opens the file as a zip archive (read-only) and
   streams every member once through a capped decompressor, *before* the
   compiled reader sees it. It refuses zip bombs (a member or the whole
   archive inflating past a limit: the sizes written in the archive are not
   trusted), archives with too many members, XML parts with a document type
   or entity declaration (no legitimate workbook has one; they are the
   vehicle of entity-expansion and external-entity attacks), encrypted and
   legacy files and files that are not workbooks at all. While streaming it
   notes what a reader should warn about: macros (never run: only cell
   values are read), hidden sheets and rows, merged cells, and formulas
   without a cached value (whose value is unknown without recalculating).
2. :func:`roundscore.intake.isolation.read_many` reads files in worker processes, each bounded in
   address space (``RLIMIT_AS``) and time. A worker that aborts, segfaults,
   runs out of memory or hangs costs only the file it was reading, which is
   reported as a :class:`~roundscore.intake.isolation.ReadFailure` with the reason; a fresh worker takes
   over the rest of its batch. Results come back in input order, identical
   for any number of workers.

References
----------
.. [1] ECMA-376 Office Open XML File Formats, Part 1 (sheet, row, c, f, v,
   mergeCell elements; workbook sheet ``state``) and Part 2 (Open Packaging
   Conventions).
.. [2] OWASP, "XML External Entity (XXE) Processing" and "XML Entity
   Expansion" (common guidance: refuse DTDs in untrusted XML).
.. [3] [MS-CFB] Compound File Binary File Format: the signature
   D0 CF 11 E0 A1 B1 1A E1 (encrypted OOXML packages and legacy .xls files).
"""

from __future__ import annotations

import functools
import html
import os
import re
import struct
import zipfile
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from collections.abc import Callable, Mapping, Sequence

from roundscore.errors import InputError
from roundscore.model.limits import DEFAULT_LIMITS, MiB, ReadLimits

__all__ = ["WorkbookCheck", "inspect_workbook", "OLE2_SIGNATURE", "DEFLATE_MAX_RATIO", "hidden_note",
           "hidden_by_design"]

#: Compound File Binary signature ([MS-CFB] 2.2): encrypted OOXML or a legacy .xls workbook.
OLE2_SIGNATURE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
#: Local file header signature of a zip archive (APPNOTE.TXT 4.3.7).
ZIP_SIGNATURE = b"PK\x03\x04"
#: Decompression step: small enough to stop a bomb early, large enough to be cheap.
_CHUNK = 1 * MiB
#: Markup that declares a DTD or an entity (XML 1.0, sections 2.8 and 4.2).
_DTD_MARKERS = (b"<!DOCTYPE", b"<!ENTITY")


def hidden_note(file: str, sheet: str) -> str:
    """The warning that a sheet read is hidden."""
    return f"{file}: sheet {sheet!r} is hidden; its values are read all the same"


def hidden_by_design(warnings, file: str, sheets) -> tuple[str, ...]:
    """``warnings`` without the hidden-sheet notes of ``sheets``: the sheets roundscore itself hides (a form's
    ``form-info``, a lab sheet's ``data`` and ``round``), whose being hidden says nothing."""
    drop = {hidden_note(str(file), s) for s in sheets}
    return tuple(w for w in warnings if w not in drop)


@dataclass(frozen=True, slots=True, kw_only=True)
class WorkbookCheck:
    """What :func:`inspect_workbook` found in a workbook that it did not refuse.

    Attributes
    ----------
    file : str
        The path as given.
    sheets : tuple of str
        Sheet names in workbook order (empty when the workbook part could not
        be mapped, e.g. an OpenDocument file).
    hidden_sheets : tuple of str
        Sheets with ``state="hidden"`` or ``"veryHidden"``.
    macros : bool
        The package holds a VBA project (``vbaProject.bin``).
    hidden_rows : mapping of str to tuple of int
        1-based hidden row numbers by sheet name.
    merged : mapping of str to tuple of str
        Merged ranges (``"A1:C1"``) by sheet name.
    formulas_without_value : mapping of str to tuple of str
        Cell references of formulas that have no cached value, by sheet name.
    uncompressed_bytes : int
        The exact inflated size of the parts that were inflated whole plus,
        for the others, the most they can inflate to; never less than the
        true total.
    """

    file: str
    sheets: tuple[str, ...] = ()
    hidden_sheets: tuple[str, ...] = ()
    macros: bool = False
    hidden_rows: Mapping[str, tuple[int, ...]] = field(default_factory=dict)
    merged: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    formulas_without_value: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    uncompressed_bytes: int = 0

    def warnings_for(self, sheet: str | None) -> tuple[str, ...]:
        """Warnings worth showing when ``sheet`` is read (the whole-workbook ones included)."""
        out = []
        if self.macros:
            out.append(f"{self.file}: macros present; they are never run, only cell values are read")
        if sheet is not None and sheet in self.hidden_sheets:
            out.append(hidden_note(self.file, sheet))
        rows = self.hidden_rows.get(sheet or "", ())
        if rows:
            out.append(f"{self.file}: sheet {sheet!r} has hidden rows {_short(rows)}; "
                       "their values are read all the same")
        merged = self.merged.get(sheet or "", ())
        if merged:
            out.append(f"{self.file}: sheet {sheet!r} has merged cells {_short(merged)}; "
                       "a merged range's value is read from its top-left cell only")
        return tuple(out)


def _short(items: Sequence[object], n: int = 10) -> str:
    shown = ", ".join(str(i) for i in items[:n])
    return shown + (f" and {len(items) - n} more" if len(items) > n else "")


def _refuse(path: str, message: str) -> InputError:
    return InputError.single(message, file=path)


# Regular expressions over worksheet XML (ECMA-376 Part 1, 18.3.1). An optional
# namespace prefix is allowed because some writers use one (``<x:c>``).
_P = rb"(?:[A-Za-z_][\w.-]*:)?"
_CELL = re.compile(rb"<" + _P + rb"c\b([^>]*?)(?:/>|>(.*?)</" + _P + rb"c>)", re.DOTALL)
_FORMULA = re.compile(rb"<" + _P + rb"f\b")
# Cheap tests before the regex (``<formula1>`` of a data validation must not trigger it): a formula with
# text ends in ``</f>`` (or ``</x:f>``, prefixed); an empty ``<f .../>`` is either a shared formula's
# child, whose group's first cell holds the text (and so an end tag), or holds no formula at all.
# Two passes of a longer needle instead of six of a short one (short needles are the slow case of
# ``bytes.__contains__``): about 40 µs instead of 250 µs on a 60 kB form sheet.
_FORMULA_HINTS = (b"</f>", b":f>")
_VALUE = re.compile(rb"<" + _P + rb"v>\s*[^<\s]")
_REF = re.compile(rb"""\br=["']([A-Z]{1,3}[0-9]{1,7})["']""")
_HIDDEN_ROW = re.compile(rb"<" + _P + rb"row\b([^>]*?\bhidden=[\"'](?:1|true)[\"'][^>]*)>")
_ROW_NUMBER = re.compile(rb"""\br=["']([0-9]{1,7})["']""")
_MERGE = re.compile(rb"<" + _P + rb"mergeCell\b[^>]*?\bref=[\"']([A-Z0-9:$]{2,40})[\"']")


@dataclass(slots=True)
class _SheetScan:
    hidden_rows: list[int] = field(default_factory=list)
    merged: list[str] = field(default_factory=list)
    no_value: list[str] = field(default_factory=list)


def _scan_sheet(data: bytes) -> _SheetScan:
    scan = _SheetScan()
    if b"hidden" in data:
        for m in _HIDDEN_ROW.finditer(data):
            r = _ROW_NUMBER.search(m.group(1))
            if r:
                scan.hidden_rows.append(int(r.group(1)))
    if b"mergeCell" in data:
        scan.merged = [m.group(1).decode("ascii") for m in _MERGE.finditer(data)]
    if any(t in data for t in _FORMULA_HINTS) and _FORMULA.search(data):
        for m in _CELL.finditer(data):
            body = m.group(2)
            if body and _FORMULA.search(body) and not _VALUE.search(body):
                ref = _REF.search(m.group(1))
                scan.no_value.append(ref.group(1).decode("ascii") if ref else "?")
    return scan


def _is_sheet_part(name: str) -> bool:
    return name.endswith(".xml") and "/worksheets/" in name and "/_rels/" not in name


def _is_xml(name: str) -> bool:
    low = name.lower()
    return low.endswith((".xml", ".rels", ".vml")) or low == "[content_types].xml"


def inspect_workbook(path: str | Path, limits: ReadLimits = DEFAULT_LIMITS) -> WorkbookCheck:
    """Check a workbook's structure before a reader opens it; refuse what is unsafe or broken.

    Every member is decompressed once, in chunks, with a hard cap: the sizes
    stored in the archive are used only for an early refusal, never trusted
    to be small. Worksheet parts are kept (up to the cap) and scanned for
    hidden rows, merged cells and formulas without cached values; every XML
    part is scanned for ``<!DOCTYPE`` and ``<!ENTITY``.

    Parameters
    ----------
    path : str or Path
        The file; opened read-only and never changed.
    limits : ReadLimits
        The size and count limits.

    Returns
    -------
    WorkbookCheck

    Raises
    ------
    InputError
        Naming the file and the reason: not found, encrypted or legacy
        (OLE2), corrupt or not a zip, too many members, a member or the
        whole workbook too large once decompressed (naming the limit), or a
        DTD or entity declaration in an XML part.

    Notes
    -----
    Assumes an Office Open XML package ([1]_): sheets are mapped to parts
    through ``xl/workbook.xml`` and its relationships. An OpenDocument file
    gets the size and DTD checks only.
    """
    file = str(path)
    try:
        with open(path, "rb") as fh:
            head = fh.read(8)
    except FileNotFoundError:
        raise _refuse(file, "file not found") from None
    except IsADirectoryError:
        raise _refuse(file, "a folder, not a workbook file") from None
    except OSError as exc:
        raise _refuse(file, f"cannot open the file: {exc.strerror or exc}") from None
    if head.startswith(OLE2_SIGNATURE):
        raise _refuse(file, "encrypted or legacy workbook: save as .xlsx without a password")
    if not head.startswith(ZIP_SIGNATURE):
        raise _refuse(file, "corrupt or not an .xlsx file (it is not a zip package)")
    try:
        size = os.path.getsize(path)
    except OSError as exc:
        raise _refuse(file, f"cannot open the file: {exc.strerror or exc}") from None
    if size > limits.max_total_bytes:
        # Deflate stores incompressible data with a few bytes of overhead per 64 KiB block, so a
        # package larger than the total limit would inflate past it (padding aside, which no
        # workbook has).
        raise _refuse(file, f"the file is {size // MiB} MiB, more than the limit of "
                            f"{limits.max_total_bytes / MiB:g} MiB for a whole workbook")
    scan = _Scan(file=file, limits=limits)
    try:
        entries = None
        if size <= _FAST_PATH_BYTES:
            with open(path, "rb") as fh:
                data = fh.read()
            entries = _central_directory(data)
        if entries is not None:
            _check_count(scan, len(entries))
            for entry in entries:
                _fast_member(scan, data, *entry)
        else:
            _inspect_zipfile(path, scan)
        return _assemble(file, scan.parts, scan.scans, scan.macros, scan.total)
    except InputError:
        raise
    except (zipfile.BadZipFile, zipfile.LargeZipFile, NotImplementedError, RuntimeError, struct.error,
            zlib.error, EOFError, OSError, ValueError, IndexError, KeyError, OverflowError) as exc:
        # Whatever the zip layer trips over in damaged bytes is the same finding for the user.
        raise _refuse(file, f"corrupt or not an .xlsx file ({type(exc).__name__}: {exc})") from None


#: Packages up to this size are read whole and inflated in bounded calls per member
#: (fast for the many small returned forms); larger ones are streamed with zipfile.
_FAST_PATH_BYTES = 16 * MiB
#: Largest ratio of inflated to deflated size the deflate format allows
#: (zlib technical details, zlib.net/zlib_tech.html: "the limit is 1032:1").
DEFLATE_MAX_RATIO = 1032
_PROLOG = re.compile(rb"(?:\s+|<\?.*?\?>|<!--.*?-->)*", re.DOTALL)


def _keep(name: str) -> bool:
    return _is_sheet_part(name) or name.endswith((".rels", "workbook.xml"))


@dataclass(slots=True)
class _Scan:
    """Accumulates what the members of one package show, enforcing the limits as it goes.

    ``total`` adds each member's exact size when it was inflated, otherwise
    the most it can inflate to (``DEFLATE_MAX_RATIO`` times its compressed
    size), so the total limit is never underestimated.
    """

    file: str
    limits: ReadLimits
    parts: dict = field(default_factory=dict)
    scans: dict = field(default_factory=dict)
    total: int = 0
    macros: bool = False

    def cap(self) -> int:
        return min(self.limits.max_member_bytes, self.limits.max_total_bytes - self.total)

    def start(self, name: str, declared: int) -> bool:
        """Note a member; False for a folder entry. Refuses a member declared too large."""
        if name.endswith("/"):
            return False
        if name.lower().endswith("vbaproject.bin"):
            self.macros = True
        if declared > self.limits.max_member_bytes:
            raise _too_big(self.file, name, declared, self.limits.max_member_bytes, "part")
        return True

    def add(self, name: str, out: bytes, cap: int) -> None:
        """Take a fully inflated member (at most ``cap + 1`` bytes were produced)."""
        limits = self.limits
        if len(out) > cap:
            if len(out) > limits.max_member_bytes:
                raise _too_big(self.file, name, len(out), limits.max_member_bytes, "part")
            raise _too_big(self.file, name, self.total + len(out), limits.max_total_bytes, "total")
        self.total += len(out)
        if _is_xml(name):
            if out.startswith((b"\xff\xfe", b"\xfe\xff")):
                text = out.decode("utf-16", errors="replace").encode("utf-8")
            else:
                text = out
            if b"<!" in text and any(m in text for m in _DTD_MARKERS):
                raise _dtd(self.file, name)
            if _is_sheet_part(name):
                self.scans[name] = _scan_sheet(text)
            elif _keep(name):
                self.parts[name] = text

    def member(self, name: str, declared: int, inflate: Callable[[int], bytes]) -> None:
        if self.start(name, declared):
            cap = self.cap()
            self.add(name, inflate(cap), cap)


def _prolog_verdict(head: bytes, complete: bool) -> bool | None:
    """True: a declaration (``<!DOCTYPE``...) before the root element; False: the root comes first;
    None: more bytes are needed (or the start is unusual and the whole part must be scanned)."""
    if head.startswith(b"\xef\xbb\xbf"):
        head = head[3:]
    prolog = _PROLOG.match(head)  # it matches the empty string, so always
    rest = head[prolog.end() if prolog else 0:]
    if not rest:
        return False if complete else None
    if rest.startswith(b"<!"):
        if rest.startswith(b"<!--") or (len(rest) < 9 and not complete):
            return False if complete else None  # a comment not closed yet
        return True
    if rest.startswith(b"<?"):
        return False if complete else None  # a processing instruction not closed yet
    if rest.startswith(b"<") and len(rest) > 1:
        return False
    return None if not complete else False


def _fast_member(scan: _Scan, data: bytes, name: str, method: int, flags: int, csize: int, usize: int,
                 offset: int, crc: int) -> None:
    """Check one member of a package held in memory.

    A part that is kept (worksheets, the workbook part, relationships) is
    inflated whole, with a cap, and scanned. Any other part is inflated only
    up to its root element: a document type declaration is legal only in the
    prolog (XML 1.0, section 2.8), and entity declarations only inside it;
    its size is bounded by ``DEFLATE_MAX_RATIO`` times its compressed size,
    and inflated whole (capped) when that bound exceeds the limit.
    """
    if not scan.start(name, usize):
        return
    file = scan.file
    comp = _member_bytes(data, file, name, flags, csize, offset)
    if method not in (0, 8):
        raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} uses compression method {method}, "
                            "which workbooks do not use")
    cap = scan.cap()
    bound = csize if method == 0 else csize * DEFLATE_MAX_RATIO
    xml = _is_xml(name)
    if _keep(name) or bound > cap:
        scan.add(name, _inflate(comp, file, name, method, cap, crc), cap)
        return
    scan.total += bound
    if not xml:
        return
    if method == 0:
        verdict = _prolog_verdict(comp, True)
    else:
        d = zlib.decompressobj(-15)
        head = b""
        want = 512
        try:
            head = d.decompress(comp, want)
            while True:
                verdict = _prolog_verdict(head, d.eof)
                if verdict is not None or d.eof or not d.unconsumed_tail or len(head) > cap:
                    break
                want *= 4
                head += d.decompress(d.unconsumed_tail, want)
        except zlib.error as exc:
            raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} is damaged ({exc})") from None
    if verdict is None:  # an unusual start (UTF-16, text before the root): scan the part whole
        scan.total -= bound
        scan.add(name, _inflate(comp, file, name, method, cap, crc), cap)
    elif verdict:
        raise _dtd(file, name)


def _member_bytes(data: bytes, file: str, name: str, flags: int, csize: int, offset: int) -> bytes:
    if flags & 0x1:
        raise _refuse(file, f"encrypted workbook part {name!r}: save as .xlsx without a password")
    if offset + _LOCAL.size > len(data):
        raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} lies outside the file")
    sig, *_, nlen, elen = _LOCAL.unpack_from(data, offset)
    if sig != b"PK\x03\x04":
        raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} has no valid header")
    start = offset + _LOCAL.size + nlen + elen
    comp = data[start:start + csize]
    if len(comp) != csize:
        raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} is truncated")
    return comp


def _inflate(comp: bytes, file: str, name: str, method: int, cap: int, crc: int) -> bytes:
    """Inflate one member, producing at most ``cap + 1`` bytes (enough to know it is too big)."""
    if method == 0:
        out = comp[:cap + 1]
    else:
        try:
            out = zlib.decompressobj(-15).decompress(comp, cap + 1)
        except zlib.error as exc:
            raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} is damaged ({exc})") from None
    if len(out) <= cap and zlib.crc32(out) != crc:
        raise _refuse(file, f"corrupt or not an .xlsx file: part {name!r} fails its checksum")
    return out


def _dtd(file: str, name: str) -> InputError:
    return _refuse(file, f"the part {name!r} declares a document type or an entity (<!DOCTYPE or <!ENTITY); "
                         "no legitimate workbook has one, so it is refused")


def _check_count(scan: _Scan, n: int) -> None:
    if n > scan.limits.max_members:
        raise _refuse(scan.file, f"the workbook has {n} parts, more than the limit of {scan.limits.max_members}")


# Zip structures (PKWARE APPNOTE.TXT 4.3.7, 4.3.12, 4.3.16).
_EOCD = struct.Struct("<4sHHHHIIH")
_CDIR = struct.Struct("<4sHHHHHHIIIHHHHHII")
_LOCAL = struct.Struct("<4sHHHHHIIIHH")


def _central_directory(data: bytes) -> list[tuple] | None:
    """Entries ``(name, method, flags, csize, usize, offset, crc)``, or None to use zipfile instead.

    None for anything unusual (zip64, multi-disk, a damaged directory): the
    zipfile path then gives the precise message.
    """
    at = data.rfind(b"PK\x05\x06", max(0, len(data) - 65557))
    if at < 0 or at + _EOCD.size > len(data):
        return None
    _, disk, cd_disk, n_disk, n, _cd_size, cd_offset, _ = _EOCD.unpack_from(data, at)
    if disk or cd_disk or n_disk != n or n == 0xFFFF or cd_offset == 0xFFFFFFFF:
        return None
    entries = []
    pos = cd_offset
    for _ in range(n):
        if pos + _CDIR.size > len(data):
            return None
        (sig, _, _, flags, method, _, _, crc, csize, usize, nlen, elen, clen, _, _, _,
         offset) = _CDIR.unpack_from(data, pos)
        if sig != b"PK\x01\x02" or 0xFFFFFFFF in (csize, usize, offset):
            return None
        raw = data[pos + _CDIR.size: pos + _CDIR.size + nlen]
        name = raw.decode("utf-8" if flags & 0x800 else "cp437", errors="replace")
        entries.append((name, method, flags, csize, usize, offset, crc))
        pos += _CDIR.size + nlen + elen + clen
    return entries


def _inspect_zipfile(path: str | Path, scan: _Scan) -> None:
    """The general path: the zipfile module, streaming each member in chunks with a hard cap."""
    file = scan.file
    try:
        zf = zipfile.ZipFile(path, "r")
    except (zipfile.BadZipFile, zipfile.LargeZipFile, OSError, ValueError, EOFError) as exc:
        raise _refuse(file, f"corrupt or not an .xlsx file ({exc})") from None
    with zf:
        infos = zf.infolist()
        _check_count(scan, len(infos))
        for info in infos:
            scan.member(info.filename, info.file_size, functools.partial(_stream, zf, info, file))


def _stream(zf: zipfile.ZipFile, info: zipfile.ZipInfo, file: str, cap: int) -> bytes:
    kept: list[bytes] = []
    size = 0
    try:
        with zf.open(info, "r") as member:
            while size <= cap:
                chunk = member.read(min(_CHUNK, cap + 1 - size))
                if not chunk:
                    break
                size += len(chunk)
                kept.append(chunk)
    except RuntimeError as exc:  # an encrypted zip member
        raise _refuse(file, f"encrypted or damaged workbook part {info.filename!r} ({exc})") from None
    except NotImplementedError as exc:
        raise _refuse(file, f"corrupt or not an .xlsx file: part {info.filename!r} uses {exc}") from None
    except (zipfile.BadZipFile, zlib.error, EOFError, OSError, ValueError) as exc:
        raise _refuse(file, f"corrupt or not an .xlsx file: part {info.filename!r} is damaged ({exc})") from None
    return b"".join(kept)


def _too_big(file: str, name: str, size: int, limit: int, what: str) -> InputError:
    if what == "part":
        text = (f"the workbook part {name!r} inflates to more than {limit / MiB:g} MiB, the limit for one part "
                "(ReadLimits.max_member_bytes)")
    else:
        text = (f"the workbook inflates to more than {limit / MiB:g} MiB in total (at part {name!r}), the limit "
                "for a whole workbook (ReadLimits.max_total_bytes)")
    return _refuse(file, text + "; it may be a decompression bomb, so it is refused unread")


_ATTR = re.compile(rb"""([\w:.-]+)\s*=\s*(?:"([^"]*)"|'([^']*)')""")
_SHEET_EL = re.compile(rb"<" + _P + rb"sheet\b([^>]*)>")
_REL_EL = re.compile(rb"<" + _P + rb"Relationship\b([^>]*)>")


def _attrs(raw: bytes) -> dict[str, str]:
    """Attributes of one start tag, local names, entity references decoded."""
    out = {}
    for m in _ATTR.finditer(raw):
        key = m.group(1).decode("utf-8", "replace").rpartition(":")[2]
        value = (m.group(2) if m.group(2) is not None else m.group(3)).decode("utf-8", "replace")
        out[key] = html.unescape(value) if "&" in value else value
    return out


_REL_ID = re.compile(rb"""\bId\s*=\s*["']([^"']*)["']""")
_REL_TARGET = re.compile(rb"""\bTarget\s*=\s*["']([^"']*)["']""")


def _text(raw: bytes) -> str:
    value = raw.decode("utf-8", "replace")
    return html.unescape(value) if "&" in value else value


def _rels(data: bytes | None) -> dict[str, str]:
    if not data:
        return {}
    out = {}
    for m in _REL_EL.finditer(data):
        attrs = m.group(1)
        i, t = _REL_ID.search(attrs), _REL_TARGET.search(attrs)
        if i and t:
            out[_text(i.group(1))] = _text(t.group(1))
    return out


def _join(base_dir: str, target: str) -> str:
    """Resolve a relationship target against the folder of the part that names it (OPC, ECMA-376 Part 2)."""
    if target.startswith("/"):
        return target.lstrip("/")
    parts = [p for p in base_dir.split("/") if p]
    for piece in target.split("/"):
        if piece == "..":
            if parts:
                parts.pop()
        elif piece not in ("", "."):
            parts.append(piece)
    return "/".join(parts)


def _assemble(file: str, parts: dict[str, bytes], scans: dict[str, _SheetScan], macros: bool,
              total: int) -> WorkbookCheck:
    root_rels = _rels(parts.get("_rels/.rels"))
    wb_name = next((_join("", t) for t in root_rels.values() if t.lstrip("/").endswith("workbook.xml")),
                   "xl/workbook.xml")
    wb_dir = wb_name.rpartition("/")[0]
    workbook = parts.get(wb_name)
    if workbook is None:
        if scans:
            raise _refuse(file, f"corrupt or not an .xlsx file: the workbook part {wb_name!r} is missing")
        return WorkbookCheck(file=file, macros=macros, uncompressed_bytes=total)
    rels = _rels(parts.get(f"{wb_dir}/_rels/{wb_name.rpartition('/')[2]}.rels"))
    sheets, hidden = [], []
    hidden_rows, merged, no_value = {}, {}, {}
    for m in _SHEET_EL.finditer(workbook):
        el = _attrs(m.group(1))
        name = el.get("name", "")
        sheets.append(name)
        if el.get("state") in ("hidden", "veryHidden"):
            hidden.append(name)
        scan = scans.get(_join(wb_dir, rels.get(el.get("id", ""), "")))
        if scan is None:
            continue
        if scan.hidden_rows:
            hidden_rows[name] = tuple(scan.hidden_rows)
        if scan.merged:
            merged[name] = tuple(scan.merged)
        if scan.no_value:
            no_value[name] = tuple(scan.no_value)
    return WorkbookCheck(file=file, sheets=tuple(sheets), hidden_sheets=tuple(hidden), macros=macros,
                         hidden_rows=hidden_rows, merged=merged, formulas_without_value=no_value,
                         uncompressed_bytes=total)
