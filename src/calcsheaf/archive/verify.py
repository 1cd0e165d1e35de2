"""Verification of issued revisions, whole projects and built sites.

Every check yields a row (item, passed, detail).  A revision folder is checked on its own
(hashes, both Ed25519 manifest signatures, sign-off statements, preparer differs from
checker, both PDF signatures against the certificates recorded at issue, the recorded
keys against the frozen project.toml) and, when it sits inside a project, also against the
project's current project.toml.  Only the standard library, cryptography and (for PDFs)
pyHanko are imported; the analysis stack only with `recompute`.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Callable

from . import projectfiles
from .canonical import sha256_bytes, sha256_file
from .manifest import (MANIFEST, SIGNATURES, Row, check_manifest_signatures, compare_files,
                       folder_files, read_manifest)
from .signoffs import ROLES, signature_problem

Recompute = Callable[[Path, Path], dict]      # (calc file, project.toml) -> results dict
RELATIVE_TOLERANCE = 1e-6
# Solver diagnostics vary at round-off level (or in wording) between machines and library
# versions, so on recompute only their pass flags are compared, not these values.
DIAGNOSTIC_KEYS = frozenset({"max_relative_residual", "relative_error", "agreement",
                             "residual", "constraint_drift", "nfev", "message", "detail",
                             "software", "build_date"})


def _load_json(folder: Path, rel: str) -> tuple[dict | None, Row | None]:
    try:
        return json.loads((folder / rel).read_text(encoding="utf-8")), None
    except FileNotFoundError:
        return None, (rel, False, "missing")
    except (ValueError, UnicodeDecodeError) as exc:
        return None, (rel, False, f"not valid JSON ({exc})")


def verify_revision(folder: Path, *, recompute: Recompute | None = None,
                    project_root: Path | None = None) -> list[Row]:
    """Every check of one issued/<CALC>/<REV>/ folder."""
    folder = Path(folder)
    try:
        manifest_bytes, manifest = read_manifest(folder)
    except FileNotFoundError:
        return [(MANIFEST, False, "missing: this is not an issued revision folder")]
    except ValueError as exc:
        return [(MANIFEST, False, f"not valid JSON ({exc}): the manifest was edited")]
    rows = compare_files(manifest.get("files", {}), folder_files(folder))
    people, problem = _load_json(folder, "record/people.json")
    if problem:
        return rows + [problem]
    rows += _check_roles(manifest, people)
    signatures, problem = _load_json(folder, SIGNATURES)
    rows += [problem] if problem else check_manifest_signatures(manifest_bytes, signatures, people)
    rows += _check_signoffs(folder, manifest, people)
    rows += _check_frozen_roster(folder, people)
    if project_root is not None:
        rows += _check_project_roster(project_root, people)
    rows += _check_results(folder, manifest)
    rows += _check_pdf(folder, manifest, people)
    if recompute is not None:
        rows += _check_recompute(folder, manifest, recompute)
    return rows


def _check_roles(manifest: dict, people: dict) -> list[Row]:
    prep, check = people.get("preparer", {}), people.get("checker", {})
    rows = []
    distinct = (prep.get("id") != check.get("id") and prep.get("public_key") != check.get("public_key")
                and prep.get("certificate") != check.get("certificate"))
    rows.append(("preparer differs from checker", bool(prep and check and distinct),
                 f"prepared by {prep.get('id', '?')}, checked by {check.get('id', '?')}"
                 + ("" if distinct else ": the same person or the same key took both roles")))
    for role, key in (("preparer", "prepared_by"), ("checker", "checked_by")):
        named = (manifest.get(key) or {}).get("id")
        ok = named == people.get(role, {}).get("id")
        rows.append((f"{role} recorded", ok, f"{named} with key {fingerprint(people.get(role, {}))}"
                     if ok else f"manifest names {named}, record/people.json names "
                     f"{people.get(role, {}).get('id')}"))
    return rows


def fingerprint(person: dict) -> str:
    """Short SHA-256 fingerprint of a person's public key, for comparing by eye."""
    key = person.get("public_key", "")
    return "ed25519:" + sha256_bytes(key.encode("ascii"))[:16] if key else "(none)"


def _check_signoffs(folder: Path, manifest: dict, people: dict) -> list[Row]:
    records, problem = _load_json(folder, "record/signoffs.json")
    if problem:
        return [problem]
    calc_path = folder / manifest.get("calc_file", "")
    actual = sha256_file(calc_path) if calc_path.is_file() else "(missing)"
    rows = [("content hash", actual == manifest.get("content_hash"),
             f"frozen calc file SHA-256 {actual[:16]}... "
             + ("matches" if actual == manifest.get("content_hash") else
                f"differs from the signed {str(manifest.get('content_hash'))[:16]}..."))]
    for role in ROLES:
        item = f"sign-off ({role})"
        record, who = records.get(role), people.get(role, {})
        if not record:
            rows.append((item, False, "missing"))
            continue
        statement = record.get("statement", {})
        problem = signature_problem(record, who.get("public_key", ""))
        if problem is None and statement.get("person") != who.get("id"):
            problem = f"signed as {statement.get('person')}, recorded {role} is {who.get('id')}"
        if problem is None and statement.get("content_hash") != manifest.get("content_hash"):
            problem = "the signed content hash is not that of the frozen calc file"
        if problem is None and (statement.get("calc"), statement.get("role")) != (
                manifest.get("calc"), role):
            problem = "the statement is for another calc or role"
        rows.append((item, problem is None, problem or
                     f"{who.get('name') or who.get('id')} signed on {statement.get('date')}"))
    return rows


