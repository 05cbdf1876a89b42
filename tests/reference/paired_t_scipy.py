"""Reference value for the paired t-test behind the run's choice of default
(src/default_rule.rs, test `paired_t_test_matches_scipy_on_students_sleep_data`).

Data: Student's sleep data (Student, Biometrika 6(1), 1908; R's
datasets::sleep), extra hours of sleep of ten patients under two drugs.
Run: python3 tests/reference/paired_t_scipy.py  (scipy 1.17.1 gave
t = -4.062127683382037, one-sided p = 0.0014164450986921364).
"""
from scipy import stats

g1 = [0.7, -1.6, -0.2, -1.2, -0.1, 3.4, 3.7, 0.8, 0.0, 2.0]
g2 = [1.9, 0.8, 1.1, 0.1, -0.1, 4.4, 5.5, 1.6, 4.6, 3.4]
r = stats.ttest_rel(g1, g2, alternative="less")
print(f"t = {float(r.statistic)!r}, one-sided p = {float(r.pvalue)!r}")
