"""Verification of issued revisions, whole projects and built sites.

Every check yields a row (item, passed, detail).  A revision folder is checked on its own
(hashes, both Ed25519 manifest signatures, sign-off statements, preparer differs from
checker, both PDF signatures against the certificates recorded at issue, the recorded
keys against the frozen project.toml) and, when it sits inside a project, also against the
project's current project.toml.  Only the standard library, cryptography and (for PDFs)
pyHanko are imported; the analysis stack only with `recompute`.
"""

from __future__ import annotations

import math
import os
from pathlib import Path
from typing import Callable

from calcsheaf import __version__, identifiers
from calcsheaf.errors import ArchiveError, CalcsheafError, InputError

from . import projectfiles
from .canonical import sha256_bytes, sha256_file
from .manifest import (MANIFEST, SIGNATURES, Row, check_manifest_signatures, compare_files,
                       folder_files, parse_json, read_manifest)
from .signoffs import ROLES, signature_problem

# (revision folder, manifest) -> {"results": dict, "files": {output-relative path: bytes}
# or None when only the results could be recomputed, "note": what was recomputed}
Recompute = Callable[[Path, dict], dict]
PEOPLE_FIELDS = ("id", "name", "public_key", "certificate")
RELATIVE_TOLERANCE = 1e-6
# Solver diagnostics vary at round-off level (or in wording) between machines and library
# versions, so on recompute only their pass flags are compared, not these values.
DIAGNOSTIC_KEYS = frozenset({"max_relative_residual", "relative_error", "agreement",
                             "residual", "constraint_drift", "nfev", "message", "detail",
                             "software", "build_date"})


def verify_revision(folder: Path, *, recompute: Recompute | None = None,
                    project_root: Path | None = None, trust: dict | None = None) -> list[Row]:
    """Every check of one issued/<CALC>/<REV>/ folder; a malformed folder gives failed rows.

    `trust` (from `load_keyring`): the firm's keyring; each signer's key must be in it.
    """
    folder = Path(folder)
    rows, manifest, people = _signed_rows(folder, project_root)
    if manifest is None or people is None:
        return rows
    if project_root is not None:
        rows += check_project_revisions(project_root, manifest["calc"], focus=folder.name)
    else:
        link = manifest.get("supersedes")
        rows.append(("revision history", True,
                     f"supersedes {link['revision']}: not checked, the folder is not inside "
                     "its project" if link else "the first revision of its calc"))
    if trust is not None:
        rows += _check_trust(trust, people)
    rows += _check_results(folder, manifest)
    rows += _check_pdf(folder, manifest, people)
    if recompute is not None:
        rows += _check_recompute(folder, manifest, recompute)
    return rows


def _signed_rows(folder: Path, project_root: Path | None) -> tuple[list[Row], dict | None,
                                                                 dict | None]:
    """The signature checks of a revision folder (no PDF signatures, no recompute): no
    symbolic link on its path, file hashes, place, roles, both manifest signatures, both
    sign-offs and the recorded keys against the frozen (and the project's) project.toml.
    Returns (rows, manifest, people); manifest or people is None when the folder is too
    damaged to go on."""
    link = _linked_part(folder)
    if link is not None:
        return [("revision folder", False, f"{link} is a symbolic link: an issued revision is a "
                 "real folder under its own calc (a link can make one calc's revision pass as "
                 "another's); replace the link by the archived copy")], None, None
    try:
        manifest_bytes, manifest = read_manifest(folder)
    except FileNotFoundError:
        return [(MANIFEST, False, "missing: this is not an issued revision folder")], None, None
    except (ValueError, UnicodeDecodeError) as exc:
        return [(MANIFEST, False, f"not valid JSON ({exc}): the manifest was edited")], None, None
    except OSError as exc:
        return [(MANIFEST, False, f"cannot be read ({exc.strerror})")], None, None
    from .layout import manifest_problem
    problem = manifest_problem(manifest)
    if problem:
        return [(MANIFEST, False, f"is not a calcsheaf manifest ({problem}): the manifest was "
                 "edited or made by hand")], None, None
    rows = compare_files(manifest["files"], folder_files(folder))
    people, problem = _load_people(folder)
    if problem:
        return rows + [problem], manifest, None
    rows += _check_place(folder, manifest, project_root)
    rows += _check_roles(manifest, people)
    signatures, problem = _load_json(folder, SIGNATURES)
    rows += [problem] if problem else check_manifest_signatures(manifest_bytes, signatures, people)
    rows += _check_signoffs(folder, manifest, people)
    rows += _check_frozen_roster(folder, people)
    if project_root is not None:
        rows += _check_project_roster(project_root, people)
    return rows, manifest, people


