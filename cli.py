"""Command line of ``termination``: parse, call one library function, render.

This is the only module that imports typer and rich.  Library errors
(:class:`termination.errors.TerminationError`) become one line on stderr and
exit code 2; ``--traceback`` (anywhere on the command line) shows the trace.
"""

import functools
import json
import sys
from typing import Annotated

import typer

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    help=(
        "Which face and atomic termination does a cleaved crystal show? Lists candidate "
        "Miller faces of a bulk structure, their terminations, step heights, polarity and "
        "visible corrugation, and ranks them against measurements. Lengths in Å, angles in degrees."
    ),
)

_STATE = {"traceback": False}

HYPOTHESIS_NOTE = (
    "An identification is a ranked hypothesis from a model, not proof: confirm it with an "
    "independent probe (diffraction, spectroscopy)."
)
SAFETY_NOTE = "Cleaving, vacuum work and cryogens can hurt people: follow your lab's safety rules."

# Shared option types -----------------------------------------------------------------
StructureArg = Annotated[
    str,
    typer.Argument(
        help="Structure file (CIF, POSCAR, anything ASE reads) or prototype spec NAME:EL1,EL2 "
        "(see `termination structures`).",
        show_default=False,
    ),
]
LatticeOpt = Annotated[float | None, typer.Option("--a", help="Lattice constant of a prototype, Å.")]
XOpt = Annotated[float | None, typer.Option("--x", help="Free positional parameter of a prototype.")]
SymprecOpt = Annotated[float, typer.Option("--symprec", help="Symmetry tolerance, Å.")]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print the result as JSON on stdout.")]
MaxIndexOpt = Annotated[int, typer.Option("--max-index", help="Largest |h|, |k|, |l| (1 to 12).")]
PlaneOpt = Annotated[
    tuple[int, int, int] | None,
    typer.Option("--plane", help="Face H K L (three integers).", show_default=False),
]
LayerTolOpt = Annotated[float, typer.Option("--layer-tol", help="Atoms within this height form one layer, Å.")]
BondFactorOpt = Annotated[
    float, typer.Option("--bond-factor", help="Bonded if closer than this times the sum of covalent radii.")
]
BondCutoffOpt = Annotated[
    float | None, typer.Option("--bond-cutoff", help="Fixed bond cutoff, Å (replaces --bond-factor).")
]
UnitRatioOpt = Annotated[
    float,
    typer.Option("--unit-ratio", help="Cuts costing more than this times the cheapest lie inside a unit."),
]
VisibleOpt = Annotated[
    list[str] | None, typer.Option("--visible", help="Only this species images in the corrugation; repeatable.")
]
WeightOpt = Annotated[list[str] | None, typer.Option("--weight", help="Visibility weight EL=W; repeatable.")]
MountOpt = Annotated[
    tuple[int, int, int] | None,
    typer.Option("--mount", help="Mount face H K L (three integers).", show_default=False),
]
ChargeOpt = Annotated[
    list[str] | None,
    typer.Option(
        "--charge", help="Formal charge EL=Q (3, -0.5, -1/3); repeatable. Default: file or guess.", show_default=False
    ),
]


def _fail(message):
    typer.echo(f"termination: error: {message}", err=True)
    raise typer.Exit(code=2)


def handle_errors(fn):
    """Turn library errors into one stderr line and exit code 2."""

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        import warnings

        from termination.errors import TerminationError

        try:
            with warnings.catch_warnings():
                if not _STATE["traceback"]:  # numeric warnings would break the one-line rule
                    warnings.simplefilter("ignore", RuntimeWarning)
                return fn(*args, **kwargs)
        except (TerminationError, OSError) as exc:
            if _STATE["traceback"]:
                raise
            _fail(str(exc).splitlines()[0] if str(exc) else type(exc).__name__)

    return wrapper


def _console():
    from rich.console import Console

    return Console(highlight=False, soft_wrap=False, width=max(100, _terminal_width()))


def _terminal_width():
    import shutil

    return shutil.get_terminal_size((120, 24)).columns


def emit_json(record):
    """Write the JSON serialisation of a result record to stdout."""
    from termination.serialise import to_jsonable

    typer.echo(json.dumps(to_jsonable(record), indent=2))


def hkl_text(hkl):
    """'(1 -1 0)' style Miller index."""
    from termination.surface.miller import hkl_text as text

    return text(hkl)


def uvw_text(uvw):
    return "[" + " ".join(str(int(v)) for v in uvw) + "]"


def triple(values):
    """``--mount 0 0 1`` style option as a tuple, or None."""
    return None if values is None else tuple(int(v) for v in values)


def load(structure, a=None, x=None, symprec=1e-3):
    from termination.structures import load_structure

    return load_structure(structure, a=a, x=x, symprec=symprec)


