"""The bad-input corpus: every malformed calc or project is refused with a clear message.

Layout of tests/bad_inputs/ (see its README.md):
  calcs/<case>.toml + calcs/<case>.expected   one bad calc, checked in a one-calc project
  projects/<case>/ + projects/<case>.expected  a whole bad project folder; an optional
                                               LINKS file lists symlinks to make
                                               ("path -> {outside}/target")
  valid.toml                                   the good calc the cases were cut from

An .expected file holds one required text per line (each must occur in the
command's output); `exit N` sets the exit code (default 1); `command build` runs
`build` instead of `check`; `env NAME=VALUE` sets an environment variable for the
run (e.g. a low template time limit); `#` starts a comment.
Every case must also: exit non-zero, print no Python traceback, print a
"Fix:" and name its file.  Most cases run `check` in-process (fast); a grouped
subprocess run proves the real exit code and the absence of tracebacks, and
`build` runs prove that a refused project leaves an existing site
byte-identical and that a bad calc is published as failed.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from calcsheaf import cli

CORPUS = Path(__file__).parent / "bad_inputs"
CALC_CASES = sorted(p.stem for p in (CORPUS / "calcs").glob("*.toml"))
PROJECT_CASES = sorted(p.name for p in (CORPUS / "projects").iterdir() if p.is_dir())
PROJECT_TOML = '[project]\nnumber = "P-1"\nname = "Bad-input corpus"\n'
SECRET = "SECRET-OUTSIDE-THE-PROJECT"
CALCSHEAF = Path(sys.executable).with_name("calcsheaf")


# ---- materialising cases ----------------------------------------------------------
def outside_folder(tmp: Path) -> Path:
    """A folder beside the projects, holding a good calc and a secret file."""
    outside = tmp / "outside"
    if not outside.exists():
        outside.mkdir()
        shutil.copyfile(CORPUS / "valid.toml", outside / "calc.toml")
        (outside / "secret.txt").write_text(SECRET + "\n")
    return outside


def calc_project(tmp: Path, case: str) -> Path:
    """A one-calc project holding calcs/<case>.toml (bytes copied as they are)."""
    root = tmp / case
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    shutil.copyfile(CORPUS / "calcs" / f"{case}.toml", root / "calcs" / f"{case}.toml")
    return root


def project_case(tmp: Path, case: str) -> Path:
    """A copy of projects/<case>/ with the symlinks of its LINKS file made."""
    root = tmp / case
    shutil.copytree(CORPUS / "projects" / case, root, symlinks=True)
    links = root / "LINKS"
    if links.exists():
        outside = outside_folder(tmp)
        for line in links.read_text().splitlines():
            path, _, target = (part.strip() for part in line.partition("->"))
            link = root / path
            link.parent.mkdir(parents=True, exist_ok=True)
            link.symlink_to(target.replace("{outside}", str(outside)))
        links.unlink()
    return root


def expectations(path: Path) -> tuple[int, list[str]]:
    code, wanted = 1, []
    for raw in path.read_text(encoding="utf-8").splitlines():
        line = raw.strip()
        if not line or line.startswith(("#", "command ", "env ")):
            continue
        if line.startswith("exit "):
            code = int(line.split()[1])
        else:
            wanted.append(line)
    return code, wanted


def command_of(case: str) -> str:
    """`check` unless the case's .expected says `command build` (faults only a build meets)."""
    text = (CORPUS / "projects" / f"{case}.expected").read_text(encoding="utf-8")
    return "build" if "\ncommand build" in "\n" + text else "check"


def environment_of(case: str) -> dict[str, str]:
    """The `env NAME=VALUE` lines of a project case's .expected file."""
    text = (CORPUS / "projects" / f"{case}.expected").read_text(encoding="utf-8")
    pairs = [line.strip()[4:].partition("=") for line in text.splitlines()
             if line.strip().startswith("env ")]
    return {name.strip(): value.strip() for name, _, value in pairs}


# ---- running the CLI ----------------------------------------------------------------
@pytest.fixture
def run_cli():
    """Run calcsheaf.cli.main in-process; returns (exit code, stdout, stderr)."""
    def run(*argv: str) -> tuple[int, str, str]:
        out, err = io.StringIO(), io.StringIO()
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            code = cli.main(list(argv))
        return code, out.getvalue(), err.getvalue()
    return run