def _linked_part(folder: Path) -> str | None:
    """The first of the folder, its calc folder and issued/ that is a symbolic link; None
    when there is none (links inside the folder fail as files by folder_files)."""
    folder = Path(folder)
    for part in (folder, folder.parent, folder.parent.parent):
        if part.is_symlink():
            return str(part)
        if part.name == "issued":
            break
    return None


def revision_problem(folder: Path, project_root: Path) -> str | None:
    """Why a revision folder of a project must not count as issued (shown, served, or
    superseding another); None when all its signature checks pass.  Fast: signatures and
    hashes only, no PDF signature check and no recompute."""
    rows, _, _ = _signed_rows(Path(folder), project_root)
    failed = sorted((not item.startswith(("revision folder", "manifest signature", MANIFEST)), i)
                    for i, (item, ok, _) in enumerate(rows) if not ok)
    if not failed:
        return None
    item, _, detail = rows[failed[0][1]]   # a broken signature first: it quotes no edited text
    return f"{item}: {detail}"


def _load_json(folder: Path, rel: str, kind: type = dict) -> tuple:
    try:
        data = parse_json((folder / rel).read_bytes())
    except FileNotFoundError:
        return None, (rel, False, "missing")
    except IsADirectoryError:
        return None, (rel, False, "is a folder, not a file")
    except (ValueError, UnicodeDecodeError) as exc:
        return None, (rel, False, f"not valid JSON ({exc})")
    except OSError as exc:
        return None, (rel, False, f"cannot be read ({exc.strerror})")
    if not isinstance(data, kind):
        return None, (rel, False, f"is not a JSON {'object' if kind is dict else 'list'}")
    return data, None


def _load_people(folder: Path) -> tuple:
    """record/people.json: {preparer, checker} each with text id, name, public_key, certificate."""
    people, problem = _load_json(folder, "record/people.json")
    if problem:
        return None, problem
    for role in ROLES:
        who = people.get(role)
        chain = who.get("chain", []) if isinstance(who, dict) else None
        if not isinstance(who, dict) or not all(isinstance(who.get(k), str) for k in PEOPLE_FIELDS) \
                or not isinstance(chain, list) or not all(isinstance(c, str) for c in chain):
            return None, ("record/people.json", False,
                          f"the {role} entry is missing or malformed (needs text id, name, "
                          "public_key, certificate and a list of PEM texts as chain)")
    return {role: people[role] for role in ROLES}, None


def _check_place(folder: Path, manifest: dict, project_root: Path | None) -> list[Row]:
    """The manifest's project, calc and revision against the folder, its frozen inputs and
    (inside a project) the project: a folder copied under another calc or revision fails."""
    rows = [("revision folder", manifest["revision"] == folder.name,
             f"manifest revision {manifest['revision']}, folder {folder.name}")]
    given = Path(os.path.abspath(folder))    # as given: a linked folder is not its target's
    if given.parent.parent.name == "issued":
        calc_dir = given.parent.name
        rows.append(("calc folder", manifest["calc"] == calc_dir,
                     f"manifest calc {manifest['calc']}, folder issued/{calc_dir}"))
    calc_file = folder / manifest["calc_file"]
    try:
        number = projectfiles.calc_number_of(calc_file) if _inside(folder, calc_file) else None
    except Exception as exc:   # a damaged frozen file is a failed row, never a crash
        number = f"unreadable ({exc})"
    rows.append(("frozen calc number", number == manifest["calc"],
                 f"the frozen calc file is numbered {number}, the manifest says {manifest['calc']}"
                 if number is not None else f"{manifest['calc_file']} lies outside the folder"))
    try:
        frozen_project = projectfiles.project_number_in(
            projectfiles.read_toml(folder / "inputs" / "project.toml"))
    except Exception as exc:
        frozen_project = f"unreadable ({exc})"
    rows.append(("frozen project number", frozen_project == manifest.get("project"),
                 f"inputs/project.toml: {frozen_project}, manifest: {manifest.get('project')}"))
    if project_root is not None:
        try:
            current = projectfiles.project_number(project_root)
        except Exception as exc:
            current = f"unreadable ({exc})"
        rows.append(("project number", current == manifest.get("project"),
                     f"project.toml: {current}, manifest: {manifest.get('project')}"))
    return rows


