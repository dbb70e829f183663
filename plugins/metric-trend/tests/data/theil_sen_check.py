"""Reference values for tests/reference.rs (Theil–Sen, Mann–Kendall).

Run with: python3 plugins/metric-trend/tests/data/theil_sen_check.py
Computed with scipy 1.17.1 / numpy 2.4.6 (Python 3.11).
"""
import numpy as np
import scipy
from scipy import stats

print("scipy", scipy.__version__, "numpy", np.__version__)

# The five-point check series of tests/reference.rs (days, kg).
t = np.array([0, 7, 14, 21, 28], dtype=float)
y = np.array([90.0, 89.4, 89.6, 88.9, 88.7])
r = stats.theilslopes(y, t, alpha=0.95)
print("five-point: slope %.10f intercept %.10f low %.10f high %.10f" % (r.slope, r.intercept, r.low_slope, r.high_slope))

# An irregular, tied series (two readings share t = 3 and y values tie).
t2 = np.array([0, 1, 3, 3, 6, 8, 9, 13, 14, 17, 20, 21], dtype=float)
y2 = np.array([101.2, 100.8, 100.9, 100.1, 100.4, 99.7, 100.1, 99.2, 99.6, 98.8, 99.2, 98.7])
r2 = stats.theilslopes(y2, t2, alpha=0.95)
print("irregular: slope %.10f intercept %.10f low %.10f high %.10f" % (r2.slope, r2.intercept, r2.low_slope, r2.high_slope))

# OLS on the irregular series (slope and its standard error), for the q = 0 filter check.
lr = stats.linregress(t2, y2)
print("irregular OLS: slope %.12f intercept %.12f" % (lr.slope, lr.intercept))