def print_structure(console, summary):
    console.print(
        f"[bold]{summary.name}[/bold] ({summary.origin or summary.formula}) "
        f"{summary.spacegroup} (No. {summary.spacegroup_number}), {summary.natoms} atoms, "
        f"a={summary.a:.4f} b={summary.b:.4f} c={summary.c:.4f} Å, "
        f"α={summary.alpha:.2f} β={summary.beta:.2f} γ={summary.gamma:.2f}°"
    )
    if summary.note:
        console.print(f"[dim]Note: {summary.note}[/dim]")


def print_cautions(console, summary=None, hypothesis=False):
    if summary is not None and summary.caution:
        console.print(f"[yellow]{summary.caution}[/yellow]")
    if hypothesis:
        console.print(f"[dim]{HYPOTHESIS_NOTE}[/dim]")


# Commands ----------------------------------------------------------------------------


@app.command()
@handle_errors
def structures(json_out: JsonOpt = False):
    """List the built-in prototypes with their Wyckoff sites."""
    from termination.structures import PROTOTYPES

    rows = [
        {
            "name": p.name,
            "elements": list(p.roles),
            "spacegroup": p.spacegroup,
            "number": p.number,
            "sites": p.wyckoff,
            "free_parameter_x": p.default_x,
            "example": p.example,
            "description": p.description,
        }
        for p in PROTOTYPES.values()
    ]
    if json_out:
        typer.echo(json.dumps({"prototypes": rows}, indent=2))
        return
    from rich.table import Table

    table = Table(title="Built-in prototypes (NAME:EL1,EL2,... --a A [--x X])")
    for col in ("name", "elements", "space group", "Wyckoff sites", "x", "example"):
        table.add_column(col)
    for r in rows:
        table.add_row(
            r["name"],
            ",".join(r["elements"]),
            f"{r['spacegroup']} ({r['number']})",
            r["sites"],
            "" if r["free_parameter_x"] is None else f"{r['free_parameter_x']:g}",
            r["example"],
        )
    _console().print(table)


@app.command()
@handle_errors
def planes(
    structure: StructureArg,
    a: LatticeOpt = None,
    x: XOpt = None,
    max_index: MaxIndexOpt = 3,
    mount: MountOpt = None,
    charge: ChargeOpt = None,
    symprec: SymprecOpt = 1e-3,
    json_out: JsonOpt = False,
):
    """Symmetry-distinct faces with spacing d, tilt to the mount face, surface mesh and polarity."""
    from termination.bulk.charges import parse_charge_options
    from termination.reports import planes_report

    crystal = load(structure, a, x, symprec)
    report = planes_report(
        crystal, max_index=max_index, mount=triple(mount), charges=parse_charge_options(charge) or None
    )
    if json_out:
        emit_json(report)
        return
    from rich.table import Table

    console = _console()
    print_structure(console, report.structure)
    title = f"Faces up to index {report.max_index}"
    if report.mount:
        title += f", tilt to mount {hkl_text(report.mount)}"
    table = Table(title=title)
    for col in ("face", "d (Å)", "mult."):
        table.add_column(col, justify="right", no_wrap=True)
    if report.mount:
        table.add_column("tilt (°)", justify="right")
        table.add_column("variant", justify="right", no_wrap=True)
        table.add_column("axis", justify="right", no_wrap=True)
    for col in ("mesh a (Å)", "b (Å)", "γ (°)", "area (Å²)", "terms", "min step (Å)", "polar"):
        table.add_column(col, justify="right")
    for p in report.planes:
        cells = [hkl_text(p.hkl), f"{p.d:.4f}", str(p.multiplicity)]
        if report.mount:
            cells += [
                f"{p.tilt:.2f}",
                hkl_text(p.tilt_variant),
                "—" if p.tilt_axis is None else uvw_text(p.tilt_axis),
            ]
        m = p.mesh
        cells += [
            f"{m.a:.4f}",
            f"{m.b:.4f}",
            f"{m.gamma:.2f}",
            f"{m.area:.3f}",
            str(p.terminations),
            f"{p.smallest_step:.3f}",
            "—" if p.polar is None else ("yes" if p.polar else "no"),
        ]
        table.add_row(*cells)
    console.print(table)
    if report.charges is None:
        console.print(
            "[dim]polar: unknown without formal charges; give --charge EL=Q (see `termination polarity`).[/dim]"
        )
    else:
        console.print(
            f"[dim]polar: every termination Tasker type III; charges {report.charges.text} "
            f"({report.charges.method}).[/dim]"
        )
        if report.charges.caution:
            console.print(f"[dim]Note: {report.charges.caution}.[/dim]")
    print_cautions(console, report.structure)


