#!/bin/sh
# compare_speed.sh — issue 3 point 9: time `longwave markers` against the
# reference Python pipeline (../shared/bench/reference_pipeline.py, MNE +
# SciPy) on the same 30-minute, 21-channel, 500 Hz EDF+C file made by
# ../shared/bench/make_edf.py, in interleaved rounds, and report the median
# wall time, peak resident memory and CPU share of each, and the ratios.
#
# Usage (from anywhere): testdata/bench/compare_speed.sh [ROUNDS] [MINUTES]
# Defaults: 5 rounds, 30 minutes. Needs go, /usr/bin/python3 with mne and
# scipy, and GNU time at /usr/bin/time. Only ratios from one run count: the
# machine is shared.
set -eu
ROUNDS=${1:-5}
MINUTES=${2:-30}
ROOT=$(cd "$(dirname "$0")/../.." && pwd)
BENCH="$ROOT/../shared/bench"
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT

cd "$ROOT"
go build -o "$WORK/longwave" ./cmd/longwave
/usr/bin/python3 "$BENCH/make_edf.py" "$WORK/bench.edf" --fs 500 --minutes "$MINUTES" --channels 21 --seed 1 >/dev/null

# measure NAME CMD...: one run under GNU time; appends
# "wall_s rss_kib cpu_pct cpu_s" (cpu_s = user + system seconds) to $WORK/NAME
measure() {
	name=$1
	shift
	/usr/bin/time -v "$@" >"$WORK/$name.out" 2>"$WORK/$name.time"
	wall=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$WORK/$name.time" |
		awk -F: '{ if (NF == 3) print $1*3600 + $2*60 + $3; else print $1*60 + $2 }')
	rss=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$WORK/$name.time")
	cpu=$(sed -n 's/.*Percent of CPU this job got: //p' "$WORK/$name.time" | tr -d '%')
	usr=$(sed -n 's/.*User time (seconds): //p' "$WORK/$name.time")
	sys=$(sed -n 's/.*System time (seconds): //p' "$WORK/$name.time")
	echo "$wall $rss $cpu $(echo "$usr + $sys" | bc -l)" >>"$WORK/$name"
}

i=1
while [ "$i" -le "$ROUNDS" ]; do
	measure go "$WORK/longwave" markers --state closed "$WORK/bench.edf"
	measure py /usr/bin/python3 "$BENCH/reference_pipeline.py" "$WORK/bench.edf"
	i=$((i + 1))
done

# median of column $2 of file $1
median() { sort -g -k"$2","$2" "$1" | awk -v c="$2" '{ v[NR] = $c } END { if (NR % 2) print v[(NR+1)/2]; else print (v[NR/2] + v[NR/2+1]) / 2 }'; }

gw=$(median "$WORK/go" 1); gr=$(median "$WORK/go" 2); gc=$(median "$WORK/go" 3); gu=$(median "$WORK/go" 4)
pw=$(median "$WORK/py" 1); pr=$(median "$WORK/py" 2); pc=$(median "$WORK/py" 3); pu=$(median "$WORK/py" 4)
echo "file: ${MINUTES} min, 21 channels, 500 Hz ($(du -h "$WORK/bench.edf" | cut -f1)); $ROUNDS interleaved rounds; medians"
printf '%-24s wall %6s s  peak %7.1f MiB  CPU %4s %%  CPU time %6.2f s\n' "longwave markers" "$gw" "$(echo "$gr / 1024" | bc -l)" "$gc" "$gu"
printf '%-24s wall %6s s  peak %7.1f MiB  CPU %4s %%  CPU time %6.2f s\n' "reference_pipeline.py" "$pw" "$(echo "$pr / 1024" | bc -l)" "$pc" "$pu"
printf 'speed-up (reference wall / longwave wall): %.2f x   (goal >= 7, aim 10)\n' "$(echo "$pw / $gw" | bc -l)"
printf 'CPU time ratio (reference / longwave):     %.2f x   (what a loaded machine cannot hide)\n' "$(echo "$pu / $gu" | bc -l)"
printf 'memory (longwave peak / reference peak): %.3f       (goal <= 0.333)\n' "$(echo "$gr / $pr" | bc -l)"
echo "per round (wall s, peak KiB, CPU %, CPU s):"
paste "$WORK/go" "$WORK/py" | awk '{ printf "  go %6s s %8s KiB %4s %% %5.2f s   py %6s s %8s KiB %4s %% %5.2f s\n", $1, $2, $3, $4, $5, $6, $7, $8 }'
echo "load average during the run: $(cut -d' ' -f1-3 /proc/loadavg) (2 cores)"
grep -q '"pdr_frequency"' "$WORK/go.out" || { echo "longwave markers printed no markers" >&2; exit 1; }
