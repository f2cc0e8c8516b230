"""Text rendering of the command reports: titled tables of strings and lines, sized for an 80-column terminal.

:func:`document` turns a report into blocks (:class:`Table`, :class:`Text`)
that the command line draws; nothing here imports rich.  The default tables
of every command fit 80 columns without cutting a number; ``wide`` adds the
less-used columns.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from fractions import Fraction
from typing import Any, Literal

from termination.bulk.elements import composition_label
from termination.bulk.summary import StructureSummary
from termination.surface.miller import direction_text, face_text

__all__ = [
    "HYPOTHESIS_NOTE",
    "SAFETY_NOTE",
    "Block",
    "Column",
    "Table",
    "Text",
    "document",
    "fraction_text",
    "lattice_text",
    "length_text",
    "table_width",
]

#: Printed under every identification.
HYPOTHESIS_NOTE = (
    "An identification is a ranked hypothesis from a model, not proof: confirm it with an independent "
    "probe (diffraction, spectroscopy, a second cleave)."
)
#: Printed under commands that plan or interpret a cleave.
SAFETY_NOTE = (
    "Cleaving, vacuum work, bake-outs and cryogens can hurt people: follow your lab's safety rules and training."
)


@dataclass(frozen=True)
class Column:
    """A table column: its header and alignment."""

    header: str
    justify: Literal["left", "right"] = "right"


@dataclass(frozen=True)
class Table:
    """A titled table of strings."""

    title: str
    columns: tuple[Column, ...]
    rows: tuple[tuple[str, ...], ...]


@dataclass(frozen=True)
class Text:
    """A line of text; ``style`` is 'plain', 'bold', 'dim' or 'warning'."""

    text: str
    style: Literal["plain", "bold", "dim", "warning"] = "plain"


Block = Table | Text

#: Columns are separated by this many spaces (no vertical rules), as the renderer draws them.
COLUMN_GAP = 2


def table_width(table: Table) -> int:
    """Width in characters of ``table`` drawn without vertical rules, columns ``COLUMN_GAP`` apart."""
    widths = [len(c.header) for c in table.columns]
    for row in table.rows:
        widths = [max(w, len(cell)) for w, cell in zip(widths, row)]
    return sum(widths) + COLUMN_GAP * (len(widths) - 1)


def _table(title: str, columns: Sequence[tuple[str, str] | str], rows: Iterable[Sequence[str]]) -> Table:
    cols = tuple(Column(c) if isinstance(c, str) else Column(c[0], c[1]) for c in columns)  # type: ignore[arg-type]
    return Table(title, cols, tuple(tuple(r) for r in rows))


# --------------------------------------------------------------------------- text of values


def length_text(value: float | None, digits: int = 3) -> str:
    """A length in Å, or '—' when it is unbounded or unknown (stripes, flat patterns).

    >>> length_text(2.82), length_text(float("inf"))
    ('2.820', '—')
    """
    return f"{value:.{digits}f}" if value is not None and math.isfinite(value) else "—"


def lattice_text(lattice: Any) -> str:
    """'2.820 × 2.820 Å, 90.0°' for an apparent lattice."""
    gamma = "—" if lattice.gamma is None or not math.isfinite(lattice.gamma) else f"{lattice.gamma:.1f}°"
    return f"{length_text(lattice.a)} × {length_text(lattice.b)} Å, {gamma}"


def fraction_text(f: float) -> str:
    """'1/2' for 0.5: a compensation as a small fraction.

    >>> fraction_text(-0.25), fraction_text(0.2361)
    ('1/4', '0.2361')
    """
    fr = Fraction(abs(f)).limit_denominator(24)
    return f"{fr.numerator}/{fr.denominator}" if abs(float(fr) - abs(f)) < 1e-6 else f"{abs(f):.4g}"


def _pm(value: float | None, sigma: float | None, digits: int = 3) -> str:
    if value is None:
        return "—"
    return f"{value:.{digits}f}" if sigma is None else f"{value:.{digits}f} ± {sigma:.{digits}f}"


def _charge(q: float) -> str:
    return "0" if abs(q) < 5e-7 else f"{q:+.3g}"


def _matrix(m: Sequence[Sequence[int]]) -> str:
    return f"({m[0][0]} {m[0][1]} / {m[1][0]} {m[1][1]})"


def _face(r: Any, hkl: Sequence[int]) -> str:
    """A face of the report's crystal as practitioners write it: (h k i l) in hexagonal axes, else (h k l)."""
    return face_text(hkl, r.structure.hexagonal_axes)


