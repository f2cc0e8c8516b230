"""Command line of ``termination``: parse, call one library function, render the record.

This is the only module that imports typer and rich.  Each command parses
its options, calls one builder of :mod:`termination.reports` (or
:func:`termination.identification.likelihood.match`) and renders the record
it gets back: as tables (:mod:`termination.tables`) or, with ``--json``, as
its serialisation (:mod:`termination.serialise`).  Library errors
(:class:`termination.errors.TerminationError`) and any unexpected exception
become one line on stderr and exit code 2; ``--traceback`` anywhere on the
command line shows the trace.

In the repository this file sits at the top level; it is installed as
``termination.cli``.
"""

from __future__ import annotations

import contextlib
import contextvars
import copy
import dataclasses
import functools
import json
import re
import sys
from collections.abc import Callable
from dataclasses import dataclass
from typing import Annotated, Any, TypeVar

import typer
import typer.core

from termination import __version__
from termination.defaults import (
    BOND_FACTOR,
    DECAY_LENGTH_ANGSTROM,
    LAYER_TOL_ANGSTROM,
    MAX_CELL,
    MAX_INDEX,
    MAX_MULTIPLE,
    MAX_NAN_FRACTION,
    MIN_STEP_ANGSTROM,
    SLAB_LAYERS,
    SLAB_VACUUM_ANGSTROM,
    SPOT_THRESHOLD,
    SYMPREC_ANGSTROM,
    UNIT_RATIO,
)
from termination.figures.canvas import FORMATS
from termination.identification.model import MatchModel

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
    help=(
        "Which face and atomic termination does a cleaved crystal show? Lists the Miller faces of a bulk "
        "structure with their tilt to the mount face, mesh, terminations, step heights, polarity and "
        "visible corrugation, and ranks them against measured tilt, corrugation and steps. "
        "Lengths in Å, angles in degrees."
    ),
)


#: Options that take a face: three integers H K L, or four H K I L (Miller-Bravais).
FACE_OPTIONS = ("--plane", "--mount")
_INTEGER = re.compile(r"[+-]?\d+")
_INTEGERS = re.compile(r"\s*[+-]?\d+(\s+[+-]?\d+)+\s*")


def _join_face_values(args: list[str]) -> list[str]:
    """The command line with the three or four integers after each face option joined into one value.

    A face option takes a variable number of values, which the option parser
    cannot: ``--mount 1 0 -1 0`` becomes ``--mount "1 0 -1 0"`` (the quoted
    form is accepted as given).
    """
    out: list[str] = []
    i = 0
    while i < len(args):
        token = args[i]
        out.append(token)
        i += 1
        if token in FACE_OPTIONS:
            if i < len(args) and _INTEGERS.fullmatch(args[i]):  # given as one quoted value, '1 0 -1 0'
                out.append(args[i])
                i += 1
                continue
            values: list[str] = []
            while i < len(args) and len(values) < 4 and _INTEGER.fullmatch(args[i]):
                values.append(args[i])
                i += 1
            out.append(" ".join(values))
    return out


class _Command(typer.core.TyperCommand):
    """Usage lines write a required argument as STRUCTURE, not {STRUCTURE}; faces take 3 or 4 values.

    A command with the ``--three-index`` option (:data:`ThreeIndex`) runs
    within :func:`termination.surface.miller.three_index_notation` when it is
    given: faces and directions of hexagonal and trigonal lattices are then
    written (h k l) and [u v w] instead of (h k i l) and [u v t w].
    """

    def collect_usage_pieces(self, ctx: Any) -> list[str]:
        pieces = super().collect_usage_pieces(ctx)
        return [p[1:-1] if p.startswith("{") and p.endswith("}") else p for p in pieces]

    def parse_args(self, ctx: Any, args: list[str]) -> list[str]:
        return list(super().parse_args(ctx, _join_face_values(list(args))))

    def invoke(self, ctx: Any) -> Any:
        from termination.surface.miller import three_index_notation

        with three_index_notation(bool(ctx.params.get("three_index", False))):
            return super().invoke(ctx)


command = functools.partial(app.command, cls=_Command)
_TRACEBACK: contextvars.ContextVar[bool] = contextvars.ContextVar("traceback", default=False)
_ARGV: contextvars.ContextVar[tuple[str, ...] | None] = contextvars.ContextVar("argv", default=None)
DEMO_STRUCTURE = "half-heusler:Ti,Ni,Sn"
DEMO_MEASUREMENT = "demo_TiNiSn_001.toml"

# --------------------------------------------------------------------------- shared options

Structure = Annotated[
    str,
    typer.Argument(
        metavar="STRUCTURE",
        help="Structure file (CIF, POSCAR, anything ASE reads) or prototype NAME:EL1,EL2 "
        "(see `termination structures`).",
        show_default=False,
    ),
]
LatticeA = Annotated[float | None, typer.Option("--a", metavar="Å", help="Lattice constant a of a prototype, Å.")]
LatticeC = Annotated[
    float | None,
    typer.Option("--c", metavar="Å", help="Lattice constant c of a tetragonal or hexagonal prototype, Å."),
]
FreeX = Annotated[
    list[str] | None,
    typer.Option(
        "--x",
        metavar="X",
        help="Free positional parameter of a prototype: X, or NAME=X where it has several (repeatable).",
        show_default=False,
    ),
]
Symprec = Annotated[float, typer.Option("--symprec", metavar="Å", help="Symmetry tolerance, Å.")]
Json = Annotated[bool, typer.Option("--json", help="Print the result as JSON (schema in the README).")]
# Read by _Command.invoke, which writes faces with three indices within the command; the
# commands themselves ignore the value.
ThreeIndex = Annotated[
    bool,
    typer.Option(
        "--three-index",
        help="Write faces of hexagonal and trigonal lattices (h k l) and directions [u v w], not (h k i l) and "
        "[u v t w] (JSON has both).",
    ),
]
Wide = Annotated[bool, typer.Option("--wide", help="Show the less-used columns too.")]
MaxIndex = Annotated[int, typer.Option("--max-index", metavar="N", help="Largest |h|, |k|, |l| (1 to 12).")]


@dataclass(frozen=True)
class FaceArgument:
    """A face as given on the command line: three Miller indices, or four Miller-Bravais ones (i checked)."""

    values: tuple[int, ...]


