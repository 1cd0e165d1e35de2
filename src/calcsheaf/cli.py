"""Command-line interface: parses arguments and calls the plain command functions.

Exit codes: 0 success, 1 a calc failed or input was refused, 2 usage error.
Heavy libraries are imported only by the subcommands that need them.
"""

from __future__ import annotations

import argparse
import errno
import signal
import sys
import threading
from pathlib import Path

from . import __version__, settings
from .errors import CalcsheafError, UsageError


class _Parser(argparse.ArgumentParser):
    def error(self, message):
        self.print_usage(sys.stderr)
        print(f"calcsheaf: error: {message}", file=sys.stderr)
        raise SystemExit(2)


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"--jobs must be a whole number of at least 1, got {text!r}")
    return value


def _port(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = -1
    if not 1 <= value <= 65535:
        raise argparse.ArgumentTypeError(f"--port must be a whole number from 1 to 65535 "
                                         f"(e.g. 8001), got {text!r}")
    return value


def make_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="calcsheaf", description="Verified dynamics calculation packages from "
                     "plain-text calc files: derive, solve, check, publish, sign, verify.")
    parser.add_argument("--version", action="version", version=f"calcsheaf {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    p = sub.add_parser("check", help="load, derive and analyse every calc; one line per calc")
    p.add_argument("project", type=Path, help="project folder (the one holding project.toml)")
    p = sub.add_parser("build", help="analyse every calc and write the site (HTML, PDF, results.json)")
    p.add_argument("project", type=Path, help="project folder (the one holding project.toml)")
    p.add_argument("--out", type=Path, default=None, help="output folder (default PROJECT/_site)")
    p.add_argument("--jobs", type=_positive, default=None, help="calcs analysed at once (default: cores)")
    p = sub.add_parser("selftest", help="build every handbook case as a calc and write the verification report")
    p.add_argument("--out", type=Path, default=None,
                   help="output folder; the report is OUT/selftest/index.html (default ./selftest-out)")
    p = sub.add_parser("new", help="scaffold a project folder with one worked calc")
    p.add_argument("path", type=Path, help="new (or empty) project folder")
    p = sub.add_parser("preview", help="serve the site on localhost and rebuild on change")
    p.add_argument("project", type=Path, help="project folder (the one holding project.toml)")
    p.add_argument("--port", type=_port, default=8000, help="port on 127.0.0.1 (default 8000)")
    p = sub.add_parser("keygen", help="make a person's signing keys and add them to project.toml")
    p.add_argument("--name", required=True)
    p.add_argument("--id", required=True, dest="person_id")
    p.add_argument("--project", required=True, type=Path)
    p.add_argument("--role", default="")
    p.add_argument("--pkcs12", type=Path, default=None, help="use the firm's PKCS#12 certificate")
    p = sub.add_parser("sign", help="sign a calc's current content as preparer or checker")
    p.add_argument("project", type=Path, help="project folder (the one holding project.toml)")
    p.add_argument("calc", help="calc number, e.g. C-101")
    p.add_argument("--as", dest="role", required=True, choices=["preparer", "checker"])
    p.add_argument("--person", required=True)
    p = sub.add_parser("issue", help="freeze, sign and archive a revision under issued/")
    p.add_argument("project", type=Path, help="project folder (the one holding project.toml)")
    p.add_argument("calc", help="calc number, e.g. C-101")
    p.add_argument("--rev", required=True)
    p.add_argument("--description", default="")
    p = sub.add_parser("verify", help="check hashes, signatures and roles of issued revisions or a site")
    p.add_argument("path", type=Path, help="an issued/CALC/REV folder, a built _site, or a project folder")
    p.add_argument("--recompute", action="store_true",
                   help="also re-analyse and re-render the calc from its frozen inputs")
    p.add_argument("--trust", type=Path, default=None, metavar="KEYRING",
                   help="a keyring (TOML [[person]] id, name, public_key) kept outside the "
                        "project; every signer must be in it")
    p = sub.add_parser("diff", help="what changed between two revisions (REV_B may be 'current')")
    p.add_argument("project", type=Path, help="project folder (the one holding project.toml)")
    p.add_argument("calc", help="calc number, e.g. C-101")
    p.add_argument("rev_a", help="older revision, e.g. A")
    p.add_argument("rev_b", help="newer revision, or 'current' for the working calc file")
    return parser


def _run(args) -> int:
    if args.command == "check":
        from .commands.check import check
        return check(args.project)
    if args.command == "build":
        from .commands.build import build
        return build(args.project, args.out, args.jobs)
    if args.command == "selftest":
        from .commands.selftest import selftest
        return selftest(args.out)
    if args.command == "new":
        from .commands.new import new
        return new(args.path)
    if args.command == "preview":
        from .commands.preview import preview
        return preview(args.project, args.port)
    if args.command == "keygen":
        from .commands.keygen import keygen
        return keygen(args.name, args.person_id, args.project, role=args.role, pkcs12=args.pkcs12)
    if args.command == "sign":
        from .commands.sign import sign
        return sign(args.project, args.calc, args.role, args.person)
    if args.command == "issue":
        from .commands.issue import issue
        return issue(args.project, args.calc, args.rev, description=args.description)
    if args.command == "verify":
        from .commands.verify import verify
        return verify(args.path, recompute=args.recompute, trust=args.trust)
    if args.command == "diff":
        from .commands.diff import diff
        return diff(args.project, args.calc, args.rev_a, args.rev_b)
    raise UsageError("no command given", fix="run 'calcsheaf --help' for the commands")


# errno -> what to change, for faults of the file system rather than of calcsheaf.
_OS_FIXES = {
    errno.ENOSPC: "free space on that disk, or write elsewhere (e.g. --out on another disk)",
    errno.EDQUOT: "free space within your disk quota, or write elsewhere (e.g. --out)",
    errno.EROFS: "the file system is read-only: copy the project to a writable folder, or write "
                 "elsewhere (e.g. --out)",
    errno.EACCES: "give yourself write permission there (chmod/chown), or write elsewhere (e.g. --out)",
    errno.EPERM: "give yourself write permission there (chmod/chown), or write elsewhere (e.g. --out)",
    errno.ENAMETOOLONG: "use a shorter folder path",
    errno.EMFILE: "raise the open-file limit (ulimit -n) or build with fewer --jobs",
}


def os_error_message(exc: OSError) -> str:
    """One line for a file-system fault: the path, what the system said, and what to change."""
    where = exc.filename if exc.filename is not None else "a file"
    what = exc.strerror or type(exc).__name__
    fix = _OS_FIXES.get(exc.errno, "check the path, its permissions and the free space, then rerun")
    return f"{where}: {what} ({errno.errorcode.get(exc.errno, 'no errno')}). Fix: {fix}."


def _terminate(signum, frame):
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    if threading.current_thread() is threading.main_thread():
        signal.signal(signal.SIGTERM, _terminate)   # clean up workers and temporary folders
    parser = make_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        settings.validate()
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
    except OSError as exc:
        print(f"calcsheaf: {os_error_message(exc)}", file=sys.stderr)
        return 1
    except Exception as exc:  # a bug in calcsheaf itself: say so plainly, no traceback
        if settings.debug():
            raise
        print(f"calcsheaf: internal error ({type(exc).__name__}: {exc}). Nothing was published "
              "by this run. Fix: rerun with CALCSHEAF_DEBUG=1 for the traceback and report it.",
              file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