def _structure(s: StructureSummary) -> list[Block]:
    out: list[Block] = [
        Text(
            f"{s.name} ({s.origin or s.formula}): {s.spacegroup} (No. {s.spacegroup_number}), {s.natoms} atoms", "bold"
        ),
        Text(
            f"cell a = {s.a:.4f}, b = {s.b:.4f}, c = {s.c:.4f} Å; "
            f"α = {s.alpha:.2f}°, β = {s.beta:.2f}°, γ = {s.gamma:.2f}°"
        ),
    ]
    if s.note:
        out.append(Text(f"Note: {s.note}", "dim"))
    if s.absolute_structure:
        out.append(Text(f"Note: {s.absolute_structure}.", "dim"))
    if s.hexagonal_axes:
        out.append(Text("Hexagonal axes: faces (h k i l), directions [u v t w]; --three-index: (h k l).", "dim"))
    return out


def _caution(s: StructureSummary) -> list[Block]:
    return [Text(s.caution, "warning")] if s.caution else []


# --------------------------------------------------------------------------- commands


def _structures(r: Any, wide: bool) -> list[Block]:
    cols: list[str | tuple[str, str]] = [
        ("name", "left"),
        ("system", "left"),
        ("space group", "left"),
        ("example", "left"),
    ]
    if wide:
        cols += [("elements", "left"), ("Wyckoff sites", "left"), ("free parameters", "left"), ("tabulated", "left")]
    rows = []
    for p in r.prototypes:
        row = [p.name, p.crystal_system, f"{p.spacegroup} ({p.spacegroup_number})", p.example]
        if wide:
            row += [
                ",".join(p.elements),
                p.sites,
                " ".join(f"{k}={v:g}" for k, v in p.parameters.items()) or "—",
                " ".join(p.tabulated) or "—",
            ]
        rows.append(row)
    out: list[Block] = [_table("Built-in prototypes: NAME:EL1,EL2,... [--a Å] [--c Å] [--x X]", cols, rows)]
    out.append(
        Text(
            "Tabulated compounds need no --a or --c (room-temperature values with their sources); "
            "--x NAME=VALUE sets a free parameter.",
            "dim",
        )
    )
    if not wide:
        out.append(
            Text("--wide adds the Wyckoff sites, free parameters and tabulated compounds; --json everything.", "dim")
        )
    return out


def _planes(r: Any, wide: bool) -> list[Block]:
    out = _structure(r.structure)
    mount = r.mount is not None
    cols: list[str | tuple[str, str]] = ["face"]
    if mount:
        cols += ["tilt (°)"]
        if wide:
            cols += ["variant", "axis"]
    cols += ["d (Å)"]
    if wide:
        cols += ["mult."]
    cols += ["a × b (Å)", "γ (°)"]
    if wide:
        cols += ["area (Å²)"]
    cols += ["terms", "step (Å)", "polar"]
    if r.tilt_window is not None:
        return out + _window(r, wide)
    rows = []
    for f in r.faces:
        row = [_face(r, f.hkl)]
        if mount:
            row += [f"{f.tilt:.2f}"]
            if wide:
                row += [
                    _face(r, f.tilt_variant),
                    "—" if f.tilt_axis is None else direction_text(f.tilt_axis, r.structure.hexagonal_axes),
                ]
        row += [f"{f.d:.4f}"]
        if wide:
            row += [str(f.multiplicity)]
        m = f.mesh
        row += [f"{m.a:.3f} × {m.b:.3f}", f"{m.gamma:.2f}"]
        if wide:
            row += [f"{m.area:.3f}"]
        row += [
            str(len(f.terminations)),
            f"{f.smallest_step:.3f}",
            "—" if f.polar is None else ("yes" if f.polar else "no"),
        ]
        rows.append(row)
    title = f"Faces up to index {r.max_index}"
    if mount:
        title += f", tilt to the mount {_face(r, r.mount)}"
    out.append(_table(title, cols, rows))
    out.append(
        Text("terms: terminations; step: smallest step height; polar: every termination Tasker type III.", "dim")
    )
    if r.charges is None:
        out.append(
            Text("polar: unknown without formal charges; give --charge EL=Q (see `termination polarity`).", "dim")
        )
    else:
        out.append(Text(f"Charges {r.charges.text} ({r.charges.method}).", "dim"))
        if r.charges.caution:
            out.append(Text(f"Note: {r.charges.caution}.", "dim"))
    if not wide:
        more = "variant, rotation axis, " if mount else ""
        out.append(Text(f"--wide adds the {more}multiplicity and mesh area; --json everything.", "dim"))
    return out + _caution(r.structure)


