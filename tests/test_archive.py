"""Keys, sign-offs, issuing, revision history, diff and verify (with tamper cases)."""

from __future__ import annotations

import json
import math
import os
import shutil
import stat
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

from calcsheaf.archive import keys as K
from calcsheaf.archive import revisions, signoffs
from calcsheaf.archive.canonical import b64, pretty_json, sha256_file
from calcsheaf.archive.diff import format_diff, revision_diff
from calcsheaf.archive.manifest import MANIFEST, SIGNATURES
from calcsheaf.archive.verify import compare_results, verify_path, verify_revision
from calcsheaf.commands.keygen import keygen
from calcsheaf.commands.verify import verify
from calcsheaf.errors import ArchiveError

PROJECT_TOML = """# Project file written by hand; this comment must survive keygen.
[project]
number = "P-0001"
name = "Test rig"   # trailing comment
"""

CALC_TOML = """[calc]
number = "C-1"
title = "Mass on a spring"

[[assumption]]
id = "A1"
text = "Spring is linear."
open = false

[parameters]
m = "850 kg"
k = "1200000 N/m"

[coordinates]
z = { unit = "m" }

[energy]
kinetic = "m/2 * dot(z)**2"
potential = "k/2 * z**2"
"""

ENV = {"CALCSHEAF_KDF_LOG2N": "10", "SOURCE_DATE_EPOCH": "1700000000",
       "CALCSHEAF_PASSPHRASE_AB": "alpha passphrase", "CALCSHEAF_PASSPHRASE_CD": "charlie phrase",
       "CALCSHEAF_PASSPHRASE_EF": "echo phrase"}


@pytest.fixture(scope="session")
def tiny_pdf() -> bytes:
    weasyprint = pytest.importorskip("weasyprint")
    return weasyprint.HTML(string="<h1>Calc C-1</h1><p>Mass on a spring.</p>").write_pdf()


def _number(text: str) -> float:
    return float(text.split()[0])


def fake_render(pdf: bytes, *, passed: bool = True):
    """Stand-in for the build's build_calc: writes page, PDF and results.json of a 1-DOF calc.

    f_n = sqrt(k/m) / (2 pi): Rao, Mechanical Vibrations, 5th ed., sec. 2.2, eq. (2.14)
    (omega_n = sqrt(k/m)).
    """
    def render(frozen_calc, project_root, out_dir, *, calc_number, status, revision, signoff,
               history):
        calc = tomllib.loads(Path(frozen_calc).read_text())
        m, k = _number(calc["parameters"]["m"]), _number(calc["parameters"]["k"])
        f_n = math.sqrt(k / m) / (2 * math.pi)
        results = {"calc": {"number": calc_number, "title": calc["calc"]["title"],
                            "revision": revision, "status": status},
                   "results": {"f1": {"value": f_n, "unit": "Hz"}},
                   "modes": [{"natural_frequency_hz": f_n, "damping_ratio": 0.0,
                              "shape": {"z": 1.0}}],
                   "criteria": [{"name": "frequency above 5 Hz", "demand": 5.0, "capacity": f_n,
                                 "ratio": 5.0 / f_n, "pass": passed}],
                   "passed": passed}
        out_dir = Path(out_dir)
        (out_dir / "results.json").write_bytes(pretty_json(results))
        (out_dir / "index.html").write_text(
            f"<h1>{calc_number} rev {revision}</h1><p>prepared by "
            f"{signoff['prepared_by']}, checked by {signoff['checked_by']}</p>")
        (out_dir / f"{calc_number}.pdf").write_bytes(pdf)
        return out_dir
    return render


def _make_project(root: Path) -> Path:
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    (root / "calcs" / "c1.toml").write_text(CALC_TOML)
    return root


def _sign_both(project: Path) -> None:
    signoffs.sign(project, "C-1", "preparer", K.unlock("ab"))
    signoffs.sign(project, "C-1", "checker", K.unlock("cd"))


