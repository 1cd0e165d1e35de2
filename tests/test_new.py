"""`calcsheaf new`: the scaffolded project analyses and passes; taken paths are refused."""

from __future__ import annotations

import io
import math
from pathlib import Path

import pytest

from calcsheaf.calcfile.loader import load_calc
from calcsheaf.commands.check import check
from calcsheaf.commands.new import new
from calcsheaf.errors import InputError
from calcsheaf.pipeline import analyse_project
from calcsheaf.project import load_project


@pytest.fixture(scope="module")
def scaffold(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("new") / "rack-project"
    assert new(root, out=io.StringIO()) == 0
    return root


def test_scaffold_writes_the_project_files(scaffold):
    files = sorted(str(p.relative_to(scaffold)) for p in scaffold.rglob("*") if p.is_file())
    assert files == [".gitignore", "README.md", "calcs/c001-mounted-rack.toml", "project.toml"]
    project = load_project(scaffold)
    assert (project.number, project.name) == ("P-0001", "rack-project")
    assert "calcsheaf check" in (scaffold / "README.md").read_text()


def test_scaffold_analyses_and_every_check_passes(scaffold):
    out = io.StringIO()
    assert check(scaffold, out=out, err=out) == 0, out.getvalue()
    _, outcomes = analyse_project(scaffold)
    assert len(outcomes) == 1
    report = outcomes[0].report
    assert report.passed and report.checks
    kinds = {c.kind for c in report.checks}
    assert {"energy", "integrators", "criterion", "crosscheck", "equilibrium"} <= kinds


def test_scaffold_frequency_matches_the_closed_form(scaffold):
    spec = load_calc(scaffold / "calcs" / "c001-mounted-rack.toml")
    p = spec.parameter_values
    _, outcomes = analyse_project(scaffold)
    f1 = {r.name: r.value for r in outcomes[0].report.results}["f1"]
    # f_n = sqrt(k/m) / (2 pi): S. S. Rao, Mechanical Vibrations, 6th ed., section 2.2.
    assert f1 == pytest.approx(math.sqrt(p["k"] / p["m"]) / (2 * math.pi), rel=1e-9)


def test_refuses_a_non_empty_folder_and_writes_nothing(tmp_path):
    (tmp_path / "notes.txt").write_text("keep me")
    with pytest.raises(InputError) as caught:
        new(tmp_path, out=io.StringIO())
    error = caught.value
    assert error.file == str(tmp_path)
    assert "not empty" in error.problem and "new or empty folder" in error.fix
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.txt"]
    assert (tmp_path / "notes.txt").read_text() == "keep me"


def test_refuses_a_file_at_the_path(tmp_path):
    target = tmp_path / "project"
    target.write_text("not a folder")
    with pytest.raises(InputError) as caught:
        new(target, out=io.StringIO())
    assert caught.value.file == str(target) and caught.value.fix
    assert target.read_text() == "not a folder"


def test_an_empty_folder_is_used(tmp_path):
    target = tmp_path / "empty"
    target.mkdir()
    assert new(target, out=io.StringIO()) == 0
    assert (target / "project.toml").is_file()


def test_folder_name_with_quotes_is_escaped_in_project_toml(tmp_path):
    target = tmp_path / 'rig "B" \\ east'
    assert new(target, out=io.StringIO()) == 0
    assert load_project(target).name == 'rig "B" \\ east'