def parse_assignments(items, option, error="MeasurementError"):
    """``["Na=0.2", "Cl=1"]`` -> ``{"Na": 0.2, "Cl": 1.0}``; one clear error per bad item."""
    import math

    from termination import errors
    from termination.bulk.elements import check_symbol

    exc = getattr(errors, error)
    out = {}
    for item in items or ():
        name, sep, value = str(item).partition("=")
        if not sep:
            raise exc(f"{option} needs ELEMENT=VALUE, got {item!r}")
        try:
            symbol = check_symbol(name)
        except errors.StructureError as e:
            raise exc(f"{option} {item!r}: {e}") from None
        try:
            number = float(value)
        except ValueError:
            raise exc(f"{option} {item!r}: {value!r} is not a number") from None
        if not math.isfinite(number):
            raise exc(f"{option} {item!r}: value must be finite")
        out[symbol] = number
    return out


def require_plane(plane):
    if plane is None:
        from termination.errors import PlaneError

        raise PlaneError("--plane H K L is required")
    return triple(plane)


def composition_text(comp):
    from termination.bulk.elements import composition_label

    return composition_label(comp)


@app.command()
@handle_errors
def terminations(
    structure: StructureArg,
    plane: PlaneOpt = None,
    a: LatticeOpt = None,
    x: XOpt = None,
    layer_tol: LayerTolOpt = 0.1,
    bond_factor: BondFactorOpt = 1.15,
    bond_cutoff: BondCutoffOpt = None,
    unit_ratio: UnitRatioOpt = 1.8,
    max_multiple: Annotated[
        int, typer.Option("--max-multiple", help="Steps listed up to this many extra periods d.")
    ] = 3,
    symprec: SymprecOpt = 1e-3,
    json_out: JsonOpt = False,
):
    """Atomic layers, terminations and allowed step heights of one face."""
    from termination.reports import terminations_report

    crystal = load(structure, a, x, symprec)
    report = terminations_report(
        crystal,
        require_plane(plane),
        layer_tol_angstrom=layer_tol,
        bond_factor=bond_factor,
        bond_cutoff_angstrom=bond_cutoff,
        unit_ratio=unit_ratio,
        max_multiple=max_multiple,
    )
    if json_out:
        emit_json(report)
        return
    from rich.table import Table

    console = _console()
    print_structure(console, report.structure)
    m = report.mesh
    console.print(
        f"Face {hkl_text(report.plane)}: d = {report.d:.4f} Å, mesh {m.a:.4f} × {m.b:.4f} Å, "
        f"γ = {m.gamma:.2f}°, {m.area:.3f} Å² per surface cell"
    )
    lt = Table(title=f"Layers of one period (tolerance {report.layer_tol_angstrom:g} Å)")
    for col in ("layer", "depth (Å)", "composition per cell"):
        lt.add_column(col, justify="right")
    for i, layer in enumerate(report.layers):
        lt.add_row(str(i), f"{layer.depth:.4f}", composition_text(layer.composition))
    console.print(lt)
    tt = Table(title="Terminations (top layer or unit), by broken-bond density")
    for col in (
        "id",
        "label",
        "layers",
        "depth (Å)",
        "broken bonds/nm²",
        "weighted/nm²",
        "equivalent to",
        "apparent lattice",
    ):
        tt.add_column(col, justify="right")
    for t, lat in zip(report.terminations, report.apparent_lattices):
        eq = "—" if t.equivalent_to is None else f"{t.equivalent_to} ({t.relation})"
        tt.add_row(
            t.id,
            t.label,
            ",".join(map(str, t.layers)),
            f"{t.depth:.4f}",
            f"{t.broken_bonds_per_nm2:.2f}",
            f"{t.weighted_bonds_per_nm2:.2f}",
            eq,
            lattice_text(lat),
        )
    console.print(tt)
    console.print(
        "[dim]Apparent lattice: what a topograph shows in the default corrugation model (all species "
        "alike, top unit, λ = 0.5 Å); see `termination corrugation`.[/dim]"
    )
    st = Table(title="Allowed step heights, lower terrace → upper terrace (Å)")
    for col in ("from", "to", "heights"):
        st.add_column(col, justify="right" if col != "heights" else "left")
    for step in report.steps:
        st.add_row(step.from_label, step.to_label, "  ".join(f"{h:.3f}" for h in step.heights))
    console.print(st)
    print_cautions(console, report.structure)


DEMO_STRUCTURE = "half-heusler:Ti,Ni,Sn"
DEMO_MEASUREMENT = "demo_TiNiSn_001.toml"


def _measurement_from_options(mount, max_index, tilt, spacing, row_angle, step, steps_file, visible, weight, decay):
    from termination.identification.measurement import Measurement, parse_value, read_steps

    steps = tuple(parse_value(v) for v in step or ())
    if steps_file:
        from termination.errors import MeasurementError

        from_file = tuple(read_steps(steps_file))
        if not from_file:
            raise MeasurementError(f"no step heights in {steps_file}")
        steps = steps + from_file
    return Measurement(
        mount=None if mount is None else tuple(int(v) for v in mount),
        max_index=max_index,
        tilt=None if tilt is None else parse_value(tilt),
        row_angle=None if row_angle is None else parse_value(row_angle),
        spacings=tuple(parse_value(v) for v in spacing or ()),
        steps=steps,
        visible=tuple(_symbol(v, "--visible") for v in visible or ()),
        weights=parse_assignments(weight, "--weight"),
        decay_length=decay,
    )


