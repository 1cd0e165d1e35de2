"""Archival PDFs (PDF/A-3b) of calc pages, one per calc and one for the project.

WeasyPrint lays out the print page of each calc: a title block and "Sheet N of M"
on every sheet, a draft mark on every sheet of a draft.  The only files it may
read are the page's own in-memory assets (no file:// or network reads).  The
calc's source and results are embedded as attachments.  Dates come only from
the build date (SOURCE_DATE_EPOCH), so two builds give identical bytes.
"""

from __future__ import annotations

import hashlib
import io
import mimetypes
import posixpath
from collections.abc import Mapping, Sequence
from datetime import datetime, timezone

import pypdf
import weasyprint
from weasyprint.urls import FatalURLFetchingError, URLFetcher, URLFetcherResponse

from calcsheaf.errors import BuildError
from calcsheaf.model import PackageModel
from calcsheaf.render import site, theme
from calcsheaf.render.html import CalcPage, render_index

ASSET_ROOT = "https://calcsheaf.invalid/"
PDF_VARIANT = "pdf/a-3b"
_EPOCH = datetime(1970, 1, 1, tzinfo=timezone.utc)


class AssetFetcher(URLFetcher):
    """URL fetcher that serves only the given in-memory files, keyed by site-root path."""

    def __init__(self, assets: Mapping[str, bytes]) -> None:
        super().__init__(allowed_protocols=("https",), fail_on_errors=True)
        self.assets = assets

    def fetch(self, url, headers=None):
        if url.startswith(ASSET_ROOT):
            path = posixpath.normpath(url[len(ASSET_ROOT):].split("#")[0].split("?")[0])
            if path in self.assets:
                mime = mimetypes.guess_type(path)[0] or "application/octet-stream"
                return URLFetcherResponse(url, body=self.assets[path],
                                          headers={"Content-Type": mime})
        raise ValueError(f"refused: {url} is not one of the package's own files")


def _timestamp(build_date: str) -> datetime:
    """Attachment date: the build date (from SOURCE_DATE_EPOCH) or, if unset, 1970-01-01."""
    if not build_date:
        return _EPOCH
    return datetime.fromisoformat(build_date).replace(tzinfo=timezone.utc)


def _attachments(files: Mapping[str, bytes], build_date: str) -> list[weasyprint.Attachment]:
    when = _timestamp(build_date)
    return [weasyprint.Attachment(file_obj=io.BytesIO(data), name=name, created=when,
                                  modified=when, relationship="Source",
                                  description=f"{name} (source of this document)")
            for name, data in sorted(files.items())]


def _document(html: str, base_path: str, assets: Mapping[str, bytes]) -> weasyprint.Document:
    """Lay out `html` as if it were the file `base_path` of the site."""
    fetcher = AssetFetcher(assets)
    try:
        return weasyprint.HTML(string=html, base_url=ASSET_ROOT + base_path,
                               url_fetcher=fetcher).render(pdf_variant=PDF_VARIANT)
    except FatalURLFetchingError as exc:
        raise BuildError(f"the PDF page refers to a file outside the package: {exc.__cause__}",
                         file=base_path,
                         fix="refer only to theme files under templates/static/ "
                             "(no file:// or http links, no absolute paths)") from None


def _write(document: weasyprint.Document, attachments: Mapping[str, bytes],
           build_date: str) -> bytes:
    return document.write_pdf(pdf_variant=PDF_VARIANT,
                              attachments=_attachments(attachments, build_date))


def calc_pdf(page: CalcPage, attachments: Mapping[str, bytes]) -> bytes:
    """PDF/A-3b of one calc; `attachments` maps names (`<calc>.toml`, `results.json`) to bytes."""
    document = _document(page.print_html, site.calc_page_path(page.number), page.print_assets)
    return _write(document, attachments, page.build_date)


def project_pdf(package: PackageModel, calc_pdfs: Sequence[bytes],
                attachments: Mapping[str, bytes]) -> bytes:
    """One PDF of the whole project: the index sheet(s), then each calc's own PDF.

    The calcs' PDFs are appended as they are (each keeps its own sheet numbers),
    so no calc is laid out twice.  `attachments` maps names (e.g. `C-102/C-102.toml`)
    to bytes.  The identifier is a hash of the parts, so equal inputs give equal bytes.
    """
    cover = _write(_document(render_index(package, medium="print"), site.INDEX_PAGE,
                             theme.static_assets(package.project.root)), {}, package.build_date)
    writer = pypdf.PdfWriter(clone_from=pypdf.PdfReader(io.BytesIO(cover)))
    digest = hashlib.md5(cover)
    for part in calc_pdfs:
        writer.append(pypdf.PdfReader(io.BytesIO(part)))
        digest.update(part)
    for name, data in sorted(attachments.items()):
        writer.add_attachment(name, data)
        digest.update(name.encode() + data)
    identifier = pypdf.generic.ByteStringObject(digest.digest())
    writer._ID = pypdf.generic.ArrayObject([identifier, identifier])
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()