def _face_argument(text: Any) -> FaceArgument:
    """Parse '1 1 0' or '1 0 -1 0' (the values of a face option, joined)."""
    from termination.errors import PlaneError
    from termination.surface.miller import from_four_index

    if isinstance(text, FaceArgument):
        return text
    parts = str(text).split()
    if len(parts) not in (3, 4) or not all(_INTEGER.fullmatch(v) for v in parts):
        raise typer.BadParameter(f"give three integers H K L, or four H K I L, got {str(text) or 'none'!r}")
    values = tuple(int(v) for v in parts)
    if len(values) == 4:
        try:
            from_four_index(values, "face")
        except PlaneError as exc:
            raise typer.BadParameter(str(exc)) from None
    return FaceArgument(values)


Plane = Annotated[
    FaceArgument | None,
    typer.Option(
        "--plane",
        metavar="H K [I] L",
        parser=_face_argument,
        help="The face: three integers, or four (Miller-Bravais) for hexagonal and trigonal lattices.",
        show_default=False,
    ),
]
Mount = Annotated[
    FaceArgument | None,
    typer.Option(
        "--mount",
        metavar="H K [I] L",
        parser=_face_argument,
        help="Face the crystal was mounted on: three integers, or four for hexagonal and trigonal lattices.",
        show_default=False,
    ),
]
LayerTol = Annotated[
    float, typer.Option("--layer-tol", metavar="Å", help="Atoms within this height form one layer, Å.")
]
BondFactor = Annotated[
    float, typer.Option("--bond-factor", metavar="F", help="Bonded if closer than F × the sum of covalent radii.")
]
BondCutoff = Annotated[
    float | None,
    typer.Option(
        "--bond-cutoff", metavar="Å", help="Fixed bond cutoff, Å (replaces --bond-factor).", show_default=False
    ),
]
UnitRatio = Annotated[
    float,
    typer.Option("--unit-ratio", metavar="R", help="Cuts costing more than R × the cheapest lie inside a unit."),
]
Charge = Annotated[
    list[str] | None,
    typer.Option(
        "--charge",
        metavar="EL=Q",
        help="Formal charge (3, -0.5, -1/3); repeatable. Default: file or guess.",
        show_default=False,
    ),
]
MaxCell = Annotated[
    int, typer.Option("--max-cell", metavar="N", help="Largest reconstruction cell, in 1×1 cells (1 to 12).")
]
Visible = Annotated[
    list[str] | None,
    typer.Option(
        "--visible", metavar="EL", help="Only this species images in the corrugation; repeatable.", show_default=False
    ),
]
Weight = Annotated[
    list[str] | None,
    typer.Option("--weight", metavar="EL=W", help="Imaging weight of a species; repeatable.", show_default=False),
]
DecayLength = Annotated[
    float, typer.Option("--decay-length", metavar="Å", help="Decay length λ of the depth weight exp(-depth/λ), Å.")
]
Depth = Annotated[
    float | None,
    typer.Option(
        "--depth", metavar="Å", help="Atoms down to this depth image, Å (default: the top unit).", show_default=False
    ),
]
Force = Annotated[bool, typer.Option("--force", help="Overwrite existing output files.")]
Plot = Annotated[
    str | None,
    typer.Option(
        "--plot", metavar="DIR", help="Write this command's figures to DIR (made if missing).", show_default=False
    ),
]
PlotFormat = Annotated[str, typer.Option("--plot-format", metavar="FMT", help="Figure format: png, svg or pdf.")]
Report = Annotated[
    str | None,
    typer.Option(
        "--report",
        metavar="FILE.html",
        help="Write a self-contained HTML report (tables, figures, command, versions).",
        show_default=False,
    ),
]
Cell = Annotated[
    list[str] | None,
    typer.Option(
        "--cell",
        metavar="CELL",
        help="A cell to consider: Wood notation (2x1, c(2x2), sqrt3xsqrt3R30) or a matrix (2,0,0,1); repeatable.",
        show_default=False,
    ),
]
SiteWeight = Annotated[
    list[str] | None,
    typer.Option(
        "--site-weight",
        metavar="SITE=W",
        help="Imaging weight of one kind of site, by its bonds kept: Ti5c=1 (five-fold Ti); repeatable.",
        show_default=False,
    ),
]


# --------------------------------------------------------------------------- errors and rendering

F = TypeVar("F", bound=Callable[..., Any])


def _fail(message: str) -> None:
    typer.echo(f"termination: error: {message}", err=True)
    raise typer.Exit(code=2)


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _unexpected(exc: BaseException) -> str:
    """The one-line text of an exception no check foresaw: its type, its first line, how to see the trace."""
    text = str(exc).strip()
    detail = f"{type(exc).__name__}: {text.splitlines()[0]}" if text else type(exc).__name__
    return f"unexpected {detail} (rerun with --traceback)"


def _subject(kwargs: dict[str, Any]) -> str:
    """The input a command was given (structure, image file, paths, --demo), for the one-line error."""
    if kwargs.get("demo"):
        return " --demo"
    for key in ("structure", "file"):
        if kwargs.get(key):
            return f" {kwargs[key]}"
    paths = list(kwargs.get("paths") or ())
    if paths:
        return f" {paths[0]}" + (f" (and {len(paths) - 1} more)" if len(paths) > 1 else "")
    return ""


#: True once a command has reported its own interruption, so that ``main`` does not add a second line.
_INTERRUPTED: contextvars.ContextVar[bool] = contextvars.ContextVar("interrupted", default=False)


def one_line_errors(command: str) -> Callable[[F], F]:
    """Turn library errors, and any unexpected exception, into one stderr line and exit code 2.

    A library error (:class:`termination.errors.TerminationError`) or an OS
    error is printed as it is.  Anything else (MemoryError, RecursionError,
    OverflowError, a bug) is an input the checks missed or an internal error:
    one line naming the command, its input and the exception, still exit
    code 2, the trace only with ``--traceback``.  Ctrl-C is one line and exit
    code 130.  Warnings and log records of the libraries are silenced while
    the command runs, so that they never add lines.
    """

    def decorate(fn: F) -> F:
        @functools.wraps(fn)
        def wrapper(*args: Any, **kwargs: Any) -> Any:
            import logging
            import warnings

            from termination.errors import TerminationError

            if _TRACEBACK.get():
                return fn(*args, **kwargs)
            logging.disable(logging.CRITICAL)  # third-party log lines would break the one-line rule
            try:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    return fn(*args, **kwargs)
            except (typer.Exit, typer.Abort):
                raise
            except (TerminationError, OSError) as exc:
                _fail(_first_line(exc))
            except KeyboardInterrupt:
                typer.echo(f"termination {command}: interrupted", err=True)
                _INTERRUPTED.set(True)
                raise typer.Exit(code=130) from None
            except Exception as exc:  # a bug or an input the checks missed: still one line
                _fail(f"{command}{_subject(kwargs)}: {_unexpected(exc)}")
            finally:
                logging.disable(logging.NOTSET)

        return wrapper  # type: ignore[return-value]

    return decorate


