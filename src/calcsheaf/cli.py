"""Command-line interface: parses arguments and calls the plain command functions.

Exit codes: 0 success, 1 a calc failed or input was refused, 2 usage error.
Heavy libraries are imported only by the subcommands that need them.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from . import __version__
from .errors import CalcsheafError, UsageError


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        self.print_usage(sys.stderr)
        print(f"calcsheaf: error: {message}", file=sys.stderr)
        raise SystemExit(2)


def make_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="calcsheaf", description="Verified dynamics calculation packages from "
                     "plain-text calc files: derive, solve, check, publish, sign, verify.")
    parser.add_argument("--version", action="version", version=f"calcsheaf {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    p = sub.add_parser("check", help="load, derive and analyse every calc; one line per calc")
    p.add_argument("project", type=Path)
    p = sub.add_parser("build", help="analyse every calc and write the site (HTML, PDF, results.json)")
    p.add_argument("project", type=Path)
    p.add_argument("--out", type=Path, default=None, help="output folder (default PROJECT/_site)")
    p = sub.add_parser("selftest", help="build every handbook case as a calc and write the verification report")
    p.add_argument("--out", type=Path, default=None, help="output folder (default ./selftest-out)")
    return parser


def _run(args) -> int:
    if args.command == "check":
        from .commands.check import check
        return check(args.project)
    if args.command == "build":
        from .commands.build import build
        return build(args.project, args.out)
    if args.command == "selftest":
        from .commands.selftest import selftest
        return selftest(args.out)
    raise UsageError("no command given", fix="run 'calcsheaf --help' for the commands")


def main(argv: list[str] | None = None) -> int:
    parser = make_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return _run(args)
    except UsageError as exc:
        print(f"calcsheaf: {exc.message}", file=sys.stderr)
        return 2
    except CalcsheafError as exc:
        print(f"calcsheaf: {exc.message}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("calcsheaf: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
