"""Find what an HTML page would load from elsewhere: a record must load nothing.

:func:`external_references` parses the page with :mod:`html.parser` and lists every reference
that is not a ``data:`` URI, a ``#fragment`` or a relative local path: script, image, frame,
media and link sources, ``srcset`` entries, and CSS ``url(...)`` and ``@import`` in ``<style>``
elements and ``style`` attributes. Script bodies are not searched (they are code, and the
inline BokehJS carries URLs in strings that it never fetches for a static plot).
"""

from __future__ import annotations

import re
from html.parser import HTMLParser
from urllib.parse import urlsplit

#: Attributes the browser fetches on whatever element carries them (script, image, frame and
#: media sources, media posters, legacy backgrounds).
_FETCHED_ANY = {"src", "poster", "background"}
#: (tag, attribute) pairs fetched only on those elements.
_FETCHED = {
    ("object", "data"), ("link", "href"), ("image", "href"), ("image", "xlink:href"),
    ("use", "href"), ("use", "xlink:href"), ("feimage", "href"), ("base", "href"),
}
_CSS_URL_RE = re.compile(r"""url\(\s*(?P<q>['"]?)(?P<u>.*?)(?P=q)\s*\)""", re.IGNORECASE)
_CSS_IMPORT_RE = re.compile(r"""@import\s+(?P<q>['"])(?P<u>.*?)(?P=q)""", re.IGNORECASE)


def is_local(ref: str) -> bool:
    """True for a ``data:`` URI, a ``#fragment``, an empty value or a relative local path."""
    r = ref.strip()
    if not r or r.startswith("#"):
        return True
    if r.startswith("//"):  # protocol-relative: another host
        return False
    parts = urlsplit(r)
    if parts.scheme:
        return parts.scheme.lower() == "data"
    return not parts.netloc


def css_references(css: str) -> list[str]:
    """Every ``url(...)`` and ``@import "..."`` target in a piece of CSS."""
    found = [m.group("u") for m in _CSS_URL_RE.finditer(css)]
    found += [m.group("u") for m in _CSS_IMPORT_RE.finditer(css)]
    return found


class _Collector(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.refs: list[str] = []
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        tag = tag.lower()
        for name, value in attrs:
            if value is None:
                continue
            name = name.lower()
            if name in _FETCHED_ANY or (tag, name) in _FETCHED:
                if tag == "link" and not _link_fetches(attrs):
                    continue
                self.refs.append(value)
            elif name in ("srcset", "imagesrcset"):
                self.refs += [c.strip().split()[0] for c in value.split(",") if c.strip()]
            elif name == "style":
                self.refs += css_references(value)
        if tag == "style":
            self._in_style = True

    handle_startendtag = handle_starttag

    def handle_endtag(self, tag):
        if tag.lower() == "style":
            self._in_style = False

    def handle_data(self, data):
        if self._in_style:
            self.refs += css_references(data)


def _link_fetches(attrs) -> bool:
    """A ``<link>`` whose target the browser loads (stylesheet, icon, preload...)."""
    rel = " ".join((v or "") for k, v in attrs if k.lower() == "rel").lower().split()
    passive = {"canonical", "alternate", "author", "help", "license", "next", "prev", "search",
               "bookmark", "external", "nofollow", "noopener", "noreferrer", "tag"}
    return not rel or any(r not in passive for r in rel)


def external_references(html_text: str) -> list[str]:
    """List what a page would load from outside itself.

    Parameters
    ----------
    html_text : str
        A whole HTML document or a fragment.

    Returns
    -------
    list of str
        Each reference that is not a ``data:`` URI, a fragment or a relative local path, in the
        order met; empty for a self-contained page.
    """
    p = _Collector()
    p.feed(html_text)
    p.close()
    return [r for r in p.refs if not is_local(r)]
