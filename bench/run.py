"""calcsheaf benchmark: times against baselines, printed side by side in one run.

    .venv/bin/python bench/run.py [--quick] [--only derive,rhs,pdf,build] [--markdown FILE]

(a) derivation against sympy.physics.mechanics LagrangesMethod and KanesMethod
    for an n-link pendulum chain; (b) time per right-hand-side call against a
    hand-written numpy RHS; (c) a calc PDF with ~50 equations and 5 plots
    against a text-only PDF of the same pages; (d) a generated project built
    cold, with nothing changed and after one edit, with --jobs 1 and 2.
Ratios are calcsheaf's time over the baseline's (lower is better).  See
docs/benchmarks.md.  Timings only: nothing here is a test.
"""

from __future__ import annotations

import argparse
import os
import platform
import subprocess
import sys
import tempfile
import time
import traceback
from dataclasses import dataclass
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import builds  # noqa: E402
import derivation  # noqa: E402
from table import Row, Time, markdown_table, text_table  # noqa: E402

SECTIONS = ("derive", "rhs", "pdf", "build")
REPEAT_BELOW_S = 5.0          # derivations faster than this are repeated, best kept


@dataclass(frozen=True)
class Plan:
    derive_n: tuple[int, ...]
    derive_cap_s: float
    derive_best_of: int
    rhs_n: tuple[int, ...]
    rhs_calls: int
    rhs_repeat: int
    pdf_masses: int
    pdf_repeat: int
    project_calcs: int


FULL = Plan(derive_n=(2, 4, 6, 8), derive_cap_s=600.0, derive_best_of=3, rhs_n=(2, 5),
            rhs_calls=2000, rhs_repeat=7, pdf_masses=8, pdf_repeat=2, project_calcs=50)
QUICK = Plan(derive_n=(2, 4), derive_cap_s=60.0, derive_best_of=1, rhs_n=(2, 5),
             rhs_calls=300, rhs_repeat=5, pdf_masses=2, pdf_repeat=1, project_calcs=2)
TARGET_N = 8
FORMS = (("cartesian", "T from positions"), ("pairs", "T in link pairs"))
BASELINES = (("lagrange", "LagrangesMethod", 0.1, "≥ 10× faster"),
             ("kane", "KanesMethod", 1.0, "no slower"))


def _best(plan: Plan, tool: str, n: int, *extra: str) -> dict:
    """Best of up to `derive_best_of` fresh-process derivations (one when the first is slow)."""
    first = derivation.measure(tool, n, plan.derive_cap_s, *extra)
    if "capped" in first or first["seconds"] > REPEAT_BELOW_S:
        return first
    runs = [first] + [derivation.measure(tool, n, plan.derive_cap_s, *extra)
                      for _ in range(plan.derive_best_of - 1)]
    return min(runs, key=lambda r: r.get("seconds", float("inf")))


def _time(result: dict) -> Time:
    if "capped" in result:
        return Time(result["capped"], capped=True)
    return Time(result["seconds"])


def derive_rows(plan: Plan, notes: list[str]) -> list[Row]:
    rows = []
    for n in plan.derive_n:
        base = {tool: _time(_best(plan, tool, n)) for tool, *_ in BASELINES}
        for form, label in FORMS:
            ours = _best(plan, "calcsheaf", n, form)
            if ours.get("node_limit_raised"):
                notes.append(f"derive n={n}, {label}: T exceeds the loader's node limit "
                             f"(expressions.MAX_NODES); raised for this run only.")
            if "load_seconds" in ours:
                notes.append(f"derive n={n}, {label}: load_calc took {ours['load_seconds']:.3g} s "
                             "(not in the derivation time).")
            for tool, name, max_ratio, target in BASELINES:
                judged = n == TARGET_N
                rows.append(Row(f"derive n={n}, {label}", _time(ours), base[tool], name,
                                max_ratio=max_ratio if judged else None,
                                target_text=f"{target} at n={TARGET_N}" if judged else ""))
    return rows


def rhs_rows(plan: Plan, notes: list[str]) -> list[Row]:
    import rhs

    rows = []
    for n in plan.rhs_n:
        for form, label in FORMS:
            r = rhs.measure(n, plan.rhs_calls, plan.rhs_repeat, form)
            notes.append(f"RHS n={n}, {label}: generated and numpy RHS agree to "
                         f"{r['max_relative_difference']:.1e} (relative) at 20 random states.")
            judged = n == 5
            rows.append(Row(f"RHS call n={n}, {label}", Time(r["calcsheaf_us"], "µs"),
                            Time(r["numpy_us"], "µs"), "numpy", max_ratio=0.6 if judged else None,
                            target_text="≤ 0.6× at n=5" if judged else ""))
    return rows


def pdf_rows(plan: Plan, notes: list[str]) -> list[Row]:
    import pdf

    r = pdf.measure(plan.pdf_masses, plan.pdf_repeat)
    notes.append(f"PDF: {r['pages']} pages, {r['equations']} equations, {r['plots']} plots "
                 f"(text-only baseline: {r['baseline_pages']} pages); of calcsheaf's "
                 f"{r['calcsheaf_s']:.3g} s, render_calc (equation SVGs, plots, templates) took "
                 f"{r['render_s']:.3g} s and WeasyPrint the rest; WeasyPrint alone took "
                 f"{r['plots_kept_s']:.3g} s for the page with equations as text but the plots "
                 f"kept.")
    return [Row(f"calc PDF, {r['equations']} eqs, {r['plots']} plots, {r['pages']} pages",
                Time(r["calcsheaf_s"]), Time(r["baseline_s"]), "text-only PDF", max_ratio=4.0,
                target_text="≤ 4×")]


