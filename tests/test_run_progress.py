"""Progress of batches and studies (issue 14 point 5): one line per finished run in logs, a bar with whole counts
and the time left on a terminal.

Segment counts in the lines are checked against the row count pyarrow reads from each run's Parquet footer (an
independent reader of the written table), and run labels against the plan's (variant, replicate) pairs.
"""

from __future__ import annotations

import io
import re
import shutil
import sys
from pathlib import Path

import pyarrow.parquet as pq
from rootsim.cli import main
from study_helpers import TINY_STUDY, write_study

TAPROOT = Path(__file__).resolve().parents[1] / "params" / "taproot_laterals.toml"
LINE = re.compile(r"run (\d+)/(\d+) (\S+) r(\d{3}): ok, ([\d,]+) segments, \d+\.\d\d s")


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def run_lines(err: str) -> list[re.Match]:
    lines = [line for line in err.splitlines() if line.startswith("run ")]
    matches = [LINE.fullmatch(line) for line in lines]
    assert all(matches), lines
    return matches


def test_batch_prints_one_line_per_finished_run_in_logs(tmp_path, capsys):
    out = tmp_path / "batch"
    assert main(["batch", str(TAPROOT), "--replicates", "2", "--days", "4", "--out", str(out)]) == 0
    matches = run_lines(capsys.readouterr().err)  # pytest's captured stderr is not a terminal
    assert [(int(m[1]), int(m[2])) for m in matches] == [(1, 2), (2, 2)]
    assert sorted((m[3], int(m[4])) for m in matches) == [("taproot_laterals", 0), ("taproot_laterals", 1)]
    for m in matches:
        table = out / m[3] / f"replicate_{m[4]}" / "segments.parquet"
        assert int(m[5].replace(",", "")) == pq.read_metadata(table).num_rows


def test_study_lines_count_runs_finished_before_a_resume(tmp_path, capsys):
    study = write_study(tmp_path, TINY_STUDY.replace("duration_days = 10", "duration_days = 4")
                        .replace("replicates = 2", "replicates = 1"))
    out = tmp_path / "study"
    assert main(["study", "run", str(study), "--out", str(out)]) == 0
    matches = run_lines(capsys.readouterr().err)
    assert [(int(m[1]), int(m[2])) for m in matches] == [(k, 4) for k in range(1, 5)]
    variants = {f"angle-{a}_spacing-{s}" for a in ("45", "80") for s in ("0.5", "1.5")}
    assert {m[3] for m in matches} == variants and {m[4] for m in matches} == {"000"}
    # a study killed after three runs: the resumed one counts them and reports only the fourth
    shutil.rmtree(out / "runs" / "angle-80_spacing-1.5")
    assert main(["study", "run", str(study), "--out", str(out), "--resume"]) == 0
    matches = run_lines(capsys.readouterr().err)
    assert [(int(m[1]), int(m[2]), m[3]) for m in matches] == [(4, 4, "angle-80_spacing-1.5")]


def test_failed_runs_get_a_line_with_their_error(tmp_path, capsys):
    out = tmp_path / "batch"
    assert main(["batch", str(TAPROOT), "--days", "10", "--max-segments", "30", "--out", str(out)]) == 0
    lines = [line for line in capsys.readouterr().err.splitlines() if line.startswith("run ")]
    assert len(lines) == 1
    assert re.fullmatch(r"run 1/1 taproot_laterals r000: failed, \d+\.\d\d s: .*segment budget.*", lines[0]), lines


def test_terminal_shows_a_bar_with_whole_counts_and_time_left(tmp_path, monkeypatch):
    from rootsim.batch import plan_batch, run_batch
    from rootsim.spec import load_spec

    terminal = _Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    spec = load_spec(TAPROOT).with_overrides(duration_days=4)
    run_batch(plan_batch([spec], replicates=2), out_dir=tmp_path / "batch", keep_segments=False)
    shown = terminal.getvalue()
    assert "0/2 run" in shown and re.search(r"[12]/2 run \[\d\d:\d\d<(\d\d:\d\d|\?) left\]", shown), shown
    assert not re.search(r"\d\.\d/\d", shown)  # counts, not 1.0/2.0
    assert "run 1/2" not in shown  # the bar replaces the lines on a terminal


def test_days_keep_one_decimal(monkeypatch):
    from rootsim.progress import progress_bar

    terminal = _Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    with progress_bar(total=60, desc="growing") as bar:
        bar.update(12.5)
        bar.refresh()
    assert "12.5/60.0 day" in terminal.getvalue()


def test_quiet_runs_write_nothing(tmp_path, capsys):
    from rootsim.batch import plan_batch, run_batch
    from rootsim.spec import load_spec

    spec = load_spec(TAPROOT).with_overrides(duration_days=3)
    run_batch(plan_batch([spec]), out_dir=tmp_path / "b", progress=False, keep_segments=False)
    assert capsys.readouterr().err == ""
