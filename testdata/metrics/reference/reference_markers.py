#!/usr/bin/python3
"""Independent reference for longwave's marker engine (issue 3 point 8).

For every <case>.mask.json in this folder (written by the Go test
TestReferenceAgreement with -update-reference), recompute from the EDF files
in ../shared/data, with MNE 1.3 (reading) and SciPy 1.10 (everything else),
the figures that test compares, and write <case>.reference.json:

  1. read each run with mne.io.read_raw_edf, keep the good channels named in
     the mask (their labels as the file spells them), volts -> microvolts,
     the first `count` samples of each run;
  2. filter each run separately with scipy.signal.sosfiltfilt (default odd
     padding): butter(4, 45 Hz, lowpass) at the recording's rate; keep every
     q-th sample (q = the mask's decimation); then, at the analysis rate,
     the stacked sections of butter(4, 0.5 Hz, highpass) and, when the mask
     names a line frequency, tf2sos(iirnotch(line, Q=30));
  3. common average reference over the good channels;
  4. the mask's epochs (4 s; clean or not, per state) are joined into runs of
     consecutive clean epochs; scipy.signal.welch (hann, nperseg = 4 s,
     noverlap = 2 s, detrend constant, density, mean) on each run, averaged
     with weights equal to each run's segment count;
  5. the spectrum divided by the forward-backward power response
     (|H_hp|^2 |H_lp|^2)^2 from scipy.signal.sosfreqz wherever that is >= 0.05;
  6. regional spectra = mean of the channel spectra (posterior O1 O2 P3 P4 Pz,
     left_occipital O1, right_occipital O2, frontal Fp1 Fp2 F3 F4 Fz, global
     all good channels);
  7. band powers: sum of the density over the bins in [lo, hi) times the bin
     width (delta 1-4, theta 4-8, alpha 8-13, beta 13-30 Hz), theta/alpha;
  8. the peak: scipy.signal.savgol_filter(psd, 11, 5) (mode 'interp'), the
     largest local maximum (above the left neighbour, not below the right)
     with 5 <= f <= 14 Hz, refined by the vertex of the parabola through
     log10 of the smoothed power at the bin and its neighbours.

These numbers mirror metrics.V1() in the Go code; the Go side is not run
here.  Usage: /usr/bin/python3 reference_markers.py
"""
import glob
import json
import os

import mne
import numpy as np
import scipy.signal as ss

HERE = os.path.dirname(os.path.abspath(__file__))
DATA = os.path.normpath(os.path.join(HERE, "..", "..", "..", "..", "shared", "data"))

BANDS = {"delta": (1.0, 4.0), "theta": (4.0, 8.0), "alpha": (8.0, 13.0), "beta": (13.0, 30.0)}
REGIONS = {
    "posterior": ["O1", "O2", "P3", "P4", "Pz"],
    "left_occipital": ["O1"],
    "right_occipital": ["O2"],
    "frontal": ["Fp1", "Fp2", "F3", "F4", "Fz"],
}
HP_HZ, LP_HZ, ORDER, NOTCH_Q = 0.5, 45.0, 4, 30.0
CORRECT_FLOOR = 0.05
MIN_CLEAN_S = 20.0
SEARCH = (5.0, 14.0)
SMOOTH_BINS, SMOOTH_ORDER = 11, 5


def runs_of(epochs, state, length):
    """[(first, count)] of consecutive clean epochs of one state."""
    out = []
    for e in epochs:
        if e["state"] != state or not e["clean"]:
            continue
        if out and out[-1][0] + out[-1][1] == e["first"]:
            out[-1][1] += length
        else:
            out.append([e["first"], length])
    return out