def assert_refused(case: str, code: int, out: str, err: str, expected: Path, file_name: str) -> None:
    want_code, wanted = expectations(expected)
    text = out + err
    assert code == want_code, f"{case}: exit {code}, expected {want_code}\n{text}"
    assert code != 0, case
    assert "Traceback" not in text, f"{case}: traceback\n{text}"
    assert "Fix:" in text, f"{case}: no fix given\n{text}"
    assert file_name in text, f"{case}: the message does not name {file_name}\n{text}"
    missing = [w for w in wanted if w not in text]
    assert not missing, f"{case}: missing {missing}\n{text}"


@pytest.mark.parametrize("case", CALC_CASES)
def test_bad_calc_is_refused_by_check(case, tmp_path, run_cli, monkeypatch):
    monkeypatch.chdir(tmp_path)
    calc_project(tmp_path, case)
    code, out, err = run_cli("check", case)
    assert_refused(case, code, out, err, CORPUS / "calcs" / f"{case}.expected", f"{case}.toml")
    assert not (tmp_path / case / "_site").exists()
    assert not list(tmp_path.rglob("calcsheaf-injected")), "an injected command ran"


@pytest.mark.parametrize("case", [c for c in PROJECT_CASES if command_of(c) == "check"])
def test_bad_project_is_refused_by_check(case, tmp_path, run_cli, monkeypatch):
    monkeypatch.chdir(tmp_path)
    project_case(tmp_path, case)
    code, out, err = run_cli("check", case)
    expected = CORPUS / "projects" / f"{case}.expected"
    _, wanted = expectations(expected)
    assert_refused(case, code, out, err, expected, case)
    assert SECRET not in out + err


@pytest.mark.parametrize("case", [c for c in PROJECT_CASES if command_of(c) == "build"])
def test_bad_project_is_refused_by_build(case, tmp_path, run_cli, monkeypatch):
    monkeypatch.chdir(tmp_path)
    for name, value in environment_of(case).items():
        monkeypatch.setenv(name, value)
    project_case(tmp_path, case)
    code, out, err = run_cli("build", case)
    assert not list(tmp_path.rglob("calcsheaf-injected")), "a template ran a command"
    assert_refused(case, code, out, err, CORPUS / "projects" / f"{case}.expected", case)


def test_every_case_has_an_expected_message():
    for case in CALC_CASES:
        assert (CORPUS / "calcs" / f"{case}.expected").is_file(), case
    for case in PROJECT_CASES:
        assert (CORPUS / "projects" / f"{case}.expected").is_file(), case
    assert len(CALC_CASES) + len(PROJECT_CASES) >= 40


def test_valid_calc_of_the_corpus_passes(tmp_path, run_cli):
    """The cases are cut from valid.toml: it must pass, so each case fails by its own fault."""
    root = tmp_path / "good"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    shutil.copyfile(CORPUS / "valid.toml", root / "calcs" / "valid.toml")
    code, out, err = run_cli("check", str(root))
    assert code == 0, out + err


# ---- the real command line, in subprocesses -------------------------------------------
def _subprocess(*argv: str, cwd: Path) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONWARNINGS": "default"}
    return subprocess.run([str(CALCSHEAF), *argv], cwd=cwd, capture_output=True, text=True,
                          timeout=300, env=env)


@pytest.fixture(scope="module")
def all_bad_calcs(tmp_path_factory) -> subprocess.CompletedProcess:
    """`calcsheaf check` in a subprocess on one project holding every bad calc and valid.toml."""
    tmp = tmp_path_factory.mktemp("all")
    root = tmp / "all"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    for number, case in enumerate(CALC_CASES, start=2):   # own numbers: C-1 is valid.toml
        raw = (CORPUS / "calcs" / f"{case}.toml").read_bytes()
        (root / "calcs" / f"{case}.toml").write_bytes(
            raw.replace(b'number = "C-1"', f'number = "C-{number}"'.encode()))
    shutil.copyfile(CORPUS / "valid.toml", root / "calcs" / "valid.toml")
    result = _subprocess("check", "all", cwd=tmp)
    result.tmp = tmp
    return result


