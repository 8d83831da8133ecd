"""The ``rootsim`` command line: a thin layer over the library.

Each sub-command lives in its own module of this package and defines

* ``COMMAND`` – the sub-command name (``"grow"``),
* ``HELP`` – a one-line description,
* ``ORDER`` – where it appears in ``rootsim --help``,
* ``register(parser)`` – adds its arguments to an :class:`argparse.ArgumentParser`,
* ``run(args) -> int`` – does the work.

Modules are discovered automatically, so adding a command touches no shared file.
User errors (:class:`rootsim.errors.RootsimError`) print one ``error:`` line and exit 2.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import re
import sys

from ..errors import RootsimError

__all__ = ["main", "build_parser"]


class _Parser(argparse.ArgumentParser):
    """argparse with one-line ``error:`` messages and exit code 2 (no usage dump); comma lists that
    start with a negative number (``--core -37.5,-20,4,90``) are values, not unknown options."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = re.compile(r"^-\d[\d.,eE+-]*$|^-\.\d[\d.,eE+-]*$")

    def error(self, message: str):  # noqa: D401 - argparse API
        self.exit(2, f"error: {self.prog}: {message} (see '{self.prog} --help')\n")


class _HelpFormatter(argparse.RawDescriptionHelpFormatter):
    """Keeps the description's layout and shows each option's default (unless the help text already
    names it, or there is none to show)."""

    def _get_help_string(self, action):
        text = action.help or ""
        default = action.default
        if default is None and text.startswith("override "):
            return f"{text} (default: the parameter file's value)"
        if ("default" in text or default is None or default is False or default is argparse.SUPPRESS
                or default == [] or not action.option_strings):
            return text
        return f"{text} (default: %(default)s)"


def _command_modules():
    mods = []
    for info in pkgutil.iter_modules(__path__):
        if info.name.startswith("_"):
            continue
        mod = importlib.import_module(f"{__name__}.{info.name}")
        if hasattr(mod, "COMMAND") and hasattr(mod, "register") and hasattr(mod, "run"):
            mods.append(mod)
    return sorted(mods, key=lambda m: (getattr(m, "ORDER", 100), m.COMMAND))


def build_parser() -> argparse.ArgumentParser:
    from .. import __version__

    parser = _Parser(
        prog="rootsim",
        description=(
            "Grow 3D root systems from TOML parameter files, measure them (RLD profiles, traits, "
            "virtual soil cores, profile walls, minirhizotron tubes) and export them for viewers. "
            "Start with: rootsim grow params/cereal_fibrous.toml --out results/demo"
        ),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"rootsim {__version__}")
    sub = parser.add_subparsers(title="commands", metavar="COMMAND", parser_class=_Parser)
    for mod in _command_modules():
        p = sub.add_parser(mod.COMMAND, help=mod.HELP, description=getattr(mod, "DESCRIPTION", mod.HELP),
                           formatter_class=_HelpFormatter)
        mod.register(p)
        p.set_defaults(handler=mod.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``rootsim`` console script; returns the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version and usage errors: return the code instead of exiting
        return exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 2)
    if not hasattr(args, "handler"):
        parser.print_help(sys.stderr)
        return 2
    try:
        code = int(args.handler(args) or 0)
        sys.stdout.flush()  # a closed pipe (``rootsim check FILE | head``) shows up here, not at exit
        return code
    except BrokenPipeError:
        _silence_stdout()
        return 0
    except RootsimError as exc:
        print(f"error: {exc.cli_message()}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("error: interrupted", file=sys.stderr)
        return 130


def _silence_stdout() -> None:
    """Point stdout at the null device after its reader went away (``| head``), so that the final
    flush at interpreter exit does not print a BrokenPipeError traceback."""
    import os

    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):  # pragma: no cover - stdout without a file descriptor
        pass


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
