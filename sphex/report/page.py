"""The page of the report: embedded images, the style sheet, the table of numbers, the HTML."""
from __future__ import annotations

import base64
import html
import io
import string
from dataclasses import dataclass, field
from typing import Any

from sphex import plot
from sphex.harmonics import Harmonics
from sphex.plot.figures import FAINT, INK, PALETTE, PAPER

__all__ = ["SECTIONS", "Row", "Image", "png_size", "degree_order_picture", "Page"]

#: Section ids in page order (those that apply to the input appear).
SECTIONS = ("provenance", "maps", "numbers", "spectrum", "cumulative", "degree-order",
            "smoothed", "series", "comparison", "local", "winds", "wind-maps", "model")
#: Resolution of the PNG images.
DPI = 110
#: Maps draw at most this many columns (every k-th cell of larger grids): the images are
#: about 800 pixels wide, so more would only make the page heavier.
MAP_COLUMNS = 1080


@dataclass
class Row:
    """One line of the table of key numbers: exact value on the page in ``data-value``."""

    key: str
    name: str
    value: float | str
    unit: str = ""
    note: str = ""



@dataclass
class Image:
    """A PNG image: its bytes and pixel size (read from its header)."""

    data: bytes
    width: int
    height: int
    alt: str

    def tag(self) -> str:
        src = "data:image/png;base64," + base64.b64encode(self.data).decode("ascii")
        return (f'<img src="{src}" width="{self.width}" height="{self.height}" '
                f'alt="{html.escape(self.alt)}">')


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from a PNG header (the IHDR chunk)."""
    if data[:8] != b"\x89PNG\r\n\x1a\n" or data[12:16] != b"IHDR":
        raise ValueError("not a PNG image")
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def _image(fig: Any, alt: str) -> Image:
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI, facecolor=fig.get_facecolor(), bbox_inches="tight",
                pad_inches=0.1)
    data = buf.getvalue()
    w, h = png_size(data)
    return Image(data, w, h, alt)


def degree_order_picture(h: Harmonics, title: str) -> Image:
    """The degree-order picture of the page: the isotropy picture (how each degree's power
    is shared among its orders, against an isotropic field)."""
    return _image(plot.isotropy_figure(h, title=title), "isotropy: power by order against an "
                  "isotropic field")


def _figure_html(img: Image, caption: str) -> str:
    return f"<figure>{img.tag()}<figcaption>{html.escape(caption)}</figcaption></figure>"



_CSS = string.Template("""
:root { --paper: $paper; --ink: $ink; --faint: $faint; --accent: $accent; --warm: $warm; }
* { box-sizing: border-box; }
html { background: var(--paper); color: var(--ink); }
body { margin: 0 auto; max-width: 62rem; padding: 1.2rem 1rem 3rem;
       font: 16px/1.5 "Iowan Old Style", "Palatino Linotype", Palatino, Georgia, serif; }
header { border-bottom: 3px solid var(--accent); padding-bottom: .6rem; margin-bottom: 1rem; }
h1 { font-size: 1.7rem; margin: 0 0 .3rem; line-height: 1.2; }
h2 { font-size: 1.25rem; margin: 2rem 0 .5rem; padding-bottom: .2rem;
     border-bottom: 1px solid var(--faint); color: var(--accent); }
