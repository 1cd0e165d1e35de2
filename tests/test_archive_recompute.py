"""verify --recompute re-runs the real analysis from an issued revision's frozen inputs."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from calcsheaf.archive import keys as K
from calcsheaf.archive import revisions, signoffs
from calcsheaf.archive.canonical import pretty_json
from calcsheaf.archive.verify import verify_revision
from calcsheaf.commands.keygen import keygen
from calcsheaf.commands.verify import recompute_revision, results_isolated

CALC_TOML = """[calc]
number = "C-7"
title = "Isolated mass"
purpose = "Natural frequency of a mass on a spring."

[[assumption]]
id = "A1"
text = "Spring is linear."

[parameters]
m = "850 kg"
k = "1.2 MN/m"

[coordinates]
z = { unit = "m", label = "displacement" }

[energy]
kinetic = "m/2 * dot(z)**2"
potential = "k/2 * z**2"

[initial]
z = "0 m"
"dot(z)" = "0 m/s"

[analysis]
equilibrium = true
modes = true

[[result]]
name = "f1"
expr = "natural_frequency(1)"
unit = "Hz"
"""


def analysed_render(pdf: bytes, *, calc_text: str | None = None):
    """A build stand-in whose results.json comes from the real analysis.

    With `calc_text`, the results are computed from that text instead of the signed calc
    file: a build that published numbers of some other input.
    """
    def render(frozen_calc, project_root, out_dir, *, calc_number, status, revision, signoff,
               history):
        calc_file = Path(frozen_calc)
        if calc_text is not None:
            calc_file = Path(out_dir).parent / "other.toml"
            calc_file.write_text(calc_text)
        results = results_isolated(calc_file, Path(project_root))
        if calc_text is not None:
            calc_file.unlink()
        results["calc"].update(revision=revision, status=status)
        (Path(out_dir) / "results.json").write_bytes(pretty_json(results))
        (Path(out_dir) / "index.html").write_text(f"<h1>{calc_number}</h1>")
        (Path(out_dir) / f"{calc_number}.pdf").write_bytes(pdf)
        return out_dir
    return render


@pytest.fixture
def signed_project(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "config"))
    monkeypatch.setenv("CALCSHEAF_KDF_LOG2N", "10")
    monkeypatch.setenv("CALCSHEAF_PASSPHRASE_AB", "alpha passphrase")
    monkeypatch.setenv("CALCSHEAF_PASSPHRASE_CD", "charlie phrase")
    root = tmp_path / "proj"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-7"\nname = "Rig"\n')
    (root / "calcs" / "c7.toml").write_text(CALC_TOML)
    keygen("Alice Able", "ab", root)
    keygen("Chris Dale", "cd", root)
    signoffs.sign(root, "C-7", "preparer", K.unlock("ab"))
    signoffs.sign(root, "C-7", "checker", K.unlock("cd"))
    return root


@pytest.fixture(scope="module")
def tiny_pdf() -> bytes:
    weasyprint = pytest.importorskip("weasyprint")
    return weasyprint.HTML(string="<p>C-7</p>").write_pdf()


def test_recompute_agrees_with_an_honest_issue(signed_project, tiny_pdf):
    folder = revisions.issue(signed_project, "C-7", "A", render=analysed_render(tiny_pdf))
    frozen = json.loads((folder / "output" / "results.json").read_text())
    # f_n = sqrt(k/m)/(2 pi) = sqrt(1.2e6/850)/(2 pi) = 5.980 Hz:
    # Rao, Mechanical Vibrations, 5th ed., sec. 2.2, eq. (2.14)
    assert math.isclose(frozen["results"]["f1"]["value"], math.sqrt(1.2e6 / 850) / (2 * math.pi),
                        rel_tol=1e-9)
    rows = verify_revision(folder, recompute=recompute_revision)
    assert [r for r in rows if not r[1]] == []
    assert ("recompute results", True, "every value of results.json agrees within a relative "
            "1e-06 (analysed afresh from the frozen calc file)") in rows
    assert [d for item, _, d in rows if item == "recompute pages"] == [
        "not re-rendered: the revision has no render.json (issued by an older calcsheaf): only "
        "results.json was recomputed"]


def test_recompute_catches_results_of_other_inputs(signed_project, tiny_pdf):
    other = CALC_TOML.replace('k = "1.2 MN/m"', 'k = "1.3 MN/m"')
    folder = revisions.issue(signed_project, "C-7", "A",
                             render=analysed_render(tiny_pdf, calc_text=other))
    assert [r for r in verify_revision(folder) if not r[1]] == []     # hashes and signatures fine
    failures = {item: detail for item, ok, detail in
                verify_revision(folder, recompute=recompute_revision) if not ok}
    assert "results.f1.value" in failures["recompute results"]
