"""Progress of long work on stderr: bars on a terminal, one line per stage otherwise.

:func:`progress_bar` draws a bar only when stderr is a terminal; :func:`stage` reports each stage
(reading, growing, writing, sampling, exporting, rendering) with its duration, on a terminal and
in logs alike, so that silence never means "hung".
"""

from __future__ import annotations

import sys


def progress_bar(*, total: float, desc: str, unit: str = "day", enabled: bool | None = None):
    """A :class:`tqdm.tqdm` bar writing to stderr; disabled when stderr is not a terminal.

    Parameters
    ----------
    total : float
        Amount of work (e.g. simulated days).
    desc : str
        Short label shown left of the bar.
    enabled : bool, optional
        Force the bar on or off; default follows ``sys.stderr.isatty()``.
    """
    from tqdm.auto import tqdm

    if enabled is None:
        enabled = sys.stderr.isatty()
    return tqdm(total=total, desc=desc, unit=unit, file=sys.stderr, disable=not enabled, leave=False,
                bar_format="{desc}: {percentage:3.0f}%|{bar}| {n:.1f}/{total:.1f} {unit} [{elapsed}<{remaining}]")


class _Stage:
    """Context manager behind :func:`stage`."""

    def __init__(self, label: str, *, enabled: bool, terminal: bool, stream, min_seconds: float):
        self.label, self.enabled, self.terminal, self.stream = label, enabled, terminal, stream
        self.min_seconds = min_seconds
        self.seconds = 0.0

    def __enter__(self):
        import time

        self._start = time.perf_counter()
        if self.enabled and self.terminal:
            self.stream.write(f"{self.label} ...")
            self.stream.flush()
        return self

    def __exit__(self, kind, value, traceback):
        import time

        self.seconds = time.perf_counter() - self._start
        if not self.enabled:
            return False
        if self.terminal:
            self.stream.write("\r\033[K")  # clear the running line (and a bar drawn over it)
        if kind is None and self.seconds >= self.min_seconds:
            self.stream.write(f"{self.label}: {format_seconds(self.seconds)}\n")
        self.stream.flush()
        return False


def format_seconds(seconds: float) -> str:
    """``"0.42 s"``, ``"12.3 s"``, ``"3 min 05 s"``."""
    if seconds < 10:
        return f"{seconds:.2f} s"
    if seconds < 60:
        return f"{seconds:.1f} s"
    minutes, rest = divmod(int(round(seconds)), 60)
    return f"{minutes} min {rest:02d} s"


#: Stages shorter than this, in seconds, are not reported once done (they are not long work).
MIN_REPORT_SECONDS = 0.5


def stage(label: str, *, enabled: bool = True, stream=None, min_seconds: float | None = None):
    """Report one stage of long work (reading, growing, writing, sampling, ...) on stderr.

    On a terminal the label shows while the stage runs and is replaced by ``"label: 2.31 s"``
    when it ends; otherwise (a log file, a pipe) one line ``"label: 2.31 s"`` is written when the
    stage ends. Stages quicker than ``min_seconds`` leave no line; a stage that raises leaves
    none either (the error message follows instead).

    Parameters
    ----------
    label : str
        What is being done, e.g. ``"writing results/demo/segments.parquet"``.
    enabled : bool
        False writes nothing (``--quiet``).
    stream : file-like, optional
        Default ``sys.stderr``.
    min_seconds : float, optional
        Shortest stage reported once done (default :data:`MIN_REPORT_SECONDS`).

    Returns
    -------
    context manager
        Its ``seconds`` attribute holds the stage's duration once it has ended.
    """
    stream = sys.stderr if stream is None else stream
    terminal = bool(getattr(stream, "isatty", lambda: False)())
    min_seconds = MIN_REPORT_SECONDS if min_seconds is None else float(min_seconds)
    return _Stage(label, enabled=enabled, terminal=terminal, stream=stream, min_seconds=min_seconds)
