"""Honest bands: coverage of pointwise 95 % bands by simulation with truth drawn from the prior."""

import numpy as np
import pytest
from scipy.stats import norm
from threadpoolctl import threadpool_limits

from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.noise import noise_covariance
from heatsight.inverse.strength import choose_strength
from heatsight.inverse.strength_average import StrengthAverage

Z95 = norm.ppf(0.975)          # 1.95996 (scipy.stats.norm, reference library)
ALPHA_TRUE = 0.01


def setup(n, K, offsets, seed):
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.05, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    p = 1.0 + (np.pi * k) ** 2
    sig = np.full(n, 0.5)
    S = noise_covariance(sig, offset_sd=0.3, common_offset_sd=0.2) if offsets else sig**2
    c0 = rng.normal(size=K)
    t0 = np.full(n, 20.0)
    B = rng.normal(size=(6, K))          # any fixed linear map of the coefficients
    return rng, G, t0, S, p, c0, B


def simulate(n, K, offsets, seed, replicates=500):
    # thousands of tiny matrix products: one BLAS thread avoids thread hand-off overhead
    with threadpool_limits(limits=1, user_api="blas"):
        return _simulate(n, K, offsets, seed, replicates)


def _simulate(n, K, offsets, seed, replicates):
    rng, G, t0, S, p, c0, B = setup(n, K, offsets, seed)
    Sm = S if np.ndim(S) == 2 else np.diag(S)
    L = np.linalg.cholesky(Sm)
    prob = LinearGaussianProblem(G, t0, t0, S, p, c0)
    hits = {"known": 0, "evidence": 0, "averaged": 0}
    for _ in range(replicates):
        c = c0 + rng.normal(size=K) / np.sqrt(ALPHA_TRUE * p)        # truth from the prior
        q = prob.with_data(t0 + G @ c + L @ rng.normal(size=n))
        bands = {"known": q.predict(B, ALPHA_TRUE),
                 "evidence": q.predict(B, choose_strength(q, "evidence").alpha),
                 }
        for key, (mean, sd) in bands.items():
            hits[key] += int(np.sum(np.abs(B @ c - mean) <= Z95 * sd))
        _, _, lower, upper = StrengthAverage(q).band(B, 0.95)
        hits["averaged"] += int(np.sum((B @ c >= lower) & (B @ c <= upper)))
    total = replicates * B.shape[0]
    return {key: v / total for key, v in hits.items()}


CASES = [(16, 10, False, 21), (12, 24, True, 22)]
_cache = {}


def coverage(case):
    if case not in _cache:
        _cache[case] = simulate(*case)
        n, K, offsets, _ = case
        print(f"\ncoverage n={n} K={K} offsets={offsets}: " +
              ", ".join(f"{k} alpha {v:.3f}" for k, v in _cache[case].items()))
    return _cache[case]


@pytest.mark.parametrize("case", CASES)
def test_band_coverage_known_alpha(case):
    # nominal 0.95; [0.90, 0.98] allows for Monte Carlo error of 3000 correlated indicators
    assert 0.90 <= coverage(case)["known"] <= 0.98


@pytest.mark.parametrize("case", CASES)
def test_band_coverage_alpha_averaged(case):
    assert 0.90 <= coverage(case)["averaged"] <= 0.98


@pytest.mark.parametrize("case", CASES)
@pytest.mark.xfail(strict=True, reason="plug-in evidence alpha ignores the scatter of alpha-hat "
                   "(a factor ~3 here): its bands cover about 0.85-0.89; use StrengthAverage")
def test_band_coverage_plug_in_evidence_alpha(case):
    assert 0.90 <= coverage(case)["evidence"] <= 0.98


@pytest.mark.parametrize("case", CASES)
def test_plug_in_evidence_shortfall_is_bounded(case):
    """Guard on the known shortfall: plug-in evidence bands undercover, but not grossly."""
    cov = coverage(case)
    assert 0.80 <= cov["evidence"] < cov["averaged"]