def render(command: str, record: Any, json_out: bool, wide: bool = False) -> None:
    """Print ``record`` as JSON or as the tables of :mod:`termination.tables`."""
    if json_out:
        from termination.serialise import json_document

        typer.echo(json.dumps(json_document(command, record), indent=2, ensure_ascii=False))
        return
    from rich import box
    from rich.console import Console
    from rich.table import Table as RichTable

    from termination.tables import Table, Text, document, table_width

    console = Console(highlight=False, emoji=False)  # a name such as bad:X: is text, not an emoji code
    styles = {"plain": "", "bold": "bold", "dim": "dim", "warning": "yellow"}
    for block in document(record, wide=wide):
        if isinstance(block, Text):
            console.print(block.text, style=styles[block.style] or None, markup=False)
            continue
        assert isinstance(block, Table)
        console.print(block.title, style="bold", markup=False)
        table = RichTable(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False, padding=(0, 1), collapse_padding=True)
        for col in block.columns:
            table.add_column(col.header, justify=col.justify, no_wrap=True)
        for row in block.rows:
            table.add_row(*row)
        # Never cut a number: a table wider than the terminal is printed at its own width.
        width = max(console.width, table_width(block))
        Console(highlight=False, emoji=False, width=width).print(table)


def _face(face: FaceArgument | None, crystal: Any, option: str) -> tuple[int, int, int] | None:
    """A face option as (h k l) of the crystal's conventional cell; four indices only for hexagonal axes."""
    from termination.surface.faces import face_index

    return None if face is None else face_index(crystal, face.values, option)


def _require_plane(plane: FaceArgument | None, crystal: Any) -> tuple[int, int, int]:
    from termination.errors import PlaneError

    if plane is None:
        raise PlaneError("--plane H K L (or H K I L) is required")
    found = _face(plane, crystal, "--plane")
    assert found is not None
    return found


def _inputs(structure: str | None) -> tuple[str, ...]:
    """The structure file, when the structure is a file (outputs must never overwrite it)."""
    import os

    return (structure,) if structure is not None and os.path.exists(structure) else ()


def _free_parameters(items: list[str] | None) -> tuple[float | None, dict[str, float]]:
    """--x values: one bare number, or NAME=VALUE pairs."""
    from termination.errors import StructureError

    bare: float | None = None
    named: dict[str, float] = {}
    for item in items or ():
        name, sep, value = item.partition("=")
        if not sep:
            if bare is not None or len(items or ()) > 1:
                raise StructureError(f"--x {item!r}: with several free parameters write NAME=VALUE for each")
            bare = _number(item, "--x")
        else:
            if not name.strip():
                raise StructureError(f"--x {item!r}: the parameter name is missing (NAME=VALUE)")
            named[name.strip()] = _number(value, f"--x {name.strip()}")
    return bare, named


def _number(text: str, option: str) -> float:
    from termination.errors import StructureError
    from termination.quantities import parse_number

    try:
        return parse_number(text)
    except ValueError as exc:
        raise StructureError(f"{option}: {exc}") from None


def _load(structure: str, a: float | None, x: list[str] | None, symprec: float, c: float | None = None) -> Any:
    from termination.structures import load_structure

    bare, named = _free_parameters(x)
    return load_structure(structure, a=a, x=bare, symprec=symprec, c=c, parameters=named or None)


def _charges(items: list[str] | None) -> dict[str, float] | None:
    from termination.bulk.charges import parse_charge_options

    return parse_charge_options(items) or None


def _site_weights(items: list[str] | None) -> dict[str, float]:
    from termination.errors import MeasurementError, StructureError
    from termination.surface.corrugation import parse_site_weights

    try:
        return parse_site_weights(items)
    except StructureError as exc:
        raise MeasurementError(str(exc)) from None


def _element(text: str, option: str) -> str:
    from termination.bulk.elements import check_symbol
    from termination.errors import MeasurementError, StructureError

    try:
        return check_symbol(text)
    except StructureError as exc:
        raise MeasurementError(f"{option} {text!r}: {exc}") from None


def _termination_rules(
    layer_tol: float, bond_factor: float, bond_cutoff: float | None, unit_ratio: float, max_multiple: int = MAX_MULTIPLE
) -> dict[str, Any]:
    return dict(
        layer_tol_angstrom=layer_tol,
        bond_factor=bond_factor,
        bond_cutoff_angstrom=bond_cutoff,
        unit_ratio=unit_ratio,
        max_multiple=max_multiple,
    )


class _Outputs:
    """``--plot DIR``, ``--plot-format`` and ``--report FILE`` of one command: checked before the work, written after.

    ``values`` are the command's parsed arguments (its ``locals()`` on entry), for the command line a
    report shows when ``main`` did not see it typed.  Figures and reports are drawn by
    :mod:`termination.figures` (matplotlib is imported only then) and written through
    :mod:`termination.outputs`; a line on stderr names what was written.
    """

    def __init__(
        self,
        command: str,
        values: dict[str, Any],
        plot: str | None,
        fmt: str,
        force: bool,
        report: str | None = None,
        inputs: tuple[str, ...] = (),
    ) -> None:
        self.command, self.values = command, dict(values)
        self.plot, self.fmt, self.force, self.report, self.inputs = plot, fmt, force, report, inputs
        if plot is not None:
            from termination.figures.commands import check_plot_folder

            self.fmt = check_plot_folder(plot, fmt)
        if report is not None:
            import os

            from termination.outputs import check_outputs

            # A report inside the --plot folder that is still to be made is checked when it is written.
            inside_new = plot is not None and not os.path.exists(plot)
            inside_new = inside_new and os.path.dirname(os.path.abspath(report)) == os.path.abspath(str(plot))
            if not inside_new:
                check_outputs([report], inputs, force=force)

    @property
    def wanted(self) -> bool:
        return self.plot is not None or self.report is not None

    def write(self, record: Any, plans: Any) -> None:
        """Draw ``plans`` (a list of :class:`termination.figures.commands.PlannedFigure`) and write them."""
        written: list[str] = []
        if self.plot is not None:
            from termination.figures.commands import write_figures

            written += [str(p) for p in write_figures(plans, self.plot, self.fmt, force=self.force, inputs=self.inputs)]
        if self.report is not None:
            from termination.htmlreport import command_line, write_report

            given = _ARGV.get()
            typed = given if given and given[0] == self.command else _typed_command(self.command, self.values)
            command = command_line(typed)
            write_report(self.report, record, plans, command=command, force=self.force, inputs=self.inputs)
            written.append(self.report)
        if written:
            shown = ", ".join(written[:4]) + (f" and {len(written) - 4} more" if len(written) > 4 else "")
            typer.echo(f"termination: wrote {shown}", err=True)


