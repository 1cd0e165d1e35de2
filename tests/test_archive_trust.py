"""Who signed, where a revision belongs, and what verify trusted (issue 13, items 4, 8, 10, 11).

Each test is an attack on the archive that once got through, or a malformed folder that
once gave an internal error.
"""

from __future__ import annotations

import json
import math
import os
import shutil
import tomllib
from pathlib import Path

import pytest

from calcsheaf import identifiers
from calcsheaf.archive import keys as K
from calcsheaf.archive import projectfiles, revisions, signoffs
from calcsheaf.archive.canonical import pretty_json, sha256_file
from calcsheaf.archive.manifest import MANIFEST, SIGNATURES
from calcsheaf.archive.verify import verify_path, verify_revision
from calcsheaf.cli import main
from calcsheaf.commands.keygen import keygen
from calcsheaf.commands.verify import verify
from calcsheaf.errors import ArchiveError, CalcsheafError, InputError
from test_archive import (CALC_TOML, _failures, _sign_both, env, fake_render,  # noqa: F401
                          project, tiny_pdf)


def _issue(project, rev="A", **kwargs):
    return revisions.issue(project, "C-1", rev, render=fake_render(kwargs.pop("pdf")), **kwargs)


# --- identifiers -------------------------------------------------------------------------

@pytest.mark.parametrize("kind,text", [
    ("calc number", "C-1\n"), ("calc number", "../../x"), ("calc number", "/etc/x"),
    ("calc number", ".hidden"), ("calc number", "a/b"), ("calc number", ""),
    ("calc number", "C" * 65), ("calc number", "a..b"), ("person id", "ab\n"),
    ("person id", "a b"), ("person id", "-ab"), ("revision", "B\n"), ("revision", "current"),
    ("revision", "Current"), ("revision", "../A"), ("revision", "A" * 17)])
def test_identifiers_refuse_paths_newlines_and_reserved_words(kind, text):
    assert identifiers.problem(kind, text) is not None
    with pytest.raises(InputError) as caught:
        identifiers.check(kind, text)
    assert caught.value.fix == identifiers.fix(kind)


@pytest.mark.parametrize("kind,text", [("calc number", "C-102"), ("calc number", "STR.4_b"),
                                       ("person id", "jdoe"), ("revision", "P1")])
def test_identifiers_accept_ordinary_names(kind, text):
    assert identifiers.problem(kind, text) is None


def test_revisions_order_and_next_letter():
    order = ["A", "B", "Z", "AA", "AB"]
    assert sorted(reversed(order), key=identifiers.revision_key) == order
    assert identifiers.revision_key("P2") < identifiers.revision_key("P10")
    assert [identifiers.next_revision(r) for r in (None, "A", "Z", "AZ", "P9", "b", "A-")] == [
        "A", "B", "AA", "BA", "P10", "c", "after A-"]


def test_a_calc_number_that_climbs_out_writes_nothing_outside(project):
    calc = project / "calcs" / "c1.toml"
    calc.write_text(calc.read_text().replace('number = "C-1"', 'number = "../../x"'))
    with pytest.raises(ArchiveError, match="not allowed"):
        signoffs.sign(project, "../../x", "preparer", K.unlock("ab"))
    calc.write_text(calc.read_text().replace('number = "../../x"', 'number = "C-1\\n"'))
    with pytest.raises(ArchiveError, match="not allowed"):
        signoffs.sign(project, "C-1\n", "preparer", K.unlock("ab"))
    assert not (project.parent / "x.json").exists() and not (project / "signoffs").exists()


def test_the_command_line_refuses_an_id_with_a_newline(project, capsys):
    assert main(["keygen", "--name", "Eve", "--id", "ef\n", "--project", str(project)]) == 1
    assert main(["sign", str(project), "C-1", "--as", "preparer", "--person", "ab\n"]) == 1
    err = capsys.readouterr().err
    assert err.count("person id 'ef\\n' is not allowed") + err.count(
        "person id 'ab\\n' is not allowed") == 2
    assert "Traceback" not in err


# --- names come from the roster ----------------------------------------------------------

