#!/bin/sh
# bench_present — the presenter: per-frame work of our own trial loop under the virtual clock,
# preload throughput against plain SDL2_image decoding of the same files, and peak memory of the
# preload queue for 500 against 5,000 images (/usr/bin/time -v, maximum resident set size).
# Figures are printed, never asserted.
BUILD=${BUILD:-build/rel}
TOOLS=$BUILD/tools
export SDL_VIDEODRIVER=dummy
D=$(mktemp -d "${TMPDIR:-/tmp}/tachist-bench.XXXXXX")
trap 'rm -rf "$D"' EXIT

echo "-- per-frame loop work (target p99 < 50 µs)"
"$TOOLS/bench_frameloop" 200

echo "-- preload throughput, 2,000 images of 128x128 (target ratio >= 0.8)"
"$TOOLS/bench_preload" make "$D" 5000 || exit 1
"$TOOLS/bench_preload" compare "$D" 2000

echo "-- peak memory of the preload queue (target ratio <= 1.2)"
peak() { /usr/bin/time -v "$TOOLS/bench_preload" queue "$D" "$1" 2>&1 >/dev/null |
	 sed -n 's/.*Maximum resident set size (kbytes): //p'; }
a=$(peak 500); b=$(peak 5000)
echo "   500 images:   $a kB"
echo "   5000 images:  $b kB"
awk -v a="$a" -v b="$b" 'BEGIN { printf "   ratio 5000/500: %.3f\n", b / a }'