def peak(freqs, psd):
    sm = ss.savgol_filter(psd, SMOOTH_BINS, SMOOTH_ORDER)
    best = -1
    for k in range(1, len(freqs) - 1):
        if not (SEARCH[0] <= freqs[k] <= SEARCH[1]):
            continue
        if sm[k] > 0 and sm[k] > sm[k - 1] and sm[k] >= sm[k + 1] and (best < 0 or sm[k] > sm[best]):
            best = k
    if best < 0:
        return 0.0
    f = freqs[best]
    if sm[best - 1] > 0 and sm[best + 1] > 0:
        ym, y0, yp = np.log10(sm[best - 1 : best + 2])
        den = ym - 2 * y0 + yp
        if den < 0:
            f += 0.5 * (ym - yp) / den * (freqs[1] - freqs[0])
    return float(f)


def one(mask_path):
    m = json.load(open(mask_path))
    fs_in, q, fs = m["input_rate"], m["decimation"], m["sample_rate"]
    originals = [c["original"] for c in m["channels"]]
    labels = [c["label"] for c in m["channels"]]
    lp = ss.butter(ORDER, LP_HZ, "lowpass", fs=fs_in, output="sos")
    hp = ss.butter(ORDER, HP_HZ, "highpass", fs=fs, output="sos")
    slow = hp
    if m["line_hz"] > 0:
        b, a = ss.iirnotch(m["line_hz"], NOTCH_Q, fs=fs)
        slow = np.vstack([hp, ss.tf2sos(b, a)])
    parts = []
    for f in m["files"]:
        raw = mne.io.read_raw_edf(os.path.join(DATA, f["path"]), preload=True, verbose="ERROR")
        x = raw.get_data(picks=originals)[:, : f["count"]] * 1e6
        y = ss.sosfiltfilt(lp, x, axis=-1)[:, ::q]
        parts.append(ss.sosfiltfilt(slow, y, axis=-1))
    data = np.concatenate(parts, axis=1)
    data -= data.mean(axis=0, keepdims=True)  # common average of the good channels

    L = m["epoch_samples"]
    out = {"name": m["name"], "regions": {}}
    for state in sorted({e["state"] for e in m["epochs"]}):
        runs = runs_of(m["epochs"], state, L)
        clean_s = sum(c for _, c in runs) / fs
        if clean_s < MIN_CLEAN_S:
            continue
        acc, n = None, 0
        for first, count in runs:
            freqs, p = ss.welch(data[:, first : first + count], fs=fs, window="hann", nperseg=L,
                                noverlap=L // 2, detrend="constant", scaling="density", average="mean")
            k = (count - L) // (L - L // 2) + 1
            acc = p * k if acc is None else acc + p * k
            n += k
        psd = acc / n
        _, hh = ss.sosfreqz(hp, worN=freqs, fs=fs)
        _, hl = ss.sosfreqz(lp, worN=freqs, fs=fs_in)
        r = (np.abs(hh) ** 2 * np.abs(hl) ** 2) ** 2
        psd[:, r >= CORRECT_FLOOR] /= r[r >= CORRECT_FLOOR]
        regions = dict(REGIONS, **{"global": labels})
        df = freqs[1] - freqs[0]
        res = {}
        for name, chans in regions.items():
            idx = [labels.index(c) for c in chans if c in labels]
            if not idx:
                continue
            spec = psd[idx].mean(axis=0)
            row = {}
            for b, (lo, hi) in BANDS.items():
                row[b + "_uv2"] = float(spec[(freqs >= lo) & (freqs < hi)].sum() * df)
            row["theta_alpha"] = row["theta_uv2"] / row["alpha_uv2"]
            row["peak_hz"] = peak(freqs, spec)
            res[name] = row
        out["regions"][state] = res
    dst = mask_path.replace(".mask.json", ".reference.json")
    with open(dst, "w") as fh:
        json.dump(out, fh, indent=1, sort_keys=True)
        fh.write("\n")
    print("wrote", os.path.basename(dst))


if __name__ == "__main__":
    for p in sorted(glob.glob(os.path.join(HERE, "*.mask.json"))):
        one(p)