@pytest.fixture
def env(tmp_path, monkeypatch):
    for name, value in ENV.items():
        monkeypatch.setenv(name, value)
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "config"))
    monkeypatch.delenv("CALCSHEAF_PASSPHRASE", raising=False)
    return tmp_path


@pytest.fixture
def project(env):
    root = _make_project(env / "proj")
    keygen("Alice Able", "ab", root, role="engineer")
    keygen("Chris Dale", "cd", root, role="checker")
    return root


@pytest.fixture(scope="module")
def issued(tmp_path_factory, tiny_pdf):
    """One project with revision A issued (shared by the read-only and tamper tests)."""
    base = tmp_path_factory.mktemp("issued")
    with pytest.MonkeyPatch.context() as mp:
        for name, value in ENV.items():
            mp.setenv(name, value)
        mp.setenv("XDG_CONFIG_HOME", str(base / "config"))
        mp.delenv("CALCSHEAF_PASSPHRASE", raising=False)
        root = _make_project(base / "proj")
        keygen("Alice Able", "ab", root)
        keygen("Chris Dale", "cd", root)
        _sign_both(root)
        folder = revisions.issue(root, "C-1", "A", render=fake_render(tiny_pdf))
        yield {"root": root, "folder": folder, "config": base / "config"}


def _failures(rows):
    return [(item, detail) for item, ok, detail in rows if not ok]


def _copy(issued, tmp_path) -> Path:
    """A copy of the issued folder alone, outside any project."""
    return Path(shutil.copytree(issued["folder"], tmp_path / "copy" / "A"))


# --- keys and project.toml ---------------------------------------------------------------

def test_keygen_keeps_private_keys_out_of_the_project(project, env):
    text = (project / "project.toml").read_text()
    assert text.startswith(PROJECT_TOML)             # user's text and comments kept byte for byte
    people = {p["id"]: p for p in tomllib.loads(text)["person"]}
    assert people["ab"]["name"] == "Alice Able" and people["cd"]["role"] == "checker"
    assert "BEGIN CERTIFICATE" in people["ab"]["certificate"]
    key_file = env / "config" / "calcsheaf" / "keys" / "ab.json"
    assert stat.S_IMODE(key_file.stat().st_mode) == 0o600
    secret = json.loads(key_file.read_text())["ciphertext"]
    for path in project.rglob("*"):
        if path.is_file():
            body = path.read_text()
            assert "PRIVATE KEY" not in body and secret[:40] not in body


def test_keygen_again_reuses_the_key_and_does_not_duplicate(project, capsys):
    before = (project / "project.toml").read_text()
    assert keygen("Alice Able", "ab", project) == 0
    assert "Already listed" in capsys.readouterr().out
    assert (project / "project.toml").read_text() == before


def test_wrong_passphrase_is_refused(project, monkeypatch):
    monkeypatch.setenv("CALCSHEAF_PASSPHRASE_AB", "not it")
    with pytest.raises(ArchiveError, match="wrong passphrase for 'ab'"):
        K.unlock("ab")


def test_keygen_imports_a_pkcs12_signing_certificate(env, tmp_path):
    from cryptography.hazmat.primitives.asymmetric import rsa
    from cryptography.hazmat.primitives.serialization import BestAvailableEncryption, pkcs12
    root = _make_project(env / "proj")
    rsa_key = rsa.generate_private_key(public_exponent=65537, key_size=2048)
    cert = K.self_signed_certificate(rsa_key, "Firm Signer", "fs")
    bundle = tmp_path / "firm.p12"
    bundle.write_bytes(pkcs12.serialize_key_and_certificates(
        b"fs", rsa_key, cert, None, BestAvailableEncryption(b"p12 pass")))
    os.environ["CALCSHEAF_PKCS12_PASSPHRASE"] = "p12 pass"
    os.environ["CALCSHEAF_PASSPHRASE_FS"] = "firm phrase"
    try:
        keygen("Firm Signer", "fs", root, pkcs12=bundle)
        assert K.unlock("fs").certificate == cert
    finally:
        del os.environ["CALCSHEAF_PKCS12_PASSPHRASE"], os.environ["CALCSHEAF_PASSPHRASE_FS"]


