#!/usr/bin/python3
"""Writes MNE's EOG regression on fixed inputs to golden/ocular.json.

Run from anywhere with Debian's python3 (checked with MNE 1.3.0, numpy 1.24.2):

    /usr/bin/python3 testdata/metrics/make_ocular_golden.py

The reference is mne.preprocessing.EOGRegression (MNE 1.3; the regression of
Gratton, Coles & Donchin 1983): fit() on the EEG channels with the EOG
channels as predictors, apply() to the same data. The EEG is declared as
already referenced (set_eeg_reference([])): longwave regresses before its
common average, in the recording's own reference.

Inputs are deterministic (numpy default_rng with fixed seeds): a mixture of
a blink train (raised-cosine bumps), a slow eye-movement wave and brain-like
noise, with invented propagation weights, rounded to float32 (longwave holds
samples as float32) and stored beside MNE's output, so the Go test needs no
Python. Two cases: one continuous recording with two EOG channels (MNE Raw),
and two segments with one EOG channel (MNE Epochs: each epoch centred on its
own, as each segment of a recording is). Floats are written with Python's
shortest round-trip repr.
"""
import json
import os

import mne
import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "golden", "ocular.json")
FS = 125.0
N_EEG = 8


def signals(seed, n):
    """EEG (N_EEG x n) and EOG (2 x n) in µV."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / FS
    blinks = np.zeros(n)
    for onset in rng.uniform(0, t[-1] - 0.5, size=int(n / FS / 3)):
        length = int(rng.uniform(0.2, 0.4) * FS)
        i0 = int(onset * FS)
        j = np.arange(length)
        blinks[i0:i0 + length] += rng.uniform(80, 300) * 0.5 * (1 - np.cos(2 * np.pi * j / length))
    saccade = 40 * np.sin(2 * np.pi * 0.3 * t + rng.uniform(0, 2 * np.pi))
    shared = rng.standard_normal(n) * 4
    blink_w = np.array([1.0, 0.95, 0.5, 0.45, 0.15, 0.12, 0.05, 0.03])
    sacc_w = np.array([0.2, -0.2, 0.6, -0.6, 0.1, -0.1, 0.02, -0.02])
    eeg = (np.outer(blink_w, blinks) + np.outer(sacc_w, saccade) + shared
           + rng.standard_normal((N_EEG, n)) * 8)
    veog = 1.6 * blinks + 0.2 * shared + rng.standard_normal(n) * 2
    heog = 0.15 * blinks + 1.0 * saccade + rng.standard_normal(n) * 2
    data = np.vstack([eeg, veog, heog]).astype(np.float32).astype(np.float64)
    return data[:N_EEG], data[N_EEG:]


def info(n_eog):
    names = ["E%d" % i for i in range(N_EEG)] + ["VEOG", "HEOG"][:n_eog]
    return mne.create_info(names, FS, ["eeg"] * N_EEG + ["eog"] * n_eog)


def tolist(a):
    return [float(v) for v in np.asarray(a).ravel()]


def raw_case():
    eeg, eog = signals(901, 1000)
    raw = mne.io.RawArray(np.vstack([eeg, eog]), info(2))
    raw.set_eeg_reference([])
    model = mne.preprocessing.EOGRegression(picks="eeg", picks_artifact="eog").fit(raw)
    clean = model.apply(raw).get_data(picks="eeg")
    return {
        "name": "continuous, VEOG and HEOG",
        "segments": [[0, 1000]],
        "eeg": [tolist(c) for c in eeg],
        "eog": [tolist(c) for c in eog],
        "coef": [tolist(r) for r in model.coef_],
        "clean": [tolist(c) for c in clean],
    }


def epochs_case():
    eeg, eog = signals(902, 1000)
    eog = eog[:1]
    seg = 500
    x = np.vstack([eeg, eog])  # channels x samples
    arr = x.reshape(x.shape[0], 2, seg).transpose(1, 0, 2).copy()
    ep = mne.EpochsArray(arr, info(1))
    ep.set_eeg_reference([])
    model = mne.preprocessing.EOGRegression(picks="eeg", picks_artifact="eog").fit(ep)
    clean = model.apply(ep).get_data(picks="eeg")  # epochs x channels x samples
    clean = clean.transpose(1, 0, 2).reshape(N_EEG, -1)
    return {
        "name": "two segments, VEOG",
        "segments": [[0, seg], [seg, seg]],
        "eeg": [tolist(c) for c in eeg],
        "eog": [tolist(c) for c in eog],
        "coef": [tolist(r) for r in model.coef_],
        "clean": [tolist(c) for c in clean],
    }


def main():
    mne.set_log_level("ERROR")
    out = {
        "meta": {
            "library": "mne %s, numpy %s" % (mne.__version__, np.__version__),
            "call": "mne.preprocessing.EOGRegression(picks='eeg', picks_artifact='eog').fit(inst).apply(inst)",
            "script": "testdata/metrics/make_ocular_golden.py",
        },
        "cases": [raw_case(), epochs_case()],
    }
    os.makedirs(os.path.dirname(OUT), exist_ok=True)
    with open(OUT, "w") as f:
        json.dump(out, f, indent=None, separators=(",", ":"))
        f.write("\n")


if __name__ == "__main__":
    main()
