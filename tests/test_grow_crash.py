"""SIGKILL `rootsim grow` at random (seeded) moments: the folder holds the old run or the new one, never a mix,
and the next run removes the temporary files the killed process left."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

from rootsim.cli import main
from rootsim.result_folder import verify_result_folder

ROOT = Path(__file__).resolve().parents[1]
SPEC = ROOT / "params" / "taproot_laterals.toml"


def folder_bytes(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def grow_argv(out: Path, seed: int) -> list[str]:
    return ["grow", str(SPEC), "--out", str(out), "--days", "20", "--seed", str(seed), "--overwrite", "--quiet"]


def test_sigkill_during_grow_never_mixes_runs(tmp_path):
    out, reference = tmp_path / "run", tmp_path / "reference"
    assert main(grow_argv(out, 1)) == 0
    old = folder_bytes(out)
    assert main(grow_argv(reference, 2)) == 0  # what a complete new run leaves (results are byte-identical)
    new = folder_bytes(reference)
    assert old["segments.parquet"] != new["segments.parquet"]
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    command = [sys.executable, "-m", "rootsim", *grow_argv(out, 2)]

    start = time.monotonic()  # one full run in a subprocess sets the range of kill moments
    subprocess.run(command[:-4] + ["--out", str(tmp_path / "timing"), "--seed", "2", "--quiet"], env=env, check=True)
    full = time.monotonic() - start

    rng = np.random.default_rng(77)
    seen = set()
    for moment in rng.uniform(0.4 * full, 1.1 * full, size=5):
        proc = subprocess.Popen(command, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        time.sleep(float(moment))
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        state = folder_bytes(out)
        assert state in (old, new), sorted(state)  # the old run or the new one, whole
        verify_result_folder(out)
        seen.add("new" if state == new else "old")
        if state == new:  # put the old run back so the next kill again interrupts a replacement
            assert main(grow_argv(out, 1)) == 0
    # the next complete run commits and leaves no temporary file of the killed processes behind
    assert main(grow_argv(out, 2)) == 0
    assert folder_bytes(out) == new
    leftovers = [p.name for p in list(tmp_path.iterdir()) + list(out.iterdir()) if p.name.startswith(".")]
    assert leftovers == []
    assert seen  # at least one kill landed (which state it saw depends on the machine's speed)