# --- sign-offs -----------------------------------------------------------------------------

def test_preparer_then_checker_gives_checked(project):
    _sign_both(project)
    digest = sha256_file(project / "calcs" / "c1.toml")
    status = signoffs.signoff_status(project, "C-1", digest)
    assert status["state"] == "checked"
    assert status["preparer"]["id"] == "ab" and status["checker"]["id"] == "cd"
    assert (status["prepared_by"], status["checked_by"]) == ("Alice Able", "Chris Dale")
    assert status["prepared_date"] == "2023-11-14"     # from SOURCE_DATE_EPOCH


def test_preparer_cannot_sign_as_checker(project):
    signoffs.sign(project, "C-1", "preparer", K.unlock("ab"))
    with pytest.raises(ArchiveError, match="'ab' prepared calc C-1 and cannot also check it"):
        signoffs.sign(project, "C-1", "checker", K.unlock("ab"))


def test_checker_needs_a_preparer_first(project):
    with pytest.raises(ArchiveError, match="no valid preparer sign-off"):
        signoffs.sign(project, "C-1", "checker", K.unlock("cd"))


def test_editing_the_calc_makes_signatures_stale(project, tiny_pdf):
    _sign_both(project)
    calc = project / "calcs" / "c1.toml"
    calc.write_text(calc.read_text().replace("850 kg", "900 kg"))
    status = signoffs.signoff_status(project, "C-1", sha256_file(calc))
    assert status["state"] == "unsigned"
    assert [s["role"] for s in status["stale"]] == ["preparer", "checker"]
    assert "the calc file changed after Alice Able signed as preparer" in status["stale"][0]["reason"]
    with pytest.raises(ArchiveError, match="lacks a valid preparer and checker sign-off.*changed"):
        revisions.issue(project, "C-1", "A", render=fake_render(tiny_pdf))


def test_a_forged_signoff_does_not_count(project):
    signoffs.sign(project, "C-1", "preparer", K.unlock("ab"))
    path = signoffs.signoff_file(project, "C-1")
    data = json.loads(path.read_text())
    data["signoffs"]["preparer"]["signature"] = b64(bytes(64))
    path.write_text(json.dumps(data))
    status = signoffs.signoff_status(project, "C-1", sha256_file(project / "calcs" / "c1.toml"))
    assert status["state"] == "unsigned"
    assert "signature does not verify" in status["stale"][0]["reason"]


# --- issuing -------------------------------------------------------------------------------

def test_issue_refuses_open_assumptions(project, tiny_pdf):
    calc = project / "calcs" / "c1.toml"
    calc.write_text(calc.read_text().replace("open = false", "open = true"))
    _sign_both(project)
    with pytest.raises(ArchiveError, match="open assumptions: A1"):
        revisions.issue(project, "C-1", "A", render=fake_render(tiny_pdf))


def test_issue_refuses_failing_checks(project, tiny_pdf):
    _sign_both(project)
    with pytest.raises(ArchiveError, match="does not pass.*frequency above 5 Hz"):
        revisions.issue(project, "C-1", "A", render=fake_render(tiny_pdf, passed=False))
    assert not (project / "issued" / "C-1" / "A").exists()
    assert list((project / "issued" / "C-1").glob(".staging-*")) == []    # cleaned up


