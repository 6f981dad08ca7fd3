"""A seeded generator of large rounds (invented data), returned as filled-in submission forms.

Scenario (invented): the *Skerrywater Proficiency Services* feed scheme
SKRF sends one compound feed to many laboratories, who measure up to 40
trace elements, vitamins and nutrients in replicate. The generator writes a
round folder in the shape a coordinator has after the returns come in:

``round.toml``
    One ``[measurand.NAME]`` per measurand, cycling through the ways a
    round sets x_pt and σ_pt (Algorithm A with a fixed σ_pt, the Horwitz
    function, the robust SD; a reference value with ζ, En with U and k; the
    median with z′), so every branch of the evaluation runs.
``participants.csv``
    Lab code, an invented name and contact.
``forms/``
    One submission workbook per lab, made with
    :func:`roundscore.intake.forms.write_form` (what ``roundscore forms``
    writes) and then *filled in*: the result, uncertainty and method cells
    are written into the workbook's sheet XML, as a spreadsheet program
    would store them, leaving every other part of the form untouched.

Planted features, at fixed rates: about 1 % outlying labs per measurand, a
few censored results (``<limit``), a few results not reported, some labs
giving u, others U and k, and two methods for some measurands.

Every value is drawn in the main process from one seeded generator, so the
files are the same for any number of jobs.
"""

from __future__ import annotations

import csv
import re
import zipfile
from dataclasses import dataclass, replace
from pathlib import Path
from collections.abc import Sequence

import numpy as np

from roundscore.support import parallel
from roundscore.intake.forms import FIRST_ROW, RESULTS_SHEET, write_form
from roundscore.outputs.outfolder import atomic_folder

__all__ = ["make_big_round", "BigRound", "BIG_SEED", "BIG_ID", "fill_form"]

BIG_SEED = 20270301
BIG_ID = "SKRF-2027-03"
#: Share of labs made outlying per measurand (invented scenario).
OUTLIER_RATE = 0.01
#: Share of results reported as ``<limit`` and not reported at all (invented scenario).
CENSORED_RATE = 0.003
MISSING_RATE = 0.005

_ELEMENTS = [
    "iron", "zinc", "copper", "manganese", "selenium", "iodine", "cobalt", "molybdenum", "chromium", "nickel",
    "cadmium", "lead", "mercury", "arsenic", "calcium", "phosphorus", "magnesium", "sodium", "potassium",
    "sulfur", "vitamin_a", "vitamin_d3", "vitamin_e", "vitamin_b1", "vitamin_b2", "vitamin_b6", "niacin",
    "biotin", "folic_acid", "choline", "protein", "fat", "fibre", "ash", "moisture", "starch", "sugar",
    "lysine", "methionine", "threonine",
]
# How x_pt and σ_pt are set, cycled over the measurands: (assigned, sigma_pt, score).
_SCHEMES = [
    ("algorithm-a", "fixed", "z"),
    ("algorithm-a", "horwitz", "z"),
    ("algorithm-a", "robust-sd", "z"),
    ("reference", "fixed", "zeta"),
    ("reference", "fixed", "en"),
    ("median", "robust-sd", "z-prime"),
]
_METHODS = ("ICP-MS", "ICP-OES", "AAS", "HPLC")
_SYLLABLES = ["ash", "bar", "cal", "dun", "elm", "fen", "gar", "hol", "ink", "jur", "kel", "lor", "mar",
              "nor", "ost", "pen", "quar", "ros", "sal", "thor", "ul", "ven", "wes", "yar"]
_KINDS = ["Analytical", "Laboratory", "Testing Services", "Food Lab", "Feed Analysis", "Scientific"]


@dataclass(frozen=True, slots=True, kw_only=True)
class BigRound:
    """What :func:`make_big_round` wrote.

    Attributes
    ----------
    folder : Path
        The round folder (``round.toml``, ``participants.csv``, ``forms/``).
    forms : tuple of Path
        The filled-in forms, one per lab, in lab order.
    labs, measurands, replicates : int
        The round's size.
    cells : int
        Result cells filled in (labs × measurands × replicates, less the blanks).
    """

    folder: Path
    forms: tuple[Path, ...]
    labs: int
    measurands: int
    replicates: int
    cells: int


def _measurand_names(m: int) -> list[str]:
    names = list(_ELEMENTS)
    i = 2
    while len(names) < m:
        names += [f"{n}_{i}" for n in _ELEMENTS]
        i += 1
    return names[:m]