def _inside(folder: Path, path: Path) -> bool:
    return folder.resolve() in path.resolve().parents


def _check_roles(manifest: dict, people: dict) -> list[Row]:
    prep, check = people["preparer"], people["checker"]
    rows = []
    distinct = (prep["id"] != check["id"] and prep["public_key"] != check["public_key"]
                and prep["certificate"] != check["certificate"]
                and projectfiles.same_name(prep["name"]) != projectfiles.same_name(check["name"]))
    rows.append(("preparer differs from checker", distinct,
                 f"prepared by {prep['id']}, checked by {check['id']}"
                 + ("" if distinct else ": the same person, name or key took both roles")))
    for role, key in (("preparer", "prepared_by"), ("checker", "checked_by")):
        named = manifest.get(key) or {}
        who = people[role]
        ok = (named.get("id"), named.get("name")) == (who["id"], who["name"])
        rows.append((f"{role} recorded", ok, f"{who['name']} ({who['id']}) with key "
                     f"{fingerprint(who)}" if ok else
                     f"manifest names {named.get('name')!r} ({named.get('id')}), "
                     f"record/people.json names {who['name']!r} ({who['id']})"))
    return rows


def fingerprint(person: dict) -> str:
    """Short SHA-256 fingerprint of a person's public key, for comparing by eye."""
    key = person.get("public_key", "")
    return "ed25519:" + sha256_bytes(key.encode("utf-8"))[:16] if key else "(none)"


def _check_signoffs(folder: Path, manifest: dict, people: dict) -> list[Row]:
    records, problem = _load_json(folder, "record/signoffs.json")
    if problem:
        return [problem]
    calc_path = folder / manifest["calc_file"]
    actual = (sha256_file(calc_path) if _inside(folder, calc_path) and calc_path.is_file()
              else "(missing)")
    rows = [("content hash", actual == manifest["content_hash"],
             f"frozen calc file SHA-256 {actual[:16]}... "
             + ("matches" if actual == manifest["content_hash"] else
                f"differs from the signed {manifest['content_hash'][:16]}..."))]
    after = (manifest.get("supersedes") or {}).get("manifest_sha256", "")
    for role in ROLES:
        item = f"sign-off ({role})"
        record, who = records.get(role), people[role]
        if not isinstance(record, dict) or not isinstance(record.get("statement"), dict):
            rows.append((item, False, "missing or malformed"))
            continue
        problem = _statement_problem(record, role, who, manifest, after)
        rows.append((item, problem is None, problem or
                     f"{who['name']} signed on {record['statement'].get('date')}"))
    return rows


def _statement_problem(record: dict, role: str, who: dict, manifest: dict,
                       after: str) -> str | None:
    """Why a frozen sign-off does not vouch for this revision (None when it does)."""
    statement = record["statement"]
    problem = signature_problem(record, who["public_key"])
    if problem is None and statement.get("person") != who["id"]:
        problem = f"signed as {statement.get('person')}, recorded {role} is {who['id']}"
    if problem is None and statement.get("name") != who["name"]:
        problem = (f"signed under the name {statement.get('name')!r}, the roster lists "
                   f"{who['name']!r}")
    if problem is None and statement.get("content_hash") != manifest["content_hash"]:
        problem = "the signed content hash is not that of the frozen calc file"
    if problem is None and (statement.get("calc"), statement.get("role"),
                            statement.get("project")) != (manifest["calc"], role,
                                                          manifest.get("project")):
        problem = "the statement is for another project, calc or role"
    if problem is None and statement.get("after") != after:
        problem = ("signed at another point of the revision history than the revision this "
                   "one supersedes (a sign-off replayed from another revision)")
    return problem


def _roster_rows(listed: dict, people: dict, where: str) -> list[Row]:
    rows = []
    for role, who in sorted(people.items()):
        entry = listed.get(who["id"])
        same = entry is not None and entry["public_key"] == who["public_key"] and \
            entry["certificate"].strip() == who["certificate"].strip() and \
            entry["name"] == who["name"]
        rows.append((f"{role} key listed in {where}", same,
                     f"{who['name']} ({who['id']}) {fingerprint(who)}" if same else
                     f"'{who['id']}' with this name and key is not listed in {where}"
                     + ("" if entry is None else " (another name or key is listed)")))
    return rows


