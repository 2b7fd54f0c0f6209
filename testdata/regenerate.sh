#!/usr/bin/env bash
# Re-makes every golden file from the reference libraries (Debian's
# /usr/bin/python3 with python3-numpy, python3-scipy, python3-mne,
# python3-statsmodels). .ci/run
# calls it and then compares the output with the committed files
# (.ci/golden_drift.py: structure and strings must be equal, numbers may
# differ in their last digits between processors), and runs the tests
# against the regenerated files, so the committed golden files cannot drift
# from the libraries they quote.
set -euo pipefail
cd "$(dirname "$0")/.."
py=/usr/bin/python3

echo "-- MNE's EDF/BDF reader on ../shared/data and our synthetic files"
"$py" testdata/ingest/mne/make_golden.py

echo "-- scipy filters, Welch, Savitzky-Golay, curve_fit"
"$py" testdata/metrics/make_golden.py

echo "-- fooof 1.1.1 (../shared/reference) on the spectral-parameterisation spectra"
"$py" testdata/metrics/make_fooof_golden.py

echo "-- MNE's EOG regression (ocular correction)"
"$py" testdata/metrics/make_ocular_golden.py

echo "-- epoch masks from the Go pipeline, then the MNE + scipy reference markers"
go test ./metrics/ -count=1 -run '^TestReferenceAgreement$' -update-reference >/dev/null
"$py" testdata/metrics/reference/reference_markers.py

echo "-- the literature rows of migration 0002 as the store reads them back"
go test ./server/store/ -count=1 -run '^TestLiteratureRowsFile$' -update-literature >/dev/null

echo "-- numpy/scipy regression and t quantiles"
"$py" testdata/trends/make_golden.py

echo "-- statsmodels MixedLM fits of the control norm"
"$py" testdata/trends/mixed/make_golden.py
