"""Phase two: turn the package model into the site's files (relative path -> bytes)."""

from __future__ import annotations

import os
from datetime import datetime, timezone

from ..model import PackageModel
from ..render.json import results_json


def build_date() -> str:
    """ISO date from SOURCE_DATE_EPOCH, or "" (no wall-clock dates in the output)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if not epoch:
        return ""
    return datetime.fromtimestamp(int(epoch), tz=timezone.utc).date().isoformat()


def site_files(package: PackageModel) -> dict[str, bytes]:
    files: dict[str, bytes] = {}
    for report in package.calcs:
        files[f"{report.number}/results.json"] = results_json(report, package.project)
    return files
