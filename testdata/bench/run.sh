#!/usr/bin/env bash
# Side-by-side benchmark of the whole job (issue 11): `counterpart report
# --json` against the pandas + statsmodels pipeline (pipeline.py) on the same
# CSV of the Wide scenario, alternated, ROUNDS runs each; prints the median
# wall time and its spread (min-max), the ratio of medians, and the peak RSS
# of each side (GNU time's "Maximum resident set size").
#
#   bash testdata/bench/run.sh [ROWS [COVARIATES [ROUNDS]]]     (default 1000000 20 3)
#
# Needs Go, GNU time (/usr/bin/time; Debian: apt-get install -y time) and
# /usr/bin/python3 with pandas and statsmodels (Debian: apt-get install -y
# python3-pandas python3-statsmodels). Not part of the test suite. The data
# and binaries go to ${BENCH_DIR:-/tmp/counterpart-bench}; the CSV is made
# once per size and reused. Run it from the repository root on a machine
# that is otherwise idle, or say that it was shared.
set -euo pipefail
n=${1:-1000000}
p=${2:-20}
rounds=${3:-3}
dir=${BENCH_DIR:-/tmp/counterpart-bench}
py=${PYTHON:-/usr/bin/python3}
here=$(cd "$(dirname "$0")" && pwd)
mkdir -p "$dir"
for tool in /usr/bin/time "$py"; do
  [ -x "$tool" ] || { echo "run.sh: $tool not found (see the header of this script)" >&2; exit 1; }
done
"$py" -c 'import pandas, statsmodels' || { echo "run.sh: $py lacks pandas or statsmodels" >&2; exit 1; }

csv="$dir/wide_${n}_${p}.csv"
[ -s "$csv" ] || go run ./testdata/bench/gen -n "$n" -p "$p" -out "$csv"
go build -o "$dir/counterpart" ./kernel/cmd/counterpart
covs=$(seq -s, -f 'x%g' 1 "$p")

# run NAME LOG CMD...: one timed run; appends "NAME wall_s peak_kB user_s sys_s" to $dir/times.
run() {
  local name=$1 log=$2
  shift 2
  /usr/bin/time -v "$@" >"$log.out" 2>"$log.err" || { echo "run.sh: $name failed, see $log.err" >&2; exit 1; }
  local wall rss user sys
  wall=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$log.err")
  rss=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$log.err")
  user=$(sed -n 's/.*User time (seconds): //p' "$log.err")
  sys=$(sed -n 's/.*System time (seconds): //p' "$log.err")
  echo "$name $(echo "$wall" | awk -F: '{ s = 0; for (i = 1; i <= NF; i++) s = s * 60 + $i; print s }') $rss $user $sys" >>"$dir/times"
}

: >"$dir/times"
for r in $(seq 1 "$rounds"); do
  run counterpart "$dir/cp.$r" "$dir/counterpart" report --data "$csv" --treatment t --outcome y --covariates "$covs" --json "$dir/report.json" --verbose
  run pandas "$dir/py.$r" "$py" "$here/pipeline.py" "$csv" t y "$covs" --json "$dir/pipeline.json"
  echo "round $r of $rounds done" >&2
done

"$py" - "$dir/times" "$n" "$p" <<'PY'
import statistics, sys
rows = [l.split() for l in open(sys.argv[1])]
n, p = int(sys.argv[2]), int(sys.argv[3])
t = {}
for name, wall, rss, user, sys_ in rows:
    t.setdefault(name, []).append((float(wall), int(rss), float(user) + float(sys_)))
data = n * (p + 2) * 8
print(f"{n} rows x {p} covariates; numeric data {data / 1e6:.0f} MB (float64); {len(t['counterpart'])} alternated runs each")
print(f"{'':12} {'wall s: median':>15} {'spread':>13} {'CPU s: median':>14} {'spread':>13} {'peak RSS MB':>12}")
med = {}
for name in ("counterpart", "pandas"):
    w = [x[0] for x in t[name]]
    c = [x[2] for x in t[name]]
    m = max(x[1] for x in t[name]) * 1024
    med[name] = (statistics.median(w), statistics.median(c))
    print(f"{name:12} {med[name][0]:15.2f} {min(w):6.2f}-{max(w):<6.2f} {med[name][1]:14.2f} {min(c):6.2f}-{max(c):<6.2f} {m / 1e6:12.0f}")
print(f"ratio counterpart / pandas+statsmodels (medians): wall {med['counterpart'][0] / med['pandas'][0]:.3f}, CPU {med['counterpart'][1] / med['pandas'][1]:.3f}")
print(f"counterpart peak RSS / numeric data: {max(x[1] for x in t['counterpart']) * 1024 / data:.2f}")
PY
for r in $(seq 1 "$rounds"); do grep "timing:" "$dir/cp.$r.err" || true; done