def test_a_name_edited_in_a_key_file_does_not_change_who_signed(project, tiny_pdf):
    key_file = K.key_path("ab")
    record = json.loads(key_file.read_text())
    record["name"] = "Chris Dale"
    key_file.write_text(json.dumps(record))
    _sign_both(project)
    status = signoffs.signoff_status(project, "C-1", sha256_file(project / "calcs" / "c1.toml"))
    assert (status["prepared_by"], status["checked_by"]) == ("Alice Able", "Chris Dale")
    folder = _issue(project, pdf=tiny_pdf)
    manifest = json.loads((folder / MANIFEST).read_text())
    assert manifest["prepared_by"] == {"id": "ab", "name": "Alice Able"}
    assert "prepared by Alice Able" in (folder / "output" / "index.html").read_text()
    assert _failures(verify_revision(folder)) == []


def test_a_sign_off_under_another_name_does_not_count(project):
    keys = K.unlock("ab")
    digest = sha256_file(project / "calcs" / "c1.toml")
    statement = signoffs.make_statement(
        project="P-0001", calc="C-1", calc_file="calcs/c1.toml", role="preparer", person="ab",
        name="Chris Dale", content_hash=digest, date="2023-11-14", after="")
    path = signoffs.signoff_file(project, "C-1")
    path.parent.mkdir()
    path.write_bytes(pretty_json({"format": signoffs.FILE_FORMAT, "calc": "C-1", "signoffs": {
        "preparer": signoffs.sign_statement(keys, statement)}}))
    status = signoffs.signoff_status(project, "C-1", digest)
    assert status["state"] == "unsigned"
    assert status["stale"][0]["reason"] == (
        "signed under the name 'Chris Dale', but project.toml lists 'ab' as 'Alice Able'")


def test_a_second_person_with_an_existing_name_is_refused(project, env):
    toml = project / "project.toml"
    toml.write_text(toml.read_text() + '\n[[person]]\nid = "mal"\nname = "alice   ABLE"\n'
                    'public_key = "AAAA"\n')
    with pytest.raises(ArchiveError) as caught:
        projectfiles.people(project)
    assert caught.value.problem == "person[3] repeats the name of 'ab'"
    assert caught.value.key == "person[3].name"
    with pytest.raises(ArchiveError, match="repeats the name"):
        signoffs.sign(project, "C-1", "preparer", K.unlock("ab"))
    from calcsheaf.project import load_project
    with pytest.raises(CalcsheafError) as listed:
        load_project(project)
    assert "the name of person[3] repeats that of an earlier person" in str(listed.value)


def test_keygen_refuses_a_name_already_listed(project):
    with pytest.raises(ArchiveError, match="repeats the name of 'ab'"):
        keygen("Alice Able", "ef", project)


@pytest.mark.parametrize("name,problem", [
    ("Alice Able\u200b", "contains U+200B ZERO WIDTH SPACE, an invisible, control or unusual "
                          "space character"),
    ("Ali\u00adce Able", "contains U+00AD SOFT HYPHEN, an invisible, control or unusual space "
                         "character"),
    ("Eve\x01", "contains U+0001 CONTROL CHARACTER, an invisible, control or unusual space "
                "character"),
    ("Eve\u00a0Hart", "contains U+00A0 NO-BREAK SPACE, an invisible, control or unusual space "
                      "character"),
    ("\u0410lice Able", "mixes letters of CYRILLIC and LATIN (e.g. U+0410 CYRILLIC CAPITAL "
                        "LETTER A), which can look like another name")])
def test_invisible_characters_and_mixed_scripts_in_a_name_are_refused(project, name, problem):
    toml = project / "project.toml"
    toml.write_text(toml.read_text() + f'\n[[person]]\nid = "mal"\nname = {json.dumps(name)}\n'
                    'public_key = "AAAA"\n')
    with pytest.raises(ArchiveError) as caught:
        projectfiles.people(project)
    assert caught.value.problem == f"the name of person[3] ('mal') {problem}"
    assert caught.value.key == "person[3].name"
    assert caught.value.fix.startswith("type the name with ordinary letters of one script")
    from calcsheaf.project import load_project
    with pytest.raises(CalcsheafError, match=r"the name of person\[3\] \('mal'\)"):
        load_project(project)


def test_a_name_all_in_look_alike_letters_repeats_a_listed_name(project):
    toml = project / "project.toml"
    text = toml.read_text()
    toml.write_text(text + '\n[[person]]\nid = "mal"\nname = "\u0410\u04cf\u0456\u0441\u0435 '
                    '\u0410\u044c\u04cf\u0435"\npublic_key = "AAAA"\n')   # Cyrillic throughout
    with pytest.raises(ArchiveError, match=r"person\[3\] repeats the name of 'ab'"):
        projectfiles.people(project)


