# bench analysis — (1) one psychometric fit against R glm with psyphy's mafc.probit link on the
# same data, side by side: in-process (tests/tools/bench_fit against R's system.time over the same
# number of fits) and as whole commands (`tachist fit` against `Rscript`); target ≥ 10× faster.
# (2) `tachist report` on 100,000 trials with 20 conditions and 1,000 bootstrap samples per fit:
# wall time and peak memory (/usr/bin/time -v), beside the sqlite3 shell's own aggregate of the
# same table and the report without fits (target under 2 s on two cores). Nothing is asserted.
set -u
BUILD=${BUILD:-build/rel}
TACHIST=${TACHIST:-$(pwd)/$BUILD/tachist}
T=$(mktemp -d "${TMPDIR:-/tmp}/tachist-bench.XXXXXX")
trap 'rm -rf "$T"' EXIT

run() { # NAME COMMAND...: sets SEC (wall seconds) and KB (peak RSS) from /usr/bin/time -v
  name=$1; shift
  /usr/bin/time -v "$@" >"$T/$name.out" 2>"$T/$name.time"
  rc=$?
  SEC=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$T/$name.time" |
        awk -F: '{ s = 0; for (i = 1; i <= NF; i++) s = s * 60 + $i; print s }')
  KB=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$T/$name.time")
  CPU=$(awk -F': ' '/User time \(seconds\)|System time \(seconds\)/ { s += $2 } END { printf "%.2f", s }' "$T/$name.time")
  return $rc
}

echo "-- one fit: tachist against R glm(binomial(mafc.probit(4))), same grouped data"
printf 'level,n,k\n0.1,60,17\n0.2,60,21\n0.3,60,33\n0.4,60,45\n0.5,60,52\n0.6,60,57\n' >"$T/g.csv"
REPS=2000
set -- $("$BUILD/tools/bench_fit" "$T/g.csv" 4 $REPS)
c_per=$1; c_alpha=$2; c_beta=$3; boot=$4
r_out=$(Rscript -e "suppressMessages(library(psyphy)); d <- read.csv('$T/g.csv');
  f <- function() glm(cbind(k, n - k) ~ level, family = binomial(mafc.probit(4)), data = d)
  b <- coef(f()); t <- system.time(for (i in 1:$REPS) f())[['elapsed']]
  cat(sprintf('%.9f %.10f %.10f', t / $REPS, -b[1]/b[2], 1/b[2]))")
set -- $r_out
r_per=$1; r_alpha=$2; r_beta=$3
echo "   same estimates: tachist alpha $c_alpha beta $c_beta; R alpha $r_alpha beta $r_beta"
awk -v c="$c_per" -v r="$r_per" 'BEGIN { printf "   in process, mean of %d fits: tachist %.1f µs, R glm %.1f µs, ratio R/tachist %.1f×\n", '$REPS', c * 1e6, r * 1e6, r / c }'
run cfit "$TACHIST" fit "$T/g.csv" --m 4 --shape normal --lapse 0 --boot 0; c_cmd=$SEC
run rfit Rscript -e "suppressMessages(library(psyphy)); d <- read.csv('$T/g.csv'); print(coef(glm(cbind(k, n - k) ~ level, family = binomial(mafc.probit(4)), data = d)))"; r_cmd=$SEC
awk -v c="$c_cmd" -v r="$r_cmd" 'BEGIN { if (c <= 0) c = 0.005; printf "   whole command: tachist fit %.2f s, Rscript %.2f s, ratio %.0f× (clock resolution 10 ms)\n", c, r, r / c }'
echo "   one fit with 1,000 bootstrap samples (2 threads): $boot s"

echo "-- report: 100,000 trials, 20 conditions, 1,000 bootstrap samples per fit"
DB=$BUILD/bench-data/report-100k.db
if [ ! -f "$DB" ]; then
  echo "   writing $DB through the store (once; one transaction per trial)"
  mkdir -p "$(dirname "$DB")"
  "$BUILD/tools/report_fixture" "$DB" --m 4 --levels 5 --per-level 250 --blocks 20 --seed 3 || exit 1
fi
n=$(sqlite3 "$DB" "select count(*) from trials where practice = 0")
echo "   $n trials (plus practice) in $(sqlite3 "$DB" "select count(distinct block) from trials where practice = 0") blocks"
run base sqlite3 "$DB" "select block, level, count(*), sum(correct = 1) from trials group by block, level"; base_sec=$SEC; base_kb=$KB; base_cpu=$CPU
run nofit "$TACHIST" report --db "$DB" --no-fit; nofit_sec=$SEC; nofit_kb=$KB; nofit_cpu=$CPU
run full "$TACHIST" report --db "$DB" --boot 1000; full_rc=$?; full_sec=$SEC; full_kb=$KB; full_cpu=$CPU
run plots "$TACHIST" report --db "$DB" --boot 1000 --plots "$T/plots"; plots_sec=$SEC; plots_kb=$KB; plots_cpu=$CPU
echo "   (wall seconds, CPU seconds summed over threads, peak memory; the machine's load average"
echo "    was $(cut -d' ' -f1 /proc/loadavg) — wall time stretches when other work shares the cores)"
echo "   sqlite3 shell, counts per condition:      ${base_sec} s wall, ${base_cpu} s CPU, ${base_kb} kB"
echo "   tachist report --no-fit:                   ${nofit_sec} s wall, ${nofit_cpu} s CPU, ${nofit_kb} kB"
echo "   tachist report, 20 fits x 1,000 samples:   ${full_sec} s wall, ${full_cpu} s CPU, ${full_kb} kB (exit $full_rc; target < 2 s)"
echo "   the same with --plots (reads every flip):  ${plots_sec} s wall, ${plots_cpu} s CPU, ${plots_kb} kB"
awk -v a="$full_sec" -v b="$base_sec" -v c="$nofit_sec" 'BEGIN { if (b <= 0) b = 0.005; if (c <= 0) c = 0.005; printf "   ratios: report / sqlite3 %.1f×, report / report --no-fit %.1f×\n", a / b, a / c }'
