"""The build cache and the template sandbox under a hostile project folder.

Cache entries are JSON + bytes authenticated with a per-user key kept outside the
project: a crafted entry cannot run code, a forged or altered one is ignored and
rebuilt (and said so once), `issue`'s renderer uses no project cache at all, and a
calc file is read once per build, so results are cached under the bytes they came
from.  Templates see plain data only and render under limits.
"""

from __future__ import annotations

import hashlib
import json
import os
import pickle
import shutil
import stat
import textwrap
import types
from pathlib import Path

import numpy as np
import pytest
import sympy as sp

from calcsheaf import cache as cache_mod, pipeline
from calcsheaf.cli import main
from calcsheaf.commands import issue as issue_command, publish
from calcsheaf.errors import BuildError, ProblemList, InputError
from calcsheaf.model import ProjectInfo
from calcsheaf.project import load_project
from calcsheaf.render import theme
from calcsheaf.render.html import LAGRANGE
from calcsheaf.render.mathsvg import equation_key
from calcsheaf.report_codec import decode_report, encode_report

TINY = textwrap.dedent("""
    [calc]
    number = "C-1"
    title = "Mass on a spring"

    [parameters]
    m = "{mass} kg"
    k = "4 kN/m"
    g = "9.80665 m/s^2"

    [coordinates]
    x = {{ unit = "mm", label = "displacement, positive down" }}

    [energy]
    kinetic = "m/2*dot(x)**2"
    potential = "k/2*x**2 - m*g*x"

    [initial]
    x = "0 mm"
    "dot(x)" = "0 m/s"

    [[result]]
    name = "x_static"
    expr = "equilibrium(x)"
    unit = "mm"
    """)


@pytest.fixture(autouse=True)
def own_key(tmp_path, monkeypatch):
    """Every test has its own cache key and a fixed build date."""
    monkeypatch.setenv("CALCSHEAF_CACHE_KEY_FILE", str(tmp_path / "config" / "cache.key"))
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1780000000")


def make_project(root: Path, mass: float = 10.0) -> Path:
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-9"\nname = "Cache trust"\n')
    (root / "calcs" / "a.toml").write_text(TINY.format(mass=mass))
    return root


def x_static(site: Path) -> float:
    """x_static (mm) as published; static deflection m g / k (closed form, any statics text)."""
    return json.loads((site / "C-1" / "results.json").read_text())["results"]["x_static"]["value"]


def entries(project: Path, kind: str) -> list[Path]:
    return sorted((project / cache_mod.FOLDER / kind).glob(f"*{cache_mod.SUFFIX}"))


class _Payload:
    """Unpickling this runs a command: what a crafted pickle cache entry would do."""

    def __init__(self, marker: Path) -> None:
        self.marker = marker

    def __reduce__(self):
        return (os.system, (f"touch {self.marker}",))


# ---- entries cannot run code and cannot be forged ---------------------------------------
def test_crafted_pickle_entries_run_nothing_and_are_rebuilt(tmp_path, capsys):
    project = make_project(tmp_path / "p")
    assert main(["build", str(project)]) == 0
    marker = tmp_path / "calcsheaf-injected"
    payload = pickle.dumps(_Payload(marker))
    assert pickle.loads(payload) == 0 and marker.exists()     # the payload does run when unpickled
    marker.unlink()
    crafted = entries(project, "calc") + entries(project, "equations")
    assert crafted
    for path in crafted:
        path.write_bytes(payload)
        path.with_suffix(".pickle").write_bytes(payload)       # the former format, too
    (project / "._site.key").unlink()
    capsys.readouterr()
    assert main(["build", str(project)]) == 0
    captured = capsys.readouterr()
    assert not marker.exists()
    assert "a.toml: solve" in captured.out                     # analysed again, not trusted
    assert captured.err.count("failed authentication") == 1, captured.err
    assert f"ignored {len(crafted)} entries" in captured.err     # calc and equation entries
    assert x_static(project / "_site") == pytest.approx(10 * 9.80665 / 4000 * 1000, rel=1e-9)