def _symbol(text, option):
    from termination.bulk.elements import check_symbol
    from termination.errors import MeasurementError, StructureError

    try:
        return check_symbol(text)
    except StructureError as exc:
        raise MeasurementError(f"{option} {text!r}: {exc}") from None


def _fmt_criterion(c, unit, digits=2):
    if c is None:
        return "—"
    if c.predicted is None:
        return f"{c.measured:.{digits}f}{unit}: no prediction"
    return f"{c.predicted:.{digits}f}{unit} ({c.residual:+.1f}σ)"


def _steps_summary(steps):
    """'4/5 within 2σ, worst +3.1σ' for the step column."""
    if not steps:
        return "—"
    res = [abs(c.residual) for c in steps if c.residual is not None]
    within = sum(r <= 2 for r in res)
    worst = max(steps, key=lambda c: abs(c.residual) if c.residual is not None else 0)
    return f"{within}/{len(steps)} within 2σ, worst {worst.residual:+.1f}σ"


@app.command()
@handle_errors
def match(
    structure: Annotated[
        str | None, typer.Argument(help="Structure file or prototype spec (omit with --demo).", show_default=False)
    ] = None,
    demo: Annotated[
        bool, typer.Option("--demo", help="Run the built-in scenario: a TiNiSn crystal cleaved from a (001) mount.")
    ] = False,
    measurement: Annotated[
        str | None, typer.Option("--measurement", help="Measurement file (TOML); options override it.")
    ] = None,
    mount: MountOpt = None,
    tilt: Annotated[
        str | None, typer.Option("--tilt", help="Terrace inclination to the mount face, e.g. 30+-3 (°).")
    ] = None,
    spacing: Annotated[
        list[str] | None, typer.Option("--spacing", help="Corrugation periodicity, e.g. 4.6+-0.2 (Å); repeatable.")
    ] = None,
    row_angle: Annotated[
        str | None, typer.Option("--row-angle", help="Angle between corrugation rows, e.g. 60+-3 (°).")
    ] = None,
    step: Annotated[
        list[str] | None, typer.Option("--step", help="Step height, e.g. 1.25+-0.1 (Å); repeatable.")
    ] = None,
    steps: Annotated[
        str | None, typer.Option("--steps", help="File of step heights, one per line (optional sigma column).")
    ] = None,
    max_index: Annotated[
        int | None, typer.Option("--max-index", help="Largest Miller index of the candidates (default 3).")
    ] = None,
    visible: VisibleOpt = None,
    weight: WeightOpt = None,
    decay_length: Annotated[
        float | None, typer.Option("--decay-length", help="Decay of visibility with depth, Å.")
    ] = None,
    charge: ChargeOpt = None,
    flat_prior: Annotated[bool, typer.Option("--flat-prior", help="Give every candidate the same prior.")] = False,
    no_reconstructions: Annotated[
        bool, typer.Option("--no-reconstructions", help="Do not add reconstruction cells of polar terminations.")
    ] = False,
    top: Annotated[int, typer.Option("--top", help="Show this many candidates.")] = 10,
    a: LatticeOpt = None,
    x: XOpt = None,
    symprec: SymprecOpt = 1e-3,
    json_out: JsonOpt = False,
):
    """Rank which face and termination match the measured tilt, corrugation and steps."""
    from termination.errors import MeasurementError
    from termination.identification.likelihood import match as run_match
    from termination.identification.measurement import Measurement, merge, read_measurement
    from termination.identification.model import MatchModel

    if demo:
        from termination.structures import bundled

        if structure is not None:
            raise MeasurementError(f"--demo runs its own scenario on {DEMO_STRUCTURE}; drop {structure!r} or --demo")
        structure = DEMO_STRUCTURE
        measurement = measurement or bundled(DEMO_MEASUREMENT)
    if structure is None:
        raise MeasurementError("give a STRUCTURE (file or prototype spec), or --demo")
    base = read_measurement(measurement) if measurement else Measurement()
    cli_values = _measurement_from_options(
        mount, max_index, tilt, spacing, row_angle, step, steps, visible, weight, decay_length
    )
    meas = merge(base, cli_values)
    crystal = load(structure, a, x, symprec)
    from termination.bulk.charges import parse_charge_options

    charges = parse_charge_options(charge) or None
    report = run_match(
        crystal,
        meas,
        top=top,
        model=MatchModel(flat_prior=flat_prior),
        reconstructions=not no_reconstructions,
        charges=charges,
    )
    if json_out:
        emit_json(report)
        return
    from rich.table import Table

    console = _console()
    print_structure(console, report.structure)
    e = report.measurement
    parts = []
    if report.mount:
        parts.append(f"mount {hkl_text(report.mount)}")
    if e["tilt"]:
        parts.append(f"tilt {e['tilt']['value']:g}±{e['tilt']['sigma']:g}°")
    if e["spacings"]:
        parts.append("spacings " + ", ".join(f"{v['value']:g}±{v['sigma']:g}" for v in e["spacings"]) + " Å")
    if e["row_angle"]:
        parts.append(f"row angle {e['row_angle']['value']:g}±{e['row_angle']['sigma']:g}°")
    if e["steps"]:
        parts.append("steps " + ", ".join(f"{v['value']:g}" for v in e["steps"]) + " Å")
    console.print("Measured: " + "; ".join(parts))
    table = Table(title="Candidate faces and terminations, most probable first")
    for col in ("rank", "face", "termination", "cell", "p", "tilt (°)", "spacings (Å)", "row angle (°)", "steps (Å)"):
        table.add_column(col, justify="right", no_wrap=col in ("face", "termination", "cell"))
    for r in report.candidates:
        sp = ", ".join(_fmt_criterion(c, "") for c in r.spacings) or "—"
        st = _steps_summary(r.steps)
        table.add_row(
            str(r.rank),
            hkl_text(r.hkl),
            r.termination,
            r.cell or "1×1",
            f"{r.probability:.3f}",
            _fmt_criterion(r.tilt, "", 1),
            sp,
            _fmt_criterion(r.row_angle, "", 1),
            st,
        )
    console.print(table)
    console.print(
        "[dim]Each cell: predicted value (residual in σ); steps: measured heights explained within 2σ. "
        "--json gives every criterion.[/dim]"
    )
    console.print(
        "Faces, over their terminations: "
        + ", ".join(f"{hkl_text(f.hkl)} {f.probability:.2f}" for f in report.faces[:4] if f.probability >= 0.005)
    )
    console.print(f"[bold]{report.verdict}[/bold]")
    if report.warning:
        console.print(f"[yellow]{report.warning}[/yellow]")
    for note in report.notes:
        console.print(f"[dim]{note}[/dim]")
    print_cautions(console, report.structure)
    console.print(f"[dim]{SAFETY_NOTE}[/dim]")


