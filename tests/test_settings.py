"""Environment variables: one reader (calcsheaf.settings) that refuses bad values with the
variable's name and what to set (issue 13, item 10: a negative memory limit once disabled
the limit silently)."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from calcsheaf import settings
from calcsheaf.errors import InputError


@pytest.mark.parametrize("name, value, words", [
    ("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "-1", "is not a number of GiB from 0.25 to"),
    ("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "0", "is not a number of GiB"),
    ("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "1e300", "is not a number of GiB"),
    ("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "4GB", "is not a number of GiB"),
    ("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "nan", "is not a number of GiB"),
    ("CALCSHEAF_CALC_TIME_LIMIT", "-5", "is not a number of seconds from 1 to"),
    ("CALCSHEAF_CALC_TIME_LIMIT", "inf", "is not a number of seconds"),
    ("SOURCE_DATE_EPOCH", "yesterday", "is not a date as whole seconds since 1970-01-01 UTC"),
    ("SOURCE_DATE_EPOCH", "-1", "is not a date as whole seconds"),
    ("SOURCE_DATE_EPOCH", "1.5e9", "is not a date as whole seconds"),
    ("SOURCE_DATE_EPOCH", "99999999999999", "is not a date as whole seconds"),
    ("CALCSHEAF_KDF_LOG2N", "abc", "is not a whole number from 10 to 20"),
    ("CALCSHEAF_KDF_LOG2N", "9", "is not a whole number from 10 to 20"),
    ("CALCSHEAF_KDF_LOG2N", "40", "is not a whole number from 10 to 20"),
])
def test_a_bad_value_is_refused_with_the_variable_and_a_fix(monkeypatch, name, value, words):
    monkeypatch.setenv(name, value)
    read = {"CALCSHEAF_CALC_MEMORY_LIMIT_GB": settings.memory_limit_bytes,
            "CALCSHEAF_CALC_TIME_LIMIT": settings.time_limit_s,
            "SOURCE_DATE_EPOCH": settings.source_date_epoch,
            "CALCSHEAF_KDF_LOG2N": lambda: settings.kdf_log2n(17, 10)}[name]
    with pytest.raises(InputError) as info:
        read()
    assert info.value.message.startswith(f"environment: {name}: {value!r} {words}")
    assert f"or unset {name} for the default" in info.value.fix


def test_unset_and_good_values(monkeypatch):
    for name in ("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "CALCSHEAF_CALC_TIME_LIMIT", "SOURCE_DATE_EPOCH",
                 "CALCSHEAF_KDF_LOG2N", "CALCSHEAF_DEBUG"):
        monkeypatch.delenv(name, raising=False)
    assert settings.memory_limit_bytes() == 4 * 2 ** 30
    assert settings.time_limit_s() == 300.0
    assert settings.source_date_epoch() is None
    assert settings.kdf_log2n(17, 10) == 17
    assert not settings.debug()
    monkeypatch.setenv("CALCSHEAF_CALC_MEMORY_LIMIT_GB", "0.5")
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1780000000")
    monkeypatch.setenv("CALCSHEAF_DEBUG", "0")
    assert settings.memory_limit_bytes() == 2 ** 29
    assert settings.source_date_epoch() == 1780000000
    assert not settings.debug()


def test_a_negative_memory_limit_stops_the_command_with_a_message(tmp_path):
    """The real command line: the limit is read when the isolation module loads."""
    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-1"\nname = "x"\n')
    (root / "calcs" / "a.toml").write_text('[calc]\nnumber = "C-1"\ntitle = "x"\n')
    env = {**os.environ, "CALCSHEAF_CALC_MEMORY_LIMIT_GB": "-1"}
    done = subprocess.run([sys.executable, "-m", "calcsheaf", "check", str(root)], capture_output=True,
                          text=True, env=env, timeout=300)
    assert done.returncode == 1 and "Traceback" not in done.stderr, done.stderr
    assert ("environment: CALCSHEAF_CALC_MEMORY_LIMIT_GB: '-1' is not a number of GiB from 0.25 "
            "to 1048576") in done.stderr
    assert "Fix: set it to e.g. 4" in done.stderr


def test_a_bad_setting_stops_build_before_anything_is_written(tmp_path, monkeypatch, capsys):
    from calcsheaf.cli import main

    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text('[project]\nnumber = "P-1"\nname = "x"\n')
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "2026-12-03")
    assert main(["build", str(root)]) == 1
    err = capsys.readouterr().err
    assert "environment: SOURCE_DATE_EPOCH: '2026-12-03' is not a date" in err and "Traceback" not in err
    assert sorted(p.name for p in root.iterdir()) == ["calcs", "project.toml"]


@pytest.mark.parametrize("name, value, words", [
    ("CALCSHEAF_TEMPLATE_TIME_LIMIT", "0", "is not a number of seconds from 0.5 to 3600"),
    ("CALCSHEAF_TEMPLATE_MEMORY_LIMIT_MB", "-200", "is not a number of MiB from 16 to"),
    ("CALCSHEAF_TEMPLATE_OUTPUT_LIMIT_MB", "lots", "is not a number of MB from 0.01 to 10000"),
    ("CALCSHEAF_CACHE_KEY_FILE", "cache.key", "is not an absolute path"),
])
def test_template_limits_and_the_cache_key_file_are_checked_too(monkeypatch, name, value, words):
    monkeypatch.setenv(name, value)
    with pytest.raises(InputError) as info:
        settings.validate()
    assert info.value.message.startswith(f"environment: {name}: {value!r} {words}")
