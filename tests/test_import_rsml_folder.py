"""``rootsim import-rsml`` writes a result folder exactly as ``rootsim grow`` does (issue 7 point 3).

The folder is committed through :func:`rootsim.result_folder.write_result_folder`: a staged sibling swapped in,
``manifest.json`` with the SHA-256 of every file (recomputed here with :mod:`hashlib`, FIPS 180-4), and the same
``--overwrite`` rules, so readers check an imported folder like a grown run.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest

from rootsim.cli import main
from rootsim.errors import SegmentTableError
from rootsim.rootsystem import RootSystem

RUN_FILES = {"manifest.json", "segments.parquet", "summary.json"}

# A hand-written traced plant: a vertical axis 0..-12 cm (two segments of 6 cm) and a lateral whose first traced
# point lies 0.5 cm off the axis at 4 cm depth, running 3 cm horizontally then 4 cm down (a 3-4-5 path of 7 cm).
TRACED = """<?xml version="1.0"?>
<rsml><metadata><version>1</version><unit>cm</unit><resolution>1</resolution></metadata>
<scene><plant id="p1"><root id="axis"><geometry><polyline>
<point x="0" y="0" z="0"/><point x="0" y="0" z="-6"/><point x="0" y="0" z="-12"/>
</polyline></geometry>
<root id="lateral"><properties><branch-segment-index value="0"/></properties><geometry><polyline>
<point x="0.5" y="0" z="-4"/><point x="3.5" y="0" z="-4"/><point x="3.5" y="0" z="-8"/>
</polyline></geometry></root></root></plant></scene></rsml>
"""


def sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def one_error_line(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and len(err.splitlines()) == 1, err
    return err


def hidden_entries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith("."))


@pytest.fixture
def traced(tmp_path) -> Path:
    path = tmp_path / "traced.rsml"
    path.write_text(TRACED)
    return path


def test_import_writes_a_committed_result_folder_with_checksums(tmp_path, traced, capsys):
    out = tmp_path / "imported"
    assert main(["import-rsml", str(traced), "--out", str(out)]) == 0
    assert {p.name for p in out.iterdir()} == RUN_FILES
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["command"] == "import-rsml" and set(manifest["files"]) == {"segments.parquet", "summary.json"}
    for name, entry in manifest["files"].items():
        assert entry["sha256"] == sha256(out / name) and entry["bytes"] == (out / name).stat().st_size
    assert manifest["run_id"] == sha256(out / "segments.parquet")[:16]
    summary = json.loads((out / "summary.json").read_text())
    # lengths from the file itself: 6 + 6 cm of axis, 3 + 4 cm of lateral (the link to the parent adds none)
    assert summary["total_length_cm"] == pytest.approx(19.0, rel=1e-12) and summary["n_segments"] == 4
    assert summary["source_file"] == str(traced)
    assert hidden_entries(tmp_path) == []  # the staged sibling was swapped in, nothing left beside it


def test_earlier_import_refused_without_overwrite_and_replaced_whole_with_it(tmp_path, traced, capsys):
    out = tmp_path / "imported"
    assert main(["import-rsml", str(traced), "--out", str(out)]) == 0
    assert main(["analyze", str(out), "--area-cm2", "400"]) == 0  # derived files recorded against the imported run
    derived = json.loads((out / "manifest.json").read_text())["derived"]
    assert {"profile.csv", "traits.json"} <= set(derived)
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    capsys.readouterr()
    other = tmp_path / "other.rsml"
    other.write_text(TRACED.replace('z="-12"', 'z="-15"'))
    assert main(["import-rsml", str(other), "--out", str(out)]) == 2
    assert "--overwrite" in one_error_line(capsys)
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before
    assert main(["import-rsml", str(other), "--out", str(out), "--overwrite"]) == 0
    assert {p.name for p in out.iterdir()} == RUN_FILES  # the old profile and traits went with the old run
    assert json.loads((out / "summary.json").read_text())["total_length_cm"] == pytest.approx(22.0, rel=1e-12)
    assert hidden_entries(tmp_path) == [] and hidden_entries(out) == []


def test_overwrite_never_deletes_files_that_are_not_results(tmp_path, traced, capsys):
    out = tmp_path / "imported"
    assert main(["import-rsml", str(traced), "--out", str(out)]) == 0
    (out / "tracing_notes.txt").write_text("plant p1 traced by hand")
    capsys.readouterr()
    assert main(["import-rsml", str(traced), "--out", str(out), "--overwrite"]) == 2
    assert "tracing_notes.txt" in one_error_line(capsys)
    assert (out / "tracing_notes.txt").read_text() == "plant p1 traced by hand"


def test_readers_check_an_imported_folder_like_a_grown_run(tmp_path, traced, capsys):
    out = tmp_path / "imported"
    assert main(["import-rsml", str(traced), "--out", str(out)]) == 0
    assert RootSystem.read(out).metadata["run_id"] == sha256(out / "segments.parquet")[:16]
    table = bytearray((out / "segments.parquet").read_bytes())
    table[-12] ^= 0x01  # one flipped bit in the footer: only the manifest's checksum can see it
    (out / "segments.parquet").write_bytes(bytes(table))
    with pytest.raises(SegmentTableError, match="manifest.json"):
        RootSystem.read(out)
    capsys.readouterr()
    assert main(["analyze", str(out), "--area-cm2", "400"]) == 2
    assert "checksum" in one_error_line(capsys)
