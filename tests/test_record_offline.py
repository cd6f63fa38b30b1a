"""kit.record.offline: what a page would load from elsewhere (a record must load nothing)."""

import pytest

from kit.record.offline import css_references, external_references, is_local

GOOD = """<!DOCTYPE html><html><head><meta charset="utf-8">
<link rel="canonical" href="https://example.org/page">
<style>body { background: url(data:image/png;base64,AAAA); }
.x { background: url('img/local.png'); }</style>
<script>var u = "https://cdn.example.org/lib.js";  /* code, never fetched by the parser */</script>
</head><body>
<a href="https://example.org/">a plain link is not loaded</a>
<img src="data:image/png;base64,iVBORw0KGgo=" alt="inline">
<img src="figures/local.png" alt="relative">
<div style="background-image: url(#fragment)"></div>
<a href="#top">top</a>
<svg><use href="#marker"></use></svg>
</body></html>"""

BAD = [
    ('<script src="https://cdn.example.org/require.js"></script>', "https://cdn.example.org/require.js"),
    ('<script src="//cdn.example.org/x.js"></script>', "//cdn.example.org/x.js"),
    ('<link rel="stylesheet" href="http://fonts.example.com/css">', "http://fonts.example.com/css"),
    ('<link rel="preload" href="https://example.com/font.woff2">', "https://example.com/font.woff2"),
    ('<img src="https://example.com/a.png">', "https://example.com/a.png"),
    ('<img srcset="local.png 1x, https://example.com/b.png 2x">', "https://example.com/b.png"),
    ('<iframe src="https://example.com/embed"></iframe>', "https://example.com/embed"),
    ('<audio><source src="https://example.com/a.ogg"></audio>', "https://example.com/a.ogg"),
    ('<track src="https://example.com/captions.vtt">', "https://example.com/captions.vtt"),
    ('<table background="https://example.com/bg.gif"></table>', "https://example.com/bg.gif"),
    ("<style>@import 'https://example.com/theme.css';</style>", "https://example.com/theme.css"),
    ("<style>@font-face { src: url(https://example.com/f.woff); }</style>", "https://example.com/f.woff"),
    ('<div style="background: url(&quot;http://example.com/bg.png&quot;)"></div>', "http://example.com/bg.png"),
    ('<object data="ftp://example.com/x.svg"></object>', "ftp://example.com/x.svg"),
    ('<IMG SRC="HTTPS://EXAMPLE.COM/UPPER.PNG">', "HTTPS://EXAMPLE.COM/UPPER.PNG"),
]


def test_self_contained_page_has_no_external_references():
    assert external_references(GOOD) == []


@pytest.mark.parametrize(("snippet", "ref"), BAD, ids=[b[1] for b in BAD])
def test_each_kind_of_external_reference_is_found(snippet, ref):
    assert external_references(GOOD.replace("</body>", snippet + "</body>")) == [ref]


def test_is_local():
    assert is_local("data:text/plain,hi") and is_local("#x") and is_local("")
    assert is_local("a/b.png")
    assert not is_local("https://x.org") and not is_local("//x.org/a")
    assert not is_local("file:///etc")


def test_css_references():
    css = "a{background:url( 'x.png' )} @import \"y.css\"; b{src:url(data:font/woff;base64,AA)}"
    assert css_references(css) == ["x.png", "data:font/woff;base64,AA", "y.css"]
