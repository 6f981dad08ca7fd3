"""Bounded fuzz run of the workbook and text readers: mutated files must give a clear refusal, never a crash.

Usage::

    python fuzz/fuzz_readers.py --seconds 60 [--seed 1] [--save tests/data/fuzz_regressions]

Seeds are small workbooks and CSV files made here (a returned form, a long
table, a CSV with semicolons). Each case mutates one seed: bytes flipped,
inserted or cut, a zip member replaced by mutated XML, truncated or padded.
Every case is read twice:

* in this process with :func:`roundscore.intake.xlsx.read_file_sheets`, which
  may only return rows or raise :class:`~roundscore.errors.InputError`;
* every ``--isolated-every`` cases, a batch through
  :func:`roundscore.intake.isolation.read_many`, which must return one
  ``FileRows`` or ``ReadFailure`` per file.

Any other outcome is a crash: the input is saved under ``--save`` with a
name made from its hash, and the run ends with exit code 1. Saved crashers
are replayed by ``tests/test_fuzz_regressions.py``.
"""

from __future__ import annotations

import argparse
import hashlib
import io
import random
import sys
import tempfile
import time
import traceback
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from roundscore.errors import InputError  # noqa: E402
from roundscore.intake.isolation import FileRows, ReadFailure, read_many  # noqa: E402
from roundscore.model.limits import ReadLimits  # noqa: E402
from roundscore.intake.xlsx import read_file_sheets  # noqa: E402

#: Limits for fuzzing: small, so that a mutation that inflates is refused quickly.
FUZZ_LIMITS = ReadLimits(max_member_bytes=8 << 20, max_total_bytes=32 << 20, timeout_s=10.0,
                         memory_bytes=512 << 20)
SHEETS = ["Results", "form-info"]
XML_BITS = [b"<!DOCTYPE x>", b"<f>A1</f>", b'<row r="0" hidden="1">', b"<c r=\"ZZZZ99999999\">",
            b"<v>1e999</v>", b"&#0;", b"<mergeCell ref=\"A1:\"/>", b"\xff\xfe", b"<![CDATA[", b"]]>",
            b'<sheet name="Results" r:id="rId999"/>', b"<", b">", b"\x00", b'state="veryHidden"']


def seeds() -> dict[str, bytes]:
    """Small valid files to mutate."""
    import xlsxwriter

    out = {}
    buf = io.BytesIO()
    wb = xlsxwriter.Workbook(buf, {"in_memory": True})
    ws = wb.add_worksheet("Results")
    ws.write_row(8, 0, ["Measurand", "Unit", "Result 1", "Result 2"])
    ws.write_row(9, 0, ["lead", "mg/kg", 0.51, "<0,5"])
    ws.write_formula(10, 2, "=C10*2", None, 1.02)
    ws.merge_range("A1:D1", "title")
    ws.set_row(3, None, None, {"hidden": True})
    info = wb.add_worksheet("form-info")
    info.write_row(0, 0, ["key", "value"])
    info.write_row(1, 0, ["generator", "roundscore"])
    wb.close()
    out["form.xlsx"] = buf.getvalue()
    out["table.csv"] = "lab;measurand;replicate;value\nL1;lead;1;0,51\nL2;lead;1;1 234,5\n".encode("cp1252")
    out["bom.csv"] = b"\xef\xbb\xbflab,measurand,replicate,value\nL1,lead,1,\"0.5\"\n"
    return out


def mutate(rng: random.Random, name: str, data: bytes) -> bytes:
    """One random mutation of ``data``."""
    kind = rng.randrange(7)
    b = bytearray(data)
    if kind == 0 and b:  # flip bytes
        for _ in range(rng.randint(1, 8)):
            b[rng.randrange(len(b))] ^= 1 << rng.randrange(8)
    elif kind == 1:  # cut
        b = b[: rng.randrange(len(b) + 1)]
    elif kind == 2:  # insert junk
        at = rng.randrange(len(b) + 1)
        b[at:at] = rng.randbytes(rng.randint(1, 64))
    elif kind == 3 and name.endswith(".xlsx"):  # mutate the XML inside a member, re-zip correctly
        return _mutate_member(rng, data)
    elif kind == 4:  # overwrite a run with a structural token
        at = rng.randrange(len(b) + 1)
        tok = rng.choice(XML_BITS + [b"PK\x03\x04", b"PK\x01\x02", b"PK\x05\x06", b"\xd0\xcf\x11\xe0"])
        b[at:at + len(tok)] = tok
    elif kind == 5:  # duplicate a slice
        i, j = sorted(rng.randrange(len(b) + 1) for _ in range(2))
        b[j:j] = b[i:j]
    else:  # text mutations of CSV content
        if name.endswith(".csv"):
            text = data.decode("latin-1")
            pos = rng.randrange(len(text) + 1)
            ins = rng.choice(['"', ";", ",", "\n", "\r", "\x00", "−", "\u00a0", "=cmd", "\t", "é"])
            return (text[:pos] + ins + text[pos:]).encode("latin-1", errors="replace")
        return _mutate_member(rng, data)
    return bytes(b)