def _check_frozen_roster(folder: Path, people: dict) -> list[Row]:
    path = folder / "inputs" / "project.toml"
    try:
        listed = projectfiles.people_from_data(projectfiles.read_toml(path), path)
    except CalcsheafError as exc:   # tampered file: report, never crash
        return [("inputs/project.toml", False, f"cannot be read: {exc.problem}")]
    return _roster_rows(listed, people, "the frozen project.toml")


def _check_project_roster(project_root: Path, people: dict) -> list[Row]:
    try:
        listed = projectfiles.people(project_root)
    except CalcsheafError as exc:
        return [("project.toml", False, f"cannot be read: {exc.problem}")]
    return _roster_rows(listed, people, "the project's project.toml")


def load_keyring(path: Path) -> dict:
    """A keyring the firm keeps outside the project: TOML with [[person]] id, name,
    public_key (and optionally certificate), as in project.toml.  Returns
    {"file": path, "people": {id: entry}}; a malformed keyring is an ArchiveError."""
    path = Path(path)
    try:
        listed = projectfiles.people_from_data(projectfiles.read_toml(path), path)
    except InputError as exc:
        raise ArchiveError(f"the keyring cannot be read: {exc.problem}", file=path,
                           line=exc.line, key=exc.key, fix=exc.fix or "correct the keyring") from None
    if not listed:
        raise ArchiveError("the keyring lists nobody", file=path, key="person",
                           fix="list each trusted person under [[person]] with id, name and "
                               "public_key")
    return {"file": path, "people": listed}


def _check_trust(trust: dict, people: dict) -> list[Row]:
    """Each signer's id, name and key (and certificate, when the keyring gives one) as the
    keyring lists them."""
    rows = []
    for role in ROLES:
        who = people[role]
        entry = trust["people"].get(who["id"])
        same = entry is not None and entry["public_key"] == who["public_key"] and \
            entry["name"] == who["name"] and (not entry["certificate"].strip() or
                                              entry["certificate"].strip() == who["certificate"].strip())
        rows.append((f"{role} key in the keyring", same,
                     f"{who['name']} ({who['id']}) {fingerprint(who)} is in {trust['file']}" if same
                     else f"'{who['id']}' ({who['name']}, {fingerprint(who)}) is not in "
                     f"{trust['file']}" + ("" if entry is None else
                                           " (the keyring lists another name or key)")))
    return rows


def _check_results(folder: Path, manifest: dict) -> list[Row]:
    results, problem = _load_json(folder, "output/results.json")
    if problem:
        return [problem]
    calc = results.get("calc") if isinstance(results.get("calc"), dict) else {}
    named = calc.get("number") == manifest["calc"] and calc.get("revision") == manifest[
        "revision"]
    return [("results.json", named and results.get("passed") is True,
             f"calc {calc.get('number')} revision {calc.get('revision')}, passed: "
             f"{results.get('passed')}")]


def _check_pdf(folder: Path, manifest: dict, people: dict) -> list[Row]:
    rel = manifest.get("pdf")
    pdf = folder / rel if isinstance(rel, str) and rel else None
    if pdf is None or not _inside(folder, pdf) or not pdf.is_file():
        return [("pdf signatures", False, f"{rel} is missing")]
    from .pdfsign import check_pdf_signatures
    certs = {role: [who["certificate"]] + list(who.get("chain", []) or [])
             for role, who in people.items()}
    return check_pdf_signatures(pdf.read_bytes(), certs)


def _check_recompute(folder: Path, manifest: dict, recompute: Recompute) -> list[Row]:
    frozen, problem = _load_json(folder, "output/results.json")
    if problem:
        return [problem]
    try:
        fresh = recompute(folder, manifest)
    except CalcsheafError as exc:   # a failure to re-run is a failed verification item
        return [("recompute", False, f"re-running the calc failed: {exc.problem}")]
    differences = compare_results(frozen, fresh["results"])
    if differences:
        rows = [("recompute results", False, f"{len(differences)} value(s) differ: "
                 + "; ".join(differences))]
    else:
        rows = [("recompute results", True, "every value of results.json agrees within a "
                 f"relative {RELATIVE_TOLERANCE:g} (analysed afresh from the frozen calc file)")]
    if fresh.get("files") is None:
        return rows + [("recompute pages", True, f"not re-rendered: {fresh.get('note', '')}")]
    return rows + _compare_rendered(folder, manifest, fresh["files"])