def _round_toml(names: list[str], true: np.ndarray, s_between: np.ndarray, replicates: int) -> str:
    lines = [
        "# Large round made by roundscore.demo.big_round (invented data): one compound feed, many laboratories.",
        "[round]",
        f'id = "{BIG_ID}"',
        'title = "Feed scheme round 3: trace elements, vitamins and nutrients in a compound feed"',
        'scheme = "SKRF"',
        'date = "2027-03-01"',
        'provider = "Skerrywater Proficiency Services"',
        'material = "Compound feed, test item CF-03"',
        'results = "forms"',
        'participants = "participants.csv"',
        f"replicates = {replicates}",
        "",
    ]
    for i, n in enumerate(names):
        assigned, sigma, score = _SCHEMES[i % len(_SCHEMES)]
        lines += [f"[measurand.{n}]", 'unit = "mg/kg"']
        if assigned == "reference":
            lines += [f"assigned = {true[i]:.6g}", f"u_assigned = {0.1 * s_between[i]:.4g}"]
        else:
            lines.append(f'assigned = "{assigned}"')
        if sigma == "fixed":
            lines.append(f"sigma_pt = {1.2 * s_between[i]:.4g}")
        else:
            lines.append(f'sigma_pt = "{sigma}"')
        lines += [f'score = "{score}"', "decimals = 3", ""]
    return "\n".join(lines)


def _lab_name(rng: np.random.Generator) -> str:
    a, b = rng.choice(len(_SYLLABLES), 2)
    return f"{_SYLLABLES[a].capitalize()}{_SYLLABLES[b]} {_KINDS[int(rng.integers(len(_KINDS)))]}"


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


_BLANK = re.compile(rb'<c r="([A-Z]+)(\d+)" s="(\d+)"/>')


def fill_form(path: Path, cells: dict[str, str | float]) -> None:
    """Write values into the empty cells of a form, in place, as a spreadsheet program stores them.

    ``cells`` maps a cell reference (``"C10"``) to a number (stored as a
    number) or a text (stored as an inline string). Only cells that are
    blank in the form are filled; the rest of the workbook is copied
    unchanged.

    Raises
    ------
    KeyError
        When a reference is not an empty cell of the results sheet.
    """
    path = Path(path)
    with zipfile.ZipFile(path) as z:
        infos = z.infolist()
        data = {i.filename: z.read(i.filename) for i in infos}
    name = _sheet_part(data, RESULTS_SHEET)
    todo = dict(cells)

    def put(mo: re.Match) -> bytes:
        ref = (mo.group(1) + mo.group(2)).decode()
        if ref not in todo:
            return mo.group(0)
        v = todo.pop(ref)
        head = b'<c r="' + ref.encode() + b'" s="' + mo.group(3) + b'"'
        if isinstance(v, str):
            return head + b' t="inlineStr"><is><t>' + _escape(v).encode() + b"</t></is></c>"
        return head + b"><v>" + repr(float(v)).encode() + b"</v></c>"

    data[name] = _BLANK.sub(put, data[name])
    if todo:
        raise KeyError(f"not empty cells of the form: {', '.join(sorted(todo))}")
    tmp = path.with_suffix(".filling")
    with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED, compresslevel=1) as z:
        for info in infos:
            z.writestr(info, data[info.filename], compress_type=zipfile.ZIP_DEFLATED, compresslevel=1)
    tmp.replace(path)


def _found(match: re.Match[str] | None) -> str:
    """The first group of a match in a workbook this module wrote itself (so it is there)."""
    if match is None:
        raise ValueError("the workbook written lacks a part it always has")
    return match.group(1)


def _sheet_part(data: dict[str, bytes], sheet: str) -> str:
    wb = data["xl/workbook.xml"].decode()
    rels = data["xl/_rels/workbook.xml.rels"].decode()
    rid = _found(re.search(r'<sheet name="' + re.escape(sheet) + r'" sheetId="\d+" r:id="(rId\d+)"', wb))
    target = _found(re.search(r'<Relationship Id="' + rid + r'" Type="[^"]+" Target="([^"]+)"', rels))
    return "xl/" + target.lstrip("/").removeprefix("xl/")


def _col(j: int) -> str:
    s = ""
    j += 1
    while j:
        j, r = divmod(j - 1, 26)
        s = chr(65 + r) + s
    return s


def _write_batch(batch: Sequence[tuple]) -> list[int]:
    from roundscore.intake.roundfile import load_round

    rnd = load_round(parallel.shared())
    out = []
    for lab, name, path, cells in batch:
        write_form(rnd, lab, Path(path), name=name)
        fill_form(Path(path), cells)
        out.append(len(cells))
    return out