p.lead { margin: .2rem 0; color: #4a4c55; }
dl.provenance { display: grid; grid-template-columns: max-content 1fr; gap: .15rem 1rem;
                margin: .6rem 0; font-size: .95rem; }
dl.provenance dt { font-weight: bold; }
dl.provenance dd { margin: 0; overflow-wrap: anywhere; }
code, pre { font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: .85rem; }
pre.command { background: #fffdf8; border: 1px solid var(--faint); border-left: 4px solid var(--warm);
              padding: .5rem .7rem; white-space: pre-wrap; overflow-wrap: anywhere; }
nav ul { list-style: none; padding: 0; margin: .4rem 0; display: flex; flex-wrap: wrap; gap: .3rem .9rem; }
nav a { color: var(--accent); }
figure { margin: .8rem 0 1.2rem; }
img { max-width: 100%; height: auto; display: block; border: 1px solid var(--faint); }
figcaption { font-size: .9rem; color: #4a4c55; margin-top: .3rem; }
.pair { display: grid; grid-template-columns: repeat(auto-fit, minmax(20rem, 1fr)); gap: 0 1.2rem; }
table { border-collapse: collapse; width: 100%; font-size: .95rem; background: #fffdf8; }
th, td { text-align: left; padding: .3rem .5rem; border-bottom: 1px solid var(--faint); vertical-align: top; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.unit { white-space: nowrap; }
.note { color: #5a5c66; font-size: .9rem; }
footer { margin-top: 2.5rem; font-size: .85rem; color: #5a5c66; border-top: 1px solid var(--faint); }
@media (max-width: 40rem) {
  body { padding: .8rem .6rem 2rem; font-size: 15px; }
  h1 { font-size: 1.35rem; }
  dl.provenance { font-size: .85rem; gap: .1rem .6rem; }
  .pair { grid-template-columns: 1fr; }
  th, td { padding: .25rem .3rem; }
}
@media print {
  html, body { background: #fff; }
  body { max-width: none; padding: 0; font-size: 11pt; }
  nav { display: none; }
  section { break-inside: avoid-page; }
  figure, table { break-inside: avoid; }
  img { border: none; max-height: 45vh; width: auto; }
  h2 { break-after: avoid; }
}
""").substitute(paper=PAPER, ink=INK, faint=FAINT, accent=PALETTE[0], warm=PALETTE[1])

_PAGE = string.Template("""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="sphex $version">
<title>$title</title>
<style>$css</style>
</head>
<body>
<header id="provenance">
<h1>$title</h1>
<p class="lead">$lead</p>
<dl class="provenance">
$provenance
</dl>
<pre class="command">$command</pre>
<nav><ul>$nav</ul></nav>
</header>
$sections
<footer><p>Written by sphex $version. Every number on this page comes from the command line
above; run it again to reproduce them.</p></footer>
</body>
</html>
""")

_TITLES = {"numbers": "Key numbers", "maps": "Maps", "spectrum": "Degree power spectrum",
           "cumulative": "Cumulative power", "degree-order": "Isotropy: power by order",
           "smoothed": "Smoothed field", "series": "Series", "comparison": "Comparison",
           "local": "Localised spectrum", "winds": "Kinetic energy",
           "wind-maps": "Flow maps", "model": "Model"}


def _section(key: str, body: str) -> str:
    return f'<section id="{key}">\n<h2>{_TITLES[key]}</h2>\n{body}\n</section>'


def _numbers_table(rows: list[Row]) -> str:
    lines = ["<table><thead><tr><th>quantity</th><th>value</th><th>unit</th><th>note</th>"
             "</tr></thead><tbody>"]
    for r in rows:
        if isinstance(r.value, str):
            cell = f'<td class="num" data-key="{r.key}">{html.escape(r.value)}</td>'
        else:
            shown = f"{int(r.value)}" if r.key.startswith("degree_") else f"{r.value:.6g}"
            cell = f'<td class="num" data-key="{r.key}" data-value="{r.value!r}">{shown}</td>'
        lines.append(f"<tr><th>{html.escape(r.name)}</th>{cell}"
                     f'<td class="unit">{html.escape(r.unit)}</td>'
                     f"<td class=\"note\">{html.escape(r.note)}</td></tr>")
    lines.append("</tbody></table>")
    return "\n".join(lines)


@dataclass
class Page:
    """The parts of the page as they are made."""

    title: str
    lead: str
    provenance: list[tuple[str, str]]
    command: str
    sections: dict[str, str] = field(default_factory=dict)

    def render(self, version: str) -> str:
        prov = "\n".join(f"<dt>{html.escape(k)}</dt><dd>{html.escape(v)}</dd>"
                         for k, v in self.provenance)
        keys = [k for k in SECTIONS if k in self.sections]
        nav = "".join(f'<li><a href="#{k}">{_TITLES[k]}</a></li>' for k in keys)
        return _PAGE.substitute(
            title=html.escape(self.title), lead=html.escape(self.lead), provenance=prov,
            command=html.escape(self.command), nav=nav, css=_CSS, version=html.escape(version),
            sections="\n".join(_section(k, self.sections[k]) for k in keys))


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("sphex")
    except Exception:
        import sphex

        return str(getattr(sphex, "__version__", "unknown"))