def length_text(value, digits=3):
    """A length in Å, or '—' when it is unbounded (stripes, flat patterns)."""
    import math

    return f"{value:.{digits}f}" if math.isfinite(value) else "—"


def lattice_text(lattice):
    """'2.820 × 2.820 Å, 90.0°' for an apparent lattice."""
    return f"{length_text(lattice.a)} × {length_text(lattice.b)} Å, {lattice.gamma:.1f}°"


def spot_text(g):
    """'(1/2 0)' for a spot index in units of a*, b*."""
    from fractions import Fraction

    return "(" + " ".join(str(Fraction(float(v)).limit_denominator(24)) for v in g) + ")"


@app.command()
@handle_errors
def corrugation(
    structure: StructureArg,
    plane: PlaneOpt = None,
    termination: Annotated[
        str | None, typer.Option("--termination", help="Termination id (T2) or label (SrO); default all.")
    ] = None,
    visible: VisibleOpt = None,
    weight: WeightOpt = None,
    decay_length: Annotated[
        float, typer.Option("--decay-length", help="Decay length λ of the depth weight exp(-depth/λ), Å.")
    ] = 0.5,
    depth: Annotated[
        float | None,
        typer.Option("--depth", help="Atoms down to this depth below the top layer image, Å (default: the top unit)."),
    ] = None,
    threshold: Annotated[
        float, typer.Option("--threshold", help="A spot is visible when |F(G)|/F(0) exceeds this.")
    ] = 0.05,
    reconstructions: Annotated[
        bool,
        typer.Option(
            "--reconstructions/--no-reconstructions",
            help="Add the reconstruction cells of polar terminations (polarity step).",
        ),
    ] = True,
    charge: ChargeOpt = None,
    max_cell: Annotated[
        int, typer.Option("--max-cell", help="Largest reconstruction cell, in 1×1 cells (1 to 12).")
    ] = 4,
    a: LatticeOpt = None,
    x: XOpt = None,
    symprec: SymprecOpt = 1e-3,
    json_out: JsonOpt = False,
):
    """Fourier spots, apparent lattice, maxima and rows a topograph of each termination should show."""
    from termination.bulk.charges import parse_charge_options
    from termination.reports import corrugation_report

    crystal = load(structure, a, x, symprec)
    from termination.surface.corrugation import Visibility

    visibility = Visibility(
        visible=visible or None,
        weights=parse_assignments(weight, "--weight", "StructureError"),
        decay_length_angstrom=decay_length,
        max_depth_angstrom=depth,
        threshold=threshold,
    )
    report = corrugation_report(
        crystal,
        require_plane(plane),
        termination,
        visibility=visibility,
        reconstructions=reconstructions,
        charges=parse_charge_options(charge) or None,
        max_cell=max_cell,
    )
    if json_out:
        emit_json(report)
        return
    from rich.table import Table

    console = _console()
    print_structure(console, report.structure)
    m = report.mesh
    weights = ", ".join(f"{el}={w:g}" for el, w in report.weights.items())
    seen = "all species" if report.visible is None else "only " + ", ".join(report.visible)
    console.print(
        f"Face {hkl_text(report.plane)}: mesh {m.a:.4f} × {m.b:.4f} Å, γ = {m.gamma:.2f}°. "
        f"Imaging: {seen}{'; weights ' + weights if weights else ''}; λ = {report.decay_length_angstrom:g} Å; "
        + ("top unit" if report.max_depth_angstrom is None else f"down to {report.max_depth_angstrom:g} Å")
        + f"; spots above {report.threshold:g} F(0)."
    )
    table = Table(title="Apparent lattice per termination (dual of the visible spots; Å, degrees)")
    for col in ("id", "label", "cell", "a", "b", "γ", "type", "maxima", "row spacings", "row angles"):
        if col == "type":
            table.add_column(col, justify="right", min_width=11, overflow="fold")
        else:
            table.add_column(col, justify="right", no_wrap=True)
    for t in report.terminations:
        for p in (t,) + t.reconstructions:
            lat = p.apparent_lattice
            table.add_row(
                t.id if p is t else "",
                t.label if p is t else "",
                p.cell or "1×1",
                length_text(lat.a),
                length_text(lat.b),
                f"{lat.gamma:.1f}",
                p.lattice_type,
                length_text(p.neighbour_distance),
                " ".join(length_text(s, 2) for s in p.row_spacings) or "—",
                " ".join(f"{v:.0f}" for v in p.row_angles) or "—",
            )
    console.print(table)
    spots = Table(title="Lowest-order visible spots")
    for col in ("id", "cell", "(h k) in a*, b*", "|G| (1/Å, no 2π)", "|F|/F(0)"):
        spots.add_column(col, justify="right")
    for t in report.terminations:
        # Two shells of the 1×1 pattern, the first (fractional-order) shell of each reconstruction.
        for p in (t,) + t.reconstructions:
            shells = sorted({round(s.length, 6) for s in p.spots})[: 2 if p is t else 1]
            for s in p.spots:
                if round(s.length, 6) in shells:
                    spots.add_row(t.id, p.cell or "1×1", spot_text(s.g), f"{s.length:.4f}", f"{s.intensity:.3f}")
    console.print(spots)
    for note in report.notes:
        console.print(f"[dim]{note}[/dim]")
    console.print(
        "[dim]A geometric model: which species images at a given bias is not predicted; "
        "try --visible and --weight. --json lists every spot.[/dim]"
    )
    print_cautions(console, report.structure)


