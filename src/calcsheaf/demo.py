"""`make demo`: build every demo project under a folder and say where to look.

Usage: python -m calcsheaf.demo projects
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from .commands.build import build


def main(argv: list[str]) -> int:
    folder = Path(argv[0] if argv else "projects")
    projects = sorted(p for p in folder.iterdir() if (p / "project.toml").is_file())
    if not projects:
        print(f"calcsheaf demo: no projects found under {folder}", file=sys.stderr)
        return 1
    started = time.monotonic()
    worst = 0
    for project in projects:
        print(f"== {project}")
        worst = max(worst, build(project))
        print(f"   open {(project / '_site' / 'index.html').resolve()}")
    print(f"built {len(projects)} demo project(s) in {time.monotonic() - started:.1f} s")
    return worst


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