def test_forged_entry_with_false_results_is_ignored(tmp_path, capsys):
    """An entry in the right format, at the right key, made with another key: not used."""
    project = make_project(tmp_path / "p")
    assert main(["build", str(project)]) == 0
    true_value = x_static(project / "_site")
    (entry,) = entries(project, "calc")
    genuine = cache_mod.Cache(project)
    meta, files = genuine.get("calc", entry.stem)
    forged = dict(files)
    data = json.loads(forged["C-1/results.json"])
    data["results"]["x_static"]["value"] = 0.001
    forged["C-1/results.json"] = json.dumps(data).encode()
    cache_mod.Cache(project, secret=b"\x01" * 32).put("calc", entry.stem, meta, forged)
    assert genuine.get("calc", entry.stem) is None and genuine.rejected == [entry]
    (project / "._site.key").unlink()
    capsys.readouterr()
    assert main(["build", str(project)]) == 0
    err = capsys.readouterr().err
    assert "1 entry" in err and "failed authentication" in err
    assert x_static(project / "_site") == true_value          # 24.5166 mm, not the forged 0.001


def test_an_altered_byte_of_an_authentic_entry_is_detected(tmp_path):
    store = cache_mod.Cache(tmp_path, secret=b"\x02" * 32)
    store.put("calc", "k1", {"report": {"a": 1}}, {"x.html": b"<p>true</p>"})
    path = tmp_path / cache_mod.FOLDER / "calc" / f"k1{cache_mod.SUFFIX}"
    assert store.get("calc", "k1") == ({"report": {"a": 1}}, {"x.html": b"<p>true</p>"})
    path.write_bytes(path.read_bytes().replace(b"true", b"fake"))
    assert store.get("calc", "k1") is None
    moved = tmp_path / cache_mod.FOLDER / "calc" / f"k2{cache_mod.SUFFIX}"
    store.put("calc", "k1", {"report": {"a": 1}}, {"x.html": b"<p>true</p>"})
    shutil.copyfile(path, moved)                               # an entry copied to another key
    assert store.get("calc", "k2") is None


def test_key_file_is_made_private_and_an_exposed_key_turns_the_cache_off(tmp_path, monkeypatch):
    monkeypatch.delenv("CALCSHEAF_CACHE_KEY_FILE")
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "xdg"))
    key_file = tmp_path / "xdg" / "calcsheaf" / "cache.key"
    store = cache_mod.Cache(tmp_path / "project")
    assert store.enabled and cache_mod.cache_key_file() == key_file
    assert stat.S_IMODE(key_file.stat().st_mode) == 0o600 and len(key_file.read_bytes()) == 32
    assert cache_mod.Cache(tmp_path / "other")._secret == store._secret
    key_file.chmod(0o644)
    exposed = cache_mod.Cache(tmp_path / "project")
    assert not exposed.enabled and exposed.get("calc", "x") is None
    (note,) = exposed.report()
    assert "the build cache is off" in note and "readable or writable by other users" in note
    assert "Fix: let its folder be written and keep the file private to you" in note


def test_cached_report_round_trips_as_plain_data(tmp_path):
    project = make_project(tmp_path / "p")
    source = pipeline.read_source(project / "calcs" / "a.toml")
    report = pipeline.analyse_source(source)
    data = json.loads(json.dumps(encode_report(report)))        # JSON-safe, nothing else
    back = decode_report(data, source.path, source.raw)
    for name in ("number", "title", "input_hash", "checks", "results", "inputs", "modes",
                 "equilibrium", "passed", "largest_ratio", "source_text"):
        assert repr(getattr(back, name)) == repr(getattr(report, name)), name   # NaN-safe
    with pytest.raises(ValueError):
        decode_report(data, source.path, source.raw + b"\n")    # an entry for other bytes
    failed = pipeline.failed_source(source, ProblemList([InputError("bad", file="a.toml", line=3,
                                                                    key="k", fix="mend it")]))
    again = decode_report(json.loads(json.dumps(encode_report(failed))), source.path, source.raw)
    assert again.error.message == failed.error.message


