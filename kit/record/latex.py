"""LaTeX to MathML at record time, so a record shows its equations with no script and no network.

Browsers render MathML Core natively (Firefox, Safari, Chromium 109 and later), so a record needs
neither MathJax nor KaTeX. The conversion uses the pure-Python ``latex2mathml`` package. LaTeX that
it cannot convert is shown as its source in a ``<code class="rb-tex">`` element, never dropped.
"""

from __future__ import annotations

import html
import re

from latex2mathml.converter import convert as _convert

# Math delimiters in markdown, longest first. ``\$`` (an escaped dollar) is not a delimiter.
_ENVS = r"equation\*?|align\*?|gather\*?|multline\*?|eqnarray\*?|displaymath"
_MATH_RE = re.compile(
    r"(?P<dd>\$\$(?P<dd_tex>.+?)\$\$)"
    r"|(?P<env>\\begin\{(?P<env_name>" + _ENVS + r")\}(?P<env_tex>.+?)\\end\{(?P=env_name)\})"
    r"|(?P<br>\\\[(?P<br_tex>.+?)\\\])"
    r"|(?P<pa>\\\((?P<pa_tex>.+?)\\\))"
    r"|(?P<d>(?<![\\$])\$(?!\s)(?P<d_tex>(?:\\.|[^$\\])+?)(?<!\s)\$(?!\d))",
    re.DOTALL,
)
# Code in markdown is left alone: fenced blocks first, then inline code spans.
_CODE_RE = re.compile(r"(?P<fence>^(?P<f>```+|~~~+)[^\n]*\n.*?^(?P=f)[ \t]*$)|(?P<span>(`+).+?\4)",
                      re.DOTALL | re.MULTILINE)
_PLACEHOLDER = "RBMATH{:05d}X"
_PLACEHOLDER_RE = re.compile(r"RBMATH(\d{5})X")


_BARE_AMP_RE = re.compile(r"&(?!#?\w+;)")


def tex_to_mathml(tex: str, display: bool = False) -> str:
    """Convert one LaTeX formula (without delimiters) to a MathML ``<math>`` element.

    Parameters
    ----------
    tex : str
        The formula, e.g. ``r"\\frac{a}{b}"``; ``\\displaystyle`` is accepted and dropped.
    display : bool
        Block (display) math when true, inline otherwise.

    Returns
    -------
    str
        The MathML markup, or the escaped LaTeX source in ``<code class="rb-tex">`` when the
        formula cannot be converted.
    """
    body = tex.replace(r"\displaystyle", " ").strip()
    # latex2mathml knows split but not aligned (same layout); equation is plain display math.
    body = body.replace(r"\begin{aligned}", r"\begin{split}")
    body = body.replace(r"\end{aligned}", r"\end{split}")
    body = re.sub(r"\\(begin|end)\{(equation\*?|displaymath)\}", " ", body)
    try:
        out = _convert(body, display="block" if display else "inline")
    except Exception:  # latex2mathml raises many kinds of errors on unsupported input
        out = ""
    out = _BARE_AMP_RE.sub("&amp;", out)
    if not out or "<math" not in out:
        cls = "rb-tex rb-tex-block" if display else "rb-tex"
        return f'<code class="{cls}" title="LaTeX shown as source">{html.escape(tex)}</code>'
    return out


def latex_output_to_html(tex: str) -> str:
    """MathML for a ``text/latex`` output (sympy's ``$\\displaystyle ...$`` and the like)."""
    s = tex.strip()
    for left, right in (("$$", "$$"), (r"\[", r"\]"), ("$", "$"), (r"\(", r"\)")):
        if s.startswith(left) and s.endswith(right) and len(s) >= len(left) + len(right):
            s = s[len(left):len(s) - len(right)]
            break
    return f'<div class="rb-math">{tex_to_mathml(s, display=True)}</div>'


def protect_math(markdown: str) -> tuple[str, list[str]]:
    """Replace each formula in markdown text by a placeholder; return the text and the MathML.

    Code spans and fenced code blocks are left untouched. Put the MathML back with
    :func:`restore_math` after the markdown has been rendered to HTML.
    """
    pieces: list[str] = []
    codes: list[str] = []

    def keep_code(m: re.Match) -> str:
        codes.append(m.group(0))
        return f"RBCODE{len(codes) - 1:05d}X"

    text = _CODE_RE.sub(keep_code, markdown)

    def repl(m: re.Match) -> str:
        if m.group("dd"):
            out = tex_to_mathml(m.group("dd_tex"), display=True)
        elif m.group("env"):
            out = tex_to_mathml(m.group("env"), display=True)
        elif m.group("br"):
            out = tex_to_mathml(m.group("br_tex"), display=True)
        elif m.group("pa"):
            out = tex_to_mathml(m.group("pa_tex"), display=False)
        else:
            out = tex_to_mathml(m.group("d_tex"), display=False)
        pieces.append(out)
        return _PLACEHOLDER.format(len(pieces) - 1)

    text = _MATH_RE.sub(repl, text)
    text = re.sub(r"RBCODE(\d{5})X", lambda m: codes[int(m.group(1))], text)
    return text, pieces


def restore_math(rendered_html: str, pieces: list[str]) -> str:
    """Put the MathML produced by :func:`protect_math` back in place of its placeholders."""
    return _PLACEHOLDER_RE.sub(lambda m: pieces[int(m.group(1))], rendered_html)
