"""Links and images in the Markdown text of a calc (purpose, assumptions, references).

A published package must not point at files on the machine that built it: a
link or image to `file:` or to a local path would leak a path, or load a local
file into a PDF.  Allowed are web links (http, https), mailto: and in-page
anchors (#...); an image must be on the web (the renderer shows its alt text).
"""

from __future__ import annotations

import re
from html.parser import HTMLParser

import markdown

ALLOWED_LINKS = ("http://", "https://", "mailto:", "#")
ALLOWED_IMAGES = ("http://", "https://")
_FILE_URL = re.compile(r"(?<![A-Za-z])file:/[^\s)>\]\"']*", re.IGNORECASE)


class _Targets(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.found: list[tuple[str, str]] = []

    def handle_starttag(self, tag, attrs):
        attributes = dict(attrs)
        for attribute in ("href", "src", "srcset", "data", "poster", "background"):
            value = attributes.get(attribute)
            if value is not None:
                self.found.append(("image" if tag == "img" or attribute != "href" else "link",
                                   value.strip()))


def local_targets(text: str) -> list[tuple[str, str]]:
    """(kind, target) of every link or image in Markdown `text` that is not allowed."""
    parser = _Targets()
    parser.feed(markdown.markdown(text or ""))
    parser.close()
    bad = []
    for kind, target in parser.found:
        allowed = ALLOWED_IMAGES if kind == "image" else ALLOWED_LINKS
        if not target.lower().startswith(allowed):
            bad.append((kind, target))
    bare = _FILE_URL.search(text or "")
    if bare and not any(t.lower().startswith("file:") for _, t in bad):
        bad.append(("link", bare.group(0)))
    return bad
