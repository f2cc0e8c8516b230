"""Every tolerance, knob and size limit of the package, with its unit and its one default.

Functions and commands take these values as the defaults of their keyword
arguments and options, so a knob means the same in every command.  Names
carry their unit (``_ANGSTROM``, ``_DEG``, ``_E`` for charges in units of e);
names without a unit are dimensionless.  The README's "Settings" table lists
them.
"""

from __future__ import annotations

# --------------------------------------------------------------------------- structures

#: spglib symmetry tolerance, Å.
SYMPREC_ANGSTROM = 1e-3
#: Two atoms closer than this make a structure impossible, Å.
MIN_DISTANCE_ANGSTROM = 0.5
#: Lattice vectors longer than this are rejected as impossible for a crystal, Å.
MAX_LENGTH_ANGSTROM = 1000.0
#: Largest number of atoms of an input cell, and of its conventional standard cell.
MAX_ATOMS = 5000
#: Largest number of atom pairs a neighbour search may return (about 70 bytes each).
MAX_NEIGHBOUR_PAIRS = 5_000_000

# --------------------------------------------------------------------------- faces

#: Largest |h|, |k|, |l| of the candidate faces.
MAX_INDEX = 3
#: Largest accepted ``max_index``.
MAX_INDEX_LIMIT = 12
#: Largest |h|, |k|, |i|, |l| of a face given by the user (``--plane``, ``--mount``, a measured mount).
MAX_FACE_INDEX = 100

# --------------------------------------------------------------------------- bonds, layers, terminations

#: Pairs closer than this factor times the sum of covalent radii are bonded.
BOND_FACTOR = 1.15
#: First-shell window relative to each atom's nearest-neighbour distance: the shell
#: ends at the largest gap in the sorted neighbour distances within it.
SHELL_FACTOR = 1.2
#: Atoms whose heights along the face normal differ by less than this form one layer, Å.
LAYER_TOL_ANGSTROM = 0.1
#: Gaps costing more than this factor times the cheapest gap lie inside a termination unit.
UNIT_RATIO = 1.8
#: Step heights are listed for n = 0 .. MAX_MULTIPLE extra periods d.
MAX_MULTIPLE = 3
#: Largest accepted ``max_multiple``.
MAX_MULTIPLE_LIMIT = 50

# --------------------------------------------------------------------------- charges and polarity

#: Largest accepted net charge of given or guessed formal charges, e per formula unit.
NEUTRALITY_TOL_E = 1e-3
#: Largest |q| of a formal charge (given, read from a file or solved for neutrality), e.
MAX_CHARGE_E = 10.0
#: Layer charges below this count as neutral, e per surface cell.
CHARGE_TOL_E = 1e-6
#: |dipole| / area below this counts as no dipole, e/Å.
DIPOLE_TOL_E_PER_ANGSTROM = 1e-4
#: How close a compensating fraction times the number of sites must be to a whole number.
FRACTION_TOL = 1e-6
#: Largest reconstruction cell searched, in 1x1 cells.
MAX_CELL = 4
#: Largest accepted ``max_cell``.
MAX_CELL_LIMIT = 12
#: Cells with more candidate occupation patterns than this are skipped.
MAX_PATTERNS = 200_000
#: Reconstruction cells kept per polar termination as candidates of ``match``.
MAX_CELLS_PER_TERMINATION = 4
#: Layers (or units) from the top that may give a polar termination's compensating charge.
COMPENSATION_LAYERS = 2

# --------------------------------------------------------------------------- cleavage, screening and slabs

#: Faces whose cheapest cuts differ by less than this share a cleavage rank, bonds per nm².
CLEAVAGE_TIE_PER_NM2 = 1e-6
#: Largest number of structures sent to a worker as one task of a screen.
SCREEN_CHUNK = 16
#: Repeat units (periods d) of the face in a slab.
SLAB_LAYERS = 4
#: Largest accepted number of repeat units in a slab.
MAX_SLAB_LAYERS = 100
#: Vacuum between a slab and its periodic image along the normal, Å.
SLAB_VACUUM_ANGSTROM = 15.0
#: Largest accepted vacuum, Å.
MAX_VACUUM_ANGSTROM = 1000.0
#: Largest slab built, atoms (checked before the slab is built).
MAX_SLAB_ATOMS = 100_000

