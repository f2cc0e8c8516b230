"""The shareable HTML report of ``match`` and ``image``: one self-contained file that works offline.

The page holds everything a colleague needs to judge the result without the
tool: the structure and its source, the measurement, the ranked table with
residuals (the tables the terminal shows, :mod:`termination.tables`), the
verdict and the fit check, the figures inline as SVG, the cautions, and the
exact command and versions that produced it, with the JSON record
(:mod:`termination.serialise`) folded at the end.

It loads nothing: no script, no style sheet, font or image from elsewhere.
The figures are SVG elements in the page (text drawn as outlines, so no font
is needed), their ids prefixed per figure so that two figures never share
one.  Every value is HTML-escaped.
"""

from __future__ import annotations

import datetime
import html
import json
import os
import platform
import re
import sys
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from termination.errors import TerminationError
from termination.figures.commands import PlannedFigure, draw
from termination.serialise import SCHEMA_VERSION, json_document
from termination.tables import SAFETY_NOTE, Table, Text, document

__all__ = ["VERSIONED", "inline_svg", "report_html", "versions", "write_report"]

#: Distributions whose versions the report lists (those installed).
VERSIONED: tuple[str, ...] = ("numpy", "scipy", "spglib", "matplotlib", "ase", "pymatgen", "tifffile")

_STYLE = """
body { font-family: system-ui, -apple-system, 'Segoe UI', sans-serif; margin: 2em auto; max-width: 68em;
       padding: 0 1em; color: #1a1a1a; line-height: 1.45; }
h1 { font-size: 1.5em; margin-bottom: 0.2em; }
h2 { font-size: 1.15em; border-bottom: 1px solid #cfcfcf; padding-bottom: 0.2em; margin-top: 2em; }
.verdict { border-left: 6px solid #182670; background: #f2f4fa; padding: 0.7em 1em; margin: 1em 0; }
.warning { border-left: 6px solid #d4832c; background: #fcf4ea; padding: 0.5em 1em; margin: 0.6em 0; }
.fails { border-left-color: #9a3070; background: #f8eef4; }
table { border-collapse: collapse; margin: 0.5em 0 1em 0; font-size: 0.9em; }
th, td { padding: 0.2em 0.7em; text-align: right; border-bottom: 1px solid #e4e4e4; white-space: nowrap; }
th { background: #f4f4f4; }
td.left, th.left { text-align: left; }
caption { text-align: left; font-weight: 600; padding: 0.3em 0; }
.scroll { overflow-x: auto; }
figure { margin: 1.5em 0; }
figure svg { width: min(100%, 46em); height: auto; display: block; }
figcaption { font-size: 0.9em; color: #444; margin-top: 0.3em; }
code, pre { font-family: ui-monospace, 'SFMono-Regular', Menlo, monospace; font-size: 0.88em; }
pre { background: #f6f6f6; padding: 0.7em; overflow-x: auto; }
dl.facts { display: grid; grid-template-columns: max-content auto; gap: 0.15em 1.2em; }
dl.facts dt { color: #555; }
dl.facts dd { margin: 0; }
@media print { figure { break-inside: avoid; } details { display: none; } }
"""


def _e(value: object) -> str:
    return html.escape(str(value), quote=True)


def versions() -> dict[str, str]:
    """Versions of Python, termination and the installed libraries of :data:`VERSIONED` (not imported)."""
    from importlib import metadata

    # The package's own version without importing the package module (the layers forbid it here):
    # it is always loaded before any of its modules.
    out = {"termination": str(getattr(sys.modules.get("termination"), "__version__", "unknown"))}
    out["python"] = platform.python_version()
    for name in VERSIONED:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return out


def inline_svg(svg: bytes | str, prefix: str) -> str:
    """An SVG file as an element to put in a page: no XML prolog or DOCTYPE, every id prefixed with ``prefix``.

    Ids are made valid and unique in the page: blanks become '_', a repeated
    id (matplotlib repeats glyph definitions and the gids of a figure's parts)
    gets '~2', '~3', ...; references keep pointing at the first, as they did.

    >>> inline_svg('<?xml version="1.0"?><svg><g id="a" clip-path="url(#a)"/><use xlink:href="#a"/></svg>', "f1-")
    '<svg><g id="f1-a" clip-path="url(#f1-a)"/><use xlink:href="#f1-a"/></svg>'
    >>> inline_svg('<svg><g id="pole label"/><g id="pole label"/></svg>', "f2-")
    '<svg><g id="f2-pole_label"/><g id="f2-pole_label~2"/></svg>'
    """
    text = svg.decode("utf-8") if isinstance(svg, bytes) else svg
    text = text[text.index("<svg") :]
    seen: dict[str, int] = {}

    def unique(m: re.Match[str]) -> str:
        name = prefix + re.sub(r"\s+", "_", m.group(1))
        seen[name] = seen.get(name, 0) + 1
        return f'id="{name}"' if seen[name] == 1 else f'id="{name}~{seen[name]}"'

    text = re.sub(r'\bid="([^"]+)"', unique, text)
    text = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{prefix}{m.group(1)})", text)
    text = re.sub(r'href="#([^"]+)"', lambda m: f'href="#{prefix}{m.group(1)}"', text)
    return text.strip()


