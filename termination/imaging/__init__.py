"""Imaging: height maps from files, their terraces and steps, and their Fourier lattice.

Imports nothing of the bulk, surface or identification layers: an image is
analysed without knowing the crystal.  :mod:`reading` (files and
calibration), :mod:`parameters` (the knobs), :mod:`terraces`,
:mod:`fourier`, and :mod:`analysis` (the whole pipeline).
"""
