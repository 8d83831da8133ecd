"""Result folders committed whole: manifest and checksums, readers refusing mixed or damaged folders, stale files.

Checksums are recomputed here with :mod:`hashlib` (SHA-256, FIPS 180-4) from the files' bytes; Parquet damage
is shown with pyarrow reading the same bytes without page-checksum verification.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pyarrow.parquet as pq
import pytest

from rootsim import result_folder
from rootsim.cli import main
from rootsim.errors import RootsimError, SegmentTableError
from rootsim.rootsystem import RootSystem

PARAMS = Path(__file__).resolve().parents[1] / "params"
TAPROOT = PARAMS / "taproot_laterals.toml"
RUN_FILES = {"manifest.json", "segments.parquet", "summary.json"}


def grow_cli(out, *extra):
    return main(["grow", str(TAPROOT), "--out", str(out), "--days", "6", "--quiet", *extra])


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and len(err.splitlines()) == 1, err
    assert "Traceback" not in err
    return err


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def hidden_entries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith("."))


def test_manifest_names_the_run_and_checksums_every_file(tmp_path):
    out = tmp_path / "run"
    assert grow_cli(out) == 0
    assert {p.name for p in out.iterdir()} == RUN_FILES
    manifest = json.loads((out / "manifest.json").read_text())
    assert set(manifest["files"]) == {"segments.parquet", "summary.json"}
    for name, entry in manifest["files"].items():
        assert entry["sha256"] == sha256(out / name)
        assert entry["bytes"] == (out / name).stat().st_size
    # the run id is the start of the table's SHA-256, so equal results have equal ids
    assert manifest["run_id"] == sha256(out / "segments.parquet")[:16]
    assert json.loads((out / "summary.json").read_text())["run_id"] == manifest["run_id"]
    assert manifest["facts"]["seed"] == 424242 and manifest["facts"]["duration_days"] == 6
    assert hidden_entries(tmp_path) == []


def test_earlier_run_refused_without_overwrite_and_replaced_whole_with_it(tmp_path, capsys):
    out = tmp_path / "run"
    assert grow_cli(out, "--seed", "1") == 0
    assert main(["analyze", str(out)]) == 0
    assert main(["sample", str(out), "--core", "0,0,5,30"]) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    derived = json.loads((out / "manifest.json").read_text())["derived"]
    assert set(derived) == {"profile.csv", "traits.json", "orientation.csv", "cores.csv"}
    assert {e["run_id"] for e in derived.values()} == {json.loads((out / "manifest.json").read_text())["run_id"]}
    assert json.loads((out / "traits.json").read_text())["run_id"] == derived["traits.json"]["run_id"]
    capsys.readouterr()
    # issue 14 point 3: a second grow into the folder must not leave old profiles beside a new table
    assert grow_cli(out, "--seed", "2") == 2
    assert "--overwrite" in one_error_line(capsys)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert grow_cli(out, "--seed", "2", "--overwrite") == 0
    assert {p.name for p in out.iterdir()} == RUN_FILES
    assert (out / "segments.parquet").read_bytes() != before["segments.parquet"]
    assert hidden_entries(tmp_path) == [] and hidden_entries(out) == []


def test_overwrite_never_deletes_files_that_are_not_results(tmp_path, capsys):
    out = tmp_path / "run"
    assert grow_cli(out) == 0
    (out / "field_notes.txt").write_text("plot 7 was waterlogged")
    assert grow_cli(out, "--overwrite", "--seed", "5") == 2
    assert "field_notes.txt" in one_error_line(capsys)
    assert (out / "field_notes.txt").read_text() == "plot 7 was waterlogged"


def test_budget_stop_leaves_no_folder(tmp_path, capsys):
    # issue 14 point 6: a run stopped by the segment budget leaves nothing behind
    out = tmp_path / "deep" / "run"
    assert grow_cli(out, "--max-segments", "20") == 2
    assert "segment budget" in one_error_line(capsys)
    assert not out.exists() and list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("reader", [
    ["analyze", "{dir}"],
    ["sample", "{dir}", "--core", "0,0,5,30"],
    ["export", "{dir}", "--vtk", "{tmp}/x.vtp"],
    ["plot", "{dir}", "--out-dir", "{tmp}/figs"],
    ["render", "{dir}", "--png", "{tmp}/x.png"],
])
def test_readers_refuse_files_of_another_run(tmp_path, capsys, reader):
    a, b = tmp_path / "a", tmp_path / "b"
    assert grow_cli(a, "--seed", "1") == 0 and grow_cli(b, "--seed", "2") == 0
    (a / "summary.json").write_bytes((b / "summary.json").read_bytes())  # a summary of another run
    argv = [x.format(dir=a, tmp=tmp_path) for x in reader]
    assert main(argv) == 2
    assert "summary.json" in one_error_line(capsys)
    assert not (tmp_path / "x.vtp").exists() and not (tmp_path / "x.png").exists()
    assert not (tmp_path / "figs").exists()


def test_folder_without_manifest_still_refuses_a_mismatched_summary(tmp_path, capsys):
    a, b = tmp_path / "a", tmp_path / "b"
    assert grow_cli(a, "--seed", "1") == 0 and grow_cli(b, "--days", "3") == 0
    (a / "manifest.json").unlink()  # as written by an older version: no manifest
    assert main(["analyze", str(a)]) == 0
    (a / "summary.json").write_bytes((b / "summary.json").read_bytes())
    assert main(["analyze", str(a)]) == 2
    assert "different runs" in one_error_line(capsys)


def _data_page_ranges(path: Path) -> list[tuple[int, int]]:
    meta = pq.ParquetFile(path).metadata
    ranges = []
    for g in range(meta.num_row_groups):
        for c in range(meta.num_columns):
            col = meta.row_group(g).column(c)
            start = col.dictionary_page_offset if col.has_dictionary_page else col.data_page_offset
            ranges.append((start, start + col.total_compressed_size))
    return ranges


def test_flipped_bytes_are_reported_not_measured(tmp_path):
    out = tmp_path / "run"
    assert grow_cli(out) == 0
    good = (out / "segments.parquet").read_bytes()
    reference = pq.read_table(out / "segments.parquet")
    bare = tmp_path / "bare" / "segments.parquet"  # a copy outside its folder: no manifest, page checksums only
    bare.parent.mkdir()
    rng = np.random.default_rng(20261202)
    ranges = [r for r in _data_page_ranges(out / "segments.parquet") if r[1] - r[0] > 64]
    silently_changed = reported = 0
    for _ in range(12):
        lo, hi = ranges[rng.integers(len(ranges))]
        pos = int(rng.integers(lo + 40, hi))  # inside a page, past its header
        damaged = bytearray(good)
        damaged[pos] ^= 0xFF
        bare.write_bytes(bytes(damaged))
        try:  # reported, or (a flip in a page header's statistics) the values are exactly the original ones
            system = RootSystem.read(bare)
        except SegmentTableError:
            reported += 1
        else:
            for name in ("x0", "y0", "z0", "x1", "y1", "z1", "length_cm", "parent_id"):
                assert np.array_equal(system[name], reference.column(name).to_numpy()), name
        try:  # the same bytes read without verification: damage that would have passed unnoticed
            unchecked = pq.read_table(bare, page_checksum_verification=False)
            silently_changed += not unchecked.equals(reference)
        except Exception:  # noqa: BLE001 - some flips break decompression outright
            pass
        # inside the result folder the manifest's checksum reports any flipped byte, even in the footer
        (out / "segments.parquet").write_bytes(bytes(damaged))
        with pytest.raises(SegmentTableError, match="manifest.json"):
            RootSystem.read(out)
    assert silently_changed >= 1 and reported >= 6
    footer = bytearray(good)
    footer[-12] ^= 0x01
    (out / "segments.parquet").write_bytes(bytes(footer))
    with pytest.raises(SegmentTableError, match="checksum"):
        RootSystem.read(out / "segments.parquet")


def test_fit_refuses_a_sample_file_changed_after_it_was_written(tmp_path, capsys):
    out = tmp_path / "run"
    assert grow_cli(out) == 0
    assert main(["sample", str(out), "--core", "0,0,5,30"]) == 0
    cores = out / "cores.csv"
    cores.write_text(cores.read_text().replace("0,", "1,", 1))
    capsys.readouterr()
    assert main(["fit", str(TAPROOT), "--observed", str(cores), "--param",
                 "root_classes.taproot.elongation_rate_cm_per_day=1:3", "--out", str(tmp_path / "fit")]) == 2
    assert "cores.csv" in one_error_line(capsys)
    assert not (tmp_path / "fit").exists()


def _dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_stale_temporaries_of_dead_processes_are_removed_on_the_next_run(tmp_path):
    out = tmp_path / "run"
    assert grow_cli(out) == 0
    dead = _dead_pid()
    stale_part = out / f".segments.parquet.rootsim-{dead}-0badc0de.part.parquet"
    stale_part.write_bytes(b"half a table")
    stale_stage = tmp_path / f".run.rootsim-{dead}-0badc0de.staging"
    stale_stage.mkdir()
    (stale_stage / "segments.parquet").write_bytes(b"half")
    live = tmp_path / f".run.rootsim-{os.getpid()}-0000beef.staging"  # a process still running: kept
    live.mkdir()
    other_host = tmp_path / f".run.rootsim-0123abcd-{dead}-0000cafe.staging"  # another machine's: kept for a day
    other_host.mkdir()
    old_style = out / ".profile.csv.ab12cd34.part.csv"  # id-less, from an older version, two days old
    old_style.write_text("x")
    os.utime(old_style, (0, 0))
    assert grow_cli(out, "--overwrite", "--seed", "9") == 0
    assert not stale_part.exists() and not stale_stage.exists() and not old_style.exists()
    assert live.exists() and (other_host.exists() or result_folder._HOST == "0123abcd")
    assert hidden_entries(out) == []


@pytest.mark.parametrize("fail_at", ["write", "manifest", "swap", "exchange_unsupported"])
def test_a_failure_at_any_step_of_the_commit_leaves_the_old_run_or_the_new(tmp_path, monkeypatch, fail_at):
    out = tmp_path / "run"
    assert grow_cli(out, "--seed", "1") == 0
    old = {p.name: p.read_bytes() for p in out.iterdir()}
    real_rename = os.rename

    class Killed(BaseException):
        pass

    if fail_at == "write":
        monkeypatch.setattr("rootsim.rootsystem.RootSystem.write", lambda *a, **k: (_ for _ in ()).throw(Killed()))
    elif fail_at == "manifest":
        monkeypatch.setattr(result_folder.Manifest, "model_dump_json", lambda *a, **k: (_ for _ in ()).throw(Killed()))
    elif fail_at == "swap":
        monkeypatch.setattr(result_folder, "_exchange", lambda a, b: (_ for _ in ()).throw(Killed()))
    else:  # a file system without renameat2: two renames, still never a mixed folder
        monkeypatch.setattr(result_folder, "_exchange", lambda a, b: False)
    if fail_at == "exchange_unsupported":
        assert grow_cli(out, "--seed", "2", "--overwrite") == 0
        new = {p.name: p.read_bytes() for p in out.iterdir()}
        assert new["segments.parquet"] != old["segments.parquet"]
        result_folder.verify_result_folder(out)
    else:
        with pytest.raises(Killed):
            grow_cli(out, "--seed", "2", "--overwrite")
        assert {p.name: p.read_bytes() for p in out.iterdir()} == old
    assert hidden_entries(tmp_path) == []
    assert os.rename is real_rename


def test_check_new_result_folder_refuses_a_file_and_an_unwritable_parent(tmp_path):
    target = tmp_path / "a_file"
    target.write_text("x")
    with pytest.raises(RootsimError, match="not a folder"):
        result_folder.check_new_result_folder(target, overwrite=True)
    with pytest.raises(RootsimError, match="not a writable folder"):
        result_folder.check_new_result_folder(target / "below", overwrite=False)


def test_damaged_or_incomplete_manifest_is_one_line(tmp_path, capsys):
    out = tmp_path / "run"
    assert grow_cli(out) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    (out / "manifest.json").write_text(json.dumps({**manifest, "run_id": ["not", "an", "id"]}))
    assert main(["analyze", str(out)]) == 2
    assert "manifest.json: run_id" in one_error_line(capsys)
    (out / "manifest.json").write_text(json.dumps(manifest))
    (out / "summary.json").unlink()
    assert main(["analyze", str(out)]) == 2
    assert "summary.json: listed in manifest.json" in one_error_line(capsys)


def test_overwrite_through_a_symbolic_link_keeps_the_link(tmp_path):
    real = tmp_path / "real"
    assert grow_cli(real, "--seed", "1") == 0
    link = tmp_path / "link"
    link.symlink_to(real, target_is_directory=True)
    assert grow_cli(link, "--seed", "2", "--overwrite") == 0
    assert link.is_symlink() and json.loads((real / "manifest.json").read_text())["facts"]["seed"] == 2