def test_issued_folder_holds_everything_and_verifies(issued, capsys):
    folder = issued["folder"]
    manifest = json.loads((folder / MANIFEST).read_text())
    assert sorted(manifest["files"]) == [
        "inputs/calcs/c1.toml", "inputs/project.toml", "output/C-1.pdf", "output/index.html",
        "output/results.json", "record/people.json", "record/signoffs.json"]
    assert manifest["prepared_by"]["id"] == "ab" and manifest["checked_by"]["id"] == "cd"
    assert verify(folder) == 0
    out = capsys.readouterr().out
    assert "VERIFIED: all" in out and "FAIL" not in out
    assert "project's project.toml" in out          # inside a project: live roster checked too


def test_reissuing_a_revision_is_refused(issued, tiny_pdf):
    with pytest.raises(ArchiveError, match="revision A of calc C-1 is already issued and is never "
                                           "overwritten"):
        revisions.issue(issued["root"], "C-1", "A", render=fake_render(tiny_pdf))


def test_pdf_signatures_validate_and_pdfsig_lists_both(issued):
    from calcsheaf.archive.pdfsign import check_pdf_signatures
    folder = issued["folder"]
    people = json.loads((folder / "record" / "people.json").read_text())
    rows = check_pdf_signatures((folder / "output" / "C-1.pdf").read_bytes(),
                                {r: [p["certificate"]] for r, p in people.items()})
    assert [ok for _, ok, _ in rows] == [True, True, True]
    if shutil.which("pdfsig") is None:
        pytest.skip("poppler-utils (pdfsig) not installed")
    out = subprocess.run(["pdfsig", str(folder / "output" / "C-1.pdf")], capture_output=True,
                         text=True, check=True).stdout
    assert "Signature #1" in out and "Signature #2" in out
    assert "Alice Able" in out and "Chris Dale" in out
    assert out.count("Signature is Valid.") == 2


def test_a_copy_of_the_folder_alone_verifies_offline(issued, tmp_path):
    rows = verify_revision(_copy(issued, tmp_path))
    assert _failures(rows) == []
    assert not any("project's project.toml" in item for item, _, _ in rows)


def test_verify_does_not_import_the_analysis_stack(issued):
    code = ("import sys; from calcsheaf.commands.verify import verify; "
            f"rc = verify({str(issued['folder'])!r}); "
            "heavy = [m for m in ('sympy', 'scipy', 'matplotlib', 'weasyprint') if m in sys.modules];"
            "print('HEAVY', heavy); sys.exit(rc)")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "HEAVY []" in run.stdout


# --- tamper cases (each on a copy of the issued folder) -----------------------------------

def _flip(path: Path, where: float = 0.5) -> None:
    data = bytearray(path.read_bytes())
    data[int(len(data) * where)] ^= 0x01
    path.write_bytes(bytes(data))


@pytest.mark.parametrize("rel", ["output/C-1.pdf", "output/index.html", "output/results.json",
                                 "inputs/calcs/c1.toml", "inputs/project.toml"])
def test_a_flipped_byte_is_detected(issued, tmp_path, rel):
    folder = _copy(issued, tmp_path)
    _flip(folder / rel, 0.3)
    failures = dict(_failures(verify_revision(folder)))
    assert failures[f"file {rel}"].startswith("content changed: SHA-256")
    if rel.endswith(".pdf"):
        assert "the signed bytes were changed" in failures["pdf signature Preparer"]
    if rel.endswith("c1.toml"):
        assert "differs from the signed" in failures["content hash"]


def test_a_file_added_removed_or_renamed_is_detected(issued, tmp_path):
    folder = _copy(issued, tmp_path)
    (folder / "output" / "extra.txt").write_text("added later")
    (folder / "output" / "index.html").unlink()
    (folder / "output" / "results.json").rename(folder / "output" / "results-old.json")
    failures = dict(_failures(verify_revision(folder)))
    assert failures["file output/extra.txt"] == "not listed in the manifest (file added)"
    assert failures["file output/index.html"] == "listed in the manifest but missing"
    assert failures["file output/results.json"] == "renamed to output/results-old.json"


