"""heatsight.inverse: the statistics (fit, strength, bands, screening, trends), on arrays and
forward objects.  Names load on first use, so a command's --help stays quick."""

from __future__ import annotations

import importlib

#: public name -> the module that defines it
_EXPORTS = {
    "averaged_loo": "diagnostics", "default_threshold": "diagnostics",
    "screen_outliers": "diagnostics", "sensor_table": "diagnostics",
    "InverseError": "errors", "StrengthError": "errors",
    "LinearGaussianProblem": "linear_gaussian",
    "LmfitFit": "lmfit_solver", "fit_linear_lmfit": "lmfit_solver", "fit_lmfit": "lmfit_solver",
    "Whitener": "noise", "noise_covariance": "noise",
    "StrengthChoice": "strength", "choose_strength": "strength", "default_alphas": "strength",
    "StrengthAverage": "strength_average",
    "LearnedPrior": "hyperprior", "learn_prior": "hyperprior",
    "unresolved_warning": "resolution",
    "Z95": "bands",
    "fit": "fitting", "prior_diagonal": "design", "pinned_edge_notes_for_case": "pinned_edges",
    "FitOptions": "problem", "Problem": "problem", "Zone": "problem",
    "SensorReadings": "readings",
    "FitResult": "result", "Posterior": "result",
    "BatchEstimates": "batch", "BatchSolver": "batch", "change_threshold": "batch",
    "face_functionals": "batch",
    "WindowStats": "steady", "window_index": "steady",
}
_SUBMODULES = ("steady",)

__all__ = sorted(_EXPORTS) + list(_SUBMODULES)


def __getattr__(name):
    if name in _EXPORTS:
        value = getattr(importlib.import_module(f"{__name__}.{_EXPORTS[name]}"), name)
        globals()[name] = value
        return value
    if name in _SUBMODULES:
        return importlib.import_module(f"{__name__}.{name}")
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return __all__