def _compare_rendered(folder: Path, manifest: dict, files: dict[str, bytes]) -> list[Row]:
    """Re-rendered output files against the frozen ones: byte for byte, except the signed
    PDF, whose first revision (the bytes before the signatures) must equal the fresh PDF."""
    rows = []
    version = (manifest.get("software") or {}).get("calcsheaf")
    for rel in sorted(files):
        frozen = folder / "output" / rel
        item = f"recompute output/{rel}"
        if not frozen.is_file():
            rows.append((item, False, "re-rendered, but the revision has no such file"))
            continue
        data = frozen.read_bytes()
        pdf = f"output/{rel}" == manifest.get("pdf")
        same = data.startswith(files[rel]) if pdf else data == files[rel]
        rows.append((item, same, (
            "the signed PDF's unsigned first revision equals a fresh rendering" if pdf else
            "equals a fresh rendering") if same else
            f"differs from a fresh rendering from the frozen inputs (issued with calcsheaf "
            f"{version}; this is calcsheaf {__version__})"))
    return rows


def compare_results(frozen, fresh, path: str = "") -> list[str]:
    """Differences between two results dicts: numbers within RELATIVE_TOLERANCE, the rest exactly.

    The calc's status and revision and the DIAGNOSTIC_KEYS values are not compared.
    """
    if path in ("calc.status", "calc.revision") or path.rsplit(".", 1)[-1] in DIAGNOSTIC_KEYS:
        return []
    if isinstance(frozen, dict) and isinstance(fresh, dict):
        out = []
        for key in sorted(set(frozen) | set(fresh)):
            sub = f"{path}.{key}" if path else str(key)
            if key not in frozen or key not in fresh:
                if sub.rsplit(".", 1)[-1] not in DIAGNOSTIC_KEYS:
                    out.append(f"{sub} only in {'recomputed' if key in fresh else 'frozen'}")
                continue
            out += compare_results(frozen[key], fresh[key], sub)
        return out
    if isinstance(frozen, list) and isinstance(fresh, list):
        if len(frozen) != len(fresh):
            return [f"{path}: {len(frozen)} entries frozen, {len(fresh)} recomputed"]
        return [d for i, (a, b) in enumerate(zip(frozen, fresh))
                for d in compare_results(a, b, f"{path}[{i}]")]
    if _number(frozen) and _number(fresh):
        if frozen == fresh or math.isclose(frozen, fresh, rel_tol=RELATIVE_TOLERANCE):
            return []
        return [f"{path}: {frozen!r} frozen, {fresh!r} recomputed"]
    return [] if frozen == fresh else [f"{path}: {frozen!r} frozen, {fresh!r} recomputed"]


def _number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def check_project_revisions(project_root: Path, calc_number: str, *,
                            focus: str | None = None) -> list[Row]:
    """The calc's revisions form one chain: the first supersedes nothing, each later one
    supersedes the one before it (by manifest SHA-256) with a later revision letter.

    With `focus` (one revision), only the links up to that revision are checked.
    """
    from .layout import linked_paths, ordered_revisions
    try:
        links = linked_paths(project_root, calc_number)
        if links:
            return [(f"issued/{calc_number}", False, f"{link} is a symbolic link: an issued "
                     "revision is a real folder under its own calc; replace the link by the "
                     "archived copy") for link in links]
        revs = ordered_revisions(project_root, calc_number)
    except CalcsheafError as exc:
        return [(f"revision history of {calc_number}", False, f"{exc.file}: {exc.problem}")]
    names = [rev for rev, _, _ in revs]
    if focus in names:
        revs = revs[: names.index(focus) + 1]
    rows = []
    if revs:
        link = revs[0][2].get("supersedes")
        rows.append((f"revision {revs[0][0]} is the first", not link,
                     f"it names {link.get('revision')} as superseded, which is not issued: a "
                     "revision was removed" if link else "it supersedes nothing"))
    for previous, current in zip(revs, revs[1:]):
        link = current[2].get("supersedes") or {}
        ok = link.get("revision") == previous[0] and link.get(
            "manifest_sha256") == sha256_bytes(previous[1])
        forward = identifiers.revision_key(current[0]) > identifiers.revision_key(previous[0])
        rows.append((f"revision {current[0]} supersedes {previous[0]}", ok and forward,
                     "link matches that revision's manifest" if ok and forward else
                     f"{current[0]} does not come after {previous[0]}" if ok else
                     f"the manifest of {current[0]} names {link.get('revision')} with another "
                     "manifest hash: a revision was replaced or the history broken"))
    return rows