# ---- issue renders from fresh analysis, without the project cache -------------------------
def test_issue_rendering_uses_no_project_cache(tmp_path):
    """Authentic but replaced equation images in the cache do not reach issue's output."""
    pristine = make_project(tmp_path / "pristine")
    tampered = make_project(tmp_path / "tampered")
    assert main(["build", str(tampered)]) == 0
    store = cache_mod.Cache(tampered)
    lagrange = cache_mod.key("equation", equation_key(LAGRANGE))    # on every calc page
    names = [p.stem for p in entries(tampered, "equations")]
    assert lagrange in names
    replacement = store.get("equations", next(n for n in names if n != lagrange))[1]["svg"]
    store.put("equations", lagrange, {}, {"svg": replacement})        # authentic, but wrong
    images = publish.equation_images(load_project(tampered), use_cache=True)
    assert images.svg(LAGRANGE) == replacement      # a cached build would use the replaced image
    context = {"calc": "C-1", "status": "issued", "revision": "A", "signoff": {},
               "history": [], "build_date": "", "changes": None}
    outputs = [issue_command.render_isolated(project / "calcs" / "a.toml", project, context)[0]
               for project in (pristine, tampered)]
    assert outputs[0] == outputs[1]
    assert not (pristine / cache_mod.FOLDER).exists()


# ---- read once ----------------------------------------------------------------------------
def test_a_calc_edited_during_a_build_is_built_from_the_bytes_read(tmp_path, capsys, monkeypatch):
    """The edit lands just after the build read the file: the build publishes and caches
    what it read, and the next build sees the change instead of saying "up to date"."""
    project = make_project(tmp_path / "p", mass=10.0)
    calc = project / "calcs" / "a.toml"
    read_sources = pipeline.read_sources

    def read_then_edit(root):
        sources = read_sources(root)
        calc.write_text(TINY.format(mass=20.0))
        return sources
    monkeypatch.setattr(pipeline, "read_sources", read_then_edit)
    assert main(["build", str(project)]) == 0
    site = project / "_site"
    assert x_static(site) == pytest.approx(10 * 9.80665 / 4, rel=1e-9)     # m g / k in mm
    monkeypatch.setattr(pipeline, "read_sources", read_sources)
    published = json.loads((site / "C-1" / "results.json").read_text())
    capsys.readouterr()
    assert main(["build", str(project)]) == 0
    assert "up to date" not in capsys.readouterr().out
    assert x_static(site) == pytest.approx(20 * 9.80665 / 4, rel=1e-9)
    calc.write_text(TINY.format(mass=10.0))                     # back to the first content
    assert main(["build", str(project)]) == 0
    assert json.loads((site / "C-1" / "results.json").read_text()) == published
    digest = hashlib.sha256(calc.read_bytes()).hexdigest()
    assert digest in (site / "C-1" / "index.html").read_text()


# ---- templates: plain data, sandbox, limits -------------------------------------------------
ALLOWED = (str, bool, int, float, type(None), list, dict, types.SimpleNamespace)


def _walk(value, seen_types: set) -> None:
    seen_types.add(type(value))
    items = value.values() if isinstance(value, dict) else \
        vars(value).values() if isinstance(value, types.SimpleNamespace) else \
        value if isinstance(value, list) else ()
    for item in items:
        _walk(item, seen_types)


def test_templates_get_plain_data_only(tmp_path):
    project = make_project(tmp_path / "p")
    report = pipeline.analyse_source(pipeline.read_source(project / "calcs" / "a.toml"))
    info = load_project(project)
    data = theme.plain({"calc": report, "project": info})
    kinds: set = set()
    _walk(data, kinds)
    assert all(issubclass(k, ALLOWED) for k in kinds), kinds
    assert not hasattr(data["project"], "root")
    assert vars(data["calc"].source_path) == {"name": "a.toml"}
    assert all(not hasattr(step, "expr") for step in data["calc"].derivation)
    assert data["calc"].passed is True
    for bad in (Path("/etc"), sp.Symbol("x"), np.array([1j]), object(), {1: "a"}):
        with pytest.raises(TypeError):
            theme.plain(bad)


def test_sandbox_reads_no_attribute_of_other_objects(tmp_path):
    env = theme.environment(None)
    secret = tmp_path / "secret.txt"
    secret.write_text("SECRET")
    with pytest.raises(Exception, match="unsafe"):
        env.from_string("{{ p.read_text() }}").render(p=secret)
    with pytest.raises(Exception, match="unsafe"):
        env.from_string("{{ a.tofile('x') }}").render(a=np.zeros(2))
    assert env.from_string("{{ d.items() | list | length }}").render(d={"a": 1}) == "1"