@pytest.mark.parametrize("name,problem", [
    ("", "the name is empty"), ("  ", "the name is empty"),
    ("A" * 65, "the name is 65 characters long; a certificate holds at most 64"),
    ("Eve\nHart", "the name 'Eve\\nHart' contains U+000A CONTROL CHARACTER, an invisible, "
                  "control or unusual space character")])
def test_keygen_refuses_an_empty_long_or_control_name(project, name, problem, capsys):
    with pytest.raises(ArchiveError) as caught:
        keygen(name, "ef", project)
    assert caught.value.problem == problem and caught.value.key == "--name"
    assert not K.key_path("ef").exists()
    assert main(["keygen", "--name", name, "--id", "ef", "--project", str(project)]) == 1
    assert "internal error" not in capsys.readouterr().err


# --- a revision belongs to its project, calc, revision and history -----------------------

def test_a_revision_copied_to_another_calc_or_revision_fails(project, tiny_pdf):
    _sign_both(project)
    folder = _issue(project, pdf=tiny_pdf)
    other_calc = Path(shutil.copytree(folder, project / "issued" / "C-2" / "A"))
    failures = dict(_failures(verify_path(other_calc)[0][1]))
    assert failures["calc folder"] == "manifest calc C-1, folder issued/C-2"
    other_rev = Path(shutil.copytree(folder, project / "issued" / "C-1" / "B"))
    failures = dict(_failures(verify_path(other_rev)[0][1]))
    assert failures["revision folder"] == "manifest revision A, folder B"


def test_a_revision_moved_to_another_project_fails(project, tiny_pdf):
    _sign_both(project)
    folder = _issue(project, pdf=tiny_pdf)
    toml = project / "project.toml"
    toml.write_text(toml.read_text().replace('number = "P-0001"', 'number = "P-0002"'))
    failures = dict(_failures(verify_path(folder)[0][1]))
    assert failures["project number"] == "project.toml: P-0002, manifest: P-0001"


def test_old_sign_offs_replayed_do_not_issue_a_rolled_back_revision(project, tiny_pdf):
    calc = project / "calcs" / "c1.toml"
    original = calc.read_text()
    _sign_both(project)
    folder_a = _issue(project, pdf=tiny_pdf)
    calc.write_text(original.replace("850 kg", "900 kg"))
    _sign_both(project)
    _issue(project, "B", pdf=tiny_pdf)
    calc.write_text(original)                         # roll back to A's content
    replay = json.loads((folder_a / "record" / "signoffs.json").read_text())
    signoffs.signoff_file(project, "C-1").write_bytes(pretty_json(
        {"format": signoffs.FILE_FORMAT, "calc": "C-1", "signoffs": replay}))
    with pytest.raises(ArchiveError) as caught:
        _issue(project, "C", pdf=tiny_pdf)
    assert "signed at another point of the revision history" in caught.value.problem
    _sign_both(project)                               # both sign the roll-back anew: allowed
    assert _issue(project, "C", pdf=tiny_pdf).name == "C"


def test_verify_of_one_revision_checks_its_history(project, tiny_pdf):
    _sign_both(project)
    folder_a = _issue(project, pdf=tiny_pdf)
    _sign_both(project)
    folder_b = _issue(project, "B", pdf=tiny_pdf)
    rows = verify_path(folder_b)[0][1]
    assert ("revision B supersedes A", True, "link matches that revision's manifest") in rows
    shutil.rmtree(folder_a)
    failures = dict(_failures(verify_path(folder_b)[0][1]))
    assert failures["revision B is the first"] == (
        "it names A as superseded, which is not issued: a revision was removed")


def test_a_sign_off_replayed_into_another_revision_fails_verify(project, tiny_pdf):
    """B's folder with A's (validly signed) sign-offs: B's sign-offs must follow A."""
    _sign_both(project)
    folder_a = _issue(project, pdf=tiny_pdf)
    _sign_both(project)
    folder_b = _issue(project, "B", pdf=tiny_pdf)
    shutil.copy(folder_a / "record" / "signoffs.json", folder_b / "record" / "signoffs.json")
    failures = dict(_failures(verify_revision(folder_b)))
    assert failures["sign-off (preparer)"].startswith("signed at another point of the revision")


# --- what verify trusts ------------------------------------------------------------------