def fraction_text(f):
    """'1/2' for 0.5: a compensation as a small fraction."""
    from fractions import Fraction

    fr = Fraction(abs(f)).limit_denominator(24)
    return f"{fr.numerator}/{fr.denominator}" if abs(float(fr) - abs(f)) < 1e-6 else f"{abs(f):.4g}"


def compensation_text(t):
    """'remove 1/2 of the top layer (Na)' for a termination's polarity."""
    if t.tasker_type != "III":
        return "none needed"
    if t.compensation is None:
        return "not by the top sites"
    verb = "remove" if t.compensation < 0 else "add"
    return f"{verb} {fraction_text(t.compensation)} of the {t.sites} ({t.site_label})"


@app.command()
@handle_errors
def polarity(
    structure: StructureArg,
    plane: PlaneOpt = None,
    max_index: Annotated[
        int | None,
        typer.Option("--max-index", help="All faces up to this index (1 to 12; default 2).", show_default=False),
    ] = None,
    charge: ChargeOpt = None,
    max_cell: Annotated[
        int, typer.Option("--max-cell", help="Largest reconstruction cell, in 1×1 cells (1 to 12).")
    ] = 4,
    a: LatticeOpt = None,
    x: XOpt = None,
    symprec: SymprecOpt = 1e-3,
    json_out: JsonOpt = False,
):
    """Layer charges, dipole, Tasker type, compensating charge and reconstruction cells per termination."""
    from termination.bulk.charges import parse_charge_options
    from termination.reports import polarity_report

    crystal = load(structure, a, x, symprec)
    report = polarity_report(
        crystal,
        plane=triple(plane),
        max_index=max_index,
        charges=parse_charge_options(charge) or None,
        max_cell=max_cell,
    )
    if json_out:
        emit_json(report)
        return
    from rich.table import Table

    console = _console()
    print_structure(console, report.structure)
    q = report.charges
    console.print(f"Formal charges: {q.text} ({q.method}).")
    if q.caution:
        console.print(f"[yellow]Note: {q.caution}.[/yellow]")
    shown = 6
    for f in report.faces:
        table = Table(
            title=f"{hkl_text(f.hkl)}: d = {f.d:.4f} Å, {f.area:.3f} Å² per cell, "
            + ("polar" if f.polar else "not polar")
        )
        for col in (
            "id",
            "label",
            "Tasker",
            "layer charges (e/cell, top first)",
            "μ/A (e/Å)",
            "Δq (e/cell)",
            "compensation",
            "cells (best first)",
        ):
            table.add_column(col, justify="right" if col not in ("compensation", "cells (best first)") else "left")
        for t in f.terminations:
            cells = ", ".join(r.wood or matrix_text(r.matrix) for r in t.reconstructions[:3])
            if len(t.reconstructions) > 3:
                cells += f", … ({len(t.reconstructions)})"
            table.add_row(
                t.id,
                t.label,
                t.tasker_type,
                "  ".join(charge_text(L.charge) for L in t.layers),
                f"{t.dipole_per_area:+.4f}",
                f"{t.compensating_charge:+.3f}",
                compensation_text(t),
                cells or (t.note or "—") if t.tasker_type == "III" else "—",
            )
        console.print(table)
        for t in f.terminations:
            if not t.reconstructions:
                continue
            rt = Table(title=f"{hkl_text(f.hkl)} {t.id} {t.label}: cells that {compensation_text(t)}")
            for col in ("cell", "matrix", "sites", "changed", "patterns", "energy (eV/site)"):
                rt.add_column(col, justify="right")
            for r in t.reconstructions[:shown]:
                rt.add_row(
                    r.wood or "—",
                    matrix_text(r.matrix),
                    str(r.sites),
                    f"{r.changed} ({r.mode})",
                    str(r.patterns),
                    f"{r.score:.3f}",
                )
            console.print(rt)
            if len(t.reconstructions) > shown:
                console.print(
                    f"[dim]… {len(t.reconstructions) - shown} more cells up to index {report.max_cell} in --json.[/dim]"
                )
    console.print(
        f"[dim]μ = Σ q z over the repeat unit, z the depth below the top layer; Δq = μ/d is the charge "
        f"the top layer must gain (> 0) or lose (< 0). Patterns ranked by: {report.criterion}.[/dim]"
    )
    print_cautions(console, report.structure, hypothesis=True)