def test_bad_template_limit_is_refused(monkeypatch):
    monkeypatch.setenv("CALCSHEAF_TEMPLATE_TIME_LIMIT", "-1")
    with pytest.raises(InputError) as refused:
        theme.limits()
    assert refused.value.message == (
        "environment: CALCSHEAF_TEMPLATE_TIME_LIMIT: '-1' is not a number of seconds from 0.5 "
        "to 3600 Fix: set it to e.g. 60, or unset CALCSHEAF_TEMPLATE_TIME_LIMIT for the default")
    monkeypatch.setenv("CALCSHEAF_TEMPLATE_TIME_LIMIT", "nan")
    with pytest.raises(InputError):
        theme.limits()


def test_render_limits_name_the_template(tmp_path, monkeypatch):
    """Time and output limits stop a render with the template's file and line."""
    monkeypatch.setenv("CALCSHEAF_TEMPLATE_TIME_LIMIT", "1")
    monkeypatch.setenv("CALCSHEAF_TEMPLATE_OUTPUT_LIMIT_MB", "1")
    (tmp_path / "templates" / "sections").mkdir(parents=True)
    (tmp_path / "templates" / "index.html.j2").write_text(
        "<p>{{ project.name }}</p>\n{% include 'sections/slow.html.j2' %}\n")
    slow = tmp_path / "templates" / "sections" / "slow.html.j2"
    info = ProjectInfo("P-1", "Limits", tmp_path)
    env = theme.environment(tmp_path)
    slow.write_text("ok\n{% for i in range(100000) %}{% for j in range(100000) %}{% endfor %}{% endfor %}")
    with pytest.raises(BuildError) as stopped:
        theme.render(env, "index.html.j2", project=info)
    assert stopped.value.file == str(slow) and stopped.value.line == 2
    assert "ran longer than its time limit of 1 s" in stopped.value.problem
    env = theme.environment(tmp_path)
    slow.write_text("ok\n{% for i in range(100000) %}{{ 'abcdefghij' * 10 }}{% endfor %}")
    with pytest.raises(BuildError) as stopped:
        theme.render(env, "index.html.j2", project=info)
    assert stopped.value.file == str(slow) and stopped.value.line == 2
    assert "produced more than 1 MB of text" in stopped.value.problem
    env = theme.environment(tmp_path)
    slow.write_text("fine")
    assert theme.render(env, "index.html.j2", project=info) == "<p>Limits</p>\nfine"


def test_a_key_that_cannot_be_made_turns_the_cache_off_with_a_note(tmp_path, monkeypatch):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("")
    monkeypatch.setenv("CALCSHEAF_CACHE_KEY_FILE", str(blocker / "cache.key"))
    store = cache_mod.Cache(tmp_path / "project")
    store.put("calc", "k", {}, {"a": b"b"})
    assert not store.enabled and store.get("calc", "k") is None
    assert not (tmp_path / "project" / cache_mod.FOLDER).exists()
    (note,) = store.report()
    assert note.startswith(f"the build cache is off: cannot read the cache key {blocker / 'cache.key'} "
                           "(Not a directory). Fix: ")
    assert "CALCSHEAF_CACHE_KEY_FILE" in note


def test_a_template_linked_outside_after_check_is_refused_at_render(tmp_path):
    """The link check of `check` cannot be raced: the loader refuses it too."""
    root = tmp_path / "project"
    (root / "templates" / "sections").mkdir(parents=True)
    outside = tmp_path / "environ"
    outside.write_text("CALCSHEAF_PASSPHRASE=secret\n")
    (root / "templates" / "index.html.j2").write_text("{% include 'sections/x.html.j2' %}")
    (root / "templates" / "sections" / "x.html.j2").symlink_to(outside)
    (root / "templates" / "static").mkdir()
    (root / "templates" / "static" / "logo.svg").symlink_to(outside)
    env = theme.environment(root)
    with pytest.raises(BuildError) as refused:
        theme.render(env, "index.html.j2", project=ProjectInfo("P-1", "n", root))
    assert "secret" not in refused.value.message
    assert f"is a link to {outside}, outside the project" in refused.value.message
    with pytest.raises(BuildError, match="outside the project"):
        theme.static_assets(root)


# ---- the cache never writes or reads through links (attack round 13, F4) -----------------
SECRET = b"\x07" * 32


