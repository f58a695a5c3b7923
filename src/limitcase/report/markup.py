"""Docstrings as a reader sees them: the reStructuredText a docstring uses (``code``,
*emphasis*, **strong**, :math:`x`, :func:`name`, bullet lists, ``::`` literal blocks,
``.. math::`` blocks, numpydoc section headings) turned into HTML or Markdown, so a page
shows no raw markup. Only that subset is understood; any other text is shown as written
(escaped), never dropped."""

from __future__ import annotations

import html
import re
from typing import Callable

__all__ = ["rest_to_html", "rest_to_markdown"]

_INLINE = re.compile(
    r"``(?P<code>.+?)``"
    r"|:math:`(?P<math>[^`]+)`"
    r"|:(?:[a-z]+:)?[a-z]+:`~?(?P<ref>[^`]+)`"
    r"|\*\*(?P<strong>[^*\s](?:[^*]*[^*\s])?)\*\*"
    r"|(?<![\w*])\*(?P<em>[^*\s](?:[^*]*[^*\s])?)\*(?![\w*])"
    r"|(?<!`)`(?P<interp>[^`]+)`(?!`)_?"
)


def _ref(text: str) -> str:
    # :class:`~a.b.C` shows C; :func:`name <target>` shows name
    text = re.sub(r"\s*<[^>]*>$", "", text)
    return text.rsplit(".", 1)[-1] if text.startswith("~") or "." in text and text[:1] == "~" else text.lstrip("~")


def _inline_html(text: str, math: Callable[[str], str | None] | None) -> str:
    out, pos = [], 0
    for m in _INLINE.finditer(text):
        out.append(html.escape(text[pos:m.start()]))
        pos = m.end()
        if m.group("code") is not None:
            out.append(f"<code>{html.escape(m.group('code'))}</code>")
        elif m.group("math") is not None:
            tex = m.group("math")
            img = math(tex) if math is not None else None
            out.append(img if img else f'<code class="math">{html.escape(tex)}</code>')
        elif m.group("ref") is not None:
            out.append(f"<code>{html.escape(_ref(m.group(0).split('`')[1]))}</code>")
        elif m.group("strong") is not None:
            out.append(f"<strong>{html.escape(m.group('strong'))}</strong>")
        elif m.group("em") is not None:
            out.append(f"<em>{html.escape(m.group('em'))}</em>")
        else:
            out.append(f"<em>{html.escape(m.group('interp'))}</em>")
    out.append(html.escape(text[pos:]))
    return "".join(out)


def _inline_md(text: str) -> str:
    def sub(m: re.Match[str]) -> str:
        if m.group("code") is not None:
            return f"`{m.group('code')}`"
        if m.group("math") is not None:
            return f"${m.group('math')}$"
        if m.group("ref") is not None:
            return f"`{_ref(m.group(0).split('`')[1])}`"
        if m.group("strong") is not None:
            return f"**{m.group('strong')}**"
        if m.group("em") is not None:
            return f"*{m.group('em')}*"
        return f"*{m.group('interp')}*"

    return _INLINE.sub(sub, text)


def _blocks(doc: str) -> list[tuple[str, list[str]]]:
    """Split a docstring into ("p" | "ul" | "pre" | "math" | "h", lines) blocks."""
    lines = doc.expandtabs().splitlines()
    blocks: list[tuple[str, list[str]]] = []
    i, literal_next, literal_indent = 0, False, 0
    while i < len(lines):
        line = lines[i]
        if not line.strip():
            i += 1
            continue
        indent = len(line) - len(line.lstrip())
        stripped = line.strip()
        if literal_next or stripped.startswith(".. math::"):
            kind = "pre" if literal_next else "math"
            if literal_next:
                indent = literal_indent
            literal_next = False
            if kind == "math":
                rest = stripped[len(".. math::"):].strip()
                body = [rest] if rest else []
                i += 1
            else:
                body = []
            base = None
            while i < len(lines) and (not lines[i].strip() or len(lines[i]) - len(lines[i].lstrip()) > indent):
                if lines[i].strip():
                    cur = len(lines[i]) - len(lines[i].lstrip())
                    base = cur if base is None else min(base, cur)
                body.append(lines[i])
                i += 1
            body = [b[base:] if base is not None else b for b in body]
            while body and not body[-1].strip():
                body.pop()
            while body and not body[0].strip():
                body.pop(0)
            blocks.append((kind, body))
            continue
        if i + 1 < len(lines) and re.fullmatch(r"\s*([-=~^])\1{2,}\s*", lines[i + 1]) and len(stripped) <= 60:
            blocks.append(("h", [stripped]))
            i += 2
            continue
        if re.match(r"[-*+] ", stripped):
            items: list[str] = []
            while i < len(lines) and lines[i].strip():
                s = lines[i].strip()
                if re.match(r"[-*+] ", s) and len(lines[i]) - len(lines[i].lstrip()) <= indent:
                    items.append(s[2:])
                elif items:
                    items[-1] += " " + s
                i += 1
            blocks.append(("ul", items))
            continue
        para: list[str] = []
        literal_indent = indent
        while i < len(lines) and lines[i].strip() and not (para and re.match(r"[-*+] ", lines[i].strip())):
            para.append(lines[i].strip())
            i += 1
        text = " ".join(para)
        if text.endswith("::"):
            text = text[:-1] if not text.endswith(" ::") else text[:-3]
            literal_next = True
        if text:
            blocks.append(("p", [text]))
    return blocks


def rest_to_html(doc: str, math: Callable[[str], str | None] | None = None) -> str:
    """The docstring ``doc`` as HTML paragraphs, lists, headings and preformatted blocks.
    ``math(tex)`` may return HTML (an ``<img>``) for a formula; else it is shown as code."""
    out = []
    for kind, body in _blocks(doc):
        if kind == "p":
            out.append(f"<p>{_inline_html(body[0], math)}</p>")
        elif kind == "h":
            out.append(f"<h4>{html.escape(body[0])}</h4>")
        elif kind == "ul":
            out.append("<ul>" + "".join(f"<li>{_inline_html(b, math)}</li>" for b in body) + "</ul>")
        elif kind == "math":
            tex = " ".join(b.strip() for b in body if b.strip())
            img = math(tex) if math is not None else None
            out.append(f"<p>{img}</p>" if img else f"<pre>{html.escape(chr(10).join(body))}</pre>")
        else:
            out.append(f"<pre>{html.escape(chr(10).join(body))}</pre>")
    return "".join(out)


def rest_to_markdown(doc: str) -> str:
    """The docstring ``doc`` as Markdown (math as ``$...$``, literal blocks fenced)."""
    out = []
    for kind, body in _blocks(doc):
        if kind == "p":
            out.append(_inline_md(body[0]))
        elif kind == "h":
            out.append(f"**{body[0]}**")
        elif kind == "ul":
            out.append("\n".join(f"- {_inline_md(b)}" for b in body))
        elif kind == "math":
            out.append("$$\n" + "\n".join(b.strip() for b in body if b.strip()) + "\n$$")
        else:
            out.append("```text\n" + "\n".join(body) + "\n```")
    return "\n\n".join(out)
