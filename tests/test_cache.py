"""The input cache (roundscore/intake/cache.py): only an optimisation, the same table and outputs with or without it."""
# Source of expected values: the tool's own contract (the table and outputs read without the cache); no outside
# reference values here.

from __future__ import annotations

import io
import json
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from roundscore.cli import main
from roundscore.demo.big_round import make_big_round
from roundscore.intake.cache import CACHE_FOLDER, PACK_NAME, InputCache
from roundscore.intake.readers import read_results
from roundscore.intake.roundfile import load_round
from roundscore.outputs.outfolder import check_target, read_marker
from roundscore.pipeline import check_round, run_round

FORMATS = ("csv", "xlsx")  # the PDFs and pages depend on the same evaluation; these are quick to compare


@pytest.fixture(scope="module")
def big(tmp_path_factory) -> Path:
    return make_big_round(tmp_path_factory.mktemp("c") / "r", labs=12, measurands=4, replicates=2, jobs=1).folder


@pytest.fixture(scope="module")
def reference(big, tmp_path_factory):
    """The round read and scored without any cache."""
    out = tmp_path_factory.mktemp("ref") / "out"
    ev, _ = run_round(big, out, jobs=1, formats=FORMATS, use_cache=False)
    assert not (out / CACHE_FOLDER).exists()
    return ev, out


def _files(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file() and CACHE_FOLDER not in p.relative_to(folder).parts}


def _same_evaluation(a, b) -> None:
    pd.testing.assert_frame_equal(a.scores, b.scores)
    pd.testing.assert_frame_equal(a.table.frame, b.table.frame)
    assert a.table.frame.dtypes.equals(b.table.frame.dtypes)
    assert a.table.warnings == b.table.warnings and a.table.readings == b.table.readings
    assert a.table.lab_places == b.table.lab_places and a.table.receipts == b.table.receipts


def test_scores_are_the_same_bytes_cold_warm_and_without_cache(big, reference, tmp_path):
    ev0, ref_out = reference
    out = tmp_path / "out"
    ev1, _ = run_round(big, out, jobs=1, formats=FORMATS)  # cold: the cache is made in the new outputs
    pack = out / CACHE_FOLDER / PACK_NAME
    assert pack.is_file()
    first = pack.read_bytes()
    ev2, _ = run_round(big, out, jobs=2, formats=FORMATS)  # warm: every form from the cache
    _same_evaluation(ev0, ev1)
    _same_evaluation(ev0, ev2)
    assert _files(out) == _files(ref_out)
    assert pack.read_bytes() == first  # the same forms give the same pack
    # The cache folder is ours, listed by its own marker: the output folder is still one score may replace.
    assert read_marker(out / CACHE_FOLDER).kind == "input cache"
    assert check_target(out) == "ours"


def test_warm_read_takes_every_form_from_the_cache(big, tmp_path):
    rnd = load_round(big)
    cold = InputCache(rnd, None)
    t1 = read_results(rnd, jobs=1, cache=cold)
    folder = tmp_path / "c"
    folder.mkdir()
    assert cold.misses == 12 and cold.hits == 0 and cold.save(folder)
    warm = InputCache(rnd, folder)
    assert warm.ignored is None
    t2 = read_results(rnd, jobs=1, cache=warm)
    assert warm.hits == 12 and warm.misses == 0 and not warm.changed
    pd.testing.assert_frame_equal(t1.frame, t2.frame)