def test_planted_temporary_file_links_are_not_followed(tmp_path):
    """(a) links named `<entry>.entry.tmp-<pid>` beside an entry made `build` overwrite the file
    they pointed at; the temporary file now has an unpredictable name made with O_EXCL."""
    project = tmp_path / "p"
    project.mkdir()
    victim = tmp_path / "victim.txt"
    victim.write_text("VICTIM DATA\n")
    folder = project / cache_mod.FOLDER / "calc"
    folder.mkdir(parents=True)
    for pid in (1, os.getpid(), os.getpid() + 1):
        (folder / f"e1{cache_mod.SUFFIX}.tmp-{pid}").symlink_to(victim)
    cache = cache_mod.Cache(project, secret=SECRET)
    cache.put("calc", "e1", {"a": 1}, {"f": b"bytes"})
    assert victim.read_text() == "VICTIM DATA\n"
    assert cache.get("calc", "e1") == ({"a": 1}, {"f": b"bytes"})
    assert cache.notes == []


def test_an_entry_that_is_a_link_is_not_read_and_is_replaced_not_followed(tmp_path):
    project = tmp_path / "p"
    outside = tmp_path / "outside"
    outside.mkdir()
    cache_mod.Cache(outside, secret=SECRET).put("calc", "e1", {"forged": True}, {})
    real = outside / cache_mod.FOLDER / "calc" / f"e1{cache_mod.SUFFIX}"
    before = real.read_bytes()
    (project / cache_mod.FOLDER / "calc").mkdir(parents=True)
    (project / cache_mod.FOLDER / "calc" / f"e1{cache_mod.SUFFIX}").symlink_to(real)
    cache = cache_mod.Cache(project, secret=SECRET)
    assert cache.get("calc", "e1") is None                   # authentic bytes, but behind a link
    cache.put("calc", "e1", {"a": 2}, {})
    assert real.read_bytes() == before
    assert cache.get("calc", "e1") == ({"a": 2}, {})


@pytest.mark.parametrize("linked", [cache_mod.FOLDER, f"{cache_mod.FOLDER}/calc"])
def test_a_cache_folder_that_is_a_link_turns_the_cache_off(tmp_path, linked):
    """(b) `.calcsheaf-cache` (or a subfolder) linked to an outside folder: build wrote 15 files
    there.  Now the cache is off, with one note naming the link, and nothing is written."""
    project = tmp_path / "p"
    project.mkdir()
    outside = tmp_path / "outside"
    outside.mkdir()
    (project / linked).parent.mkdir(parents=True, exist_ok=True)
    (project / linked).symlink_to(outside)
    cache = cache_mod.Cache(project, secret=SECRET)
    cache.put("calc", "e1", {"a": 1}, {})
    cache.put("equations", "e2", {"a": 1}, {})
    assert cache.get("calc", "e1") is None and not cache.enabled
    assert list(outside.iterdir()) == []
    (note,) = cache.report()
    assert note.startswith("the build cache is off:") and str(project / linked) in note
    assert "is a symbolic link" in note and "Fix: delete it" in note


def test_a_cache_folder_inside_a_linked_folder_resolving_elsewhere_is_refused(tmp_path):
    project = tmp_path / "p"
    project.mkdir()
    elsewhere = tmp_path / "elsewhere"
    (elsewhere / "calc").mkdir(parents=True)
    (project / cache_mod.FOLDER).mkdir()
    cache = cache_mod.Cache(project, secret=SECRET)
    assert cache.enabled
    # the real cache folder is fine; a project whose cache resolves elsewhere is not
    inner = project / cache_mod.FOLDER
    inner.rmdir()
    inner.symlink_to(elsewhere)
    assert not cache_mod.Cache(project, secret=SECRET).enabled
    assert list((elsewhere / "calc").iterdir()) == []


def test_build_with_a_linked_cache_folder_writes_nothing_outside(tmp_path, capsys):
    project = make_project(tmp_path / "p")
    outside = tmp_path / "outside"
    outside.mkdir()
    (project / cache_mod.FOLDER).symlink_to(outside)
    assert main(["build", str(project)]) == 0
    err = capsys.readouterr().err
    assert err.count("the build cache is off") == 1 and "is a symbolic link" in err
    assert list(outside.iterdir()) == []
    assert x_static(project / "_site") == pytest.approx(10 * 9.80665 / 4000 * 1000, rel=1e-9)
