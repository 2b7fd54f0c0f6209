#!/usr/bin/python3
"""Write the MNE-Python reference values that ingest's decoder is compared with.

For every EDF/BDF file under ../shared/data (next to the repository) and under
testdata/ingest/mne/synthetic/ (files written by longwave's own test writer,
`go test ./ingest/ -run TestMNESyntheticFiles -update`), this script reads the
file with MNE's EDF/BDF reader and writes <name>.json beside this script with:

  labels (MNE channel names, read with infer_types=False so that they equal the
  header labels), sfreq, n_times, n_records, per channel the unit, samples per
  record, whether MNE resampled it to sfreq, values at fixed sample indices,
  the sum and the sum of squares (float64), all in µV for channels whose unit
  is a volt unit (uV, µV, μV, mV, V) and in the file's own unit otherwise,
  and the number of trailing samples that are exactly 0 in every channel.

MNE is called as mne.io.read_raw_edf / read_raw_bdf(preload=True,
stim_channel=None, infer_types=False).  By design MNE differs from longwave in
ways the Go test knows about:
  * channels with fewer samples per record than the fastest one are resampled
    by MNE to the fastest rate (longwave keeps each signal's own rate): such
    channels are marked "resampled" and compared only by their label;
  * MNE keeps zero-padded samples at the end (eegmmidb), longwave cuts them when
    the annotations give the end: "trailing_zeros" lets the test check that
    only zeros were cut;
  * MNE reads a record count from the file size even when the header declares
    fewer; not the case in these files;
  * files MNE cannot read (e.g. an annotation-only hypnogram) are written with
    "mne_error" and the test checks that longwave finds no channel to compare.

Usage: /usr/bin/python3 testdata/ingest/mne/make_golden.py [shared-data-dir]
"""
import glob
import json
import os
import sys
import warnings

import numpy as np
import mne

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
VOLT = {"uV": 1.0, "\u00b5V": 1.0, "\u03bcV": 1.0, "mV": 1.0, "V": 1.0}


def fixed_indices(n):
    idx = {0, 1, 2, 10, 100, 1000, n // 3, n // 2, n - 2, n - 1}
    return sorted(i for i in idx if 0 <= i < n)


def golden(path, rel):
    out = {"file": rel, "mne_version": mne.__version__}
    reader = mne.io.read_raw_bdf if path.lower().endswith(".bdf") else mne.io.read_raw_edf
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            raw = reader(path, preload=True, stim_channel=None, infer_types=False, verbose="error")
        out["mne_warnings"] = sorted({str(w.message).split("\n")[0] for w in caught})
    except Exception as exc:  # recorded, the Go test handles it explicitly
        out["mne_error"] = "%s: %s" % (type(exc).__name__, str(exc).split("\n")[0])
        return out
    if len(raw.ch_names) == 0:
        out["mne_error"] = "MNE read no data channel (annotation-only file); n_times %d" % raw.n_times
        return out
    extras = raw._raw_extras[0]
    sel = extras["sel"]
    n_samps = np.asarray(extras["n_samps"])[sel]
    max_samp = int(extras["max_samp"])
    data = raw.get_data()  # volts for volt units, the file's unit otherwise
    units = raw._orig_units
    out.update(sfreq=float(raw.info["sfreq"]), n_times=int(raw.n_times), n_records=int(extras["n_records"]))
    chans = []
    all_zero_tail = None
    for k, name in enumerate(raw.ch_names):
        unit = units.get(name, "")
        x = data[k].astype(np.float64)
        if unit in VOLT:
            x = x * 1e6
        resampled = int(n_samps[k]) != max_samp
        idx = fixed_indices(len(x))
        chans.append({
            "name": name, "unit": unit, "samples_per_record": int(n_samps[k]), "resampled": resampled,
            "indices": idx, "values": [float(x[i]) for i in idx],
            "sum": float(np.sum(x)), "sumsq": float(np.sum(x * x)),
        })
        if not resampled:
            nz = np.flatnonzero(x != 0)
            tail = len(x) - (int(nz[-1]) + 1 if len(nz) else 0)
            all_zero_tail = tail if all_zero_tail is None else min(all_zero_tail, tail)
    out["channels"] = chans
    out["trailing_zeros"] = int(all_zero_tail or 0)
    return out


def main():
    data_dir = sys.argv[1] if len(sys.argv) > 1 else os.path.join(ROOT, "..", "shared", "data")
    files = []
    for p in sorted(glob.glob(os.path.join(data_dir, "*", "*"))):
        if p.lower().endswith((".edf", ".bdf")):
            files.append((p, os.path.relpath(p, data_dir), "shared"))
    for p in sorted(glob.glob(os.path.join(HERE, "synthetic", "*"))):
        if p.lower().endswith((".edf", ".bdf")):
            files.append((p, os.path.relpath(p, HERE), "synthetic"))
    if not files:
        sys.exit("no EDF/BDF files found under %s" % data_dir)
    for path, rel, source in files:
        g = golden(path, rel)
        g["source"] = source
        name = os.path.basename(path) + ".json"
        with open(os.path.join(HERE, name), "w", encoding="utf-8") as f:
            json.dump(g, f, indent=1, ensure_ascii=False, sort_keys=True)
            f.write("\n")
        print("%-45s %s" % (rel, g.get("mne_error", "%d channels" % len(g.get("channels", [])))))


if __name__ == "__main__":
    main()
