"""The whole sign-off path through the command line on a real build:
keygen, sign, issue, verify (with recompute), an edit after issue, diff, a second issue."""

from __future__ import annotations

import json
import subprocess

import pytest

from calcsheaf.cli import main
from test_build import make_project, tiny


@pytest.fixture
def people_env(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "config"))
    monkeypatch.setenv("CALCSHEAF_KDF_LOG2N", "10")
    monkeypatch.setenv("CALCSHEAF_PASSPHRASE", "correct horse battery staple")
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1780000000")


def test_issue_verify_edit_and_reissue(tmp_path, people_env, capsys):
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    assert main(["keygen", "--name", "Ada Preparer", "--id", "ada", "--project", str(project)]) == 0
    assert main(["keygen", "--name", "Ben Checker", "--id", "ben", "--project", str(project)]) == 0
    assert main(["sign", str(project), "C-1", "--as", "preparer", "--person", "ada"]) == 0
    assert main(["sign", str(project), "C-1", "--as", "checker", "--person", "ada"]) == 1
    assert "different" in capsys.readouterr().err.lower()
    assert main(["sign", str(project), "C-1", "--as", "checker", "--person", "ben"]) == 0
    assert main(["issue", str(project), "C-1", "--rev", "A"]) == 0
    frozen = project / "issued" / "C-1" / "A"
    assert main(["verify", str(frozen), "--recompute"]) == 0
    pdf = next(frozen.rglob("C-1.pdf"))
    listed = subprocess.run(["pdfsig", str(pdf)], capture_output=True, text=True).stdout
    assert listed.count("Signature #") == 2
    assert main(["issue", str(project), "C-1", "--rev", "A"]) == 1
    assert "already" in capsys.readouterr().err.lower()

    (project / "calcs" / "a.toml").write_text(tiny("C-1", 12.0).replace('title = ', 'revision = "B"\ntitle = '))
    assert main(["build", str(project)]) == 0
    page = (project / "_site" / "C-1" / "index.html").read_text()
    assert "Changes since revision A" in page and "not signed" in page.lower()
    results = json.loads((project / "_site" / "C-1" / "results.json").read_text())
    assert results["calc"]["status"] == "draft" and results["calc"]["revision"] == "B"
    capsys.readouterr()
    assert main(["diff", str(project), "C-1", "A", "current"]) == 0
    assert "12" in capsys.readouterr().out

    assert main(["sign", str(project), "C-1", "--as", "preparer", "--person", "ada"]) == 0
    assert main(["sign", str(project), "C-1", "--as", "checker", "--person", "ben"]) == 0
    assert main(["issue", str(project), "C-1", "--rev", "B"]) == 0
    assert main(["verify", str(project)]) == 0
    assert main(["build", str(project)]) == 0
    index = (project / "_site" / "C-1" / "index.html").read_text()
    assert "superseded" in index