# --------------------------------------------------------------------------- corrugation

#: Decay length lambda of the depth weight exp(-depth/lambda), Å: the decay
#: length 1/(2 kappa) of the tunnelling current for a work function of about
#: 4 eV (kappa = sqrt(2 m phi)/hbar; Tersoff and Hamann 1985).
DECAY_LENGTH_ANGSTROM = 0.5
#: Largest accepted imaging depth, Å: far below anything a topograph sees.
MAX_DEPTH_ANGSTROM = 1000.0
#: A Fourier spot is visible when |F(G)|/F(0) exceeds this.
SPOT_THRESHOLD = 0.05
#: Spots are listed out to this many times the longest reduced reciprocal mesh vector.
MAX_SPOT_ORDER = 2.0
#: Sites whose amplitude reaches this fraction of the largest count as maxima.
MAXIMUM_FRACTION = 0.5
#: Two sites closer than this (in the plane and in depth) are one site, Å.
SITE_TOL_ANGSTROM = 0.2
#: A cell given without an atom pattern: the imaging atoms of one 1x1 cell per
#: cell image (1 + this) times as strongly as the others.
CELL_MODULATION = 1.0
#: Largest index (in 1x1 cells) of a cell given by the user.
MAX_USER_CELL = 100

# --------------------------------------------------------------------------- height maps

#: Smallest step height resolved in a height map, Å.
MIN_STEP_ANGSTROM = 0.5
#: Largest fraction of missing (NaN) pixels a height map may have.
MAX_NAN_FRACTION = 0.5

# --------------------------------------------------------------------------- measurements and input files

#: Largest number of spacings, and of step heights, in one measurement.
MAX_MEASURED_VALUES = 1000
#: Largest accepted uncertainty of a measured value, Å or degrees.
MAX_SIGMA = 1000.0
#: Largest measurement file or step list read, bytes (1 MiB; regular files only).
MAX_MEASUREMENT_BYTES = 1_048_576
#: Largest structure file read, bytes (16 MiB; regular files only).
MAX_STRUCTURE_BYTES = 16_777_216

# --------------------------------------------------------------------------- figures

#: Resolution of PNG figures, dots per inch.
FIGURE_DPI = 150
#: Candidates of ``match`` drawn in its figures (highlighted poles, step ladders).
FIGURE_TOP = 3
#: Pixels along each side of a simulated topograph.
TOPOGRAPH_PIXELS = 160
#: Largest number of figure files one command writes (checked before any is drawn).
MAX_FIGURES = 100

# --------------------------------------------------------------------------- numerical noise

#: Heights and lengths closer than this are equal: rounding noise, far below
#: any physical tolerance, Å.
LENGTH_EPS_ANGSTROM = 1e-6
#: Fractional coordinates closer than this are equal.
FRACTIONAL_EPS = 1e-9
#: Angles closer than this are equal, degrees.
ANGLE_EPS_DEG = 1e-6
#: Two positions closer than this are one point (an atom and its own image), Å.
POINT_EPS_ANGSTROM = 1e-8
#: A computed dimensionless number within this of a whole number or a simple
#: fraction is that number (an entry of an integer matrix, a multiple of 1/12,
#: a fraction of sites, a charge in e written as -1/3); also the relative
#: margin that keeps a search radius from cutting at an exact boundary.
RELATIVE_EPS = 1e-6
#: Relative float noise of a computed number of order one (a length in Å, an
#: angle in degrees, a bond count, |F|/F(0)): x <= y (1 + ROUNDING_EPS) counts as
#: x <= y, and a boundary is nudged by it so that values equal on paper fall on
#: a definite side.
ROUNDING_EPS = 1e-9
#: A computed quantity that is zero on paper (a bond count, |G| of the origin,
#: a difference of equal squared lengths) lies below this, in its own unit.
ZERO_EPS = 1e-12
