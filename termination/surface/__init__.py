"""The surface layer: faces, layers, terminations, steps, polarity, reconstructions and corrugation.

Everything here is computed from a :class:`~termination.bulk.crystal.Crystal`
for one Miller face at a time.  Modules in the order of the data flow:
:mod:`miller` (index notation), :mod:`faces` (spacing, mesh, tilt),
:mod:`symmetry` (operations that keep a face), :mod:`layers`,
:mod:`terminations` (cuts, units, terminations), :mod:`steps`,
:mod:`electrostatics` and :mod:`reconstructions` (cells that compensate a
polar termination), :mod:`polarity` (Tasker type), :mod:`corrugation` (what a
topograph shows).
"""