def test_an_edited_manifest_is_detected(issued, tmp_path):
    folder = _copy(issued, tmp_path)
    _flip(folder / "output" / "index.html")
    manifest = json.loads((folder / MANIFEST).read_text())
    manifest["files"]["output/index.html"] = sha256_file(folder / "output" / "index.html")
    (folder / MANIFEST).write_bytes(pretty_json(manifest))
    failures = dict(_failures(verify_revision(folder)))
    assert "file output/index.html" not in failures            # the forger fixed the hash...
    assert "does not match MANIFEST.json" in failures["manifest signature (preparer)"]
    assert "does not match MANIFEST.json" in failures["manifest signature (checker)"]


def test_a_signature_by_an_unlisted_key_is_detected(issued, tmp_path):
    folder = _copy(issued, tmp_path)
    intruder = K.generate("zz", "Zed Zero")
    manifest_bytes = (folder / MANIFEST).read_bytes()
    sigs = json.loads((folder / SIGNATURES).read_text())
    checker = next(s for s in sigs["signatures"] if s["role"] == "checker")
    checker.update(person="cd", public_key=intruder.public_key_b64,
                   signature=b64(intruder.ed25519.sign(manifest_bytes)))
    (folder / SIGNATURES).write_bytes(pretty_json(sigs))
    failures = _failures(verify_revision(folder))
    details = " | ".join(d for _, d in failures)
    assert "signed by a key not recorded for this revision" in details
    assert "made with a key other than cd's recorded key" in details


def test_the_same_person_in_both_roles_is_detected(issued, tmp_path):
    folder = _copy(issued, tmp_path)
    people = json.loads((folder / "record" / "people.json").read_text())
    people["checker"] = people["preparer"]
    (folder / "record" / "people.json").write_bytes(pretty_json(people))
    failures = dict(_failures(verify_revision(folder)))
    assert "the same person, name or key took both roles" in failures[
        "preparer differs from checker"]


def test_a_key_not_in_the_project_roster_is_detected(issued, tmp_path):
    project = Path(shutil.copytree(issued["root"], tmp_path / "proj"))
    text = (project / "project.toml").read_text()
    start = text.index('[[person]]\nid = "cd"')
    (project / "project.toml").write_text(text[:start])
    folder = project / "issued" / "C-1" / "A"
    failures = dict(_failures(verify_path(folder)[0][1]))
    assert failures["checker key listed in the project's project.toml"] == (
        "'cd' with this name and key is not listed in the project's project.toml")


# --- revisions, history and diff ---------------------------------------------------------

def test_revision_b_supersedes_a_and_diff_shows_the_change(project, tiny_pdf, capsys):
    render = fake_render(tiny_pdf)
    _sign_both(project)
    revisions.issue(project, "C-1", "A", render=render)
    calc = project / "calcs" / "c1.toml"
    calc.write_text(calc.read_text().replace('k = "1200000 N/m"', 'k = "1500000 N/m"'))
    _sign_both(project)
    revisions.issue(project, "C-1", "B", description="Stiffer isolators", render=render)
    history = revisions.revision_history(project, "C-1")
    assert history[1]["description"] == "Stiffer isolators"
    assert [(h["rev"], h["status"], h["superseded_by"]) for h in history] == [
        ("A", "superseded", "B"), ("B", "issued", None)]
    assert (history[1]["checked_by"], history[1]["checked_by_id"]) == ("Chris Dale", "cd")
    assert verify(project) == 0
    assert "revision B supersedes A: link matches" in capsys.readouterr().out

    rows = {(r["section"], r["item"]): r for r in revision_diff(project, "C-1", "A", "B")["rows"]}
    assert rows[("inputs", "parameters.k")]["change"] == "changed"
    assert rows[("inputs", "parameters.m")]["change"] == "same"
    # f_n = sqrt(k/m)/(2 pi) (Rao, Mechanical Vibrations, 5th ed., eq. 2.14), m = 850 kg:
    # k = 1.2 MN/m -> 5.979977 Hz, k = 1.5 MN/m -> 6.685840 Hz, shown in full precision
    old, new = rows[("results", "results.f1")]["old"], rows[("results", "results.f1")]["new"]
    assert old.endswith(" Hz") and new.endswith(" Hz")
    assert math.isclose(float(old.split()[0]), math.sqrt(1.2e6 / 850) / (2 * math.pi), rel_tol=1e-15)
    assert math.isclose(float(new.split()[0]), math.sqrt(1.5e6 / 850) / (2 * math.pi), rel_tol=1e-15)
    text = format_diff(revision_diff(project, "C-1", "A", "B"))
    assert "* parameters.k\n      A: 1200000 N/m\n      B: 1500000 N/m" in text
    assert "item(s) differ" in text and "None" not in text and "…" not in text


