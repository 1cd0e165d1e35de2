"""Markdown of user text (purpose, assumptions) to safe HTML.

Raw HTML in the text is shown as text, never passed through.  Links are kept
only to http(s), mailto and in-page anchors; images are replaced by their alt
text, so a page or PDF never loads a local or remote file named by a calc.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import markdown
from markdown.extensions import Extension
from markdown.treeprocessors import Treeprocessor
from markupsafe import Markup

_ALLOWED_LINKS = ("http://", "https://", "mailto:", "#")


class _SafeLinks(Treeprocessor):
    def run(self, root: ET.Element) -> None:
        for parent in root.iter():
            for child in list(parent):
                if child.tag == "img":
                    self._replace_image(parent, child)
                elif child.tag == "a" and not child.get("href", "").startswith(_ALLOWED_LINKS):
                    child.attrib.pop("href", None)

    @staticmethod
    def _replace_image(parent: ET.Element, image: ET.Element) -> None:
        span = ET.Element("span", {"class": "image-omitted"})
        span.text = f"[image omitted: {image.get('alt', '')}]"
        span.tail = image.tail
        parent.insert(list(parent).index(image), span)
        parent.remove(image)


class _NoRawHtml(Extension):
    def extendMarkdown(self, md: markdown.Markdown) -> None:
        md.preprocessors.deregister("html_block")
        md.inlinePatterns.deregister("html")
        md.treeprocessors.register(_SafeLinks(md), "calcsheaf_safe_links", 0)


def markdown_html(text: str) -> Markup:
    """HTML of Markdown `text`, with raw HTML escaped and unsafe links and images removed."""
    engine = markdown.Markdown(extensions=[_NoRawHtml(), "tables"], output_format="html")
    return Markup(engine.convert(text or ""))