def _terminations(r: Any, wide: bool) -> list[Block]:
    out = _structure(r.structure)
    m = r.mesh
    out.append(
        Text(
            f"Face {_face(r, r.hkl)}: d = {r.d:.4f} Å, mesh {m.a:.4f} × {m.b:.4f} Å, γ = {m.gamma:.2f}°, "
            f"{m.area:.3f} Å² per surface cell"
        )
    )
    out.append(
        _table(
            f"Layers of one period, depth below the top layer of T1 (tolerance {r.layer_tol_angstrom:g} Å)",
            ["layer", "depth (Å)", ("atoms per cell", "left")],
            [[str(i), f"{la.depth:.4f}", composition_label(la.composition)] for i, la in enumerate(r.layers)],
        )
    )
    cols: list[str | tuple[str, str]] = ["id", ("label", "left"), "depth (Å)", "bonds/nm²"]
    if wide:
        cols += ["weighted/nm²", "layers", "cut (Å)"]
    cols += [("equivalent to", "left"), ("apparent lattice", "left")]
    rows = []
    for t in r.terminations:
        eq = "—" if t.equivalent_to is None else f"{t.equivalent_to} ({t.relation})"
        row = [t.id, t.label, f"{t.depth:.3f}", f"{t.broken_bonds_per_nm2:.2f}"]
        if wide:
            row += [f"{t.weighted_bonds_per_nm2:.2f}", ",".join(map(str, t.layers)), f"{t.cut_height:.3f}"]
        row += [eq, lattice_text(t.apparent_lattice)]
        rows.append(row)
    out.append(_table("Terminations (top layer or unit), cheapest cut first", cols, rows))
    vdw = [f"{t.id} ({t.label})" for t in r.terminations if t.van_der_waals]
    if vdw:
        out.append(
            Text(
                f"Van der Waals layer{'s' if len(vdw) > 1 else ''}: {', '.join(vdw)}: no bond crosses the cuts "
                "above and below, the cleavage plane of this layered crystal.",
                "bold",
            )
        )
    out.append(
        Text(
            "Apparent lattice: what a topograph shows in the default corrugation model (all species alike, "
            "top unit, λ = 0.5 Å); see `termination corrugation`.",
            "dim",
        )
    )
    out.append(
        _table(
            "Allowed step heights, lower terrace → upper terrace (Å)",
            [("from", "left"), ("to", "left"), ("heights", "left")],
            [[s.from_label, s.to_label, "  ".join(f"{h:.3f}" for h in s.heights)] for s in r.steps],
        )
    )
    if not wide:
        out.append(Text("--wide adds weighted bond densities, layers and cut heights; --json everything.", "dim"))
    return out + _caution(r.structure)


def compensation_text(t: Any) -> str:
    """'remove 1/2 (Na layer)' for a termination's polarity."""
    if t.tasker_type != "III":
        return "none needed"
    if t.compensation is None:
        return "not by the top sites"
    verb = "remove" if t.compensation < 0 else "add"
    kind = "unit" if t.site_kind == "top unit" else "layer"
    return f"{verb} {fraction_text(t.compensation)} ({t.site_label} {kind})"


def changed_text(rc: Any) -> str:
    """'3 of 4 Na + 1 of 4 Cl' for the sites a reconstruction cell changes in each layer (per cell)."""
    parts = [f"{k} of {n} {label}" for label, n, k in zip(rc.layer_labels, rc.layer_sites, rc.layer_changed) if k]
    return " + ".join(parts) + (" added" if rc.mode == "add" else "")