def charge_text(q):
    """'+3', '-0.5', '0' for a layer charge (e)."""
    return "0" if abs(q) < 5e-7 else f"{q:+.3g}"


def matrix_text(m):
    """'(2 0 / 0 1)' for a supercell matrix (rows in mesh units)."""
    return f"({m[0][0]} {m[0][1]} / {m[1][0]} {m[1][1]})"


def _refuse_existing(path, force, inputs):
    """No output may replace an input; an existing file only with --force."""
    from pathlib import Path

    from termination.errors import MeasurementError

    if path is None:
        return
    target = Path(path).resolve()
    if any(target == Path(p).resolve() for p in inputs):
        raise MeasurementError(f"{path} is an input file; choose another output name")
    if target.exists() and not force:
        raise MeasurementError(f"{path} exists; pass --force to overwrite it")


def _image_progress(shape):
    """A rich progress bar on stderr for large images, else a no-op context."""
    import contextlib

    if shape[0] * shape[1] < 1024 * 1024:
        return contextlib.nullcontext(None)
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    return Progress(
        TextColumn("{task.description}"), BarColumn(), TimeElapsedColumn(), console=Console(stderr=True), transient=True
    )


def pm_text(value, sigma, digits=3):
    """'4.000 ± 0.036' or '—'."""
    if value is None:
        return "—"
    return f"{value:.{digits}f}" if sigma is None else f"{value:.{digits}f} ± {sigma:.{digits}f}"


