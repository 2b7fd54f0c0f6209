#!/usr/bin/python3
"""Golden fits of the control norm (longwave, package trends) by statsmodels.

Run from the repository root:  /usr/bin/python3 testdata/trends/mixed/make_golden.py
Writes testdata/trends/mixed/golden.json. Made with Debian's python3-statsmodels
(version recorded in the file), numpy and pandas.

Each data set is invented (synthetic ground truth, seeded): control persons with
repeated visits, value = b0_i + b1_i * (age - c) + noise. The model is fitted by
statsmodels MixedLM with a random intercept and a random slope per person:

    MixedLM.from_formula("value ~ age", data, groups="person",
                         re_formula="~age").fit(reml=True)

with age centred at the mean age over all visits (as longwave centres it).
statsmodels' default optimiser stops early on some sets, so each is fitted
with Nelder-Mead then BFGS and with Powell, the larger REML log likelihood kept
and polished by BFGS (gtol 1e-12).
Recorded: fe_params (intercept at the centre, slope per year), bse_fe, bse_gls
(sqrt of the diagonal of (sum X'V^-1 X)^-1 at the fitted G and scale), cov_re
(the 2x2 between-person covariance G, intercept then slope), scale (residual
variance) and llf (the REML log likelihood as statsmodels states it).
Values and ages are rounded to 4 and 3 decimals before the fit so that the
file holds exactly the data that was fitted.
"""
import json
import os
import warnings

import numpy as np
import pandas as pd
import statsmodels
import statsmodels.api as sm


def make(rng, persons, visits, age_lo, age_hi, b0, b0_sd, b1, b1_sd, rho, sigma, gap=1.0, gap_jitter=0.0):
    """persons: count; visits: function rng -> number of visits of a person."""
    cov = np.array([[b0_sd ** 2, rho * b0_sd * b1_sd], [rho * b0_sd * b1_sd, b1_sd ** 2]])
    rows = []
    for i in range(persons):
        first = rng.uniform(age_lo, age_hi)
        u = rng.multivariate_normal([0.0, 0.0], cov) if (b0_sd > 0 or b1_sd > 0) else np.zeros(2)
        age = first
        for j in range(visits(rng)):
            if j > 0:
                age += gap + gap_jitter * rng.uniform(-1, 1)
            value = b0 + u[0] + (b1 + u[1]) * (age - 70.0) + sigma * rng.standard_normal()
            rows.append(("P%02d" % (i + 1), round(age, 3), round(value, 4)))
    return rows


def fit(name, note, rows):
    df = pd.DataFrame(rows, columns=["person", "age_years", "value"])
    centre = float(np.mean(df["age_years"].to_numpy()))
    df["age"] = df["age_years"] - centre
    model = sm.MixedLM.from_formula("value ~ age", df, groups="person", re_formula="~age")
    # statsmodels' default optimiser stops early on some of these sets (its
    # llf is then visibly below the optimum); fit with Nelder-Mead then BFGS,
    # and with Powell, and keep the fit with the larger REML log likelihood.
    best, caught = None, []
    for method in (["nm", "bfgs"], ["powell"]):
        with warnings.catch_warnings(record=True) as w:
            warnings.simplefilter("always")
            res = model.fit(reml=True, method=method, maxiter=5000)
        if np.isfinite(res.llf) and (best is None or res.llf > best[0].llf):
            best, caught = (res, "+".join(method)), w
    res, method = best
    # Polish with BFGS at a tight gradient tolerance from the best fit; kept
    # when it raises the log likelihood.
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        polished = model.fit(reml=True, start_params=res.params_object, method="bfgs", maxiter=2000, gtol=1e-12)
    if np.isfinite(polished.llf) and polished.llf > res.llf:
        res, method, caught = polished, method + ", polished by bfgs", w
    # The GLS covariance of the fixed effects at statsmodels' variance
    # components, (sum_i X_i' V_i^-1 X_i)^-1 with V_i = scale I + Z_i G Z_i'
    # (numpy arithmetic; statsmodels' own bse_fe inverts the full observed
    # Hessian instead and is recorded beside it).
    G = np.asarray(res.cov_re)
    xvx = np.zeros((2, 2))
    for _, grp in df.groupby("person", sort=True):
        X = np.column_stack([np.ones(len(grp)), grp["age"].to_numpy()])
        V = res.scale * np.eye(len(grp)) + X @ G @ X.T
        xvx += X.T @ np.linalg.solve(V, X)
    bse_gls = np.sqrt(np.diag(np.linalg.inv(xvx)))
    return {
        "name": name, "note": note,
        "person": df["person"].tolist(),
        "age_years": df["age_years"].tolist(),
        "value": df["value"].tolist(),
        "centre": centre,
        "fe_params": [float(x) for x in res.fe_params],
        "bse_fe": [float(x) for x in res.bse_fe],
        "bse_gls": [float(x) for x in bse_gls],
        "cov_re": [float(x) for x in np.asarray(res.cov_re).ravel()],
        "scale": float(res.scale),
        "llf": float(res.llf),
        "converged": bool(res.converged),
        "method": method,
        "warnings": sorted({str(w.category.__name__) for w in caught}),
    }