def _polarity(r: Any, wide: bool) -> list[Block]:
    out = _structure(r.structure)
    q = r.charges
    out.append(Text(f"Formal charges: {q.text} ({q.method})."))
    if q.caution:
        out.append(Text(f"Note: {q.caution}.", "warning"))
    shown = 6
    for f in r.faces:
        cols: list[str | tuple[str, str]] = ["id", ("label", "left"), "Tasker"]
        if wide:
            cols += [("layer charges (e, top first)", "left"), "μ/A (e/Å)"]
        cols += ["Δq (e)", ("compensation", "left"), ("best cell", "left")]
        rows = []
        for t in f.terminations:
            cells = t.reconstructions[0].label if t.reconstructions else ""
            if len(t.reconstructions) > 1:
                cells += f", +{len(t.reconstructions) - 1}"
            if t.reconstructions and not t.reconstructions[0].exact:
                cells = "nearest: " + cells
            row = [t.id, t.label, t.tasker_type]
            if wide:
                row += [" ".join(_charge(la.charge) for la in t.layers), f"{t.dipole_per_area:+.4f}"]
            row += [
                f"{t.compensating_charge:+.3f}",
                compensation_text(t),
                (cells or "—") if t.tasker_type == "III" else "—",
            ]
            rows.append(row)
        title = f"{_face(r, f.hkl)}: d = {f.d:.4f} Å, {f.area:.3f} Å² per cell, {'polar' if f.polar else 'not polar'}"
        out.append(_table(title, cols, rows))
        for t in f.terminations:
            if t.note:
                out.append(Text(f"{_face(r, f.hkl)} {t.id} {t.label}: {t.note}", "dim"))
        for t in f.terminations:
            if not t.reconstructions:
                continue
            exact = t.reconstructions[0].exact
            rrows = []
            for rc in t.reconstructions[:shown]:
                row = [rc.name, _matrix(rc.matrix), changed_text(rc), str(len(rc.domains)), str(rc.patterns)]
                row += [f"{rc.score:.3f}"] + ([] if exact else [f"{rc.residual_charge:+.3f}"])
                rrows.append(row)
            rcols: list[str | tuple[str, str]] = [("cell", "left"), "matrix", ("changed", "left"), "domains"]
            rcols += ["patterns", "eV/cell"] + ([] if exact else ["residual (e)"])
            what = "cells that" if exact else "nearest cells to"
            out.append(_table(f"{_face(r, f.hkl)} {t.id} {t.label}: {what} {compensation_text(t)}", rcols, rrows))
            if len(t.reconstructions) > shown:
                out.append(
                    Text(f"{len(t.reconstructions) - shown} more cells up to index {r.max_cell} in --json.", "dim")
                )
    out.append(
        Text(
            "Δq = μ/d: the charge per cell the top layer must gain (> 0) or lose (< 0), μ = Σ q z over the "
            "repeat unit; the top two layers (or units) may give it. Patterns ranked by the "
            f"{r.criterion}; residual: the part of Δq per 1×1 cell a nearest cell does not supply.",
            "dim",
        )
    )
    if not wide:
        out.append(Text("--wide adds the layer charges and the dipole per area; --json everything.", "dim"))
    out.append(
        Text(
            "Formal charges are a bookkeeping model: real surfaces also compensate electronically, by "
            "adsorbates and by non-stoichiometry.",
            "dim",
        )
    )
    return out + _caution(r.structure)


def spot_text(g: Sequence[float]) -> str:
    """'(1/2 0)' for a spot index in units of a*, b*."""
    return "(" + " ".join(str(Fraction(float(v)).limit_denominator(24)) for v in g) + ")"


