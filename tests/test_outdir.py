"""Output folders: no command deletes what it did not make (issue 13, item 3), and a
file-system fault (disk full, read-only folder) is a message that leaves the old output whole
(item 10).

Most tests call write_site directly (no analysis: fast); the CLI tests are refused before
any calc is analysed.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import io
import os
from pathlib import Path

import pytest

from calcsheaf import cli
from calcsheaf.outdir import write_site
from calcsheaf.errors import BuildError
from calcsheaf.outdir import MARKER, MARKER_TEXT, check_output_folder, is_calcsheaf_output

FILES = {"index.html": b"<p>site</p>\n", "C-1/results.json": b"{}\n"}
PROJECT_TOML = '[project]\nnumber = "P-1"\nname = "Output folder tests"\n'


def run(*argv: str) -> tuple[int, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main(list(argv))
    return code, out.getvalue() + err.getvalue()


def tree(folder: Path) -> dict[str, str]:
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def project(root: Path) -> Path:
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    (root / "calcs" / "a.toml").write_text("# a calc the user wrote\n")
    (root / "issued" / "C-1" / "A").mkdir(parents=True)
    (root / "issued" / "C-1" / "A" / "MANIFEST.json").write_text("{}\n")
    return root


# ---- write_site ---------------------------------------------------------------------
def test_a_new_folder_is_written_with_the_marker_listed_in_sha256sums(tmp_path):
    target = tmp_path / "site"
    write_site(target, FILES)
    assert (target / MARKER).is_file()
    listed = {line.split("  ", 1)[1] for line in (target / "SHA256SUMS").read_text().splitlines()}
    assert listed == set(FILES) | {MARKER}
    assert is_calcsheaf_output(target)


def test_an_empty_folder_and_a_marked_folder_are_replaced(tmp_path):
    target = tmp_path / "site"
    target.mkdir()
    write_site(target, FILES)
    write_site(target, {"other.html": b"x"})            # a folder we wrote: replaced whole
    assert sorted(tree(target)) == sorted(["other.html", MARKER, "SHA256SUMS"])


def test_a_folder_with_the_users_files_is_refused_and_kept(tmp_path):
    target = tmp_path / "Documents"
    target.mkdir()
    (target / "thesis.docx").write_bytes(b"years of work")
    before = tree(target)
    with pytest.raises(BuildError) as info:
        write_site(target, FILES)
    assert "already holds 1 item(s) that calcsheaf did not write" in info.value.problem
    assert "Fix: choose a new or empty folder with --out" in info.value.message
    assert tree(target) == before
    assert [p.name for p in tmp_path.iterdir()] == ["Documents"], "a temporary folder was left"


def test_a_users_folder_with_an_ordinary_sha256sums_is_refused_and_kept(tmp_path):
    """Attack round 13, F2: a download folder whose SHA256SUMS (made by `sha256sum`) lists
    exactly its files was taken for an old calcsheaf site and deleted."""
    target = tmp_path / "dl"
    target.mkdir()
    files = {"distro.iso": b"my precious iso\n", "notes.txt": b"notes\n"}
    for name, data in files.items():
        (target / name).write_bytes(data)
    (target / "SHA256SUMS").write_text("".join(f"{hashlib.sha256(d).hexdigest()}  {n}\n"
                                               for n, d in sorted(files.items())))
    before = tree(target)
    assert not is_calcsheaf_output(target)
    with pytest.raises(BuildError) as info:
        write_site(target, FILES)
    assert str(target) in info.value.message
    assert "choose a new or empty folder" in info.value.message
    assert "delete this folder yourself" in info.value.message
    assert tree(target) == before


@pytest.mark.parametrize("content", [b"", b"mine\n", MARKER_TEXT + b"extra", MARKER_TEXT.rstrip()])
def test_a_marker_whose_content_is_not_calcsheafs_is_refused(tmp_path, content):
    target = tmp_path / "site"
    target.mkdir()
    (target / MARKER).write_bytes(content)
    (target / "keep.txt").write_text("keep")
    with pytest.raises(BuildError, match="did not write"):
        write_site(target, FILES)
    assert (target / "keep.txt").read_text() == "keep"


def test_a_marker_that_is_a_link_is_refused(tmp_path):
    real = tmp_path / "real-marker"
    real.write_bytes(MARKER_TEXT)
    target = tmp_path / "site"
    target.mkdir()
    (target / MARKER).symlink_to(real)
    assert not is_calcsheaf_output(target)


def test_the_leftover_temporary_folder_has_an_unpredictable_name(tmp_path, monkeypatch):
    """Attack round 13, L2: links `.site.tmp-<pid>` planted for every pid blocked every build."""
    target = tmp_path / "site"
    outside = tmp_path / "outside"
    outside.mkdir()
    (tmp_path / f".site.tmp-{os.getpid()}").symlink_to(outside)
    write_site(target, FILES)
    assert sorted(tree(target)) == sorted([*FILES, MARKER, "SHA256SUMS"])
    assert list(outside.iterdir()) == []


def test_a_symlink_or_a_file_as_output_is_refused(tmp_path):
    real = tmp_path / "real"
    real.mkdir()
    (tmp_path / "link").symlink_to(real)
    (tmp_path / "file").write_text("x")
    with pytest.raises(BuildError, match="is a symbolic link"):
        check_output_folder(tmp_path / "link")
    with pytest.raises(BuildError, match="is a file, not a folder"):
        check_output_folder(tmp_path / "file")


@pytest.mark.parametrize("out, words", [
    (".", "is the project folder"),
    ("..", "contains the project folder"),
    ("calcs", "inside the project's sources"),
    ("issued/C-1", "inside the project's sources"),
    ("templates/site", "inside the project's sources"),
])
def test_an_output_folder_overlapping_the_sources_is_refused(tmp_path, out, words):
    root = project(tmp_path / "proj")
    with pytest.raises(BuildError) as info:
        check_output_folder(root / out, root)
    assert words in info.value.problem


def test_the_default_site_folder_inside_the_project_is_allowed(tmp_path):
    root = project(tmp_path / "proj")
    check_output_folder(root / "_site", root)


def test_disk_full_while_writing_leaves_the_old_site_whole_and_no_temporary_folder(tmp_path, monkeypatch):
    target = tmp_path / "site"
    write_site(target, FILES)
    before = tree(target)
    real_write = Path.write_bytes
    calls = []

    def full(self, data):
        calls.append(self)
        if len(calls) > 2:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(self))
        return real_write(self, data)

    monkeypatch.setattr(Path, "write_bytes", full)
    with pytest.raises(OSError):
        write_site(target, {**FILES, "big.pdf": b"x" * 1000})
    monkeypatch.undo()
    assert tree(target) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site"]


# ---- the command line -------------------------------------------------------------------
def test_build_into_the_project_itself_is_refused_and_deletes_nothing(tmp_path):
    root = project(tmp_path / "proj")
    before = tree(root)
    code, text = run("build", str(root), "--out", str(root))
    assert code == 1 and "Traceback" not in text
    assert "the output folder is the project folder" in text and "Fix:" in text
    assert tree(root) == before


def test_build_into_a_folder_holding_other_files_is_refused(tmp_path):
    root = project(tmp_path / "proj")
    out = tmp_path / "photos"
    out.mkdir()
    (out / "holiday.jpg").write_bytes(b"jpeg")
    code, text = run("build", str(root), "--out", str(out))
    assert code == 1 and "did not write (no .calcsheaf-output marker file)" in text
    assert (out / "holiday.jpg").read_bytes() == b"jpeg"
    assert not list(tmp_path.glob(".photos.*")), "lock or temporary files left beside the folder"


def test_selftest_into_a_folder_holding_other_files_is_refused_before_running(tmp_path):
    out = tmp_path / "reports"
    out.mkdir()
    (out / "keep.txt").write_text("keep")
    code, text = run("selftest", "--out", str(out))
    assert code == 1 and "calcsheaf did not write" in text and "Fix:" in text
    assert "PASS" not in text, "the suite ran before the folder was checked"
    assert (out / "keep.txt").read_text() == "keep"


def test_selftest_into_a_folder_with_an_ordinary_sha256sums_is_refused(tmp_path):
    """Attack round 13, F2, for `selftest --out`."""
    out = tmp_path / "st"
    out.mkdir()
    (out / "thesis.tex").write_text("keep")
    (out / "SHA256SUMS").write_text(f"{hashlib.sha256(b'keep').hexdigest()}  thesis.tex\n")
    code, text = run("selftest", "--out", str(out))
    assert code == 1 and str(out) in text and "delete this folder yourself" in text
    assert "PASS" not in text
    assert (out / "thesis.tex").read_text() == "keep"


@pytest.mark.parametrize("code, words", [
    (errno.ENOSPC, "free space on that disk"),
    (errno.EROFS, "the file system is read-only"),
    (errno.EACCES, "give yourself write permission"),
])
def test_a_file_system_fault_is_a_message_not_an_internal_error(tmp_path, monkeypatch, code, words):
    root = project(tmp_path / "proj")

    def fail(*args, **kwargs):
        raise OSError(code, os.strerror(code), str(root / "_site"))

    monkeypatch.setattr("calcsheaf.commands.build._full_build", fail)
    status, text = run("build", str(root))
    assert status == 1 and "Traceback" not in text and "internal error" not in text
    assert f"{root / '_site'}: {os.strerror(code)} ({errno.errorcode[code]}). Fix: {words}" in text


@pytest.mark.skipif(os.geteuid() == 0, reason="root writes into read-only folders")
def test_a_read_only_parent_folder_is_a_message(tmp_path):
    root = project(tmp_path / "proj")
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        code, text = run("build", str(root), "--out", str(locked / "site"))
    finally:
        locked.chmod(0o700)
    assert code == 1 and "Traceback" not in text and "internal error" not in text
    assert "Permission denied (EACCES). Fix: give yourself write permission" in text
    assert list(locked.iterdir()) == []


def test_disk_full_during_a_real_build_keeps_the_previous_site(tmp_path, monkeypatch):
    """End to end: a rebuild that runs out of space while writing the new site says so and
    leaves the previous site byte-identical, with no temporary folder beside it."""
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1780000000")
    root = tmp_path / "proj"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(PROJECT_TOML)
    valid = (Path(__file__).parent / "bad_inputs" / "valid.toml").read_text()
    (root / "calcs" / "a.toml").write_text(valid)
    code, text = run("build", str(root))
    assert code == 0, text
    before = tree(root / "_site")
    (root / "calcs" / "a.toml").write_text(valid.replace("Mass on a spring", "Edited mass"))
    real_write = Path.write_bytes

    def full(self, data):
        if "._site.tmp-" in str(self) and self.name != MARKER:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(self))
        return real_write(self, data)

    monkeypatch.setattr(Path, "write_bytes", full)
    code, text = run("build", str(root))
    assert code == 1 and "Traceback" not in text and "internal error" not in text
    assert "No space left on device (ENOSPC). Fix: free space on that disk" in text
    assert tree(root / "_site") == before
    assert not [p.name for p in root.iterdir() if p.name.startswith(("._site.tmp", "._site.old"))]