def _typed_command(command: str, values: dict[str, Any]) -> list[str]:
    """The arguments of ``command``, rebuilt from its parsed ``values`` (when ``main`` did not see them typed)."""
    params = typer.main.get_command(app).commands[command].params  # type: ignore[attr-defined]
    args = [command]
    for param in params:
        value = values.get(param.name)
        if value is None or value == param.default or value in ((), []):
            continue
        if param.param_type_name == "argument":
            args += [str(v) for v in (value if isinstance(value, (list, tuple)) else [value])]
            continue
        if value is True or value is False:
            flags = param.opts if value else param.secondary_opts
            args += flags[:1]
        elif getattr(param, "multiple", False):
            for v in value:
                args += [param.opts[0], *(str(u) for u in (v if isinstance(v, (list, tuple)) else [v]))]
        elif isinstance(value, (list, tuple)):
            args += [param.opts[0], *(str(v) for v in value)]
        else:
            args += [param.opts[0], str(value)]
    return args


# --------------------------------------------------------------------------- commands


@command()
@one_line_errors("structures")
def structures(json_out: Json = False, wide: Wide = False) -> None:
    """List the built-in prototypes with their space groups and Wyckoff sites."""
    from termination.reports import structures_report

    render("structures", structures_report(), json_out, wide)