def _mutate_member(rng: random.Random, data: bytes) -> bytes:
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as zf:
            parts = {n: zf.read(n) for n in zf.namelist()}
    except Exception:
        return data
    name = rng.choice(sorted(parts))
    body = bytearray(parts[name])
    for _ in range(rng.randint(1, 3)):
        at = rng.randrange(len(body) + 1)
        tok = rng.choice(XML_BITS)
        if rng.random() < 0.5:
            body[at:at] = tok
        else:
            body[at:at + len(tok)] = tok
    parts[name] = bytes(body)
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        for n, v in parts.items():
            zf.writestr(n, v)
    return out.getvalue()


def check_in_process(path: Path) -> str | None:
    """"read" or "refused" when the reader behaved (rows or InputError); else the crash text."""
    try:
        read_file_sheets(path, SHEETS if path.suffix == ".xlsx" else [None], limits=FUZZ_LIMITS)
    except InputError as exc:
        return "refused" if str(exc) else "InputError with an empty message"
    except BaseException as exc:  # anything else is what we hunt for
        if isinstance(exc, KeyboardInterrupt):
            raise
        return "".join(traceback.format_exception(exc))
    return "read"


def check_isolated(paths: list[Path]) -> list[tuple[Path, str]]:
    got = read_many(paths, SHEETS, jobs=2, limits=FUZZ_LIMITS)
    bad = []
    if len(got) != len(paths):
        return [(p, "read_many returned a wrong number of results") for p in paths]
    for p, g in zip(paths, got):
        if not isinstance(g, (FileRows, ReadFailure)):
            bad.append((p, f"read_many returned {type(g).__name__}"))
        elif isinstance(g, ReadFailure) and ("reader failed" in g.reason or "stopped by" in g.reason):
            bad.append((p, f"isolated reader: {g.reason}"))
    return bad


def save(folder: Path, suffix: str, data: bytes, why: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    digest = hashlib.sha256(data).hexdigest()[:16]
    path = folder / f"crash-{digest}{suffix}"
    path.write_bytes(data)
    (folder / f"crash-{digest}{suffix}.txt").write_text(why, encoding="utf-8")
    return path


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=30.0, help="time limit of the run (default 30)")
    ap.add_argument("--seed", type=int, default=1, help="random seed (default 1)")
    ap.add_argument("--save", type=Path, default=ROOT / "tests" / "data" / "fuzz_regressions",
                    help="folder for crashing inputs")
    ap.add_argument("--isolated-every", type=int, default=50,
                    help="also read a batch of this many cases through read_many (default 50)")
    args = ap.parse_args(argv)
    rng = random.Random(args.seed)
    base = seeds()
    names = sorted(base)
    deadline = time.monotonic() + args.seconds
    n = refused = crashes = 0
    batch: list[tuple[Path, bytes]] = []
    with tempfile.TemporaryDirectory(prefix="roundscore-fuzz-") as tmp:
        while time.monotonic() < deadline:
            name = rng.choice(names)
            data = base[name]
            for _ in range(rng.randint(1, 3)):
                data = mutate(rng, name, data)
            path = Path(tmp) / f"case{n:06d}{Path(name).suffix}"
            path.write_bytes(data)
            n += 1
            why = check_in_process(path)
            refused += why == "refused"
            if why not in ("read", "refused"):
                crashes += 1
                print(f"CRASH (in process) saved as {save(args.save, path.suffix, data, why)}", file=sys.stderr)
            if path.suffix == ".xlsx":
                batch.append((path, data))
            if len(batch) >= args.isolated_every:
                for p, why in check_isolated([p for p, _ in batch]):
                    crashes += 1
                    data = dict(batch)[p]
                    print(f"CRASH (isolated) saved as {save(args.save, p.suffix, data, why)}", file=sys.stderr)
                for p, _ in batch:
                    p.unlink(missing_ok=True)
                batch = []
            else:
                if path.suffix != ".xlsx":
                    path.unlink(missing_ok=True)
    print(f"fuzz_readers: {n} cases in {args.seconds:g} s (seed {args.seed}): {refused} refused with a "
          f"clear message, {n - refused - crashes} read, crashes: {crashes}")
    return 1 if crashes else 0


if __name__ == "__main__":
    sys.exit(main())
