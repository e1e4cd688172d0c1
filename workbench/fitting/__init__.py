"""Fit loss-model parameters to a measured loss table.

Four fits, each returning a frozen result object with named fields and ``to_dict()`` (SI):

* :func:`fit_steinmetz` -- k, alpha, beta (and, with temperatures in the table, the
  quadratic temperature factor ct0, ct1, ct2), minimising the relative error; non-sine rows
  enter through the iGSE. Parameter covariance, 95 % intervals, prediction bands and
  extrapolation flags.
* :func:`fit_steinmetz_bands` -- split the frequency range into contiguous bands with one
  Steinmetz set each when a single set misses a relative-error tolerance.
* :func:`fit_separation` -- hysteresis (k_hyst, beta_hyst) and excess (k_excess) terms with
  the classical eddy term fixed by resistivity and thickness, or with an effective
  resistivity fitted too.
* :func:`fit_two_frequency` -- energy per cycle against frequency at each flux level:
  hysteresis energy (intercept), eddy slope and the crossover frequency.
* :func:`fit_bias` -- one Steinmetz set per DC-bias level of a table with an ``h_dc`` or
  ``b_dc`` column (the other fits refuse to pool rows from several bias levels).

:func:`fitted_material` and :func:`save_fitted_material` turn a fit into a user material.

The modules follow the fits: ``steinmetz``, ``bands``, ``separation``, ``two_frequency``,
``material``; ``tables`` holds the waveform constants of table rows.
"""
from workbench.fitting.bands import SteinmetzBands, fit_steinmetz_bands
from workbench.fitting.bias import BiasFit, fit_bias
from workbench.fitting.material import fitted_material, save_fitted_material
from workbench.fitting.separation import SeparationFit, fit_separation
from workbench.fitting.steinmetz import SteinmetzFit, SteinmetzPrediction, fit_steinmetz
from workbench.fitting.tables import igse_shape_factor, separation_shape_constants
from workbench.fitting.two_frequency import (
    TwoFrequencyFit,
    TwoFrequencyLevel,
    fit_two_frequency,
)

__all__ = [
    "BiasFit",
    "fit_bias",
    "SeparationFit",
    "SteinmetzBands",
    "SteinmetzFit",
    "SteinmetzPrediction",
    "TwoFrequencyFit",
    "TwoFrequencyLevel",
    "fit_separation",
    "fit_steinmetz",
    "fit_steinmetz_bands",
    "fit_two_frequency",
    "fitted_material",
    "igse_shape_factor",
    "save_fitted_material",
    "separation_shape_constants",
]
