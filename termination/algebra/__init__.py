"""Exact integer and two-dimensional lattice algebra.

The bottom layer of the package: of ``termination`` it imports only the
bottom modules (array type aliases, numerical constants, units).
:mod:`~termination.algebra.integer` holds gcds, Hermite bases and unimodular
completion; :mod:`~termination.algebra.lattice2d` Gauss reduction,
sublattices, their classes under a point group and Wood notation.
"""
