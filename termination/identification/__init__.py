"""Identification: measurements, candidates with their predictions and prior, and the likelihood ranking.

:mod:`measurement` holds what was measured (and its file formats),
:mod:`model` the model parameters, :mod:`candidates` what every face and
termination predicts, and :mod:`likelihood` the posterior ranking and the
verdict.  Data flows in from :mod:`termination.surface` (predictions) and
:mod:`termination.imaging` (measurements of a height map).
"""