def _corrugation(r: Any, wide: bool) -> list[Block]:
    out = _structure(r.structure)
    m, v = r.mesh, r.visibility
    weights = ", ".join(f"{el}={w:g}" for el, w in v.weights)
    seen = "all species" if v.visible is None else "only " + ", ".join(v.visible)
    depth = "top unit" if v.max_depth_angstrom is None else f"down to {v.max_depth_angstrom:g} Å"
    sites = ", ".join(f"{key}={w:g}" for key, w in v.site_weights)
    if sites:
        weights = f"{weights}, {sites}" if weights else sites
    out.append(Text(f"Face {_face(r, r.hkl)}: mesh {m.a:.4f} × {m.b:.4f} Å, γ = {m.gamma:.2f}°."))
    out.append(
        Text(
            f"Imaging {seen}{'; weights ' + weights if weights else ''}; λ = {v.decay_length_angstrom:g} Å; "
            f"{depth}; spots above {v.threshold:g} F(0)."
        )
    )
    cols: list[str | tuple[str, str]] = [
        "id",
        ("label", "left"),
        ("cell", "left"),
        "a (Å)",
        "b (Å)",
        "γ (°)",
        ("type", "left"),
        "maxima (Å)",
    ]
    if wide:
        cols += ["row spacings (Å)", "row angles (°)", "matrix"]
    rows = []
    for t in r.terminations:
        for p in (t, *t.reconstructions, *t.cells):
            lat = p.apparent_lattice
            row = [
                t.id if p is t else "",
                t.label if p is t else "",
                (p.cell or "1×1") + (" (given)" if any(p is c for c in t.cells) else ""),
                length_text(lat.a),
                length_text(lat.b),
                f"{lat.gamma:.1f}",
                p.lattice_type.replace("centred rectangular", "centred rect."),  # fits 80 columns
                length_text(p.neighbour_distance),
            ]
            if wide:
                row += [
                    " ".join(length_text(s, 2) for s in p.row_spacings) or "—",
                    " ".join(f"{a:.0f}" for a in p.row_angles) or "—",
                    "—" if p.matrix is None else _matrix(p.matrix),
                ]
            rows.append(row)
    out.append(_table("Apparent lattice per termination (dual of the visible spots; one domain)", cols, rows))
    spots = []
    for t in r.terminations:
        # Two shells of the 1×1 pattern, the first (fractional-order) shell of each cell.
        for p in (t, *t.reconstructions, *t.cells):
            shells = sorted({round(s.length, 6) for s in p.spots})[: 2 if p is t else 1]
            for s in p.spots:
                if round(s.length, 6) in shells:
                    spots.append(
                        [
                            t.id,
                            p.cell or "1×1",
                            spot_text(s.g),
                            f"{s.length:.4f}",
                            f"{s.intensity:.3f}",
                            f"{s.domains}/{len(p.domains)}" if p.domains else "—",
                        ]
                    )
    out.append(
        _table(
            "Lowest-order visible spots (of all domains)",
            ["id", ("cell", "left"), "(h k)", "|G| (1/Å)", "|F|/F(0)", "domains"],
            spots,
        )
    )
    for t in r.terminations:
        for p in (*t.reconstructions, *t.cells):
            if len(p.domains) > 1 and p.domain_lattice is not None:
                out.append(
                    Text(
                        f"{t.id} {p.cell}: {len(p.domains)} domains superposed ({', '.join(p.domains)}); "
                        f"their spots together: {lattice_text(p.domain_lattice)}."
                    )
                )
    for note in r.notes:
        out.append(Text(note, "dim"))
    out.append(
        Text(
            "|G| without the factor 2π. A geometric model: which species images at a given bias is not "
            "predicted; try --visible and --weight. A given cell (--cell) brightens one 1×1 cell per cell; "
            "+Cl: the cell takes Cl from the layer below too. domains: how many of a cell's rotational "
            "domains show the spot. --json lists every spot.",
            "dim",
        )
    )
    if not wide:
        out.append(Text("--wide adds the row spacings, row angles and cell matrices.", "dim"))
    return out + _caution(r.structure)


def _residual(c: Any, digits: int = 1) -> str:
    if c is None:
        return "—"
    if c.predicted is None or c.residual is None:
        return "none"
    return f"{c.residual:+.{digits}f}σ"


def _predicted(c: Any, digits: int = 2) -> str:
    if c is None:
        return "—"
    if c.predicted is None:
        return "none"
    return f"{c.predicted:.{digits}f} ({c.residual:+.1f}σ)"


def _steps_summary(steps: Sequence[Any]) -> str:
    """'4/5 ≤2σ' for the steps column: measured heights explained within 2σ."""
    if not steps:
        return "—"
    res = [abs(c.residual) for c in steps if c.residual is not None]
    return f"{sum(r <= 2 for r in res)}/{len(steps)} ≤2σ"