def _roster_rows(listed: dict, people: dict, where: str) -> list[Row]:
    rows = []
    for role, who in sorted(people.items()):
        entry = listed.get(who.get("id"))
        same = entry is not None and entry["public_key"] == who.get("public_key") and \
            entry["certificate"].strip() == who.get("certificate", "").strip()
        rows.append((f"{role} key listed in {where}", same,
                     f"{who.get('id')} {fingerprint(who)}" if same else
                     f"key of '{who.get('id')}' is not listed in {where}"
                     + ("" if entry is None else " (a different key is listed)")))
    return rows


def _check_frozen_roster(folder: Path, people: dict) -> list[Row]:
    try:
        listed = projectfiles.people_from_data(
            projectfiles.read_toml(folder / "inputs" / "project.toml"))
    except Exception as exc:   # tampered file: report, never crash
        return [("inputs/project.toml", False, f"cannot be read ({exc})")]
    return _roster_rows(listed, people, "the frozen project.toml")


def _check_project_roster(project_root: Path, people: dict) -> list[Row]:
    try:
        listed = projectfiles.people(project_root)
    except Exception as exc:
        return [("project.toml", False, f"cannot be read ({exc})")]
    return _roster_rows(listed, people, "the project's project.toml")


def _check_results(folder: Path, manifest: dict) -> list[Row]:
    results, problem = _load_json(folder, "output/results.json")
    if problem:
        return [problem]
    calc = results.get("calc", {})
    named = calc.get("number") == manifest.get("calc") and calc.get("revision") == manifest.get(
        "revision")
    return [("results.json", named and results.get("passed") is True,
             f"calc {calc.get('number')} revision {calc.get('revision')}, passed: "
             f"{results.get('passed')}")]


def _check_pdf(folder: Path, manifest: dict, people: dict) -> list[Row]:
    pdf = folder / manifest.get("pdf", "")
    if not pdf.is_file():
        return [("pdf signatures", False, f"{manifest.get('pdf')} is missing")]
    from .pdfsign import check_pdf_signatures
    certs = {role: [who.get("certificate", "")] + list(who.get("chain", []))
             for role, who in people.items()}
    return check_pdf_signatures(pdf.read_bytes(), certs)


def _check_recompute(folder: Path, manifest: dict, recompute: Recompute) -> list[Row]:
    frozen, problem = _load_json(folder, "output/results.json")
    if problem:
        return [problem]
    try:
        fresh = recompute(folder / manifest.get("calc_file", ""), folder / "inputs" / "project.toml")
    except Exception as exc:   # any failure to re-run is a failed verification item
        return [("recompute", False, f"re-running the calc failed ({exc})")]
    differences = compare_results(frozen, fresh)
    if differences:
        shown = "; ".join(differences[:5]) + (" ..." if len(differences) > 5 else "")
        return [("recompute", False, f"{len(differences)} value(s) differ: {shown}")]
    return [("recompute", True, f"every result agrees within a relative {RELATIVE_TOLERANCE:g}")]


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


def check_project_revisions(project_root: Path, calc_number: str) -> list[Row]:
    """The supersedes links of a calc's revisions form one chain of real manifests."""
    from .revisions import ordered_revisions
    revs = ordered_revisions(project_root, calc_number)
    rows = []
    for previous, current in zip(revs, revs[1:]):
        link = current[2].get("supersedes") or {}
        ok = link.get("revision") == previous[0] and link.get(
            "manifest_sha256") == sha256_bytes(previous[1])
        rows.append((f"revision {current[0]} supersedes {previous[0]}", ok,
                     "link matches that revision's manifest" if ok else
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


def verify_path(path: Path, *, recompute: Recompute | None = None) -> list[tuple[str, list[Row]]]:
    """(section title, rows) for a revision folder, a project, or a site (or any folder of them)."""
    path = Path(path)
    sections = []
    if (path / MANIFEST).is_file():
        root = _project_of_revision(path)
        return [(str(path), verify_revision(path, recompute=recompute, project_root=root))]
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
                                                      project_root=root)))
    if project:
        issued = project / "issued"
        for calc in sorted(p.name for p in issued.iterdir() if p.is_dir()) if issued.is_dir() else []:
            rows = check_project_revisions(project, calc)
            if rows:
                sections.append((f"{issued / calc} (revision history)", rows))
    return sections


def _project_of_revision(folder: Path) -> Path | None:
    """The project root when `folder` is PROJECT/issued/<CALC>/<REV>, else None."""
    folder = folder.resolve()
    root = folder.parent.parent.parent
    if folder.parent.parent.name == "issued" and (root / "project.toml").is_file():
        return root
    return None
