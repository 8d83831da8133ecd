"""A narrow fix of numba's liveness bookkeeping for generators, applied before the growth step compiles.

numba (checked on 0.59-0.68) computes the state a compiled generator keeps across a ``yield`` as the variables
live on entry to the yield's block plus those assigned before the yield, minus those deleted before it. In a
large loop nest (the growth step: stores enlarged in an outer loop, a ``yield`` deep inside an inner one) its
IR can delete, before the yield, an SSA version of a variable that its entry-variable set does not hold, and
``set.remove`` then raises ``KeyError`` at compile time. Such a variable is dead at the yield (it was just
deleted), so leaving it out of the kept state is what the bookkeeping means; :func:`apply` recompiles numba's
own method from its source with that one ``remove`` replaced by ``discard`` and changes nothing else (when the
line is not there, e.g. fixed upstream, it does nothing).
"""

from __future__ import annotations

import sys

__all__ = ["apply"]

_APPLIED = False


def apply() -> None:
    """Install the fixed ``PostProcessor._compute_generator_info`` (idempotent)."""
    global _APPLIED
    if _APPLIED:
        return
    try:
        from numba.core.postproc import PostProcessor
    except ImportError:  # pragma: no cover - numba's layout changed: leave it alone
        return
    if not hasattr(PostProcessor, "_compute_generator_info"):  # pragma: no cover
        return

    import inspect
    import textwrap

    original = PostProcessor._compute_generator_info
    try:
        source = textwrap.dedent(inspect.getsource(original))
    except (OSError, TypeError):  # pragma: no cover - no source to adapt
        return
    lines = source.splitlines()
    fixed = None
    for i in range(len(lines) - 1):  # the first ``remove`` after an ``ir.Del`` test, before the yield is found
        if lines[i].strip() == "elif isinstance(stmt, ir.Del):" and lines[i + 1].strip() == \
                "live_vars.remove(stmt.value)":
            lines[i + 1] = lines[i + 1].replace("live_vars.remove(", "live_vars.discard(")
            fixed = "\n".join(lines) + "\n"
            break
    if fixed is None:  # numba no longer has that line (fixed upstream or rewritten): nothing to do
        _APPLIED = True
        return
    namespace = dict(vars(sys.modules[original.__module__]))
    exec(compile(fixed, f"<rootsim fix of {original.__module__}>", "exec"), namespace)
    PostProcessor._compute_generator_info = namespace[original.__name__]
    _APPLIED = True
