#!/bin/sh
# Builds the libFuzzer targets in tests/fuzz/ with clang (fuzzer, ASan, UBSan; `make fuzz-build`,
# each source compiled once) and runs them side by side for a bounded time:
# sh tests/fuzz/run.sh [SECONDS] (default 60). Seeds come from the demo protocol and rig, the
# bad-input corpus and the demo list; findings are written to build/fuzz/findings/.
# Exit 0 when no target found a crash, leak or sanitizer report.
set -u
secs=${1:-60}
out=build/fuzz
mkdir -p "$out/findings"
CC=${FUZZ_CC:-clang}
if ! command -v "$CC" >/dev/null 2>&1; then
  echo "fuzz: $CC not found (install clang and libclang-rt-14-dev)"; exit 1
fi
make -s --no-print-directory -j"$(nproc 2>/dev/null || echo 1)" FUZZ_CC="$CC" fuzz-build \
  >"$out/build.log" 2>&1 || { echo "fuzz: the build failed"; tail -n 30 "$out/build.log"; exit 1; }
status=0
# one TARGET: seeds, then a bounded run; prints one line and exits 1 on a finding.
one() {
  t=$1; bin=$out/fuzz_$t
  seeds=$out/seeds_$t
  rm -rf "$seeds"; mkdir -p "$seeds"
  if [ "$t" = protocol ]; then
    cp protocols/*.ini assets-demo/rig.ini "$seeds"/ 2>/dev/null
    for f in tests/data/bad/*/*.ini; do [ -f "$f" ] && cp "$f" "$seeds/$(echo "$f" | tr / _)"; done
  else
    head -n 40 assets-demo/stimuli.csv > "$seeds/demo.csv"
    for f in tests/data/bad/*/*.csv; do [ -f "$f" ] && cp "$f" "$seeds/$(echo "$f" | tr / _)"; done
  fi
  work=$out/corpus_$t; mkdir -p "$work"
  if ! ASAN_OPTIONS=detect_leaks=1 "$bin" -max_total_time="$secs" -max_len=4096 -timeout=10 \
       -artifact_prefix="$out/findings/$t-" -print_final_stats=0 "$work" "$seeds" >"$out/$t.log" 2>&1; then
    echo "fuzz: $t FOUND A PROBLEM (see $out/$t.log and $out/findings/)"; tail -n 40 "$out/$t.log"; return 1
  fi
  echo "fuzz: $t clean for ${secs}s ($(grep -c . "$out/$t.log") log lines, $(ls "$work" | wc -l) corpus files)"
}
pids=""
for t in protocol stimlist; do
  one "$t" >"$out/$t.result" 2>&1 &
  pids="$pids $!"
done
for p in $pids; do wait "$p" || status=1; done
cat "$out/protocol.result" "$out/stimlist.result"
exit $status
