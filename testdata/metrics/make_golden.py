#!/usr/bin/python3
"""Writes the scipy reference values for package metrics to golden/*.json.

Run from anywhere with Debian's python3 (checked with scipy 1.10.1, numpy 1.24.2):

    /usr/bin/python3 testdata/metrics/make_golden.py

Every input is deterministic (numpy default_rng with fixed seeds) and stored
beside its result, so the Go tests need no Python. Floats are written with
Python's shortest round-trip repr, so they read back bit for bit.
"""
import json
import os
import sys

import numpy as np
import scipy
from scipy import signal, optimize

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "golden")


def meta(call):
    return {
        "library": "scipy %s, numpy %s" % (scipy.__version__, np.__version__),
        "call": call,
        "script": "testdata/metrics/make_golden.py",
    }


def dump(name, obj):
    os.makedirs(OUT, exist_ok=True)
    with open(os.path.join(OUT, name), "w") as f:
        json.dump(obj, f, indent=None, separators=(",", ":"))
        f.write("\n")


def tolist(a):
    return [float(v) for v in np.asarray(a).ravel()]


# --- 1. Butterworth and notch designs ---------------------------------------
def butter_cases():
    cases = []
    rates = [128, 160, 200, 250, 256, 500, 1000]
    for fs in rates:
        for order in range(1, 9):
            for btype, wn in (("lowpass", 45.0), ("highpass", 0.5), ("lowpass", fs / 5.0), ("highpass", fs / 7.0)):
                sos = signal.butter(order, wn, btype, fs=fs, output="sos")
                cases.append({"btype": btype, "order": order, "fs": fs, "wn": [wn], "sos": sos.tolist()})
        for order in (2, 3, 4):
            for lo, hi in ((48.0, 52.0), (58.0, 62.0), (fs / 10.0, fs / 5.0)):
                if hi >= fs / 2:
                    continue
                sos = signal.butter(order, [lo, hi], "bandstop", fs=fs, output="sos")
                cases.append({"btype": "bandstop", "order": order, "fs": fs, "wn": [lo, hi], "sos": sos.tolist()})
    notches = []
    for fs in rates:
        for f0 in (50.0, 60.0):
            if f0 >= fs / 2:
                continue
            for q in (10.0, 30.0, 35.0):
                b, a = signal.iirnotch(f0, q, fs)
                notches.append({"f0": f0, "q": q, "fs": fs, "b": tolist(b), "a": tolist(a)})
    dump("butter.json", {
        "source": meta("scipy.signal.butter(order, wn, btype, fs=fs, output='sos'); scipy.signal.iirnotch(f0, q, fs)"),
        "butter": cases,
        "notch": notches,
    })


# --- 2. Zero-phase filtering -------------------------------------------------
def filtfilt_cases():
    rng = np.random.default_rng(20261201)
    cases = []

    def add(name, fs, n, parts):
        t = np.arange(n) / fs
        x = 20 * rng.standard_normal(n) + 50 * np.sin(2 * np.pi * 10 * t) + 15 * np.sin(2 * np.pi * 50 * t) + 30.0 + 5 * t
        sos = np.vstack(parts)
        y = signal.sosfiltfilt(sos, x)
        cases.append({"name": name, "fs": fs, "sos": sos.tolist(), "x": tolist(x), "y": tolist(y)})

    add("lowpass4-45Hz-250", 250.0, 2500, [signal.butter(4, 45.0, "lowpass", fs=250.0, output="sos")])
    add("lowpass1-30Hz-250-odd-length", 250.0, 1001, [signal.butter(1, 30.0, "lowpass", fs=250.0, output="sos")])
    add("highpass2-1Hz-250", 250.0, 3000, [signal.butter(2, 1.0, "highpass", fs=250.0, output="sos")])
    add("highpass3-0.5Hz-128", 128.0, 1500, [signal.butter(3, 0.5, "highpass", fs=128.0, output="sos")])
    b, a = signal.iirnotch(50.0, 30.0, 250.0)
    add("notch50-q30-250", 250.0, 2000, [np.concatenate([b, a])[None, :]])
    add("bandstop4-48-52-500", 500.0, 4000, [signal.butter(4, [48.0, 52.0], "bandstop", fs=500.0, output="sos")])
    b, a = signal.iirnotch(50.0, 30.0, 500.0)
    add("pipeline-hp0.5-lp45-notch50-500", 500.0, 5000, [
        signal.butter(2, 0.5, "highpass", fs=500.0, output="sos"),
        signal.butter(4, 45.0, "lowpass", fs=500.0, output="sos"),
        np.concatenate([b, a])[None, :],
    ])
    add("lowpass8-40Hz-1000", 1000.0, 3001, [signal.butter(8, 40.0, "lowpass", fs=1000.0, output="sos")])
    # Shortest input accepted: len(x) = padlen + 1.
    sos = signal.butter(2, 20.0, "lowpass", fs=200.0, output="sos")
    add("lowpass2-20Hz-200-shortest", 200.0, 3 * (2 * len(sos) + 1) + 1, [sos])
    dump("filtfilt.json", {"source": meta("scipy.signal.sosfiltfilt(sos, x) (padtype='odd', default padlen)"), "cases": cases})


