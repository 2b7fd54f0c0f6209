#!/usr/bin/python3
"""Golden values for package trends (longwave).

Run from the repository root:  /usr/bin/python3 testdata/trends/make_golden.py
Writes testdata/trends/golden.json. Made with Debian's python3-numpy 1.24.2 and
python3-scipy 1.10.1. The series are invented (synthetic ground truth for the
arithmetic only).

- t quantiles: scipy.stats.t.ppf(0.975, df).
- slopes: x = days since the first date / 365.25 (datetime.date arithmetic),
  slope and intercept from numpy.polyfit(x, y, 1) and from
  scipy.stats.linregress(x, y) (which also gives the slope's standard error);
  95 % CI = slope ± t.ppf(0.975, n − 2) · stderr.
- prediction intervals: statsmodels is not installed, so the interval is
  computed in numpy by the textbook formula
  ŷ ± t(0.975; n−2)·s·√(1 + 1/n + (x0 − x̄)²/Sxx), with the line from
  numpy.polyfit and t from scipy.stats.t.ppf.
"""
import datetime
import json
import os

import numpy as np
import scipy
import scipy.stats


def years(dates):
    d = [datetime.date.fromisoformat(s) for s in dates]
    return np.array([(x - d[0]).days / 365.25 for x in d])


def slope_case(name, dates, values):
    x = years(dates)
    y = np.array(values, dtype=float)
    pf_slope, pf_icpt = np.polyfit(x, y, 1)
    lr = scipy.stats.linregress(x, y)
    n = len(x)
    t = scipy.stats.t.ppf(0.975, n - 2)
    return {
        "name": name, "dates": dates, "values": values,
        "years": x.tolist(),
        "polyfit_slope": float(pf_slope), "polyfit_intercept": float(pf_icpt),
        "linregress_slope": float(lr.slope), "linregress_intercept": float(lr.intercept),
        "linregress_stderr": float(lr.stderr),
        "t975": float(t),
        "ci_low": float(lr.slope - t * lr.stderr), "ci_high": float(lr.slope + t * lr.stderr),
    }


def main():
    rng = np.random.RandomState(20261201)
    out = {"numpy": np.__version__, "scipy": scipy.__version__}
    out["t975"] = [{"df": df, "t": float(scipy.stats.t.ppf(0.975, df))}
                   for df in list(range(1, 41)) + [60, 120, 200]]

    cases = [
        slope_case("annual five", ["2019-03-14", "2020-03-02", "2021-03-22", "2022-02-28", "2023-03-15"],
                   [9.8, 9.7, 9.5, 9.45, 9.2]),
        slope_case("three irregular", ["2021-06-30", "2022-01-15", "2024-02-29"], [10.1, 10.25, 9.9]),
        slope_case("rising theta/alpha", ["2018-01-01", "2019-01-01", "2020-01-01", "2021-01-01"],
                   [0.42, 0.47, 0.46, 0.55]),
    ]
    d0 = datetime.date(2016, 2, 29)
    dates, vals = [], []
    for k in range(10):
        d = d0 + datetime.timedelta(days=int(365.25 * k + rng.randint(-40, 41)))
        dates.append(d.isoformat())
        vals.append(round(float(9.9 - 0.06 * k + rng.normal(0, 0.15)), 4))
    cases.append(slope_case("ten noisy", dates, vals))
    out["slopes"] = cases

    ages = np.round(rng.uniform(55, 85, 25), 2)
    values = np.round(10.2 - 0.02 * (ages - 55) + rng.normal(0, 0.5, 25), 3)
    n = len(ages)
    b, a = np.polyfit(ages, values, 1)
    resid = values - (a + b * ages)
    s = float(np.sqrt(np.sum(resid ** 2) / (n - 2)))
    xbar = float(np.mean(ages))
    sxx = float(np.sum((ages - xbar) ** 2))
    t = float(scipy.stats.t.ppf(0.975, n - 2))
    at = []
    for x0 in [50.0, 60.0, 70.0, 72.5, 85.0, 90.0]:
        yhat = a + b * x0
        h = t * s * np.sqrt(1 + 1 / n + (x0 - xbar) ** 2 / sxx)
        at.append({"age": x0, "yhat": float(yhat), "lower": float(yhat - h), "upper": float(yhat + h)})
    out["prediction"] = {
        "ages": ages.tolist(), "values": values.tolist(),
        "intercept": float(a), "slope": float(b), "residual_sd": s, "mean_age": xbar, "sxx": sxx, "t975": t,
        "at": at,
    }
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "golden.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
