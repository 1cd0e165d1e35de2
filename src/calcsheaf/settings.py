"""The environment variables calcsheaf reads, each validated in one place.

A bad value is refused with an InputError naming the variable and what to
set, never ignored: a negative memory limit once disabled the limit silently.
Unset or empty means the default.  (Passphrases, CALCSHEAF_PASSPHRASE*, are
secrets rather than settings and are read where they are used, in
archive/keys.py and commands/keygen.py.)

  CALCSHEAF_CALC_TIME_LIMIT       seconds one calc may run (default 300)
  CALCSHEAF_CALC_MEMORY_LIMIT_GB  GiB of address space one calc may use (default 4)
  CALCSHEAF_TEMPLATE_TIME_LIMIT   seconds one template render may take (default 60)
  CALCSHEAF_TEMPLATE_MEMORY_LIMIT_MB  MiB a template render may add (default 1024)
  CALCSHEAF_TEMPLATE_OUTPUT_LIMIT_MB  MB of text one rendered page may have (default 64)
  CALCSHEAF_CACHE_KEY_FILE        the cache's secret key file (default in ~/.config/calcsheaf)
  CALCSHEAF_KDF_LOG2N             scrypt cost exponent of key files
  CALCSHEAF_DEBUG                 1: show the traceback of an internal error
  SOURCE_DATE_EPOCH               build and sign-off date, whole seconds since 1970 (UTC)
"""

from __future__ import annotations

import math
import os
import re
from pathlib import Path

from .errors import InputError

DEFAULT_TIME_LIMIT_S = 300.0
DEFAULT_MEMORY_LIMIT_GB = 4.0
MAX_MEMORY_LIMIT_GB = 2.0 ** 20          # 1 PiB: beyond this the byte count overflows rlimit
MIN_MEMORY_LIMIT_GB = 0.25               # below this not even the interpreter and sympy fit
MAX_EPOCH = 253402300799                 # 9999-12-31T23:59:59Z, the last date ISO 8601 writes
MAX_KDF_LOG2N = 20                       # scrypt with r = 8 then needs 1 GiB


def _raw(name: str) -> str:
    return os.environ.get(name, "").strip()


def _refuse(name: str, text: str, problem: str, fix: str) -> InputError:
    return InputError(f"{text!r} {problem}", file="environment", key=name,
                      fix=f"{fix}, or unset {name} for the default")


def _number(name: str, lowest: float, highest: float, unit: str, default: float) -> float:
    text = _raw(name)
    if not text:
        return default
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not (math.isfinite(value) and lowest <= value <= highest):
        raise _refuse(name, text, f"is not a number of {unit} from {lowest:.10g} to {highest:.10g}",
                      f"set it to e.g. {default:g}")
    return value


def time_limit_s() -> float:
    """Wall-clock seconds one calc may take in its own process (CALCSHEAF_CALC_TIME_LIMIT)."""
    return _number("CALCSHEAF_CALC_TIME_LIMIT", 1.0, 7 * 86400.0, "seconds", DEFAULT_TIME_LIMIT_S)


def memory_limit_bytes() -> int:
    """Address-space limit of one calc's process, bytes (CALCSHEAF_CALC_MEMORY_LIMIT_GB, GiB)."""
    gib = _number("CALCSHEAF_CALC_MEMORY_LIMIT_GB", MIN_MEMORY_LIMIT_GB, MAX_MEMORY_LIMIT_GB,
                  "GiB", DEFAULT_MEMORY_LIMIT_GB)
    return int(gib * 2 ** 30)


def template_time_limit_s() -> float:
    """Wall-clock seconds one template render may take (CALCSHEAF_TEMPLATE_TIME_LIMIT)."""
    return _number("CALCSHEAF_TEMPLATE_TIME_LIMIT", 0.5, 3600.0, "seconds", 60.0)


def template_memory_limit_bytes() -> int:
    """Bytes a template render may add to its process (CALCSHEAF_TEMPLATE_MEMORY_LIMIT_MB, MiB)."""
    return int(_number("CALCSHEAF_TEMPLATE_MEMORY_LIMIT_MB", 16.0, 2.0 ** 20, "MiB", 1024.0) * 2 ** 20)


def template_output_chars() -> int:
    """Characters one rendered page may have (CALCSHEAF_TEMPLATE_OUTPUT_LIMIT_MB, 10**6)."""
    return int(_number("CALCSHEAF_TEMPLATE_OUTPUT_LIMIT_MB", 0.01, 10000.0, "MB", 64.0) * 10 ** 6)


def cache_key_file() -> Path | None:
    """CALCSHEAF_CACHE_KEY_FILE as an absolute path, or None when unset."""
    text = _raw("CALCSHEAF_CACHE_KEY_FILE")
    if not text:
        return None
    if not os.path.isabs(text):
        raise _refuse("CALCSHEAF_CACHE_KEY_FILE", text, "is not an absolute path",
                      "give the full path of a file outside every project, e.g. "
                      "/home/you/.config/calcsheaf/cache.key")
    return Path(text)


def source_date_epoch() -> int | None:
    """SOURCE_DATE_EPOCH as whole seconds since 1970-01-01 UTC, or None when unset."""
    text = _raw("SOURCE_DATE_EPOCH")
    if not text:
        return None
    if not re.fullmatch(r"[0-9]{1,12}", text) or int(text) > MAX_EPOCH:
        raise _refuse("SOURCE_DATE_EPOCH", text, "is not a date as whole seconds since "
                      "1970-01-01 UTC (digits only, at most 9999-12-31)",
                      "set it to e.g. $(git log -1 --format=%ct) or 1767225600")
    return int(text)


def kdf_log2n(default: int = 17, lowest: int = 10) -> int:
    """scrypt cost exponent (CALCSHEAF_KDF_LOG2N) from `lowest` to MAX_KDF_LOG2N, else `default`
    (archive/keys.py passes its DEFAULT_LOG2N and MIN_LOG2N)."""
    text = _raw("CALCSHEAF_KDF_LOG2N")
    if not text:
        return default
    if not re.fullmatch(r"[0-9]{1,3}", text) or not lowest <= int(text) <= MAX_KDF_LOG2N:
        raise _refuse("CALCSHEAF_KDF_LOG2N", text, f"is not a whole number from {lowest} to "
                      f"{MAX_KDF_LOG2N}", f"set it to e.g. {default}")
    return int(text)


def validate() -> None:
    """Read every setting once, so that a bad value stops a command before it writes anything."""
    time_limit_s()
    memory_limit_bytes()
    template_time_limit_s()
    template_memory_limit_bytes()
    template_output_chars()
    cache_key_file()
    source_date_epoch()
    kdf_log2n()


def debug() -> bool:
    """CALCSHEAF_DEBUG set to anything but "", "0": internal errors show their traceback."""
    return _raw("CALCSHEAF_DEBUG") not in ("", "0")