def make_big_round(folder: str | Path, *, labs: int = 2000, measurands: int = 40, replicates: int = 2,
                   seed: int = BIG_SEED, jobs: int | None = None, progress=None) -> BigRound:
    """Write a large invented round, with one filled-in submission form per lab, into ``folder``.

    Parameters
    ----------
    folder : path
        A new or empty folder, or one this function wrote before (replaced
        whole, as an output folder is: :func:`roundscore.outputs.outfolder.atomic_folder`).
    labs, measurands, replicates : int
        The size: labs ≥ 3, 1 ≤ measurands, replicates ≥ 1.
    seed : int
        Seed of the generator; the same seed and size give the same files.
    jobs : int or None
        Worker processes for writing the forms (None = all cores); the files
        do not depend on it.

    Returns
    -------
    BigRound
    """
    if labs < 3 or measurands < 1 or replicates < 1:
        raise ValueError(f"need labs ≥ 3, measurands ≥ 1, replicates ≥ 1; got {labs}, {measurands}, {replicates}")
    folder = Path(folder)
    with atomic_folder(folder, kind="benchmark round") as tmp:
        big = _write_big_round(tmp, labs=labs, measurands=measurands, replicates=replicates, seed=seed,
                               jobs=jobs, progress=progress)
    return replace(big, folder=folder, forms=tuple(folder / p.relative_to(tmp) for p in big.forms))


def _write_big_round(folder: Path, *, labs: int, measurands: int, replicates: int, seed: int,
                     jobs: int | None, progress) -> BigRound:
    forms_dir = folder / "forms"
    forms_dir.mkdir()
    rng = np.random.default_rng(seed)
    names = _measurand_names(measurands)
    true = 10.0 ** rng.uniform(-1.0, 3.0, measurands)  # 0.1 to 1000 mg/kg
    s_between = true * rng.uniform(0.04, 0.12, measurands)
    s_within = s_between * rng.uniform(0.2, 0.5, measurands)
    (folder / "round.toml").write_text(_round_toml(names, true, s_between, replicates), encoding="utf-8")
    codes = [f"L{i:04d}" for i in range(1, labs + 1)]
    lab_names = [_lab_name(rng) for _ in codes]
    with open(folder / "participants.csv", "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["lab", "name", "contact"])
        for code, nm in zip(codes, lab_names):
            w.writerow([code, nm, f"pt@{code.lower()}.example"])
    # All values at once: labs × measurands × replicates.
    bias = rng.normal(0.0, 1.0, (labs, measurands)) * s_between
    outlier = rng.random((labs, measurands)) < OUTLIER_RATE
    bias = np.where(outlier, rng.choice([-1.0, 1.0], (labs, measurands)) * rng.uniform(4, 8, (labs, measurands))
                    * s_between, bias)
    values = (true[None, :, None] + bias[:, :, None]
              + rng.normal(0.0, 1.0, (labs, measurands, replicates)) * s_within[:, None])
    values = np.maximum(values, 1e-3 * true[None, :, None])  # a mass fraction cannot be negative
    censored = rng.random((labs, measurands)) < CENSORED_RATE
    missing = rng.random((labs, measurands)) < MISSING_RATE
    gives = rng.integers(0, 3, labs)  # 0: u, 1: U and k, 2: no uncertainty
    u_rel = rng.uniform(0.03, 0.10, (labs, measurands))
    method = rng.integers(0, len(_METHODS), labs)
    col_u = 2 + replicates
    items = []
    total = 0
    for li, code in enumerate(codes):
        cells: dict[str, str | float] = {}
        for mi in range(measurands):
            row = FIRST_ROW + mi
            if missing[li, mi]:
                continue
            for rep in range(replicates):
                ref = f"{_col(2 + rep)}{row}"
                if censored[li, mi]:
                    cells[ref] = f"<{float(f'{0.5 * true[mi]:.2g}'):g}"
                else:
                    cells[ref] = float(f"{values[li, mi, rep]:.5g}")
            mean = float(values[li, mi].mean())
            if gives[li] == 0:
                cells[f"{_col(col_u)}{row}"] = float(f"{u_rel[li, mi] * mean:.2g}")
            elif gives[li] == 1:
                cells[f"{_col(col_u + 1)}{row}"] = float(f"{2 * u_rel[li, mi] * mean:.2g}")
                cells[f"{_col(col_u + 2)}{row}"] = 2.0
            if mi % 5 == 0:
                cells[f"{_col(col_u + 3)}{row}"] = _METHODS[(method[li] + mi) % len(_METHODS)]
        path = forms_dir / f"{BIG_ID}-{code}.xlsx"
        items.append((code, lab_names[li], str(path), cells))
        total += sum(1 for mi in range(measurands) if not missing[li, mi]) * replicates
    parallel.run_batches(_write_batch, items, jobs=jobs, shared=str(folder / "round.toml"),
                         progress=progress, stage="forms")
    return BigRound(folder=folder, forms=tuple(Path(i[2]) for i in items), labs=labs, measurands=measurands,
                    replicates=replicates, cells=total)