def main():
    rng = np.random.RandomState(20261203)
    sets = []
    # 1. Balanced: 24 persons, 4 visits each, exactly a year apart.
    sets.append(fit("balanced", "24 persons x 4 visits a year apart, ages 55-85, PDR-like values",
                    make(rng, 24, lambda r: 4, 55, 82, 9.5, 0.55, -0.016, 0.03, 0.0, 0.23)))
    # 2. Unbalanced: 30 persons with 1-6 visits at irregular gaps.
    sets.append(fit("unbalanced", "30 persons, 1-6 visits each, gaps 0.5-1.5 years",
                    make(rng, 30, lambda r: int(r.randint(1, 7)), 55, 80, 9.5, 0.55, -0.02, 0.04, -0.3, 0.25,
                         gap=1.0, gap_jitter=0.5)))
    # 3. No slope variance: every person ages at the same rate. Its own seed
    # (1, the first of seeds 0-7 whose REML slope variance came out near zero)
    # so that the estimate sits next to the boundary.
    sets.append(fit("slope variance near zero", "26 persons, 3-5 visits, between-person slope SD 0; REML estimate next to the boundary",
                    make(np.random.RandomState(1), 26, lambda r: int(r.randint(3, 6)), 58, 82, 9.4, 0.5, -0.02, 0.0, 0.0, 0.22)))
    # 4. Large slope spread, correlated with the intercept.
    sets.append(fit("correlated effects", "22 persons, 3-6 visits, slope SD 0.08, correlation 0.6",
                    make(rng, 22, lambda r: int(r.randint(3, 7)), 55, 80, 9.6, 0.6, -0.03, 0.08, 0.6, 0.2)))
    # 5. Noise larger than the between-person spread, on a ratio scale.
    sets.append(fit("noisy ratio", "25 persons, 3-6 visits, theta/alpha-like ratio, residual SD above the intercept SD",
                    make(rng, 25, lambda r: int(r.randint(3, 7)), 60, 85, 0.45, 0.04, 0.004, 0.003, 0.2, 0.06)))
    # 6. Many persons, two visits each and a few with more (sparse follow-up).
    sets.append(fit("sparse follow-up", "40 persons, 2-3 visits two years apart",
                    make(rng, 40, lambda r: int(r.choice([2, 2, 3])), 55, 80, 9.5, 0.5, -0.015, 0.05, 0.0, 0.25,
                         gap=2.0, gap_jitter=0.25)))
    out = {"statsmodels": statsmodels.__version__, "numpy": np.__version__, "pandas": pd.__version__, "sets": sets}
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "golden.json")
    with open(path, "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
