"""The command line: a thin layer over the Python API.

Each command is a module in this package that defines ``NAME``, ``HELP``,
``add_arguments(parser)`` and ``run(args) -> int``; modules are found
automatically, so adding a command never touches this file.  ``main`` catches
:class:`InstgenError` only: it prints one line on stderr and exits 2.  Any
other exception is a bug and keeps its traceback.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys

from ..errors import InstgenError


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # argparse's own errors: one line, exit 2
        sys.stderr.write(f"{self.prog}: error: {message}\n")
        raise SystemExit(2)


def _commands():
    mods = []
    for info in pkgutil.iter_modules(__path__):
        if info.name.startswith("_"):
            continue
        mod = importlib.import_module(f"{__name__}.{info.name}")
        if hasattr(mod, "NAME") and hasattr(mod, "run"):
            mods.append(mod)
    return sorted(mods, key=lambda m: getattr(m, "ORDER", 50))


def build_parser() -> argparse.ArgumentParser:
    from .. import __version__

    parser = _Parser(prog="instgen", description="Breed hard Ising problem instances with known ground states.")
    parser.add_argument("--version", action="version", version=f"instgen {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for mod in _commands():
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=getattr(mod, "DESCRIPTION", mod.HELP),
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_run", None):
        parser.print_help()
        return 2
    try:
        return int(args._run(args) or 0)
    except InstgenError as exc:  # one line, even when the message quotes a name holding line breaks
        message = str(exc).replace("\r", "\\r").replace("\n", "\\n")
        sys.stderr.write(f"instgen {args.command}: {message}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write(f"instgen {args.command}: interrupted\n")
        return 130
    except BrokenPipeError:
        return 0
