# bench stimuli — `tachist stimuli audit` on 2,000 images of 256x256 (groups of a clean source and
# three perturbed versions), against plain SDL2_image decoding of the same files in the same run
# (build/<variant>/tools/decode_only). Peak memory from /usr/bin/time -v, measured on the first 500
# rows and on all 2,000 rows: streaming means it should not grow with the number of images. The
# audit does more than decode: SHA-256 and perceptual hash, luminance statistics, and the distance
# of 1,500 rows to their sources (each source decoded once, when its own row comes first).
set -u
BUILD=${BUILD:-build/rel}
TACHIST=${TACHIST:-$(pwd)/$BUILD/tachist}
DATA=$BUILD/bench-data/stimuli-2000
if [ ! -f "$DATA/list.csv" ]; then
  echo "   generating 2,000 images in $DATA (once)"
  /usr/bin/python3 tests/tools/stimset.py bench "$DATA" 2000 || exit 1
fi
head -n 501 "$DATA/list.csv" >"$DATA/list500.csv"
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
export SDL_VIDEODRIVER=dummy

# run NAME COMMAND...: runs under /usr/bin/time -v; sets SEC (wall), CPU (user + system seconds)
# and KB (peak RSS). CPU time is reported too because wall time suffers on a busy machine.
run() {
  name=$1; shift
  /usr/bin/time -v "$@" >"$T/$name.out" 2>"$T/$name.time"
  rc=$?
  SEC=$(sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$T/$name.time" |
        awk -F: '{ s = 0; for (i = 1; i <= NF; i++) s = s * 60 + $i; print s }')
  KB=$(sed -n 's/.*Maximum resident set size (kbytes): //p' "$T/$name.time")
  CPU=$(awk -F': ' '/User time|System time/ { s += $2 } END { print s }' "$T/$name.time")
  return $rc
}

# Warm the page cache so both sides read the files from memory.
cat "$DATA"/cat*/*.png >/dev/null

run base500 "$BUILD/tools/decode_only" "$DATA/list500.csv"; base500_kb=$KB
run base "$BUILD/tools/decode_only" "$DATA/list.csv"; base_sec=$SEC; base_kb=$KB; base_cpu=$CPU
run audit500 "$TACHIST" stimuli audit "$DATA/list500.csv" --size-deg 1; audit500_kb=$KB
run audit "$TACHIST" stimuli audit "$DATA/list.csv" --size-deg 1; audit_rc=$?; audit_sec=$SEC; audit_kb=$KB; audit_cpu=$CPU
if [ "$audit_rc" -gt 1 ]; then
  echo "   audit failed (exit $audit_rc)"; sed 's/^/   /' "$T/audit.time" | head -n 5; exit 1
fi
awk -v as="$audit_sec" -v bs="$base_sec" -v ak="$audit_kb" -v bk="$base_kb" \
    -v ac="$audit_cpu" -v bc="$base_cpu" -v a5="$audit500_kb" -v b5="$base500_kb" 'BEGIN {
  printf "   stimuli audit, 2000 images 256x256: %.2f s wall (%.2f s CPU), %.0f images/s, peak %.1f MB (500 images: %.1f MB)\n", as, ac, 2000 / as, ak / 1024, a5 / 1024
  printf "   SDL2_image decode only, same files:  %.2f s wall (%.2f s CPU), %.0f images/s, peak %.1f MB (500 images: %.1f MB)\n", bs, bc, 2000 / bs, bk / 1024, b5 / 1024
  printf "   ratio audit/decode: wall %.2fx, CPU %.2fx, peak memory %.2fx; audit memory growth 500 -> 2000 images: %+.1f MB\n", as / bs, ac / bc, ak / bk, (ak - a5) / 1024
}'
