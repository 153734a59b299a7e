from .diagnostics import averaged_loo, default_threshold, screen_outliers, sensor_table
from .errors import InverseError, StrengthError
from .linear_gaussian import LinearGaussianProblem
from .lmfit_solver import LmfitFit, fit_linear_lmfit, fit_lmfit
from .noise import Whitener, noise_covariance
from .strength import StrengthChoice, choose_strength, default_alphas
from .strength_average import StrengthAverage
from .hyperprior import LearnedPrior, learn_prior
from .resolution import unresolved_warning

__all__ = [
    "InverseError", "LinearGaussianProblem", "LmfitFit", "StrengthAverage", "StrengthChoice",
    "StrengthError", "Whitener", "averaged_loo", "choose_strength", "default_alphas",
    "default_threshold", "fit_linear_lmfit", "fit_lmfit", "noise_covariance", "screen_outliers",
    "sensor_table", "LearnedPrior", "learn_prior", "unresolved_warning",
]

from .bands import Z95  # noqa: E402
from .fit import fit, prior_diagonal  # noqa: E402
from .problem import FitOptions, Problem, Zone  # noqa: E402
from .readings import SensorReadings  # noqa: E402
from .result import FitResult, Posterior  # noqa: E402

__all__ += ["Z95", "FitOptions", "Problem", "Zone", "fit", "prior_diagonal", "SensorReadings", "FitResult", "Posterior"]

from .batch import BatchEstimates, BatchSolver, change_threshold, face_functionals  # noqa: E402
from .steady import WindowStats, window_index  # noqa: E402
from . import steady  # noqa: E402

__all__ += ["BatchEstimates", "BatchSolver", "change_threshold", "face_functionals", "WindowStats",
            "window_index", "steady"]