def _table_html(t: Table) -> str:
    head = "".join(f'<th class="{"left" if c.justify == "left" else ""}">{_e(c.header)}</th>' for c in t.columns)
    rows = "".join(
        "<tr>"
        + "".join(
            f'<td class="{"left" if c.justify == "left" else ""}">{_e(cell)}</td>' for c, cell in zip(t.columns, row)
        )
        + "</tr>"
        for row in t.rows
    )
    return f'<div class="scroll"><table><caption>{_e(t.title)}</caption><tr>{head}</tr>{rows}</table></div>'


def _facts(pairs: Iterable[tuple[str, object]]) -> str:
    items = "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in pairs if v not in (None, ""))
    return f'<dl class="facts">{items}</dl>'


def _structure_section(s: Any) -> str:
    cell = f"a = {s.a:.4f}, b = {s.b:.4f}, c = {s.c:.4f} Å; α = {s.alpha:.2f}°, β = {s.beta:.2f}°, γ = {s.gamma:.2f}°"
    return "<h2>Structure</h2>" + _facts(
        [
            ("name", s.name),
            ("formula", s.formula),
            ("source", s.origin),
            ("space group", f"{s.spacegroup} (No. {s.spacegroup_number})"),
            ("conventional cell", cell),
            ("atoms in the cell", s.natoms),
            ("setting", s.note),
        ]
    )


def _value(v: Any, unit: str) -> str:
    return f"{v.value:g} ± {v.sigma:.3g} {unit}".strip() if v.sigma is not None else f"{v.value:g} {unit}".strip()


def _measurement_section(r: Any) -> str:
    m = r.measurement
    return (
        "<h2>Measurement</h2><p>The values as scored, with the uncertainties used (defaults applied; the tilt's "
        "includes the mount term).</p>"
        + _facts(
            [
                ("mount face", None if m.mount is None else "(" + " ".join(str(v) for v in m.mount) + ")"),
                ("largest index", m.max_index),
                ("tilt", None if m.tilt is None else _value(m.tilt, "°")),
                ("spacings", ", ".join(_value(v, "Å") for v in m.spacings) or None),
                ("row angle", None if m.row_angle is None else _value(m.row_angle, "°")),
                ("steps", ", ".join(_value(v, "Å") for v in m.steps) or None),
            ]
        )
    )


def _fit_section(fit: Any) -> str:
    verdict = "passed" if fit.fits else "failed"
    body = _facts(
        [
            ("result", f"the best candidate's residuals {verdict} the test (α = {fit.alpha:g})"),
            ("chi-square", f"{fit.chi_square:.3g} for {fit.dof} values (p = {fit.p_value:.3g})"),
            ("step outliers", f"{fit.step_outliers} (the allowance accepts {fit.allowed_step_outliers})"),
            ("largest residuals", ", ".join(fit.worst)),
            ("likely causes", "; ".join(fit.causes)),
            ("caveats", "; ".join(fit.caveats)),
        ]
    )
    return f"<h2>Fit check</h2>{body}"


def _figures_section(rendered: Sequence[tuple[PlannedFigure, bytes]]) -> str:
    if not rendered:
        return ""
    parts = ["<h2>Figures</h2>"]
    for i, (plan, svg) in enumerate(rendered, start=1):
        parts.append(
            f'<figure id="figure-{_e(plan.name)}" data-figure="{_e(plan.name)}">'
            f"{inline_svg(svg, f'f{i}-')}"
            f"<figcaption>Figure {i}. {_e(plan.caption)}</figcaption></figure>"
        )
    return "".join(parts)


def _tables_section(record: Any, title: str) -> str:
    blocks = document(record, wide=True)
    tables = "".join(_table_html(b) for b in blocks if isinstance(b, Table))
    return f"<h2>{_e(title)}</h2>{tables}" if tables else ""


def _cautions_section(record: Any) -> str:
    items: list[tuple[str, str]] = []
    structure = getattr(record, "structure", None)
    if structure is not None and structure.caution:
        items.append(("warning", f"Caution: {structure.caution}"))
    warning = getattr(record, "warning", None)
    if warning:
        items.append(("warning", warning))
    for note in getattr(record, "notes", ()) or ():
        items.append(("", note))
    analysis = getattr(record, "analysis", None)
    for note in getattr(analysis, "notes", ()) or ():
        items.append(("", note))
    items.append(("", SAFETY_NOTE))
    body = "".join(
        f'<div class="warning">{_e(text)}</div>' if kind == "warning" else f"<p>{_e(text)}</p>" for kind, text in items
    )
    return f"<h2>Cautions and notes</h2>{body}"


