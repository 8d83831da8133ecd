"""Progress of long work on stderr: bars on a terminal, one line per stage otherwise.

:func:`progress_bar` draws a bar only when stderr is a terminal; :func:`stage` reports each stage
(reading, growing, writing, sampling, exporting, rendering) with its duration, on a terminal and
in logs alike, so that silence never means "hung".
"""

from __future__ import annotations

import sys


def progress_bar(*, total: float, desc: str, unit: str = "day", enabled: bool | None = None,
                 whole_numbers: bool | None = None, min_interval_seconds: float = 0.1):
    """A :class:`tqdm.tqdm` bar writing to stderr; disabled when stderr is not a terminal.

    Parameters
    ----------
    total : float
        Amount of work (e.g. simulated days).
    desc : str
        Short label shown left of the bar.
    enabled : bool, optional
        Force the bar on or off; default follows ``sys.stderr.isatty()``.
    whole_numbers : bool, optional
        Show the counts as integers (``3/16 run``) rather than with one decimal (``12.5/60.0 day``);
        default: integers for every unit but days.
    min_interval_seconds : float
        Shortest time between two redraws (0: redraw at every update, for few slow items such as runs).
    """
    from tqdm.auto import tqdm

    if enabled is None:
        enabled = sys.stderr.isatty()
    if whole_numbers is None:
        whole_numbers = unit != "day"
    counts = "{n:,.0f}/{total:,.0f}" if whole_numbers else "{n:.1f}/{total:.1f}"
    return tqdm(total=total, desc=desc, unit=unit, file=sys.stderr, disable=not enabled, leave=False,
                mininterval=min_interval_seconds, miniters=1 if min_interval_seconds <= 0 else None,
                bar_format="{desc}: {percentage:3.0f}%|{bar}| " + counts + " {unit} [{elapsed}<{remaining} left]")


class CountProgress:
    """Progress over a known number of items (runs of a batch or study): see :func:`count_progress`."""

    def __init__(self, *, total: int, desc: str, unit: str, mode: str, stream):
        self.total, self.desc, self.unit, self.mode, self.stream = int(total), desc, unit, mode, stream
        self.finished = 0
        self._bar = None

    def __enter__(self):
        if self.mode == "bar":
            self._bar = progress_bar(total=self.total, desc=self.desc, unit=self.unit, enabled=True,
                                     whole_numbers=True, min_interval_seconds=0.0)
            self._bar.__enter__()
        return self

    def __exit__(self, kind, value, traceback):
        if self._bar is not None:
            self._bar.__exit__(kind, value, traceback)
        return False

    def skip(self, count: int) -> None:
        """Count ``count`` items finished earlier (a resumed study) without a line each."""
        self.finished += int(count)
        if self._bar is not None:
            self._bar.update(int(count))

    def done(self, label: str, detail: str) -> None:
        """One more item finished: advance the bar, or write ``"run 3/16 LABEL: DETAIL"``."""
        self.finished += 1
        if self._bar is not None:
            self._bar.update(1)
        elif self.mode == "lines":
            self.stream.write(f"{self.unit} {self.finished}/{self.total} {label}: {detail}\n")
            self.stream.flush()


def count_progress(*, total: int, desc: str, unit: str = "run", enabled: bool | None = None,
                   lines: bool = True, stream=None) -> CountProgress:
    """Progress of ``total`` items: a bar with counts and time left on a terminal, a line per item otherwise.

    On a terminal (or with ``enabled=True``) a bar shows ``desc: 19%|##   | 3/16 run [00:06<00:26 left]``;
    in a log or a pipe each finished item writes one line ``run 3/16 steep_dense r002: ok, 12,345 segments,
    2.10 s`` (the label and detail come from :meth:`CountProgress.done`), so silence never means "hung".

    Parameters
    ----------
    total : int
        Number of items.
    desc : str
        Label of the bar.
    unit : str
        Name of one item, first word of each line.
    enabled : bool, optional
        True: always the bar; False: nothing; None (default): the bar on a terminal, lines otherwise.
    lines : bool
        False: no lines off a terminal (the bar only), for callers with many short items.
    stream : file-like, optional
        Where lines go (default ``sys.stderr``); the bar always draws on ``sys.stderr``.
    """
    stream = sys.stderr if stream is None else stream
    if enabled is False:
        mode = "off"
    elif enabled is True or bool(getattr(stream, "isatty", lambda: False)()):
        mode = "bar"
    else:
        mode = "lines" if lines else "off"
    return CountProgress(total=total, desc=desc, unit=unit, mode=mode, stream=stream)


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