def _damaged(folder: Path, how: str, other: Path) -> None:
    pack = folder / PACK_NAME
    data = pack.read_bytes()
    if how == "missing":
        pack.unlink()
    elif how == "truncated":
        pack.write_bytes(data[: len(data) // 2])
    elif how == "corrupted":
        b = bytearray(data)
        for i in range(len(b) // 3, len(b) // 3 + 64):
            b[i] ^= 0x5A
        pack.write_bytes(bytes(b))
    elif how == "garbage":
        pack.write_bytes(b"PK\x03\x04 not a cache at all")
    elif how == "foreign":  # another round's cache (another round id and settings) swapped in
        shutil.copyfile(other, pack)
    elif how == "pickled":  # an object array needs pickle to load: never allowed
        buf = io.BytesIO()
        np.savez(buf, meta=np.array([{"format": 1}], dtype=object))
        pack.write_bytes(buf.getvalue())
    elif how in ("swapped", "values"):  # a consistent pack (digest recomputed) whose entries lie
        with np.load(io.BytesIO(data), allow_pickle=False) as z:
            arrays = {k: z[k] for k in z.files}
        meta = json.loads(arrays["meta"].tobytes())
        if how == "swapped":  # two forms' entries trade their keys
            e = meta["entries"]
            e[0]["digest"], e[1]["digest"] = e[1]["digest"], e[0]["digest"]
        else:  # the rows of every entry altered, under keys that stay right: the digest must catch it
            arrays["n_value"] = arrays["n_value"] + 1.0
        arrays["meta"] = np.frombuffer(json.dumps(meta).encode(), dtype=np.uint8)
        if how == "swapped":
            from roundscore.intake.cache import _digest

            del arrays["digest"]
            arrays["digest"] = np.frombuffer(_digest(arrays), dtype=np.uint8)
        buf = io.BytesIO()
        np.savez(buf, **arrays)
        pack.write_bytes(buf.getvalue())
    else:
        raise AssertionError(how)


@pytest.fixture(scope="module")
def other_pack(tmp_path_factory) -> Path:
    r = make_big_round(tmp_path_factory.mktemp("o") / "r", labs=5, measurands=2, replicates=1, seed=7, jobs=1).folder
    check_round(r, jobs=1)
    return r / "out" / CACHE_FOLDER / PACK_NAME


@pytest.mark.parametrize("how", ["missing", "truncated", "corrupted", "garbage", "foreign", "pickled", "swapped",
                                 "values"])
def test_a_damaged_cache_is_ignored_and_the_forms_read_again(big, reference, other_pack, tmp_path, how):
    ev0, _ = reference
    rnd_dir = tmp_path / "r"
    shutil.copytree(big, rnd_dir)
    check_round(rnd_dir, jobs=1)
    folder = rnd_dir / "out" / CACHE_FOLDER
    _damaged(folder, how, other_pack)
    rnd = load_round(rnd_dir)
    cache = InputCache(rnd, folder)
    table = read_results(rnd, jobs=1, cache=cache)
    pd.testing.assert_frame_equal(table.frame.drop(columns="file"), ev0.table.frame.drop(columns="file"))
    if how == "swapped":  # the pack is whole; the two forms whose keys lie are read again, the others used
        assert (cache.hits, cache.misses) == (10, 2)
    else:
        assert cache.hits == 0 and cache.misses == 12
        assert cache.ignored is not None
    # The next check mends the cache; the one after reads nothing.
    checked = check_round(rnd_dir, jobs=1)
    _same_evaluation(checked.evaluation, check_round(rnd_dir, jobs=1).evaluation)
    again = InputCache(rnd, folder)
    read_results(rnd, jobs=1, cache=again)
    assert (again.hits, again.misses) == (12, 0)


def test_stale_entries_and_settings(big, tmp_path):
    rnd_dir = tmp_path / "r"
    shutil.copytree(big, rnd_dir)
    check_round(rnd_dir, jobs=1)
    folder = rnd_dir / "out" / CACHE_FOLDER
    toml = rnd_dir / "round.toml"
    text = toml.read_text(encoding="utf-8")
    # An exclusion does not affect reading: every form from the cache.
    lab = sorted(p.name for p in (rnd_dir / "forms").iterdir())[0]
    toml.write_text(text + '\n[[exclude]]\nlab = "L0001"\nreason = "sample damaged"\n', encoding="utf-8")
    cache = InputCache(load_round(rnd_dir), folder)
    read_results(load_round(rnd_dir), jobs=1, cache=cache)
    assert (cache.hits, cache.misses) == (12, 0)
    # A changed form is read again, alone (stale entry); the pack then holds the new one only.
    form = rnd_dir / "forms" / lab
    data = form.read_bytes()
    form.write_bytes(data)  # same bytes, new time: still a hit
    cache = InputCache(load_round(rnd_dir), folder)
    read_results(load_round(rnd_dir), jobs=1, cache=cache)
    assert (cache.hits, cache.misses) == (12, 0)
    second = sorted((rnd_dir / "forms").iterdir())[1]
    shutil.copyfile(second, form)  # another lab's bytes under this name: a stale entry, and then a duplicate lab
    cache = InputCache(load_round(rnd_dir), folder)
    with pytest.raises(Exception, match="returned two forms"):
        read_results(load_round(rnd_dir), jobs=1, cache=cache)
    assert (cache.hits, cache.misses) == (11, 1)
    form.write_bytes(data)
    # A setting that affects reading (the decimal mark) makes the whole pack stale.
    toml.write_text(text.replace("[round]\n", '[round]\ndecimal = "comma"\n', 1), encoding="utf-8")
    cache = InputCache(load_round(rnd_dir), folder)
    assert cache.ignored is not None and "settings" in cache.ignored


def test_a_form_with_problems_is_not_cached_the_others_are(big, tmp_path, capsys):
    rnd_dir = tmp_path / "r"
    shutil.copytree(big, rnd_dir)
    bad = sorted((rnd_dir / "forms").iterdir())[3]
    bad.write_bytes(b"not a workbook")
    assert main(["check", str(rnd_dir)]) == 2
    capsys.readouterr()
    folder = rnd_dir / "out" / CACHE_FOLDER
    rnd = load_round(rnd_dir)
    cache = InputCache(rnd, folder)
    with pytest.raises(Exception, match="not a zip package"):
        read_results(rnd, jobs=1, cache=cache)
    assert (cache.hits, cache.misses) == (11, 1)
    meta = json.loads(np.load(folder / PACK_NAME, allow_pickle=False)["meta"].tobytes())
    assert bad.name not in {Path(e["path"]).name for e in meta["entries"]} and len(meta["entries"]) == 11


def test_no_cache_in_a_folder_that_is_not_ours(big, tmp_path, capsys):
    rnd_dir = tmp_path / "r"
    shutil.copytree(big, rnd_dir)
    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("the user's", encoding="utf-8")
    assert main(["check", str(rnd_dir), "--out", str(mine)]) == 1  # 12 labs: u(x_pt) checks fail
    assert "Changes: not kept" in capsys.readouterr().out
    assert sorted(p.name for p in mine.iterdir()) == ["notes.txt"]
    # --no-cache: nothing read from or written to the input cache (the summary is still kept).
    assert main(["check", str(rnd_dir), "--no-cache"]) == 1
    assert not (rnd_dir / "out" / CACHE_FOLDER / PACK_NAME).exists()
    capsys.readouterr()
    # score takes the folder check made, and writes the cache into its outputs.
    assert main(["score", str(rnd_dir), "--quiet", "--formats", "csv"]) == 0
    assert (rnd_dir / "out" / CACHE_FOLDER / PACK_NAME).is_file()
    assert main(["score", str(rnd_dir), "--quiet", "--formats", "csv", "--no-cache"]) == 0
    assert not (rnd_dir / "out" / CACHE_FOLDER).exists()


def test_a_recheck_checks_the_target_once_and_before_any_write(big, tmp_path, monkeypatch, capsys):
    """The check command looks for its cache without checking the output folder again (the round's forms are
    all protected paths: each check walks them), and checks it once more before it writes there; a folder that
    became a user's in between is left alone (the tool's own contract: nothing it did not make is changed)."""
    import roundscore.pipeline as pipeline
    from roundscore.pipeline import CachePlace

    out = tmp_path / "out"
    first = main(["check", str(big), "--out", str(out), "--jobs", "1"])
    assert first in (0, 1)  # 1: the small generated round fails a check (said, not an error)
    calls = []
    real = pipeline.check_target
    monkeypatch.setattr(pipeline, "check_target", lambda *a, **k: calls.append(a) or real(*a, **k))
    capsys.readouterr()
    assert main(["check", str(big), "--out", str(out), "--jobs", "1"]) == first  # forms unchanged: none cached
    assert "are valid" in capsys.readouterr().out
    assert len(calls) == 2  # once when the place is found, once before the change summary is written
    # A place that found the target new, whose folder then became somebody else's: create() checks again.
    user = tmp_path / "user"
    place = CachePlace(out=user, state="new")
    user.mkdir()
    (user / "notes.txt").write_text("mine")
    assert place.existing() is None
    assert place.create() is None
    assert sorted(p.name for p in user.iterdir()) == ["notes.txt"]
    assert (user / "notes.txt").read_text() == "mine"
