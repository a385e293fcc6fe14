#!/bin/sh
# Builds the libFuzzer targets in tests/fuzz/ with clang (fuzzer, ASan, UBSan) and runs each for a
# bounded time: sh tests/fuzz/run.sh [SECONDS] (default 60). Seeds come from the demo protocol and
# rig, the bad-input corpus and the demo list; findings are written to build/fuzz/findings/.
# Exit 0 when no target found a crash, leak or sanitizer report.
set -u
secs=${1:-60}
out=build/fuzz
mkdir -p "$out/findings"
CC=${FUZZ_CC:-clang}
if ! command -v "$CC" >/dev/null 2>&1; then
  echo "fuzz: $CC not found (install clang and libclang-rt-14-dev)"; exit 1
fi
flags="-Wall -g -O1 -fsanitize=fuzzer,address,undefined -fno-sanitize-recover=undefined -std=c11 -Iinclude -D_POSIX_C_SOURCE=200809L -D_DEFAULT_SOURCE"
# All of core (pure computation) and the text parsers of io; nothing that needs SDL or SQLite.
srcs="$(ls app/core/*.c) app/io/infile.c app/io/inifile.c $(ls app/io/protocol*.c) app/io/rig.c app/io/rig_lum.c app/io/ini_edit.c app/io/store_pg_names.c app/io/stimlist.c"
libs="$(pkg-config --libs inih gsl) -lcsv -lm"
status=0
for t in protocol stimlist; do
  bin=$out/fuzz_$t
  # shellcheck disable=SC2086
  $CC $flags $(pkg-config --cflags gsl inih) -o "$bin" tests/fuzz/fuzz_$t.c $srcs $libs || { echo "fuzz: build of $t failed"; exit 1; }
  seeds=$out/seeds_$t
  rm -rf "$seeds"; mkdir -p "$seeds"
  if [ $t = protocol ]; then
    cp protocols/*.ini assets-demo/rig.ini "$seeds"/ 2>/dev/null
    for f in tests/data/bad/*/*.ini; do [ -f "$f" ] && cp "$f" "$seeds/$(echo "$f" | tr / _)"; done
  else
    head -n 40 assets-demo/stimuli.csv > "$seeds/demo.csv"
    for f in tests/data/bad/*/*.csv; do [ -f "$f" ] && cp "$f" "$seeds/$(echo "$f" | tr / _)"; done
  fi
  work=$out/corpus_$t; mkdir -p "$work"
  echo "fuzz: $t for ${secs}s"
  if ! ASAN_OPTIONS=detect_leaks=1 "$bin" -max_total_time="$secs" -max_len=4096 -timeout=10 \
       -artifact_prefix="$out/findings/$t-" -print_final_stats=0 "$work" "$seeds" >"$out/$t.log" 2>&1; then
    echo "fuzz: $t FOUND A PROBLEM (see $out/$t.log and $out/findings/)"; tail -n 40 "$out/$t.log"; status=1
  else
    echo "fuzz: $t clean ($(grep -c . "$out/$t.log") log lines, $(ls "$work" | wc -l) corpus files)"
  fi
done
exit $status
