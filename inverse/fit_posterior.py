"""The smooth model's posterior for inverse.fit: learned prior, strength average, one
strength, calibrated face parameters or the robust lmfit path."""

from __future__ import annotations

from .calibration import calibrate, learned_calibration
from .design import NOMINAL_PRECISION_FACTOR
from .hyperprior import learn_prior
from .lmfit_solver import fit_linear_lmfit
from .result import Posterior
from .strength_average import StrengthAverage


def smooth_posterior(design, rd, screen, P, u, opts, warnings) -> Posterior:
    """Posterior of c: joint with calibrated parameters (under the learned prior, when it
    answers: calibration.learned_calibration); with the evidence, averaged over strength,
    length scale and order of the learned prior (prior "learned", hyperprior.py) or over
    alpha alone (prior "fixed"); at one alpha; or from the robust lmfit path."""
    final, alpha = screen.problem, screen.choice.alpha
    if opts.calibrate:
        cal = calibrate(design, rd, screen.kept, final, alpha, P, opts.calibration)
        K = P.size
        if not opts.learned_prior:
            return Posterior(cal.coefficients, cal.covariance[:K, :K], alpha, None, cal)
        cal, avg, notes = learned_calibration(cal, rd, screen.kept, final, u > 0, NOMINAL_PRECISION_FACTOR,
                                              opts.calibration)
        warnings[:] = [w for w in warnings if w not in screen.choice.warnings] + list(avg.warnings) + notes
        return Posterior(cal.coefficients, cal.covariance[:K, :K], alpha, avg, cal)
    if opts.learned_prior:
        avg = learn_prior(final, design.basis, nominal=u > 0, nominal_factor=NOMINAL_PRECISION_FACTOR)
        # the fixed prior's strength-grid notes do not apply to the learned prior's answer
        warnings[:] = [w for w in warnings if w not in screen.choice.warnings] + list(avg.warnings)
        post = Posterior(avg.coefficients(), avg.posterior_covariance(), alpha, avg)
    elif opts.strength_method == "evidence":
        avg = StrengthAverage(final)
        warnings.extend(avg.warnings)
        post = Posterior(avg.coefficients(), avg.posterior_covariance(), alpha, avg)
    else:
        post = Posterior(final.coefficients(alpha), final.posterior_covariance(alpha), alpha, None)
    if opts.loss != "linear":
        lf = fit_linear_lmfit(final.G, final.d, final.t0, final.noise, P, alpha, c0=final.c0, loss=opts.loss)
        warnings.append(f"robust {opts.loss} misfit: bands come from the linearized robust fit at a "
                        "single smoothing strength")
        return Posterior(lf.coefficients, lf.coefficient_covariance, alpha, None)
    if opts.solver == "lmfit":
        lf = fit_linear_lmfit(final.G, final.d, final.t0, final.noise, P, alpha, c0=final.c0)
        if post.averaged is None:
            return Posterior(lf.coefficients, lf.coefficient_covariance, alpha, None)
    return post