def _provenance_section(command: str, record_command: str, record: Any, when: str) -> str:
    rows = "".join(
        f"<tr><td class='left'>{_e(k)}</td><td class='left'>{_e(v)}</td></tr>" for k, v in versions().items()
    )
    data = json.dumps(json_document(record_command, record), indent=2, ensure_ascii=False)
    return (
        "<h2>How this report was made</h2>"
        f"<p>Command:</p><pre>{_e(command)}</pre>"
        f"<p>Made {_e(when)} on {_e(platform.platform())}; JSON schema {_e(SCHEMA_VERSION)}.</p>"
        f"<table><tr><th class='left'>package</th><th class='left'>version</th></tr>{rows}</table>"
        f"<details><summary>The result as JSON (<code>--json</code>)</summary><pre>{_e(data)}</pre></details>"
    )


def report_html(
    record: Any, rendered: Sequence[tuple[PlannedFigure, bytes]], *, command: str, when: str | None = None
) -> str:
    """The report page of a ``match`` or ``image`` record with its rendered SVG figures.

    Parameters
    ----------
    record : MatchReport or ImageReport
    rendered : sequence of (PlannedFigure, bytes)
        Figures rendered as SVG (:func:`termination.figures.commands.draw`).
    command : str
        The command line that made the record, shown as given.
    when : str, optional
        Time of the run; default now (UTC, ISO 8601).

    Returns
    -------
    str
        A complete HTML5 document.
    """
    from termination.identification.likelihood import MatchReport
    from termination.reports import ImageReport

    stamp = when or datetime.datetime.now(datetime.UTC).strftime("%Y-%m-%d %H:%M UTC")
    if isinstance(record, MatchReport):
        kind = "match"
        s = record.structure
        title = f"Which face and termination? {s.formula} ({s.name})"
        fails = "" if record.fit.fits else " fails"
        top = (
            f'<div class="verdict{fails}"><strong>{_e(record.verdict)}</strong><br>'
            f"Decided by {_e(record.decided_by)}.</div>"
        )
        if record.warning:
            top += f'<div class="warning">{_e(record.warning)}</div>'
        body = (
            top
            + _structure_section(s)
            + _measurement_section(record)
            + _tables_section(record, "Ranked candidates, with residuals")
            + _fit_section(record.fit)
            + _figures_section(rendered)
            + _cautions_section(record)
        )
    elif isinstance(record, ImageReport):
        kind = "image"
        src = record.source
        title = f"Height map {Path(src.file).name}"
        facts = _facts(
            [
                ("file", src.file),
                ("pixels", f"{src.nx} × {src.ny}"),
                ("pixel size", f"{src.pixel_size_x:g} × {src.pixel_size_y:g} Å"),
                ("height range", f"{src.height_min:.3f} to {src.height_max:.3f} Å"),
            ]
        )
        texts = "".join(f"<p>{_e(b.text)}</p>" for b in document(record, wide=True) if isinstance(b, Text))
        body = (
            "<h2>Source</h2>"
            + facts
            + _tables_section(record, "What the analysis found")
            + texts
            + _figures_section(rendered)
            + _cautions_section(record)
        )
    else:
        raise TerminationError(f"an HTML report is made for match and image, not {type(record).__name__}")
    return (
        '<!DOCTYPE html>\n<html lang="en">\n<head>\n<meta charset="utf-8">\n'
        '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
        f"<title>{_e(title)}</title>\n<style>{_STYLE}</style>\n</head>\n<body>\n"
        f"<h1>{_e(title)}</h1>\n<p>termination {_e(kind)} report, {_e(stamp)}.</p>\n"
        f"{body}\n{_provenance_section(command, kind, record, stamp)}\n</body>\n</html>\n"
    )


def write_report(
    path: str | os.PathLike[str],
    record: Any,
    plans: Sequence[PlannedFigure],
    *,
    command: str,
    force: bool = False,
    inputs: Sequence[str | os.PathLike[str] | None] = (),
    error: type[TerminationError] = TerminationError,
) -> Path:
    """Draw ``plans`` as SVG, make the page of ``record`` and write it to ``path`` (checked first)."""
    from termination.outputs import check_outputs, write_text

    check_outputs([path], inputs, force=force, error=error)
    page = report_html(record, draw(plans, "svg"), command=command)
    return write_text(path, page, force=force, error=error)


def command_line(argv: Sequence[str] | None = None) -> str:
    """The command as typed: 'termination' and the arguments, quoted for a POSIX shell."""
    import shlex

    args = list(sys.argv[1:] if argv is None else argv)
    return shlex.join(["termination", *args])
