# bench forecast — `tachist forecast` on 1,000 simulated studies of 20 observers × 160 trials (5
# levels × 32), each fitted with 200 bootstrap samples: wall time with 1 thread and with 2, and
# their ratio (target ≥ 1.8× on 2 cores). The two runs must print the same forecast (runs are
# seeded by their index, not by the thread that ran them). Nothing is asserted on time.
set -u
BUILD=${BUILD:-build/rel}
TACHIST=${TACHIST:-$(pwd)/$BUILD/tachist}
T=$(mktemp -d "${TMPDIR:-/tmp}/tachist-bench.XXXXXX")
trap 'rm -rf "$T"' EXIT
RUNS=${FORECAST_RUNS:-1000}

run() { # NAME THREADS: sets SEC (wall seconds)
  /usr/bin/time -f '%e %U %S' -o "$T/$1.time" "$TACHIST" forecast protocols/demo.ini \
    --rig assets-demo/rig.ini --observer model:shape=weibull,threshold=1,slope=3.5,lapse=0.02 \
    --levels 0.5,0.75,1,1.25,1.5 --trials 32 --observers 20 --runs "$RUNS" --boot 200 \
    --threads "$2" --json >"$T/$1.json" 2>"$T/$1.err"
  rc=$?
  set -- $(cat "$T/$1.time")
  SEC=$1; CPU=$(awk -v u="$2" -v s="$3" 'BEGIN { printf "%.2f", u + s }')
  return $rc
}

echo "-- $RUNS studies of 20 observers x 160 trials, 200 bootstrap samples each"
run one 1 || { echo "   forecast failed:"; sed 's/^/   /' "$T/one.err"; exit 1; }
s1=$SEC; c1=$CPU
run two 2 || { echo "   forecast failed:"; sed 's/^/   /' "$T/two.err"; exit 1; }
s2=$SEC; c2=$CPU
if cmp -s "$T/one.json" "$T/two.json"; then same="identical"; else same="DIFFERENT (a defect)"; fi
echo "   1 thread ${s1} s wall (${c1} s CPU), 2 threads ${s2} s wall (${c2} s CPU); forecasts $same"
echo "   $(nproc) CPUs online, load average $(cut -d' ' -f1-3 /proc/loadavg): on a shared machine the ratio says little"
awk -v a="$s1" -v b="$s2" 'BEGIN { if (b <= 0) b = 0.01; printf "   ratio 1 thread / 2 threads %.2f× (target ≥ 1.8× on 2 idle cores)\n", a / b }'
