"""Bench stage ``command_memory``: memory per segment of the commands that read a whole table.

The bench stand is written as ``segments.parquet`` and each command is run on it through the command line
(``analyze``, ``sample`` with a core grid, a wall and a tube, ``export --vtk``, ``--rsml``, ``--mesh``
(.ply, 6 sides, 1 cm merging) and ``render`` at 800 x 600), after a first run on a small part of the
stand that imports the libraries and loads the compiled kernels. Per command:

``bytes_per_segment``
    peak memory traced by :mod:`tracemalloc` during the command / segments (numpy and Python
    allocations; Arrow's and VTK's own buffers are not traced);
``peak_resident_bytes_per_segment``
    rise of the peak resident memory during an untraced run in a fresh process (after the same small
    first run) / segments (Linux: the high-water mark is restarted through ``/proc/self/clear_refs``;
    None elsewhere). This is the figure of the README's memory table; the target is at most
    ``target_bytes_per_segment``.

``seconds`` is the command's CPU time (the untraced run); the floor is reading the table alone
(:meth:`rootsim.rootsystem.RootSystem.read`), so the ratio tells how much the command costs beyond it.
"""

from __future__ import annotations

import contextlib
import io
import time
import tracemalloc
from pathlib import Path

from . import make_entry

NAME = "command_memory"
ORDER = 95

#: Memory per segment the commands should stay within (issue target, README).
TARGET_BYTES_PER_SEGMENT = 250


def _commands(folder: Path, out: Path) -> dict[str, list[str]]:
    d = str(folder)
    return {
        "analyze": ["analyze", d, "--out-dir", str(out)],
        "sample": ["sample", d, "--core-grid", "4,90,15", "--wall", "in_row_between_plants,90,5",
                   "--tube", "in_row_between_plants,45,120,5.6,0.2", "--out-dir", str(out)],
        "export_vtk": ["export", d, "--vtk", str(out / "roots.vtp")],
        "export_rsml": ["export", d, "--rsml", str(out / "roots.rsml")],
        "export_mesh": ["export", d, "--mesh", str(out / "roots.ply"), "--mesh-sides", "6", "--merge-short-cm", "1"],
        "render": ["render", d, "--png", str(out / "roots.png"), "--size", "800x600"],
    }


def _quiet(argv: list[str]) -> None:
    from ..cli import main

    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        code = main(argv)
    if code != 0:  # pragma: no cover - the bench stand is valid
        raise RuntimeError(f"rootsim {' '.join(argv)} exited with {code}")


_RESIDENT_SCRIPT = """
import contextlib, io, json, sys, time
from rootsim.cli import main
warm, argv = json.loads(sys.argv[1]), json.loads(sys.argv[2])
def quiet(args):
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        assert main(args) == 0
def status(key):
    with open("/proc/self/status") as fh:
        return next(int(line.split()[1]) * 1024 for line in fh if line.startswith(key))
quiet(warm)
try:
    with open("/proc/self/clear_refs", "w") as fh:
        fh.write("5")
except OSError:
    print(json.dumps(None))
    raise SystemExit(0)
before = status("VmRSS:")
start = time.process_time()
quiet(argv)
seconds = time.process_time() - start
print(json.dumps({"rise": status("VmHWM:") - before, "seconds": seconds}))
"""


def _resident_run(warm: list[str], argv: list[str]) -> dict | None:
    """Run ``argv`` in a fresh process after ``warm``: the rise of its peak resident memory and its CPU time.

    A fresh process, because memory freed by an earlier command stays with the process and hides the next
    command's peak. None where the high-water mark cannot be restarted (not Linux).
    """
    import json
    import subprocess
    import sys

    done = subprocess.run([sys.executable, "-c", _RESIDENT_SCRIPT, json.dumps(warm), json.dumps(argv)],
                          capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def run(system, *, workdir, commands: tuple[str, ...] | None = None) -> dict[str, dict]:
    """Peak memory per segment and CPU time of each command on ``system`` (written into ``workdir``).

    ``commands`` picks some of ``analyze``, ``sample``, ``export_vtk``, ``export_rsml``, ``export_mesh``,
    ``render`` (default all).
    """
    from ..rootsystem import RootSystem

    workdir = Path(workdir)
    n = len(system["x0"])

    def write_table(table, name: str) -> Path:
        folder = workdir / name
        folder.mkdir(parents=True, exist_ok=True)
        table.write(folder / "segments.parquet")
        return folder

    stand = write_table(system, "memory_stand")
    frame = system.select(plant=[0]).to_dataframe()
    small = write_table(RootSystem.from_dataframe(frame.iloc[:5_000], system.metadata), "memory_warm")
    del frame
    start = time.process_time()
    RootSystem.read(stand)
    read_seconds = time.process_time() - start
    results = {}
    for name, argv in _commands(stand, workdir / "memory_out").items():
        if commands is not None and name not in commands:
            continue
        warm = _commands(small, workdir / "memory_warm_out")[name]  # imports, compiled kernels, first render
        resident = _resident_run(warm, argv)
        _quiet(warm)
        tracemalloc.start()
        try:
            _quiet(argv)
            traced = tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
        if resident is None:  # no fresh-process figure: time an untraced run here
            start = time.process_time()
            _quiet(argv)
            resident = {"rise": None, "seconds": time.process_time() - start}
        results[f"memory_{name}"] = make_entry(
            segments=n, seconds=resident["seconds"], floor_seconds=read_seconds,
            floor="reading the table alone (RootSystem.read), same run", timing="CPU time (time.process_time), one run",
            bytes_per_segment=traced / max(n, 1),
            peak_resident_bytes_per_segment=None if resident["rise"] is None else resident["rise"] / max(n, 1),
            target_bytes_per_segment=TARGET_BYTES_PER_SEGMENT,
        )
    return results
