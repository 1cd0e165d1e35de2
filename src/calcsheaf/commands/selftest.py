"""`calcsheaf selftest [--out DIR]`: the software verification report.

Every handbook case is built as a calc through the general machinery and
compared with its closed form; the report (HTML, PDF/A, JSON) names the tool
and dependency versions.  Exit 1 when any case fails.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
from pathlib import Path

from ..fingerprint import code_fingerprint
from ..outdir import check_output_folder
from ..render import pdf, theme
from ..verification.selftest import SelftestReport, run_selftest

FOLDER = "selftest"


def selftest_files(report: SelftestReport) -> dict[str, bytes]:
    """Site-root paths -> bytes of the report (selftest/index.html, .json, .pdf, static/)."""
    data = report.as_dict()
    env = theme.environment(None)
    context = dict(data, links={"static": "../static"}, build_date="", paper="A4")
    html = theme.render(env, "selftest.html.j2", medium="screen", **context)
    printed = theme.render(env, "selftest.html.j2", medium="print", **context)
    static = theme.static_assets(None)
    document = pdf._document(printed, f"{FOLDER}/index.html", static)
    files = {f"{FOLDER}/index.html": html.encode("utf-8"),
             f"{FOLDER}/selftest.json": (json.dumps(data, indent=2, sort_keys=True) + "\n").encode(),
             f"{FOLDER}/selftest.pdf": pdf._write(document, {"selftest.json": json.dumps(data).encode()}, "")}
    files.update(static)
    return files


def cache_root() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "calcsheaf"


def cached_selftest_files() -> dict[str, bytes]:
    """The report's files for this exact code, made once and then read from the cache."""
    from ..pipeline import analyse_paths

    folder = cache_root() / "selftest" / code_fingerprint()
    index = folder / "files.json"
    if index.is_file():
        try:
            names = json.loads(index.read_text())
            files = {n: (folder / "files" / n).read_bytes() for n in names}
            if all(hashlib.sha256(files[n]).hexdigest() == h for n, h in names.items()):
                return files
        except (OSError, ValueError, KeyError):
            pass
    files = selftest_files(run_selftest(analyse_paths))
    try:
        for name, data in files.items():
            path = folder / "files" / name
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(data)
        index.write_text(json.dumps({n: hashlib.sha256(d).hexdigest() for n, d in sorted(files.items())}))
    except OSError:
        pass
    return files


def selftest(out_dir: Path | None = None, out=None) -> int:
    """Run the suite, print one line per case, write the report; 1 when any case fails."""
    out = out or sys.stdout
    from ..pipeline import analyse_paths
    from ..outdir import write_site

    target = Path(out_dir) if out_dir else Path("selftest-out")
    check_output_folder(target)          # before the long run: refuse a folder we did not make
    report = run_selftest(analyse_paths)
    for o in report.outcomes:
        worst = max((x.relative_error for x in o.report.crosschecks), default=float("nan"))
        print(f"{'PASS' if o.passed else 'FAIL'}  {o.key:<24} largest relative error {worst:.1e}", file=out)
    write_site(target, selftest_files(report))
    print(f"{sum(o.passed for o in report.outcomes)} of {len(report.outcomes)} cases passed; "
          f"report at {target / FOLDER / 'index.html'}", file=out)
    return 0 if report.passed else 1