def _match(r: Any, wide: bool) -> list[Block]:
    out = _structure(r.structure)
    e = r.measurement
    parts = []
    if r.mount:
        parts.append(f"mount {_face(r, r.mount)}")
    if e.tilt:
        parts.append(f"tilt {e.tilt.value:g}±{e.tilt.sigma:.2g}°")
    if e.spacings:
        parts.append("spacings " + ", ".join(f"{v.value:g}±{v.sigma:.2g}" for v in e.spacings) + " Å")
    if e.row_angle:
        parts.append(f"row angle {e.row_angle.value:g}±{e.row_angle.sigma:.2g}°")
    if e.steps:
        parts.append("steps " + ", ".join(f"{v.value:g}" for v in e.steps) + " Å")
    out.append(Text("Measured: " + "; ".join(parts)))
    if wide:
        cols: list[str | tuple[str, str]] = [
            "#",
            "face",
            ("term.", "left"),
            ("cell", "left"),
            "p",
            "tilt (°)",
            "spacings (Å)",
            "angle (°)",
            "steps",
            "log prior",
        ]
    else:
        cols = ["#", "face", ("term.", "left"), ("cell", "left"), "p", "tilt", "spacings", "angle", "steps"]
    rows = []
    for c in r.candidates:
        row = [str(c.rank), _face(r, c.hkl), c.label, c.cell or "1×1", f"{c.probability:.3f}"]
        if wide:
            row += [
                _predicted(c.tilt, 1),
                ", ".join(_predicted(s) for s in c.spacings) or "—",
                _predicted(c.row_angle, 1),
                _steps_summary(c.steps),
                f"{c.terms.log_prior:.2f}",
            ]
        else:
            row += [
                _residual(c.tilt),
                " ".join(_residual(s) for s in c.spacings) or "—",
                _residual(c.row_angle),
                _steps_summary(c.steps),
            ]
        rows.append(row)
    out.append(_table("Candidate faces and terminations, most probable first", cols, rows))
    if wide:
        out.append(
            Text("Each cell: predicted value (residual in σ); steps: measured heights explained within 2σ.", "dim")
        )
    else:
        out.append(
            Text(
                "Residuals (measured − predicted)/σ; steps: measured heights explained within 2σ. --wide "
                "shows the predicted values, --json every criterion.",
                "dim",
            )
        )
    best = r.candidates[0]
    if best.steps:
        srows = []
        for s in best.steps:
            if s.predicted is None or s.outlier:
                srows.append([f"{s.measured:.3f}", "—", "outlier", "", "—"])
            else:
                srows.append(
                    [
                        f"{s.measured:.3f}",
                        f"{s.predicted:.3f}",
                        f"{s.lower.label} → {s.upper.label}",
                        str(s.multiple),
                        f"{s.residual:+.1f}σ",
                    ]
                )
        out.append(
            _table(
                f"Steps of {_face(r, best.hkl)} {best.label}: the terraces each explains",
                ["measured (Å)", "allowed (Å)", ("lower → upper", "left"), "+n·d", "residual"],
                srows,
            )
        )
    faces = ", ".join(f"{_face(r, f.hkl)} {f.probability:.2f}" for f in r.faces[:4] if f.probability >= 0.005)
    out.append(Text(f"Faces, over their terminations: {faces}"))
    fit = r.fit
    if fit.fits:
        out.append(
            Text(
                f"Fit check passed: chi-square {fit.chi_square:.1f} for {fit.dof} values (p = "
                f"{fit.p_value:.2g}), {fit.step_outliers} step outliers ({fit.allowed_step_outliers} "
                "allowed).",
                "dim",
            )
        )
        out.extend(Text(f"Fit check caveat: {c}.", "warning") for c in fit.caveats)
    out.append(Text(r.verdict, "bold" if fit.fits else "warning"))
    out.append(Text(f"Decided by {r.decided_by}."))
    if r.warning:
        out.append(Text(r.warning, "warning"))
    for note in r.notes:
        out.append(Text(note, "dim"))
    return out + _caution(r.structure) + [Text(SAFETY_NOTE, "dim")]


def _image(r: Any, wide: bool) -> list[Block]:
    s, a = r.source, r.analysis
    channel = "" if s.channel is None else f", channel {s.channel}" + (f" {s.direction}" if s.direction else "")
    out: list[Block] = [
        Text(
            f"{s.file}: {s.nx} × {s.ny} px, pixel {s.pixel_size_x:g} × {s.pixel_size_y:g} Å, heights "
            f"{s.height_min:.2f} to {s.height_max:.2f} Å{channel} (calibration from {s.calibration})",
            "bold",
        )
    ]
    t = a.tilt
    out.append(
        _table(
            "Tilt relative to the scanner plane",
            [("plane", "left"), "tilt (°)", "azimuth (°)"],
            [
                ["macroscopic (all pixels)", f"{t.macroscopic:.3f}", f"{t.azimuth:.1f}"],
                [
                    "terrace (identifies the face)",
                    _pm(t.terrace, t.terrace_sigma),
                    "—" if t.terrace_azimuth is None else f"{t.terrace_azimuth:.1f}",
                ],
            ],
        )
    )
    lat = a.lattice
    cols: list[str | tuple[str, str]] = ["a (Å)", "b (Å)", "γ (°)"]
    if wide:
        cols += ["direction of a (°)", "peaks"]
    if lat is None:
        rows = [["not found", "—", "—"] + (["—", "—"] if wide else [])]
    else:
        rows = [
            [_pm(lat.a, lat.sigma_a), _pm(lat.b, lat.sigma_b), _pm(lat.gamma, lat.sigma_gamma, 2)]
            + ([f"{lat.direction:.1f}", str(lat.peaks)] if wide else [])
        ]
    out.append(_table("Lattice (two shortest periodicities, in the terrace plane; γ obtuse)", cols, rows))
    if a.drift is not None:
        d = a.drift
        out.append(
            Text(
                f"Drift removed for a {d.lattice_type} lattice: shear {_pm(d.shear, d.sigma_shear, 4)}, "
                f"slow-scan stretch {_pm(d.y_scale, d.sigma_y_scale, 4)}"
            )
        )
    steps = [[str(i), _pm(st.height, st.sigma)] for i, st in enumerate(a.steps, 1)] or [["—", "none found"]]
    out.append(_table(f"Steps ({a.terraces} terraces)", ["#", "height (Å)"], steps))
    for note in a.notes:
        out.append(Text(note, "dim"))
    for path in r.written:
        out.append(Text(f"Wrote {path}"))
    return out