# --- 3. Welch ----------------------------------------------------------------
def welch_cases():
    rng = np.random.default_rng(7)
    cases = []
    for fs, nperseg, noverlap, n in (
        (250.0, 256, 128, 5000),
        (500.0, 2000, 1000, 20001),
        (256.0, 255, 100, 3001),
        (160.0, 320, 0, 1000),
        (200.0, 100, 99, 777),
        (128.0, 512, 256, 512),
    ):
        t = np.arange(n) / fs
        x = 10 * rng.standard_normal(n) + 40 * np.sin(2 * np.pi * 10.3 * t) + 7.0
        f, p = signal.welch(x, fs=fs, window="hann", nperseg=nperseg, noverlap=noverlap,
                            detrend="constant", scaling="density", return_onesided=True, average="mean")
        cases.append({"fs": fs, "nperseg": nperseg, "noverlap": noverlap, "stretches": [tolist(x)],
                      "segments": [(n - noverlap) // (nperseg - noverlap)], "freqs": tolist(f), "psd": tolist(p)})
    # Several stretches: scipy.signal.welch on each, averaged with weights =
    # segment counts (the accumulator's documented meaning).
    fs, nperseg, noverlap = 250.0, 500, 250
    stretches, psds, counts = [], [], []
    for n in (1000, 2600, 777):
        x = 5 * rng.standard_normal(n) + 12 * np.sin(2 * np.pi * 9.5 * np.arange(n) / fs)
        f, p = signal.welch(x, fs=fs, window="hann", nperseg=nperseg, noverlap=noverlap)
        stretches.append(tolist(x))
        psds.append(p)
        counts.append((n - noverlap) // (nperseg - noverlap))
    p = sum(c * q for c, q in zip(counts, psds)) / sum(counts)
    cases.append({"fs": fs, "nperseg": nperseg, "noverlap": noverlap, "stretches": stretches,
                  "segments": counts, "freqs": tolist(f), "psd": tolist(p)})
    dump("welch.json", {"source": meta("scipy.signal.welch(x, fs, window='hann', nperseg, noverlap, detrend='constant', "
                                       "scaling='density', return_onesided=True, average='mean'); several stretches: "
                                       "per-stretch welch averaged weighted by segment count"), "cases": cases})


# --- 4. Savitzky-Golay -------------------------------------------------------
def savgol_cases():
    rng = np.random.default_rng(11)
    cases = []
    n = 161
    f = np.linspace(1, 41, n)
    x = 3 * np.exp(-((f - 10) ** 2) / 2) + 20 / f + 0.2 * rng.standard_normal(n)
    for window, order in ((11, 5), (5, 2), (7, 3), (21, 4), (9, 0), (3, 1), (13, 6), (161, 3)):
        y = signal.savgol_filter(x, window, order)
        cases.append({"window": window, "order": order, "x": tolist(x), "y": tolist(y)})
    x = rng.standard_normal(11)
    cases.append({"window": 11, "order": 5, "x": tolist(x), "y": tolist(signal.savgol_filter(x, 11, 5))})
    dump("savgol.json", {"source": meta("scipy.signal.savgol_filter(x, window, order) (mode='interp')"), "cases": cases})


# --- 5. Spectral parameterisation (cross-check of model and optimiser) ------
# Spectra with a known aperiodic exponent, with and without alpha and beta
# Gaussian peaks, plus small log-normal noise. The reference follows the same
# stages as metrics.FitSpectrum after its peak search, with the true peaks as
# the peak set, and every least-squares problem solved by
# scipy.optimize.curve_fit:
#   1. robust aperiodic fit: fit y = b - log10(f**chi); residual clipped at 0;
#      refit on the points at or below its 0.025th percentile (np.percentile);
#   2. Gaussians fitted to y minus that line, from the true peaks, bounds:
#      centre within 1.5 sigma of the guess, height >= 0, sigma in
#      [width_min/2, width_max/2] (curve_fit with bounds: trust region
#      reflective);
#   3. aperiodic refit on y minus the fitted Gaussians;
#   4. R2 = squared Pearson correlation of y and the model, error = mean |y - model|.
# min_peak_height 0.25 (decades) keeps the shoulders that noise leaves beside
# a subtracted guess (up to 0.23 seen) out of the peak set: the cross-check is
# of the model and the optimiser, not of the peak search's choices.
SPEC_SETTINGS = {"freq_lo": 2.0, "freq_hi": 40.0, "peak_width_min": 0.5, "peak_width_max": 12.0,
                 "peak_threshold": 2.0, "min_peak_height": 0.25, "max_peaks": 6}
TIGHT = dict(ftol=1e-14, xtol=1e-14, gtol=1e-14, maxfev=100000)


def aperiodic(f, b, chi):
    return b - np.log10(f ** chi)


def gauss_sum(f, *p):
    out = np.zeros_like(f)
    for c, h, s in zip(p[0::3], p[1::3], p[2::3]):
        out = out + h * np.exp(-(f - c) ** 2 / (2 * s ** 2))
    return out


def fit_line(f, y):
    p0 = [y[0], 1.0]
    p, _ = optimize.curve_fit(aperiodic, f, y, p0=p0, **TIGHT)
    return p


def specparam_cases():
    rng = np.random.default_rng(2020)
    st = SPEC_SETTINGS
    freqs = np.arange(0, 250.25, 0.25)  # Welch bins of 4 s segments at 500 Hz
    sel = (freqs >= st["freq_lo"]) & (freqs <= st["freq_hi"])
    cases = []
    for chi in (0.8, 1.0, 1.5, 2.0):
        for peaks in ([], [(10.0, 0.7, 1.0)], [(10.0, 0.7, 1.0), (21.0, 0.3, 2.0)]):
            offset = 1.5
            f = freqs[sel]
            logp = aperiodic(f, offset, chi) + gauss_sum(f, *[v for pk in peaks for v in pk])
            # Noise of 0.015 log10 SD: the scatter of a Welch estimate from ~800
            # segments (a 30-minute recording), where the peak search should
            # find exactly the generating peaks.
            logp = logp + 0.015 * rng.standard_normal(len(f))
            power = np.full(len(freqs), 1e-3)
            power[sel] = 10 ** logp
            power[0] = 0.0  # DC bin outside the range: must be ignored
            y = np.log10(power[sel])
            # 1. robust aperiodic fit
            b, c = fit_line(f, y)
            flat = y - aperiodic(f, b, c)
            flat[flat < 0] = 0
            thr = np.percentile(flat, 0.025)
            keep = flat <= thr
            b, c = fit_line(f[keep], y[keep])
            flat = y - aperiodic(f, b, c)
            # 2. Gaussians from the true peaks
            if peaks:
                p0, lo, hi = [], [], []
                for (pc, ph, ps) in peaks:
                    p0 += [pc, ph, ps]
                    lo += [pc - 1.5 * ps, 0.0, st["peak_width_min"] / 2]
                    hi += [pc + 1.5 * ps, np.inf, st["peak_width_max"] / 2]
                gp, _ = optimize.curve_fit(gauss_sum, f, flat, p0=p0, bounds=(lo, hi), **TIGHT)
                g = gauss_sum(f, *gp)
            else:
                gp, g = np.array([]), np.zeros_like(f)
            # 3. aperiodic refit on the peak-removed spectrum
            b, c = fit_line(f, y - g)
            model = aperiodic(f, b, c) + g
            r2 = np.corrcoef(y, model)[0, 1] ** 2
            err = np.mean(np.abs(y - model))
            cases.append({
                "true_exponent": chi, "true_offset": offset,
                "true_peaks": [list(pk) for pk in peaks],
                "freqs": tolist(freqs), "psd": tolist(power),
                "offset": float(b), "exponent": float(c), "r2": float(r2), "error": float(err),
                "peaks": [[float(gp[i]), float(gp[i + 1]), float(2 * gp[i + 2])] for i in range(0, len(gp), 3)],
            })
    dump("specparam.json", {
        "source": meta("scipy.optimize.curve_fit (aperiodic b - log10(f**chi); sum of Gaussians with bounds) "
                       "in the stages of make_golden.py specparam_cases; np.percentile; np.corrcoef"),
        "settings": st, "cases": cases})


# --- 6. Real discrete Fourier transforms (package metrics/fft) ---------------
def fft_cases():
    rng = np.random.default_rng(20261203)
    cases = []
    # Lengths of the analysis (125 and 500 points at 125 Hz; 128/512 at
    # 128 Hz; 200/800 at 200 Hz), every radix path (4, 2, 3, 5 and primes
    # above five) and the smallest ones.
    for n in (1, 2, 3, 4, 5, 6, 7, 8, 9, 12, 15, 16, 25, 27, 49, 77, 100, 121, 125, 128, 143,
              200, 243, 250, 256, 500, 512, 800, 1000):
        x = rng.standard_normal(n) * 40.0
        c = np.fft.rfft(x)
        cases.append({"n": n, "x": tolist(x), "re": tolist(c.real), "im": tolist(c.imag)})
    dump("fft.json", {"source": meta("numpy.fft.rfft(x)"), "cases": cases})


if __name__ == "__main__":
    which = sys.argv[1:] or ["butter", "filtfilt", "welch", "savgol", "specparam", "fft"]
    for w in which:
        globals()[w + "_cases"]()
