"""Progress bars for long work: on stderr, and only when stderr is a terminal."""

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
