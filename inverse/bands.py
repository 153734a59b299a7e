"""The factor of a two-sided 95 % normal band: mean +- Z95 * sd.

Z95 is the standard normal 97.5 % quantile, Phi^-1(0.975) = 1.95996... (dimensionless);
every 95 % band of heatsight uses this one constant.
"""

import scipy.stats

Z95 = float(scipy.stats.norm.ppf(0.975))