@app.command()
@handle_errors
def image(
    file: Annotated[str, typer.Argument(help="Height map: .npy, .tif/.tiff, or a text matrix.", show_default=False)],
    pixel_size: Annotated[
        str | None,
        typer.Option(
            "--pixel-size",
            help="Pixel size with unit, e.g. 0.05nm, or x,y: 0.05nm,0.06nm "
            "(default: pixel_size in the sidecar FILE.toml).",
        ),
    ] = None,
    z_unit: Annotated[
        str | None,
        typer.Option(
            "--z-unit",
            help="Unit of the stored heights: nm, A, pm, or per count e.g. 0.01nm (default: z_unit in the sidecar).",
        ),
    ] = None,
    out: Annotated[
        str | None, typer.Option("--out", help="Write a measurement file (TOML) for `match --measurement`.")
    ] = None,
    steps_out: Annotated[
        str | None, typer.Option("--steps-out", help="Write the step heights for `match --steps`.")
    ] = None,
    force: Annotated[bool, typer.Option("--force", help="Overwrite existing output files.")] = False,
    mount: MountOpt = None,
    min_step: Annotated[float, typer.Option("--min-step", help="Smallest step height to resolve, Å.")] = 0.5,
    json_out: JsonOpt = False,
):
    """Tilt, lattice and step heights of a topograph (height map)."""
    from pathlib import Path

    import numpy as np

    from termination.errors import MeasurementError
    from termination.identification.measurement import Measurement, write_measurement, write_steps
    from termination.identification.measurement import measurement_from_image as to_measurement
    from termination.imaging.analysis import analyse_heightmap
    from termination.imaging.fourier import DRIFT_NOTE
    from termination.imaging.reading import read_heightmap, sidecar_path

    inputs = (file, sidecar_path(file))
    if out and steps_out and Path(out).resolve() == Path(steps_out).resolve():
        raise MeasurementError(f"--out and --steps-out name the same file {out}; choose two names")
    _refuse_existing(out, force, inputs)
    _refuse_existing(steps_out, force, inputs)
    Measurement(mount=triple(mount))  # a bad --mount fails before the analysis, with or without --out
    hm = read_heightmap(file, pixel_size=pixel_size, z_unit=z_unit)
    with _image_progress(hm.shape) as bar:
        task = None if bar is None else bar.add_task("analysing", total=1.0)

        def progress(fraction, stage):
            if bar is not None:
                bar.update(task, completed=fraction, description=stage)

        result = analyse_heightmap(hm.heights, hm.pixel_size, min_step_angstrom=min_step, progress=progress)
    ny, nx = hm.shape
    source = f"from {file} ({nx} x {ny} px, pixel {hm.pixel_size[0]:g} x {hm.pixel_size[1]:g} Å)"
    written = []
    if out:
        comment = source + ("\n" + DRIFT_NOTE if result.lattice is not None else "")
        write_measurement(out, to_measurement(result, mount=triple(mount)), force=force, comment=comment)
        written.append(("measurement file", out))
    if steps_out:
        write_steps(steps_out, to_measurement(result).steps, force=force, comment=source)
        written.append(("step list", steps_out))
    if json_out:
        emit_json(result)
        return
    from rich.table import Table

    console = _console()
    console.print(
        f"[bold]{file}[/bold]: {nx} × {ny} px, pixel {hm.pixel_size[0]:g} × {hm.pixel_size[1]:g} Å, "
        f"heights {float(np.nanmin(hm.heights)):.2f} to {float(np.nanmax(hm.heights)):.2f} Å"
    )
    t = result.tilt
    table = Table(title="Tilt relative to the scanner plane")
    for col in ("plane", "tilt (°)", "azimuth (°)"):
        table.add_column(col, justify="right")
    table.add_row("macroscopic (all pixels)", f"{t.macroscopic:.3f}", f"{t.azimuth:.1f}")
    table.add_row(
        "terrace (identifies the face)",
        pm_text(t.terrace, t.terrace_sigma),
        "—" if t.terrace_azimuth is None else f"{t.terrace_azimuth:.1f}",
    )
    console.print(table)
    lat = result.lattice
    lt = Table(title="Lattice (two shortest periodicities, in the terrace plane)")
    for col in ("a (Å)", "b (Å)", "γ (°)", "direction of a (°)", "peaks"):
        lt.add_column(col, justify="right")
    if lat is None:
        lt.add_row("not found", "—", "—", "—", "—")
    else:
        lt.add_row(
            pm_text(lat.a, lat.sigma_a),
            pm_text(lat.b, lat.sigma_b),
            pm_text(lat.gamma, lat.sigma_gamma, 2),
            f"{lat.direction:.1f}",
            str(lat.peaks),
        )
    console.print(lt)
    st = Table(title=f"Steps ({result.terraces} terraces)")
    st.add_column("#", justify="right")
    st.add_column("height (Å)", justify="right")
    for i, s in enumerate(result.steps, 1):
        st.add_row(str(i), pm_text(s.height, s.sigma))
    if not result.steps:
        st.add_row("—", "none found")
    console.print(st)
    for note in result.notes:
        console.print(f"[dim]{note}[/dim]")
    for what, path in written:
        console.print(f"Wrote {what} {path}")


# Entry point -------------------------------------------------------------------------


def main(argv=None):
    """Console-script entry point: one-line errors for bad options too."""
    args = list(sys.argv[1:] if argv is None else argv)
    if "--traceback" in args:
        _STATE["traceback"] = True
        args = [v for v in args if v != "--traceback"]
    command = typer.main.get_command(app)
    try:
        code = command.main(args=args, prog_name="termination", standalone_mode=False)
    except typer.Exit as exc:  # older releases re-raise instead of returning the code
        sys.exit(getattr(exc, "exit_code", exc.args[0] if exc.args else 0))
    except typer.Abort:
        typer.echo("termination: aborted", err=True)
        sys.exit(130)
    except Exception as exc:  # click usage errors (typer vendors click in new releases)
        if _STATE["traceback"] or not hasattr(exc, "format_message"):
            raise
        typer.echo(f"termination: error: {exc.format_message()}", err=True)
        sys.exit(2)
    sys.exit(code if isinstance(code, int) else 0)


if __name__ == "__main__":
    main()