def _fake_analysis(path, data):
    """Stand-in for a fresh analysis of the calc bytes: the fake_render results."""
    calc = tomllib.loads(data.decode())
    m, k = _number(calc["parameters"]["m"]), _number(calc["parameters"]["k"])
    f_n = math.sqrt(k / m) / (2 * math.pi)   # Rao, Mechanical Vibrations, 5th ed., eq. 2.14
    return {"results": {"f1": {"value": f_n, "unit": "Hz"}}, "passed": True}


def test_diff_against_current_analyses_the_working_file_not_a_stale_build(project, tiny_pdf):
    _sign_both(project)
    revisions.issue(project, "C-1", "A", render=fake_render(tiny_pdf))
    with pytest.raises(ArchiveError, match="needs a fresh analysis"):
        revision_diff(project, "C-1", "A", "current")
    stale = project / "_site" / "C-1"
    stale.mkdir(parents=True)
    shutil.copy(project / "issued" / "C-1" / "A" / "output" / "results.json", stale)
    calc = project / "calcs" / "c1.toml"
    calc.write_text(calc.read_text().replace('k = "1200000 N/m"', 'k = "1500000 N/m"')
                    + '\n[[point_force]]\nposition = ["z"]\nforce = ["-F"]\n'
                    + '\n[[reference]]\nid = "R1"\ntext = "Rao, Mechanical Vibrations"\n')
    rows = {(r["section"], r["item"]): r for r in
            revision_diff(project, "C-1", "A", "current", analyse=_fake_analysis)["rows"]}
    assert rows[("inputs", "parameters.k")]["change"] == "changed"
    assert rows[("results", "results.f1")]["change"] == "changed"
    assert rows[("inputs", "point_force[1].force")] == {
        "section": "inputs", "item": "point_force[1].force", "old": "(absent)",
        "new": '["-F"]', "change": "added"}
    assert rows[("references", "reference[R1].text")]["change"] == "added"


def test_diff_covers_every_key_of_the_calc_file():
    from calcsheaf.archive.diff import compare_sides
    old = {"calc": {"number": "C-1"}, "assumption": [{"id": "A1", "text": "rigid", "open": True,
                                                      "basis": "stiff"}],
           "constraint": [{"name": "N", "equation": "x - y"}],
           "time_history": {"duration": "5 s", "points": 4000},
           "criterion": [{"name": "stress", "demand": "peak(s)", "capacity": "f_y"}]}
    new = {"calc": {"number": "C-1"}, "assumption": [{"id": "A1", "text": "rigid", "open": False,
                                                      "basis": "measured"}],
           "constraint": [{"name": "N", "equation": "x + y"}],
           "time_history": {"duration": "5 s", "points": 8000},
           "criterion": [{"name": "stress", "demand": "1.5*peak(s)", "capacity": "f_y"}]}
    changed = {r["item"] for r in compare_sides(old, {}, new, {}) if r["change"] != "same"}
    assert changed == {"assumption[A1].open", "assumption[A1].basis", "constraint[N].equation",
                       "time_history.points", "criterion[stress].demand"}


