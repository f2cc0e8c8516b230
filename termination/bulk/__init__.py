"""The bulk crystal: elements, the one :class:`Crystal` type, formal charges and the bond graph.

Imports only :mod:`termination.algebra` and the package's bottom modules
(errors, defaults, quantities, arrays, units).  Prototypes and structure files, which build
crystals, live in :mod:`termination.structures`.
"""
