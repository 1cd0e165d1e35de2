"""The whole sign-off path through the command line on a real build:
keygen, sign, issue, verify (with recompute), an edit after issue, diff, a second issue."""

from __future__ import annotations

import json
import subprocess

import pytest

from calcsheaf import cache as cache_mod
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


def _pdf_text(path) -> str:
    return subprocess.run(["pdftotext", str(path), "-"], capture_output=True, text=True).stdout


def test_issued_pdf_site_and_revisions_tell_one_story(tmp_path, people_env, capsys):
    """Revisions go forward, the site serves the signed PDF of an issued revision, the
    signed PDF's history matches the site's, and verify --recompute re-renders what it
    compares (a planted equation image in the project cache never reaches a signed PDF)."""
    project = make_project(tmp_path / "p", {"a.toml": tiny("C-1")})
    main(["keygen", "--name", "Ada Preparer", "--id", "ada", "--project", str(project)])
    main(["keygen", "--name", "Ben Checker", "--id", "ben", "--project", str(project)])
    assert main(["build", str(project)]) == 0
    planted = sorted((project / cache_mod.FOLDER / "equations").glob(f"*{cache_mod.SUFFIX}"))
    assert planted, "the build caches equation images"
    store = cache_mod.Cache(project)        # authentic entries (this user's key), wrong images
    for entry in planted:
        store.put("equations", entry.stem, {},
                  {"svg": b'<svg xmlns="http://www.w3.org/2000/svg"><text>PLANTED</text></svg>'})

    def sign_and_issue(rev, *extra):
        assert main(["sign", str(project), "C-1", "--as", "preparer", "--person", "ada"]) == 0
        assert main(["sign", str(project), "C-1", "--as", "checker", "--person", "ben"]) == 0
        return main(["issue", str(project), "C-1", "--rev", rev, *extra])

    assert sign_and_issue("A", "--description", "For comment") == 0
    pdf_a = project / "issued" / "C-1" / "A" / "output" / "C-1.pdf"
    assert "PLANTED" not in _pdf_text(pdf_a)
    capsys.readouterr()
    assert main(["verify", str(pdf_a.parent.parent), "--recompute"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("trusted: keys as listed in project.toml")
    assert "recompute output/C-1.pdf: the signed PDF's unsigned first revision equals a fresh " \
           "rendering" in out and "recompute output/index.html: equals a fresh rendering" in out

    (project / "calcs" / "a.toml").write_text(tiny("C-1", 12.0))
    for bad, why in (("current", "reserved"), ("A", "already issued"), ("a", "does not come after"),
                     ("B\n", "not allowed"), ("../B", "not allowed")):
        assert sign_and_issue(bad) == 1
        assert why in capsys.readouterr().err
    assert sign_and_issue("B", "--description", "Heavier mass") == 0

    assert main(["build", str(project)]) == 0
    site_pdf = project / "_site" / "C-1" / "C-1.pdf"
    signed_b = project / "issued" / "C-1" / "B" / "output" / "C-1.pdf"
    assert site_pdf.read_bytes() == signed_b.read_bytes()
    printed = _pdf_text(signed_b)
    assert "superseded" in printed and "Heavier mass" in printed and "For comment" in printed
    assert "Changes since revision A" in printed and "Revision B" in printed
    page = (project / "_site" / "C-1" / "index.html").read_text()
    assert "superseded" in page and "Heavier mass" in page and "For comment" in page
    assert "Changes since revision A" in page and "Revision B" in page

    (project / "calcs" / "a.toml").write_text(tiny("C-1", 14.0))
    assert main(["build", str(project)]) == 0
    results = json.loads((project / "_site" / "C-1" / "results.json").read_text())
    assert (results["calc"]["status"], results["calc"]["revision"]) == ("draft", "C")
    assert "DRAFT" in _pdf_text(site_pdf).upper()
    capsys.readouterr()
    assert main(["diff", str(project), "C-1", "B", "current"]) == 0
    shown = capsys.readouterr().out
    assert "None" not in shown and "no differences" not in shown
