"""Small HTML inspection helpers for the site tests (html.parser only)."""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from html.parser import HTMLParser


@dataclass
class Element:
    tag: str
    attrs: dict[str, str | None]
    text: list[str] = field(default_factory=list)


class _Collector(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.elements: list[Element] = []
        self.texts: list[str] = []
        self._stack: list[Element] = []
        self._skip = 0

    def handle_starttag(self, tag, attrs):
        el = Element(tag, dict(attrs))
        self.elements.append(el)
        if tag not in ("img", "br", "hr", "meta", "link", "input"):
            self._stack.append(el)
        if tag in ("script", "style", "title"):
            self._skip += 1

    def handle_startendtag(self, tag, attrs):
        self.elements.append(Element(tag, dict(attrs)))

    def handle_endtag(self, tag):
        for i in range(len(self._stack) - 1, -1, -1):
            if self._stack[i].tag == tag:
                del self._stack[i:]
                break
        if tag in ("script", "style", "title"):
            self._skip = max(0, self._skip - 1)

    def handle_data(self, data):
        for el in self._stack:
            el.text.append(data)
        if not self._skip:
            self.texts.append(data)


def parse(html: str) -> _Collector:
    c = _Collector()
    c.feed(html)
    c.close()
    return c


def squash(text: str) -> str:
    """Collapse whitespace the way a browser shows it."""
    return re.sub(r"[ \t\n\r\f]+", " ", text).strip(" ")


def visible_text(html: str) -> str:
    return squash("".join(parse(html).texts))


def element_text(el: Element) -> str:
    return squash("".join(el.text))