def _keyring(path: Path, project: Path, ids) -> Path:
    listed = projectfiles.people(project)
    blocks = [f'[[person]]\nid = "{pid}"\nname = "{listed[pid]["name"]}"\n'
              f'public_key = "{listed[pid]["public_key"]}"\n' for pid in ids]
    path.write_text("\n".join(blocks))
    return path


def test_verify_says_what_it_trusted_and_trust_decides(project, tiny_pdf, env, capsys):
    _sign_both(project)
    folder = _issue(project, pdf=tiny_pdf)
    assert verify(folder) == 0
    first = capsys.readouterr().out.splitlines()[0]
    listed = projectfiles.people(project)
    from calcsheaf.archive.verify import fingerprint
    assert first.startswith("trusted: keys as listed in project.toml, as frozen in each revision "
                            f"(fingerprints ab {fingerprint(listed['ab'])}, cd "
                            f"{fingerprint(listed['cd'])})")
    both = _keyring(env / "firm-keys.toml", project, ["ab", "cd"])
    assert verify(folder, trust=both) == 0
    assert capsys.readouterr().out.startswith(f"trusted: keys in the keyring {both}")
    only_ab = _keyring(env / "partial.toml", project, ["ab"])
    assert verify(folder, trust=only_ab) == 1
    out = capsys.readouterr().out
    assert "FAIL  checker key in the keyring: 'cd' (Chris Dale, ed25519:" in out
    renamed = env / "renamed.toml"
    renamed.write_text(both.read_text().replace("Chris Dale", "Chris Dale Jr"))
    assert verify(folder, trust=renamed) == 1
    assert "(the keyring lists another name or key)" in capsys.readouterr().out


def test_a_malformed_keyring_is_a_message(project, env):
    bad = env / "bad.toml"
    bad.write_text("[[person]\n")
    with pytest.raises(ArchiveError, match="the keyring cannot be read: not valid TOML"):
        verify(project, trust=bad)
    empty = env / "empty.toml"
    empty.write_text("")
    with pytest.raises(ArchiveError, match="the keyring lists nobody"):
        verify(project, trust=empty)


# --- malformed issued folders: failed rows, never an internal error ----------------------

def _write(rel, data):
    def change(folder):
        path = folder / rel
        if path.is_dir():
            shutil.rmtree(path)
        path.write_bytes(data if isinstance(data, bytes) else data.encode())
    return change


def _manifest_edit(**fields):
    def change(folder):
        manifest = json.loads((folder / MANIFEST).read_text())
        manifest.update(fields)
        (folder / MANIFEST).write_bytes(pretty_json(manifest))
    return change


def _remove(rel):
    def change(folder):
        path = folder / rel
        shutil.rmtree(path) if path.is_dir() else path.unlink()
    return change


def _replace_by_folder(rel):
    def change(folder):
        (folder / rel).unlink()
        (folder / rel).mkdir()
    return change


def _people_edit(**fields):
    def change(folder):
        people = json.loads((folder / "record/people.json").read_text())
        people["preparer"].update(fields)
        (folder / "record/people.json").write_bytes(pretty_json(people))
    return change


def _signoff_edit(**fields):
    def change(folder):
        records = json.loads((folder / "record/signoffs.json").read_text())
        records["checker"].update(fields)
        (folder / "record/signoffs.json").write_bytes(pretty_json(records))
    return change


def _link(folder):
    os.symlink("/etc/passwd", folder / "output" / "extra.txt")


MALFORMED = {
    "manifest is a list": _write(MANIFEST, "[]"),
    "manifest is not UTF-8": _write(MANIFEST, b"\xff\xfe{"),
    "manifest lacks keys": _write(MANIFEST, '{"calc": 1}'),
    "files is a list": _manifest_edit(files=["a"]),
    "calc file climbs out": _manifest_edit(calc_file="../../../../etc/passwd"),
    "pdf is a number": _manifest_edit(pdf=5),
    "supersedes is text": _manifest_edit(supersedes="A"),
    "people is a list": _write("record/people.json", "[]"),
    "preparer is text": _write("record/people.json", '{"preparer": "ab", "checker": {}}'),
    "people missing": _remove("record/people.json"),
    "signatures are strings": _write(SIGNATURES, '{"signatures": ["x", 5]}'),
    "signature fields of wrong type": _write(
        SIGNATURES, '{"signatures": [{"role": "preparer", "public_key": 5, "signature": 7}]}'),
    "sign-offs are strings": _write("record/signoffs.json", '{"preparer": "x", "checker": 3}'),
    "results is a list": _write("output/results.json", "[1]"),
    "results calc is text": _write("output/results.json", '{"calc": "x"}'),
    "frozen project.toml is binary": _write("inputs/project.toml", b"\x00\xff[[["),
    "frozen calc is a folder": _replace_by_folder("inputs/calcs/c1.toml"),
    "record is a file": _write("record", "x"),
    "a link to a system file": _link,
    "chain is text": _people_edit(chain="-----BEGIN CERTIFICATE-----"),
    "chain is a number": _people_edit(chain=5),
    "certificate is not PEM": _people_edit(certificate="not a certificate"),
    "sign-off signature is a list": _signoff_edit(signature=["a", "b"]),
    "manifest nested 100000 deep": _write(MANIFEST, "[" * 100000 + "]" * 100000),
}