def test_a_replaced_older_revision_breaks_the_chain(project, tiny_pdf):
    render = fake_render(tiny_pdf)
    _sign_both(project)
    revisions.issue(project, "C-1", "A", render=render)
    _sign_both(project)
    revisions.issue(project, "C-1", "B", render=render)
    manifest = project / "issued" / "C-1" / "A" / MANIFEST
    manifest.write_bytes(manifest.read_bytes().replace(b'"date": "2023-11-14"',
                                                       b'"date": "2023-11-15"'))
    sections = dict(verify_path(project))
    chain = sections[str(project.resolve() / "issued" / "C-1") + " (revision history)"]
    assert _failures(chain)[0][1].startswith("the manifest of B names A with another manifest hash")


# --- recompute -------------------------------------------------------------------------------

def test_recompute_compares_within_tolerance(issued, tmp_path):
    folder = _copy(issued, tmp_path)
    frozen = json.loads((folder / "output" / "results.json").read_text())

    def same(folder, manifest):
        return {"results": json.loads(json.dumps(frozen)), "files": None, "note": "results only"}

    def drifted(folder, manifest):
        fresh = json.loads(json.dumps(frozen))
        fresh["results"]["f1"]["value"] *= 1 + 1e-4
        return {"results": fresh, "files": None, "note": "results only"}

    assert _failures(verify_revision(folder, recompute=same)) == []
    failures = dict(_failures(verify_revision(folder, recompute=drifted)))
    assert "1 value(s) differ: results.f1.value" in failures["recompute results"]


def test_compare_results_tolerance_and_ignored_fields():
    frozen = {"calc": {"status": "issued", "revision": "A"}, "x": 1.0, "n": [1, 2],
              "energy_audit": {"max_relative_residual": 3e-9, "pass": True}}
    fresh = {"calc": {"status": "draft", "revision": "B"}, "x": 1.0 + 5e-7, "n": [1, 2],
             "energy_audit": {"max_relative_residual": 4e-9, "pass": True}}
    assert compare_results(frozen, fresh) == []
    fresh["x"] = 1.0 + 2e-6
    fresh["energy_audit"]["pass"] = False
    assert compare_results(frozen, fresh) == [
        "energy_audit.pass: True frozen, False recomputed", "x: 1.0 frozen, 1.000002 recomputed"]


def test_a_site_sha256sums_catches_changed_and_added_files(issued, tmp_path):
    site = tmp_path / "_site"
    (site / "C-1").mkdir(parents=True)
    (site / "C-1" / "results.json").write_text('{"passed": true}\n')
    (site / "index.html").write_text("<h1>index</h1>\n")
    sums = "".join(f"{sha256_file(site / rel)}  {rel}\n" for rel in ("C-1/results.json", "index.html"))
    (site / "SHA256SUMS").write_text(sums)
    assert verify(site) == 0
    (site / "index.html").write_text("<h1>index!</h1>\n")
    (site / "extra.html").write_text("new")
    failures = dict(_failures(verify_path(site)[0][1]))
    assert failures["site index.html"].startswith("content changed")
    assert failures["site extra.html"] == "not listed in SHA256SUMS (file added)"


def test_changes_since_issue_compares_the_draft_with_the_latest_revision(issued):
    from calcsheaf.archive.diff import changes_since_issue
    folder = issued["folder"]
    results = json.loads((folder / "output" / "results.json").read_text())
    results["results"]["f1"]["value"] = 6.5
    text = (folder / "inputs" / "calcs" / "c1.toml").read_text().replace("850 kg", "800 kg")
    diff = changes_since_issue(issued["root"], "C-1", text, results)
    changed = {r["item"] for r in diff["rows"] if r["change"] != "same"}
    assert diff["a"] == "A" and changed == {"parameters.m", "results.f1"}