def check_sums(site: Path) -> list[Row]:
    """A site's SHA256SUMS (lines `<hex>  <path>`) against the files under it."""
    recorded = {}
    for line in (site / "SHA256SUMS").read_text(encoding="utf-8").splitlines():
        if line.strip():
            digest, _, rel = line.partition("  ")
            recorded[rel.strip().lstrip("*")] = digest.strip()
    actual = {rel: digest for rel, digest in folder_files(site).items() if rel != "SHA256SUMS"}
    return [(f"site {item.removeprefix('file ')}", ok,
             detail.replace("the manifest", "SHA256SUMS"))
            for item, ok, detail in compare_files(recorded, actual)]


def verify_path(path: Path, *, recompute: Recompute | None = None,
                trust: dict | None = None) -> list[tuple[str, list[Row]]]:
    """(section title, rows) for a revision folder, a project, or a site (or any folder of them).

    A single revision inside a project is also checked against the project and its place
    in the calc's revision history.
    """
    path = Path(path)
    sections = []
    if (path / MANIFEST).is_file():
        root = _project_of_revision(path)
        return [(str(path), verify_revision(path, recompute=recompute, project_root=root,
                                            trust=trust))]
    project = path.resolve() if (path / "project.toml").is_file() else None
    for site in (path, path / "_site") if project else (path,):
        if (site / "SHA256SUMS").is_file():
            sections.append((f"{site} (SHA256SUMS)", check_sums(site)))
    for manifest in sorted(path.rglob(MANIFEST)):
        folder = manifest.parent
        if any(part.startswith(".staging-") for part in folder.parts):
            continue
        root = project if project and _project_of_revision(folder) == project else None
        sections.append((str(folder), verify_revision(folder, recompute=recompute,
                                                      project_root=root, trust=trust)))
    if project:
        issued = project / "issued"
        if issued.is_symlink():
            sections.append((str(issued), [("issued", False, "is a symbolic link: calcsheaf "
                                            "never follows links in issued/; replace it by the "
                                            "real folder")]))
        for calc in sorted(p.name for p in issued.iterdir() if p.is_dir()) if issued.is_dir() else []:
            rows = (check_project_revisions(project, calc) if identifiers.problem(
                "calc number", calc) is None else
                [(f"issued/{calc}", False, "is not named by a valid calc number")])
            if rows:
                sections.append((f"{issued / calc} (revision history)", rows))
    return sections


def trusted_keys(path: Path, trust: dict | None) -> str:
    """What a verdict on `path` rests on, in words, for the report's first line."""
    if trust is not None:
        listed = ", ".join(f"{pid} {fingerprint(p)}" for pid, p in sorted(trust["people"].items()))
        return f"trusted: keys in the keyring {trust['file']} (fingerprints {listed})"
    people: dict[str, str] = {}
    folders = [Path(path)] if (Path(path) / MANIFEST).is_file() else sorted(
        m.parent for m in Path(path).rglob(MANIFEST))
    for folder in folders:
        found, _ = _load_people(folder)
        for who in (found or {}).values():
            people[who["id"]] = fingerprint(who)
    if not folders:
        return ("trusted: no keys (no issued revision here); a site's SHA256SUMS shows only "
                "that its files are the ones listed")
    listed = ", ".join(f"{pid} {fp}" for pid, fp in sorted(people.items())) or "none readable"
    return ("trusted: keys as listed in project.toml, as frozen in each revision "
            f"(fingerprints {listed}); give --trust KEYRING to check them against keys the "
            "firm keeps outside the project")


def _project_of_revision(folder: Path) -> Path | None:
    """The project root when `folder` is PROJECT/issued/<CALC>/<REV>, else None."""
    folder = Path(os.path.abspath(folder))
    root = folder.parent.parent.parent
    if folder.parent.parent.name == "issued" and (root / "project.toml").is_file():
        return root
    return None