@pytest.fixture(scope="module")
def one_issued(tmp_path_factory, tiny_pdf):
    from test_archive import ENV, _make_project
    base = tmp_path_factory.mktemp("malformed")
    with pytest.MonkeyPatch.context() as mp:
        for name, value in ENV.items():
            mp.setenv(name, value)
        mp.setenv("XDG_CONFIG_HOME", str(base / "config"))
        root = _make_project(base / "proj")
        keygen("Alice Able", "ab", root)
        keygen("Chris Dale", "cd", root)
        _sign_both(root)
        yield revisions.issue(root, "C-1", "A", render=fake_render(tiny_pdf))


@pytest.mark.parametrize("name", sorted(MALFORMED))
def test_a_malformed_issued_folder_gives_failed_rows(name, one_issued, tmp_path, capsys):
    project = Path(shutil.copytree(one_issued.parent.parent.parent, tmp_path / "proj",
                                   symlinks=True))
    folder = project / "issued" / "C-1" / "A"
    MALFORMED[name](folder)
    assert verify(folder) == 1
    assert verify(project) == 1
    out = capsys.readouterr().out
    assert "NOT VERIFIED" in out and "FAIL" in out
    recomputed = verify_revision(folder, recompute=lambda f, m: {"results": {}, "files": None})
    assert _failures(recomputed)


# --- read once; limits --------------------------------------------------------------------

def test_issue_analyses_the_bytes_it_signed_even_if_the_file_is_swapped(project, tiny_pdf):
    """The calc file is replaced while rendering: the results still come from the frozen,
    signed bytes (f_n = sqrt(k/m)/(2 pi), Rao, Mechanical Vibrations, 5th ed., eq. 2.14)."""
    calc = project / "calcs" / "c1.toml"
    _sign_both(project)
    honest = fake_render(tiny_pdf)

    def swapping(frozen_calc, project_root, out_dir, **kwargs):
        calc.write_text(CALC_TOML.replace("850 kg", "1700 kg"))   # swapped mid-issue
        return honest(frozen_calc, project_root, out_dir, **kwargs)

    folder = revisions.issue(project, "C-1", "A", render=swapping)
    manifest = json.loads((folder / MANIFEST).read_text())
    frozen = folder / manifest["calc_file"]
    assert sha256_file(frozen) == manifest["content_hash"]
    assert tomllib.loads(frozen.read_text())["parameters"]["m"] == "850 kg"
    f1 = json.loads((folder / "output" / "results.json").read_text())["results"]["f1"]["value"]
    assert math.isclose(f1, math.sqrt(1.2e6 / 850) / (2 * math.pi), rel_tol=1e-12)


def test_issue_runs_the_calc_under_the_build_limits(project, monkeypatch):
    from calcsheaf import isolation
    from calcsheaf.commands.issue import render_frozen
    from calcsheaf.errors import AnalysisError
    calc = project / "calcs" / "c1.toml"      # a valid calc: only the limit can stop it
    calc.write_text(calc.read_text() + '\n[initial]\nz = "1 mm"\n"dot(z)" = "0 m/s"\n')
    _sign_both(project)
    monkeypatch.setattr(isolation, "TIME_LIMIT_S", 0.0)
    with pytest.raises(AnalysisError, match="exceeded its time limit of 0 s"):
        revisions.issue(project, "C-1", "A", render=render_frozen)
    assert sorted(p.name for p in (project / "issued" / "C-1").iterdir()) == [".issue.lock"]