def _window(r: Any, wide: bool) -> list[Block]:
    """The cleave-planning table of ``planes --tilt-window``: every variant inside the window, by tilt."""
    lo, hi = r.tilt_window
    cols: list[str | tuple[str, str]] = ["tilt (°)", ("variant", "left"), ("axis", "left"), ("face", "left"), "d (Å)"]
    cols += ["cleave rank", "polar"]
    if wide:
        cols += ["bonds/nm²"]
    rows = []
    for w in r.window:
        row = [
            f"{w.tilt:.2f}",
            _face(r, w.tilt_variant),
            "—" if w.tilt_axis is None else direction_text(w.tilt_axis, r.structure.hexagonal_axes),
            _face(r, w.hkl),
            f"{w.d:.4f}",
            str(w.cleavage_rank),
            "—" if w.polar is None else ("yes" if w.polar else "no"),
        ]
        if wide:
            row += [f"{w.weighted_bonds_per_nm2:.2f}"]
        rows.append(row)
    title = f"Faces {lo:g}° to {hi:g}° from the mount {_face(r, r.mount)}, up to index {r.max_index}, by tilt"
    out: list[Block] = []
    if rows:
        out.append(_table(title, cols, rows))
    else:
        out.append(Text(f"{title}: none.", "bold"))
    out.append(
        Text(
            "Every variant of every face in the window, with the axis [uvw] that tilts the mount onto it. "
            "cleave rank: 1 = the face whose cheapest cut breaks the fewest bonds per area "
            f"(among the {len(r.faces)} faces up to index {r.max_index}).",
            "dim",
        )
    )
    if r.charges is None:
        out.append(Text("polar: unknown without formal charges; give --charge EL=Q.", "dim"))
    else:
        out.append(Text(f"Charges {r.charges.text} ({r.charges.method}).", "dim"))
    if not wide:
        out.append(Text("--wide adds the weighted broken-bond density; --json everything.", "dim"))
    out.append(Text(SAFETY_NOTE, "dim"))
    return out + _caution(r.structure)


def _screen(r: Any, wide: bool) -> list[Block]:
    per = r.wall_time / r.screened if r.screened else 0.0
    runner = f"{r.workers} worker{'s' if r.workers != 1 else ''}"
    out: list[Block] = [
        Text(
            f"Screened {r.screened} of {r.structures} structures ({r.skipped} already in the output), "
            f"{r.failed} failed: {r.rows} rows, faces up to index {r.max_index}.",
            "bold",
        ),
        Text(f"{r.wall_time:.1f} s with {runner}: {per:.3f} s per structure.", "dim"),
    ]
    good = [row for row in r.results if row.error is None]
    cols: list[str | tuple[str, str]] = [("face", "left"), "rank", "terms", "step (Å)", "polar", ("Tasker", "left")]
    cols += [("best cell", "left")]
    if wide:
        cols += ["d (Å)", "bonds/nm²", ("compensation", "left")]
    groups: dict[str, list[Any]] = {}
    for row in good:
        groups.setdefault(row.structure, []).append(row)
    for name, members in groups.items():
        rows = []
        for row in members:
            tasker = "/".join(t.tasker_type or "—" for t in row.terminations) if row.polar is not None else "—"
            hexagonal = row.spacegroup_number is not None and 143 <= row.spacegroup_number <= 194
            line = [
                face_text(row.hkl, hexagonal),
                str(row.cleavage_rank),
                str(row.termination_count),
                f"{row.smallest_step:.3f}",
                "—" if row.polar is None else ("yes" if row.polar else "no"),
                tasker,
                "/".join(t.cell for t in row.terminations if t.cell) or "—",
            ]
            if wide:
                comp = ", ".join("—" if t.compensation is None else _signed(t.compensation) for t in row.terminations)
                line += [f"{row.d:.4f}", f"{row.weighted_bonds_per_nm2:.2f}", comp if row.polar is not None else "—"]
            rows.append(line)
        first = members[0]
        title = f"{name}: {first.formula}, space group {first.spacegroup_number}"
        out.append(_table(title, cols, rows))
        if wide:
            out.append(Text(f"Charges {first.formal_charges or 'unknown'}.", "dim"))
    if good:
        out.append(
            Text(
                "rank 1 cleaves most easily (fewest broken bonds per area); Tasker type of each inequivalent "
                "termination, '/'-separated; best cell: the best compensating cell of each polar termination.",
                "dim",
            )
        )
    for row in r.results:
        if row.error is not None:
            out.append(Text(f"{row.structure}: error: {row.error}", "warning"))
    if r.out is not None:
        out.append(Text(f"Rows in {r.out} ({'JSON Lines' if r.format == 'jsonl' else 'CSV'})."))
    elif good and not wide:
        out.append(Text("--wide adds d, bond density, compensation and charges; --out FILE writes every row.", "dim"))
    return out