@command()
@one_line_errors("planes")
def planes(
    structure: Structure,
    max_index: MaxIndex = MAX_INDEX,
    mount: Mount = None,
    charge: Charge = None,
    tilt_window: Annotated[
        tuple[float, float] | None,
        typer.Option(
            "--tilt-window",
            metavar="MIN MAX",
            help="With --mount: every variant of every face tilted MIN to MAX degrees, by tilt (cleave planning).",
            show_default=False,
        ),
    ] = None,
    a: LatticeA = None,
    c: LatticeC = None,
    x: FreeX = None,
    symprec: Symprec = SYMPREC_ANGSTROM,
    plot: Plot = None,
    plot_format: PlotFormat = FORMATS[0],
    force: Force = False,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """Symmetry-distinct faces: spacing d, tilt to the mount face, mesh, terminations, polarity."""
    from termination.reports import planes_report

    outputs = _Outputs("planes", locals(), plot, plot_format, force, inputs=_inputs(structure))
    crystal = _load(structure, a, x, symprec, c)
    report = planes_report(
        crystal,
        max_index=max_index,
        mount=_face(mount, crystal, "--mount"),
        charges=_charges(charge),
        tilt_window=tilt_window,
    )
    if outputs.wanted:
        from termination.figures.commands import planes_figures

        outputs.write(report, planes_figures(report, crystal))
    render("planes", report, json_out, wide)


@command()
@one_line_errors("terminations")
def terminations(
    structure: Structure,
    plane: Plane = None,
    layer_tol: LayerTol = LAYER_TOL_ANGSTROM,
    bond_factor: BondFactor = BOND_FACTOR,
    bond_cutoff: BondCutoff = None,
    unit_ratio: UnitRatio = UNIT_RATIO,
    max_multiple: Annotated[
        int, typer.Option("--max-multiple", metavar="N", help="Steps listed up to N extra periods d (0 to 50).")
    ] = MAX_MULTIPLE,
    a: LatticeA = None,
    c: LatticeC = None,
    x: FreeX = None,
    symprec: Symprec = SYMPREC_ANGSTROM,
    plot: Plot = None,
    plot_format: PlotFormat = FORMATS[0],
    force: Force = False,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """Atomic layers, terminations and allowed step heights of one face."""
    from termination.reports import terminations_report

    outputs = _Outputs("terminations", locals(), plot, plot_format, force, inputs=_inputs(structure))
    crystal = _load(structure, a, x, symprec, c)
    rules = _termination_rules(layer_tol, bond_factor, bond_cutoff, unit_ratio, max_multiple)
    report = terminations_report(crystal, _require_plane(plane, crystal), **rules)
    if outputs.wanted:
        from termination.figures.commands import terminations_figures

        outputs.write(report, terminations_figures(report, crystal, rules))
    render("terminations", report, json_out, wide)


@command()
@one_line_errors("polarity")
def polarity(
    structure: Structure,
    plane: Plane = None,
    max_index: Annotated[
        int | None,
        typer.Option(
            "--max-index",
            metavar="N",
            help=f"All faces up to this index (1 to 12; default {MAX_INDEX}).",
            show_default=False,
        ),
    ] = None,
    charge: Charge = None,
    max_cell: MaxCell = MAX_CELL,
    layer_tol: LayerTol = LAYER_TOL_ANGSTROM,
    bond_factor: BondFactor = BOND_FACTOR,
    bond_cutoff: BondCutoff = None,
    unit_ratio: UnitRatio = UNIT_RATIO,
    a: LatticeA = None,
    c: LatticeC = None,
    x: FreeX = None,
    symprec: Symprec = SYMPREC_ANGSTROM,
    plot: Plot = None,
    plot_format: PlotFormat = FORMATS[0],
    force: Force = False,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """Layer charges, dipole, Tasker type, compensation and reconstruction cells per termination."""
    from termination.reports import polarity_report

    outputs = _Outputs("polarity", locals(), plot, plot_format, force, inputs=_inputs(structure))
    crystal = _load(structure, a, x, symprec, c)
    rules = _termination_rules(layer_tol, bond_factor, bond_cutoff, unit_ratio)
    # Up to minutes with --max-index 12 --max-cell 12: a progress bar on a terminal; Ctrl-C stops it.
    with _progress_bar() as progress:
        report = polarity_report(
            crystal,
            plane=_face(plane, crystal, "--plane"),
            max_index=max_index,
            charges=_charges(charge),
            max_cell=max_cell,
            termination_options=rules,
            progress=progress,
        )
    if outputs.wanted:
        from termination.figures.commands import polarity_figures

        outputs.write(report, polarity_figures(report))
    render("polarity", report, json_out, wide)


@command()
@one_line_errors("corrugation")
def corrugation(
    structure: Structure,
    plane: Plane = None,
    termination: Annotated[
        str | None,
        typer.Option(
            "--termination", metavar="ID", help="Termination id (T2) or label (SrO); default all.", show_default=False
        ),
    ] = None,
    visible: Visible = None,
    weight: Weight = None,
    decay_length: DecayLength = DECAY_LENGTH_ANGSTROM,
    depth: Depth = None,
    threshold: Annotated[
        float, typer.Option("--threshold", metavar="T", help="A spot is visible when |F(G)|/F(0) exceeds T.")
    ] = SPOT_THRESHOLD,
    reconstructions: Annotated[
        bool,
        typer.Option(
            "--reconstructions/--no-reconstructions", help="Add the reconstruction cells of polar terminations."
        ),
    ] = True,
    charge: Charge = None,
    max_cell: MaxCell = MAX_CELL,
    cell: Cell = None,
    site_weight: SiteWeight = None,
    a: LatticeA = None,
    c: LatticeC = None,
    x: FreeX = None,
    symprec: Symprec = SYMPREC_ANGSTROM,
    plot: Plot = None,
    plot_format: PlotFormat = FORMATS[0],
    force: Force = False,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """Fourier spots, apparent lattice, maxima and rows a topograph of each termination should show."""
    from termination.algebra.lattice2d import check_cells
    from termination.bulk.elements import parse_element_values
    from termination.errors import StructureError
    from termination.reports import corrugation_report
    from termination.surface.corrugation import Visibility, parse_site_weights

    outputs = _Outputs("corrugation", locals(), plot, plot_format, force, inputs=_inputs(structure))
    cells = check_cells(cell)
    visibility = Visibility(
        visible=tuple(visible) if visible else None,
        weights=tuple(parse_element_values(weight, "--weight", StructureError).items()),
        site_weights=tuple(parse_site_weights(site_weight).items()),
        decay_length_angstrom=decay_length,
        max_depth_angstrom=depth,
        threshold=threshold,
    )
    crystal = _load(structure, a, x, symprec, c)
    report = corrugation_report(
        crystal,
        _require_plane(plane, crystal),
        termination,
        visibility=visibility,
        reconstructions=reconstructions,
        charges=_charges(charge),
        max_cell=max_cell,
        cells=cells,
    )
    if outputs.wanted:
        from termination.figures.commands import corrugation_figures

        outputs.write(report, corrugation_figures(report, crystal, _charges(charge), max_cell))
    render("corrugation", report, json_out, wide)


@command()
@one_line_errors("match")
def match(
    structure: Annotated[
        str | None,
        typer.Argument(
            metavar="[STRUCTURE]", help="Structure file or prototype (omit with --demo).", show_default=False
        ),
    ] = None,
    demo: Annotated[
        bool, typer.Option("--demo", help="Run the built-in scenario: a TiNiSn crystal cleaved from a (001) mount.")
    ] = False,
    measurement: Annotated[
        str | None,
        typer.Option(
            "--measurement", metavar="FILE", help="Measurement file (TOML); options override it.", show_default=False
        ),
    ] = None,
    image_file: Annotated[
        str | None,
        typer.Option(
            "--image",
            metavar="FILE",
            help="Topograph to analyse (as `termination image`); its tilt, spacings, row angle and steps "
            "override --measurement, and the other options override them.",
            show_default=False,
        ),
    ] = None,
    pixel_size: PixelSize = None,
    z_unit: ZUnit = None,
    channel: Channel = None,
    mount: Mount = None,
    tilt: Annotated[
        str | None,
        typer.Option(
            "--tilt", metavar="DEG", help="Terrace inclination to the mount face, e.g. 54+-2 (°).", show_default=False
        ),
    ] = None,
    spacing: Annotated[
        list[str] | None,
        typer.Option(
            "--spacing",
            metavar="Å",
            help="Corrugation periodicity, e.g. 4.19+-0.2 (Å); repeatable.",
            show_default=False,
        ),
    ] = None,
    row_angle: Annotated[
        str | None,
        typer.Option(
            "--row-angle", metavar="DEG", help="Angle between corrugation rows, e.g. 90+-3 (°).", show_default=False
        ),
    ] = None,
    step: Annotated[
        list[str] | None,
        typer.Option("--step", metavar="Å", help="Step height, e.g. 2.97+-0.15 (Å); repeatable.", show_default=False),
    ] = None,
    steps: Annotated[
        str | None,
        typer.Option(
            "--steps", metavar="FILE", help="Step heights, one per line (optional sigma column).", show_default=False
        ),
    ] = None,
    max_index: Annotated[
        int | None,
        typer.Option(
            "--max-index",
            metavar="N",
            help=f"Largest Miller index of the candidates (default {MAX_INDEX}).",
            show_default=False,
        ),
    ] = None,
    visible: Visible = None,
    weight: Weight = None,
    decay_length: Annotated[
        float | None,
        typer.Option(
            "--decay-length",
            metavar="Å",
            help=f"Decay of visibility with depth, Å (default {DECAY_LENGTH_ANGSTROM:g}).",
            show_default=False,
        ),
    ] = None,
    depth: Depth = None,
    site_weight: SiteWeight = None,
    charge: Charge = None,
    mount_sigma: Annotated[
        float,
        typer.Option(
            "--mount-sigma",
            metavar="DEG",
            help="How far the sample may sit off its mount face, added in quadrature to the tilt's sigma, degrees.",
        ),
    ] = MatchModel().mount_sigma_deg,
    layer_tol: LayerTol = LAYER_TOL_ANGSTROM,
    bond_factor: BondFactor = BOND_FACTOR,
    bond_cutoff: BondCutoff = None,
    unit_ratio: UnitRatio = UNIT_RATIO,
    flat_prior: Annotated[bool, typer.Option("--flat-prior", help="Give every candidate the same prior.")] = False,
    no_reconstructions: Annotated[
        bool, typer.Option("--no-reconstructions", help="Do not add reconstruction cells of polar terminations.")
    ] = False,
    max_cell: MaxCell = MAX_CELL,
    cell: Cell = None,
    top: Annotated[int, typer.Option("--top", metavar="N", help="Show this many candidates.")] = 10,
    a: LatticeA = None,
    c: LatticeC = None,
    x: FreeX = None,
    symprec: Symprec = SYMPREC_ANGSTROM,
    plot: Plot = None,
    plot_format: PlotFormat = FORMATS[0],
    report_file: Report = None,
    force: Force = False,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """Rank which face and termination match the measured tilt, corrugation and steps."""
    typed = dict(locals())  # the arguments as parsed, before --demo fills in its own

    from termination.algebra.lattice2d import check_cells
    from termination.bulk.elements import parse_element_values
    from termination.errors import MeasurementError
    from termination.identification.likelihood import match as run_match
    from termination.identification.likelihood import measurement_visibility
    from termination.identification.measurement import Measurement, merge, parse_value, read_measurement, read_steps

    if demo:
        from termination.structures import bundled

        if structure is not None:
            raise MeasurementError(f"--demo runs its own scenario on {DEMO_STRUCTURE}; drop {structure!r} or --demo")
        structure = DEMO_STRUCTURE
        measurement = measurement or bundled(DEMO_MEASUREMENT)
    if structure is None:
        raise MeasurementError("give a STRUCTURE (file or prototype spec), or --demo")
    heights = tuple(parse_value(v) for v in step or ())
    if steps:
        from_file = read_steps(steps)
        if not from_file:
            raise MeasurementError(f"no step heights in {steps}")
        heights += from_file
    given = Measurement(
        mount=None if mount is None else mount.values,
        max_index=max_index,
        tilt=None if tilt is None else parse_value(tilt),
        row_angle=None if row_angle is None else parse_value(row_angle),
        spacings=tuple(parse_value(v) for v in spacing or ()),
        steps=heights,
        visible=tuple(_element(v, "--visible") for v in visible or ()),
        weights=parse_element_values(weight, "--weight", MeasurementError),
        decay_length=decay_length,
        depth=depth,
        site_weights=_site_weights(site_weight),
        cells=tuple(cell or ()),
    )
    outputs = _Outputs(
        "match",
        typed,
        plot,
        plot_format,
        force,
        report_file,
        inputs=_inputs(structure) + tuple(v for v in (measurement, steps, image_file) if v),
    )
    base = read_measurement(measurement) if measurement else Measurement()
    measured_lines: tuple[str, ...] = ()
    if image_file is None and (pixel_size or z_unit or channel):
        raise MeasurementError("--pixel-size, --z-unit and --channel calibrate an --image FILE; none was given")
    if image_file is not None:
        from termination.reports import image_measurement

        with _progress_bar() as progress:
            from_image, measured_lines = image_measurement(
                image_file, pixel_size=pixel_size, z_unit=z_unit, channel=channel, progress=progress
            )
        base = merge(base, from_image)
    merged = merge(base, given)
    cells = check_cells(merged.cells)
    visibility = measurement_visibility(merged)
    crystal = _load(structure, a, x, symprec, c)
    rules = _termination_rules(layer_tol, bond_factor, bond_cutoff, unit_ratio)
    rules.pop("max_multiple")
    # Minutes with --max-index 12 --max-cell 12: a progress bar on a terminal; Ctrl-C stops it.
    with _progress_bar() as progress:
        report = run_match(
            crystal,
            merged,
            top=top,
            model=MatchModel(flat_prior=flat_prior, mount_sigma_deg=mount_sigma),
            reconstructions=not no_reconstructions,
            charges=_charges(charge),
            max_cell=max_cell,
            visibility=visibility,
            cells=cells,
            progress=progress,
            **rules,
        )
    if measured_lines:
        report = dataclasses.replace(report, notes=measured_lines + tuple(report.notes))
    if outputs.wanted:
        from termination.figures.commands import match_figures, read_measured

        plans = match_figures(
            report,
            crystal,
            visibility=visibility,
            charges=_charges(charge),
            max_cell=max_cell,
            termination_options=rules,
            measured=None if image_file is None else read_measured(image_file, pixel_size, z_unit, channel),
        )
        outputs.write(report, plans)
    render("match", report, json_out, wide)


def _progress_bar() -> Any:
    """A progress bar on stderr (large images, long polarity runs): a context manager yielding an update function.

    It yields None (no progress reported) when stderr is not a terminal.
    """
    if not sys.stderr.isatty():
        return contextlib.nullcontext(None)
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    @contextlib.contextmanager
    def bar() -> Any:
        with Progress(
            TextColumn("{task.description}"),
            BarColumn(),
            TimeElapsedColumn(),
            console=Console(stderr=True),
            transient=True,
        ) as progress:
            task = progress.add_task("analysing", total=1.0)
            yield lambda fraction, stage: progress.update(task, completed=fraction, description=stage)

    return bar()


PixelSize = Annotated[
    str | None,
    typer.Option(
        "--pixel-size",
        metavar="LENGTH",
        help="Pixel size with unit, e.g. 0.05nm, or x,y: 0.05nm,0.06nm "
        "(default: the sidecar FILE.toml, then the file's own metadata).",
        show_default=False,
    ),
]
ZUnit = Annotated[
    str | None,
    typer.Option(
        "--z-unit",
        metavar="UNIT",
        help="Unit of the stored heights: nm, A, pm, or per count e.g. 0.01nm "
        "(default: the sidecar, then the file's metadata).",
        show_default=False,
    ),
]
Channel = Annotated[
    str | None,
    typer.Option(
        "--channel",
        metavar="NAME",
        help="Channel of an instrument file, e.g. Z or Z:backward (default: the height channel, forward).",
        show_default=False,
    ),
]


@command()
@one_line_errors("image")
def image(
    file: Annotated[
        str,
        typer.Argument(
            metavar="FILE",
            help="Height map: .npy, .tif/.tiff, a text matrix, or an instrument file (.sxm, .nxs/.h5, .ibw).",
            show_default=False,
        ),
    ],
    pixel_size: PixelSize = None,
    z_unit: ZUnit = None,
    channel: Channel = None,
    out: Annotated[
        str | None,
        typer.Option(
            "--out",
            metavar="FILE",
            help="Write a measurement file (TOML) for `match --measurement`.",
            show_default=False,
        ),
    ] = None,
    steps_out: Annotated[
        str | None,
        typer.Option(
            "--steps-out", metavar="FILE", help="Write the step heights for `match --steps`.", show_default=False
        ),
    ] = None,
    force: Force = False,
    mount: Mount = None,
    min_step: Annotated[
        float, typer.Option("--min-step", metavar="Å", help="Smallest step height to resolve, Å.")
    ] = MIN_STEP_ANGSTROM,
    drift_lattice: Annotated[
        str | None,
        typer.Option(
            "--drift-lattice",
            metavar="TYPE",
            help="The surface's 2D lattice is square, rectangular or hexagonal: estimate and remove a linear "
            "drift of the slow scan from it (never by default).",
            show_default=False,
        ),
    ] = None,
    max_nan: Annotated[
        float,
        typer.Option("--max-nan", metavar="FRACTION", help="Largest fraction of missing (NaN) pixels accepted."),
    ] = MAX_NAN_FRACTION,
    plot: Plot = None,
    plot_format: PlotFormat = FORMATS[0],
    report_file: Report = None,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """Tilt, lattice and step heights of a topograph (height map)."""
    from termination.reports import image_report

    outputs = _Outputs("image", locals(), plot, plot_format, force, report_file, inputs=(file,))

    # A progress bar only where someone watches: a terminal, and a map of a megapixel or more.
    with _progress_bar() as progress:
        report = image_report(
            file,
            pixel_size=pixel_size,
            z_unit=z_unit,
            channel=channel,
            mount=None if mount is None else mount.values,
            out=out,
            steps_out=steps_out,
            force=force,
            progress=progress,
            min_step_angstrom=min_step,
            drift_lattice=drift_lattice,
            max_nan_fraction=max_nan,
        )
    if outputs.wanted:
        from termination.figures.commands import image_figures, read_measured

        settings = {"min_step_angstrom": min_step, "max_nan_fraction": max_nan}
        measured = read_measured(file, pixel_size, z_unit, channel, report.analysis.lattice, settings)
        outputs.write(report, image_figures(report, measured))
    render("image", report, json_out, wide)


def _screen_progress() -> Any:
    """A rich progress bar on stderr for a screen: structures done, rate and time left."""
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        ProgressColumn,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )
    from rich.text import Text as RichText

    class Rate(ProgressColumn):
        def render(self, task: Any) -> RichText:
            speed = task.finished_speed or task.speed
            return RichText("—/s" if speed is None else f"{speed:.2f}/s")

    @contextlib.contextmanager
    def bar() -> Any:
        with Progress(
            TextColumn("screening"),
            BarColumn(),
            MofNCompleteColumn(),
            Rate(),
            TimeElapsedColumn(),
            TextColumn("elapsed,"),
            TimeRemainingColumn(),
            TextColumn("left"),
            console=Console(stderr=True),
            transient=True,
        ) as progress:
            task = progress.add_task("screening", total=None)
            yield lambda done, total: progress.update(task, completed=done, total=total)

    return bar()


def _executor(workers: int | None, scheduler: str | None) -> tuple[Any, int, Any]:
    """(executor or None, number of workers, thing to close): a Dask client's executor, a process pool, or none."""
    import os

    from termination.errors import StructureError

    if scheduler is not None:
        if workers is not None:
            raise StructureError("give --workers or --scheduler, not both: the cluster has its own workers")
        import importlib

        try:
            distributed: Any = importlib.import_module("distributed")  # an optional extra, untyped here
        except ImportError:
            raise StructureError("--scheduler needs dask.distributed: pip install 'termination[dask]'") from None
        try:
            client = distributed.Client(scheduler, timeout=30)
        except Exception as exc:
            raise StructureError(f"cannot reach the Dask scheduler at {scheduler}: {_first_line(exc)}") from None
        n = max(1, sum(client.nthreads().values()))
        return client.get_executor(), n, client
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    n = cores if workers is None else workers
    if not 1 <= n <= 1024:
        raise StructureError(f"--workers must be from 1 to 1024, got {n}")
    if n == 1:
        return None, 1, None
    from concurrent.futures import ProcessPoolExecutor

    pool = ProcessPoolExecutor(max_workers=n)
    # Start the workers now, before the progress bar's thread exists (they are forked on POSIX).
    for f in [pool.submit(os.getpid) for _ in range(n)]:
        f.result()
    return pool, n, pool


@command()
@one_line_errors("screen")
def screen(
    paths: Annotated[
        list[str],
        typer.Argument(
            metavar="PATHS...",
            help="Structure files, folders (searched for *.cif, POSCAR*, *.xyz, ...), glob patterns "
            "(quoted: 'data/*.cif') or prototype specs.",
            show_default=False,
        ),
    ],
    out: Annotated[
        str | None,
        typer.Option(
            "--out",
            metavar="FILE",
            help="Write the rows to FILE.jsonl (JSON Lines) or FILE.csv as they come.",
            show_default=False,
        ),
    ] = None,
    resume: Annotated[
        bool, typer.Option("--resume", help="Continue --out: skip the structures already in it.")
    ] = False,
    force: Force = False,
    workers: Annotated[
        int | None,
        typer.Option(
            "--workers", metavar="N", help="Processes on this machine (default: all cores).", show_default=False
        ),
    ] = None,
    scheduler: Annotated[
        str | None,
        typer.Option(
            "--scheduler",
            metavar="ADDRESS",
            help="Run on a Dask distributed cluster, e.g. tcp://10.0.0.5:8786 (needs the dask extra).",
            show_default=False,
        ),
    ] = None,
    chunk_size: Annotated[
        int | None,
        typer.Option("--chunk-size", metavar="N", help="Structures per task (default: automatic).", show_default=False),
    ] = None,
    max_index: MaxIndex = MAX_INDEX,
    max_cell: MaxCell = MAX_CELL,
    pymatgen_charges: Annotated[
        bool,
        typer.Option("--pymatgen-charges", help="Ask pymatgen for charges when the file and the guess give none."),
    ] = False,
    layer_tol: LayerTol = LAYER_TOL_ANGSTROM,
    bond_factor: BondFactor = BOND_FACTOR,
    bond_cutoff: BondCutoff = None,
    unit_ratio: UnitRatio = UNIT_RATIO,
    symprec: Symprec = SYMPREC_ANGSTROM,
    json_out: Json = False,
    wide: Wide = False,
) -> None:
    """Screen many structures: cleavage rank, terminations, steps, Tasker types and best cells per face."""
    from termination.screening import screen as run_screen

    executor, n, closer = _executor(workers, scheduler)
    try:
        with _screen_progress() if sys.stderr.isatty() else contextlib.nullcontext(None) as progress:
            report = run_screen(
                paths,
                out=out,
                resume=resume,
                force=force,
                executor=executor,
                workers=n,
                chunk_size=chunk_size,
                progress=progress,
                max_index=max_index,
                max_cell=max_cell,
                use_pymatgen=pymatgen_charges,
                symprec=symprec,
                termination_options=_termination_rules(layer_tol, bond_factor, bond_cutoff, unit_ratio),
            )
    finally:
        if closer is not None:
            if hasattr(closer, "shutdown"):
                closer.shutdown(cancel_futures=True)
            else:
                closer.close()
    render("screen", report, json_out, wide)


@command()
@one_line_errors("slab")
def slab(
    structure: Structure,
    plane: Plane = None,
    termination: Annotated[
        str | None,
        typer.Option(
            "--termination", metavar="LABEL", help="Top termination: label (SrO) or id (T2).", show_default=False
        ),
    ] = None,
    cell: Annotated[
        str | None,
        typer.Option(
            "--cell",
            metavar="CELL",
            help="Reconstruction cell as `polarity` lists it: 2x1, c(2x2), (sqrt3xsqrt3)R30, or its matrix '2 1 0 2'.",
            show_default=False,
        ),
    ] = None,
    pattern: Annotated[
        int | None,
        typer.Option(
            "--pattern",
            metavar="N",
            help="The N-th listed cell (of those matching --cell), best first (default 1).",
            show_default=False,
        ),
    ] = None,
    layers: Annotated[
        int, typer.Option("--layers", metavar="N", help="Repeat units (periods d) of the face.")
    ] = SLAB_LAYERS,
    vacuum: Annotated[
        float, typer.Option("--vacuum", metavar="Å", help="Vacuum between the slab and its image, Å.")
    ] = SLAB_VACUUM_ANGSTROM,
    symmetric: Annotated[
        bool, typer.Option("--symmetric", help="The termination (and the pattern) on the bottom too.")
    ] = False,
    output: Annotated[
        str | None,
        typer.Option(
            "-o",
            "--output",
            metavar="FILE",
            help="Write the slab with ASE (CIF, POSCAR, extended XYZ, ... by the name).",
            show_default=False,
        ),
    ] = None,
    fmt: Annotated[
        str | None,
        typer.Option("--format", metavar="FMT", help="ASE format name (cif, vasp, extxyz, ...).", show_default=False),
    ] = None,
    force: Force = False,
    charge: Charge = None,
    max_cell: MaxCell = MAX_CELL,
    layer_tol: LayerTol = LAYER_TOL_ANGSTROM,
    bond_factor: BondFactor = BOND_FACTOR,
    bond_cutoff: BondCutoff = None,
    unit_ratio: UnitRatio = UNIT_RATIO,
    a: LatticeA = None,
    c: LatticeC = None,
    x: FreeX = None,
    symprec: Symprec = SYMPREC_ANGSTROM,
    json_out: Json = False,
    wide: Wide = False,
    three_index: ThreeIndex = False,
) -> None:
    """A slab of one termination (and reconstruction cell) for a calculation, normal along z."""
    import os

    from termination.errors import StructureError
    from termination.reports import slab_report

    if termination is None:
        raise StructureError("--termination LABEL is required (see `termination terminations`)")
    crystal = _load(structure, a, x, symprec, c)
    hkl = _require_plane(plane, crystal)
    report = slab_report(
        crystal,
        hkl,
        termination,
        cell=cell,
        pattern=pattern,
        layers=layers,
        vacuum_angstrom=vacuum,
        symmetric=symmetric,
        charges=_charges(charge),
        max_cell=max_cell,
        out=output,
        fmt=fmt,
        force=force,
        inputs=[structure] if os.path.exists(structure) else [],
        termination_options=_termination_rules(layer_tol, bond_factor, bond_cutoff, unit_ratio),
    )
    render("slab", report, json_out, wide)


# --------------------------------------------------------------------------- entry point


def _version(value: bool) -> None:
    if value:
        typer.echo(f"termination {__version__}")
        raise typer.Exit()


@app.callback()
def _main(
    version: Annotated[
        bool, typer.Option("--version", callback=_version, is_eager=True, help="Show the version and exit.")
    ] = False,
) -> None:
    """Which face and atomic termination does a cleaved crystal show?"""


def _app_for(args: list[str]) -> typer.Typer:
    """The application with only the command ``args`` names, or the whole one (help, unknown names).

    Typer reads the signature and type hints of every registered command when
    it builds the command group; with one command that is one signature, not
    twenty (about 15 ms of every start-up).  What the command parses, prints
    and exits with is the same: it is the same command object under the same
    group callback.
    """
    name = args[0] if args else None
    chosen = [
        info
        for info in app.registered_commands
        if info.callback is not None and (info.name or typer.main.get_command_name(info.callback.__name__)) == name
    ]
    if not chosen:
        return app
    single = copy.copy(app)
    single.registered_commands = chosen
    return single


def main(argv: list[str] | None = None) -> None:
    """Console-script entry point: one-line errors for bad options too; no arguments prints the help."""
    args = list(sys.argv[1:] if argv is None else argv)
    traceback = _TRACEBACK.set("--traceback" in args)  # forgotten when the call ends, like the command line
    args = [v for v in args if v != "--traceback"]
    typed = _ARGV.set(tuple(args))  # the command line as given, for reports; forgotten when it ends
    if not args:
        args = ["--help"]
    interrupted = _INTERRUPTED.set(False)
    try:
        command = typer.main.get_command(_app_for(args))
        code = command.main(args=args, prog_name="termination", standalone_mode=False)
    except typer.Exit as exc:  # older releases re-raise instead of returning the code
        code = getattr(exc, "exit_code", exc.args[0] if exc.args else 0)
    except (typer.Abort, KeyboardInterrupt):
        code = 130
    except Exception as exc:  # usage errors of the option parser, or a failure while parsing
        if _TRACEBACK.get():
            raise
        if hasattr(exc, "format_message"):
            typer.echo(f"termination: error: {exc.format_message()}", err=True)
        else:
            typer.echo(f"termination: error: {args[0]}: {_unexpected(exc)}", err=True)
        sys.exit(2)
    finally:
        _ARGV.reset(typed)
        _TRACEBACK.reset(traceback)
        reported = _INTERRUPTED.get()  # the command printed its own "interrupted" line
        _INTERRUPTED.reset(interrupted)
    if code == 130 and not reported:  # Ctrl-C while the options were parsed
        typer.echo("termination: interrupted", err=True)
    sys.exit(code if isinstance(code, int) else 0)


if __name__ == "__main__":
    main()
