"""Identification of the robot from logged motion (see `_regressor` for the
model, `_estimate` for the base parameters and the weighted least squares)."""

from ._estimate import BaseParameters, Estimate, base_parameters, estimate
from ._excite import Excitation, design_excitation, fourier_motion
from ._writeback import corrected_description
from ._run import DEFAULT_CUTOFF, Identification, identify, predict, prepare
from ._regressor import ParameterSet, parameter_set, regressor, regressor_rows

__all__ = ["Excitation", "design_excitation", "fourier_motion", "corrected_description", "DEFAULT_CUTOFF", "Identification", "identify", "predict", "prepare", "base_parameters", "BaseParameters", "estimate", "Estimate", "ParameterSet",
           "parameter_set", "regressor", "regressor_rows"]