def _dipole(value: float, digits: int) -> str:
    return "0" if abs(value) < 0.5 * 10.0**-digits else f"{value:+.{digits}f}"


def _signed(f: float) -> str:
    return "0" if f == 0 else ("-" if f < 0 else "+") + fraction_text(f)


def _excess_text(excess: Any) -> str:
    return " ".join(f"{el}{v:+g}" for el, v in excess.items())


def _slab(r: Any, wide: bool) -> list[Block]:
    out = _structure(r.structure)
    s = r.slab
    sides = "top and bottom" if r.requested_symmetric else "top"
    cell = "1×1" if r.cell is None else f"{r.cell}, {r.changed} site{'s' if r.changed != 1 else ''} {r.mode}d per side"
    out.append(
        Text(
            f"Slab of {_face(r, r.hkl)}: {r.termination.label} ({r.termination.id}) on {sides}, {r.layers} repeat "
            f"unit{'s' if r.layers != 1 else ''}, cell {cell}",
            "bold",
        )
    )
    a, b, c = s.lattice
    out.append(
        Text(
            f"cell a = ({a[0]:.4f}, {a[1]:.4f}, 0), b = ({b[0]:.4f}, {b[1]:.4f}, 0), c = (0, 0, {c[2]:.4f}) Å; "
            f"{s.natoms} atoms; thickness {s.thickness:.3f} Å, vacuum {s.vacuum:.3f} Å"
        )
    )
    units = f"{s.bulk_units:g}"
    if s.stoichiometric:
        out.append(Text(f"Stoichiometric: {composition_label(s.composition)} = {units} bulk formula units."))
    else:
        out.append(
            Text(
                f"Not stoichiometric: {composition_label(s.composition)} = {units} bulk formula units "
                f"{_excess_text(s.excess)}."
            )
        )
    if s.charge is None:
        out.append(Text("Dipole: unknown without formal charges (give --charge EL=Q).", "dim"))
    else:
        out.append(
            Text(
                f"Formal charges {r.charges.text}: net charge {_charge(s.charge)} e, dipole {_dipole(s.dipole, 4)} e·Å "
                f"per cell ({_dipole(s.dipole_per_area, 5)} e/Å) along the outward normal of the top."
            )
        )
    out.append(
        Text(
            "Symmetric: yes, an operation of the slab maps its top onto its bottom."
            if s.symmetric
            else "Symmetric: no."
        )
    )
    shown = len(s.layers) if wide else min(len(s.layers), 12)
    rows = [[f"{la.z:.4f}", composition_label(la.composition)] for la in s.layers[:shown]]
    out.append(_table("Layers, top first", ["z (Å)", ("atoms per cell", "left")], rows))
    if shown < len(s.layers):
        out.append(Text(f"{len(s.layers) - shown} more layers with --wide or --json.", "dim"))
    for note in r.notes:
        out.append(Text(f"Note: {note}.", "dim"))
    for path in r.written:
        out.append(Text(f"Wrote {path} ({r.format})."))
    return out + _caution(r.structure)


_RENDERERS = {
    "StructuresReport": _structures,
    "PlanesReport": _planes,
    "TerminationsReport": _terminations,
    "PolarityReport": _polarity,
    "CorrugationReport": _corrugation,
    "MatchReport": _match,
    "ImageReport": _image,
    "ScreenReport": _screen,
    "SlabReport": _slab,
}


def document(report: Any, *, wide: bool = False) -> tuple[Block, ...]:
    """The blocks (tables and lines) that show ``report`` on a terminal.

    Parameters
    ----------
    report : a record of :mod:`termination.reports` or :class:`termination.identification.likelihood.MatchReport`
    wide : bool
        Add the less-used columns.
    """
    try:
        render = _RENDERERS[type(report).__name__]
    except KeyError:
        raise TypeError(f"no table rendering for {type(report).__name__}") from None
    return tuple(render(report, wide))