def test_all_bad_calcs_in_one_project_subprocess(all_bad_calcs):
    """Each bad calc is reported and fails alone; the good one still passes."""
    text = all_bad_calcs.stdout + all_bad_calcs.stderr
    assert all_bad_calcs.returncode == 1, text
    assert "Traceback" not in text, text
    assert f"1 of {len(CALC_CASES) + 1} calc(s) passed" in text, text
    for case in CALC_CASES:
        assert f"{case}.toml" in text or f"C-{CALC_CASES.index(case) + 2} " in text, case
    assert not list(all_bad_calcs.tmp.rglob("calcsheaf-injected"))


def test_no_python_warning_reaches_the_user(all_bad_calcs):
    assert "Warning" not in all_bad_calcs.stderr, all_bad_calcs.stderr


@pytest.mark.parametrize("case", ["symlink_calc_outside", "template_python_internals",
                                  "project_toml_syntax"])
def test_bad_project_subprocess(case, tmp_path):
    project_case(tmp_path, case)
    result = _subprocess("check", case, cwd=tmp_path)
    assert_refused(case, result.returncode, result.stdout, result.stderr,
                   CORPUS / "projects" / f"{case}.expected", case)


def test_usage_error_exit_code_subprocess(tmp_path):
    result = _subprocess("check", cwd=tmp_path)
    assert result.returncode == 2
    assert "Traceback" not in result.stderr


# ---- build: no partial output ------------------------------------------------------------
def _tree_digest(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


PUBLISHED_AS_FAILED = ("unknown_name", "mass_indefinite", "markdown_image_local", "inject_import",
                       "non_utf8_bytes")


@pytest.fixture(scope="module")
def mixed_build(tmp_path_factory) -> tuple[subprocess.CompletedProcess, Path]:
    """`calcsheaf build` (subprocess) of valid.toml beside a few bad calcs, built once."""
    tmp = tmp_path_factory.mktemp("mixed")
    root = tmp / "mixed"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    shutil.copyfile(CORPUS / "valid.toml", root / "calcs" / "valid.toml")
    for case in PUBLISHED_AS_FAILED:
        shutil.copyfile(CORPUS / "calcs" / f"{case}.toml", root / "calcs" / f"{case}.toml")
    return _subprocess("build", "mixed", cwd=tmp), root / "_site"


def test_bad_calcs_are_published_as_failed(mixed_build):
    """A fresh build of a project with bad calcs writes a whole site that shows them failed."""
    result, site = mixed_build
    text = result.stdout + result.stderr
    assert result.returncode == 1, text
    assert "Traceback" not in text and "Fix:" in text, text
    listed = dict(reversed(line.split("  ", 1)) for line in (site / "SHA256SUMS").read_text().splitlines())
    actual = {k: v for k, v in _tree_digest(site).items() if k != "SHA256SUMS"}
    assert listed == actual, "SHA256SUMS does not list exactly the published files"
    verdicts = {k.split("/")[0]: json.loads((site / k).read_text())["passed"]
                for k in actual if k.endswith("/results.json")}
    assert verdicts.pop("C-1") is True
    assert sorted(verdicts) == sorted(PUBLISHED_AS_FAILED) and not any(verdicts.values()), verdicts
    published = b"".join((site / k).read_bytes() for k in actual if k.endswith(".html"))
    assert not re.search(rb"<img[^>]*src=.?file:", published)
    assert not list(site.parent.parent.rglob("calcsheaf-injected"))


@pytest.mark.parametrize("case", ["template_include_parent", "template_symlink_static",
                                  "template_python_internals", "project_misspelt_key",
                                  "symlink_calc_outside", "project_duplicate_numbers"])
def test_refused_project_leaves_the_existing_site_byte_identical(case, tmp_path, run_cli, mixed_build):
    """A project-level refusal happens before anything is written."""
    root = project_case(tmp_path, case)
    shutil.copytree(mixed_build[1], root / "_site")
    before = _tree_digest(root / "_site")
    code, out, err = run_cli("build", str(root))
    assert code == 1, out + err
    assert "Traceback" not in out + err and "Fix:" in out + err
    assert _tree_digest(root / "_site") == before
    assert not [p for p in root.iterdir() if p.name.startswith(("._site.tmp", "._site.old"))]
