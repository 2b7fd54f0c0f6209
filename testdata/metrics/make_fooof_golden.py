#!/usr/bin/python3
"""Writes the published method's own fit of the spectral-parameterisation
spectra to golden/fooof.json.

Run from anywhere with Debian's python3 (numpy, scipy; checked with scipy
1.10.1, numpy 1.24.2):

    /usr/bin/python3 testdata/metrics/make_fooof_golden.py

The reference is fooof 1.1.1, the implementation of spectral
parameterisation by the method's authors (Donoghue T, Haller M, Peterson EJ,
et al. (2020). Parameterizing neural power spectra into periodic and
aperiodic components. Nat Neurosci 23(12):1655-1665), read from
../shared/reference/fooof-1.1.1 beside the checkout (see its PROVENANCE.md):
it is imported from there, never copied into the project.

The inputs are the twelve spectra of golden/specparam.json (written by
make_golden.py), fitted over its frequency range with two settings: that
file's own (minimum peak height 0.25) and settings v1's (the published
default minimum peak height 0). Each case keeps the index of its spectrum in
specparam.json. Floats are written with Python's shortest round-trip repr.
"""
import json
import os
import sys

import numpy as np
import scipy

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
FOOOF = os.path.join(os.path.dirname(ROOT), "shared", "reference", "fooof-1.1.1")
SPECTRA = os.path.join(HERE, "golden", "specparam.json")
OUT = os.path.join(HERE, "golden", "fooof.json")

if not os.path.isdir(FOOOF):
    sys.exit("make_fooof_golden.py: %s is absent: the reference implementation is read from there" % FOOOF)
sys.path.insert(0, FOOOF)
# fooof 1.1 prints a notice about its successor (specparam 2.0) on import.
import fooof  # noqa: E402
from fooof import FOOOF as Model  # noqa: E402


def fit(freqs, psd, st):
    fm = Model(peak_width_limits=[st["peak_width_min"], st["peak_width_max"]],
               max_n_peaks=st["max_peaks"], min_peak_height=st["min_peak_height"],
               peak_threshold=st["peak_threshold"], aperiodic_mode="fixed", verbose=False)
    fm.fit(freqs, psd, [st["freq_lo"], st["freq_hi"]])
    offset, exponent = fm.aperiodic_params_
    return {
        "offset": float(offset), "exponent": float(exponent),
        "r2": float(fm.r_squared_), "error": float(fm.error_),
        # centre Hz, Gaussian height (log10 power), bandwidth 2 sigma Hz
        "gaussians": [[float(c), float(h), float(2 * s)] for c, h, s in fm.gaussian_params_],
        # centre Hz, height of the full model above the aperiodic fit at the
        # centre, bandwidth 2 sigma Hz (fooof's peak_params_)
        "peaks": [[float(c), float(p), float(b)] for c, p, b in fm.peak_params_],
    }


def main():
    with open(SPECTRA) as f:
        spectra = json.load(f)
    own = dict(spectra["settings"])
    v1 = dict(own, min_peak_height=0.0)
    settings = [("specparam.json settings", own), ("settings v1 (minimum peak height 0)", v1)]
    out = {
        "meta": {
            "library": "fooof %s (../shared/reference/fooof-1.1.1), scipy %s, numpy %s"
                       % (fooof.__version__, scipy.__version__, np.__version__),
            "call": "FOOOF(peak_width_limits, max_n_peaks, min_peak_height, peak_threshold, "
                    "aperiodic_mode='fixed').fit(freqs, psd, [freq_lo, freq_hi])",
            "script": "testdata/metrics/make_fooof_golden.py",
            "spectra": "testdata/metrics/golden/specparam.json",
        },
        "settings": [],
    }
    for name, st in settings:
        cases = []
        for i, c in enumerate(spectra["cases"]):
            r = fit(np.array(c["freqs"]), np.array(c["psd"]), st)
            r["spectrum"] = i
            cases.append(r)
        out["settings"].append({"name": name, "settings": st, "cases": cases})
    with open(OUT, "w") as f:
        json.dump(out, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