def build_rows(plan: Plan, notes: list[str]) -> list[Row]:
    with tempfile.TemporaryDirectory() as folder:
        code = builds.freeze_code(Path(folder) / "code")
        env = builds.environment(Path(folder) / "tool-cache", code)
        notes.append(f"build: ran the committed code (HEAD) frozen in {builds.code_in_use(env)}.")
        return _build_rows(plan.project_calcs, env, notes)


def _build_rows(count: int, env: dict, notes: list[str]) -> list[Row]:
    supported = builds.jobs_supported(env)
    first = builds.first_use(1 if supported else None, env)
    rows = [Row("first build after install (1 calc, tool cache made)", Time(first), None)]
    notes.append("build: cold = fresh project, no _site and no project cache; the tool's "
                 "per-version cache (self-test report) was made by the first build above.")
    if not supported:
        r = builds.measure(count, None, env)
        notes.append("build: `calcsheaf build --jobs` is not accepted yet; builds ran without it.")
        return rows + _rebuild_rows(count, r, "") + [
            Row(f"cold build {count} calcs, --jobs 2 vs 1", None, None, note="pending (no --jobs)",
                target_text="≥ 1.6× faster")]
    one, two = builds.measure(count, 1, env), builds.measure(count, 2, env)
    rows += _rebuild_rows(count, one, " --jobs 1") + _rebuild_rows(count, two, " --jobs 2")
    rows.append(Row(f"cold build {count} calcs, --jobs 2 vs 1", Time(two["cold_s"]),
                    Time(one["cold_s"]), "--jobs 1", max_ratio=1 / 1.6, target_text="≥ 1.6× faster"))
    return rows


def _rebuild_rows(count: int, r: dict, jobs: str) -> list[Row]:
    return [
        Row(f"cold build {count} calcs{jobs}", Time(r["cold_s"]), None),
        Row(f"no-op rebuild{jobs}", Time(r["noop_s"]), Time(r["cold_s"]), "cold",
            max_ratio=0.05, max_seconds=1.0, target_text="< 1 s and ≤ 5% of cold"),
        Row(f"rebuild after one edit{jobs}", Time(r["edit_s"]), Time(r["cold_s"]), "cold"),
    ]


RUNNERS = {"derive": derive_rows, "rhs": rhs_rows, "pdf": pdf_rows, "build": build_rows}


def machine() -> str:
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    commit = subprocess.run(["git", "-C", str(HERE), "rev-parse", "--short", "HEAD"],
                            capture_output=True, text=True).stdout.strip() or "?"
    import sympy
    return (f"{platform.machine()}, {os.cpu_count()} cores, Python {platform.python_version()}, "
            f"sympy {sympy.__version__}; commit {commit}; load average {load}")


def run(plan: Plan, sections: list[str]) -> tuple[list[Row], list[str]]:
    rows, notes = [], []
    for name in sections:
        started = time.perf_counter()
        print(f"[{name}] running ...", file=sys.stderr, flush=True)
        try:
            rows += RUNNERS[name](plan, notes)
        except Exception as exc:        # a broken section is reported, the others still run
            traceback.print_exc(file=sys.stderr)
            first_line = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
            rows.append(Row(f"{name} section", None, None, note=f"error: {first_line[:120]}"))
        print(f"[{name}] {time.perf_counter() - started:.0f} s", file=sys.stderr, flush=True)
    return rows, notes


def markdown(rows: list[Row], notes: list[str], header: str, mode: str, seconds: float) -> str:
    lines = [f"# Benchmark results ({mode})", "", f"Machine: {header}; run took {seconds:.0f} s.", "",
             "Ratio = calcsheaf time / baseline time (lower is better).", "",
             markdown_table(rows), "", "## Notes", ""]
    lines += [f"- {note}" for note in notes]
    return "\n".join(lines) + "\n"


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="reduced set, about three minutes")
    parser.add_argument("--only", default=",".join(SECTIONS),
                        help=f"comma-separated sections out of {','.join(SECTIONS)}")
    parser.add_argument("--markdown", type=Path, help="also write the results as Markdown here")
    args = parser.parse_args(argv)
    sections = [s for s in args.only.split(",") if s]
    unknown = sorted(set(sections) - set(SECTIONS))
    if unknown:
        parser.error(f"unknown section(s) {', '.join(unknown)}; choose from {', '.join(SECTIONS)}")
    plan = QUICK if args.quick else FULL
    header = machine()
    started = time.perf_counter()
    rows, notes = run(plan, sections)
    seconds = time.perf_counter() - started
    print(f"calcsheaf benchmark ({'quick' if args.quick else 'full'}); {header}")
    print("ratio = calcsheaf time / baseline time (lower is better)\n")
    print(text_table(rows))
    print("\n" + "\n".join(f"* {note}" for note in notes))
    if args.markdown:
        args.markdown.write_text(markdown(rows, notes, header, "quick" if args.quick else "full",
                                          seconds), encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
