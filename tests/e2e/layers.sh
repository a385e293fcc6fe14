#!/bin/sh
# The layer rules of docs/design.md hold in the tree (`make layers`), and the check fails, naming
# file, line and rule, on violations planted in a copy of the tree.
. tests/e2e/lib.sh

expect_exit "the tree follows the layer rules" 0 sh tests/tools/layers.sh
grep -q 'files follow docs/design.md' "$WORK/last.out" && ok "the check says how many files it read" \
  || notok "the check says how many files it read"

# A copy of what the check reads: the design notes, app/ and include/.
fresh() {
  rm -rf "$WORK/tree"; mkdir -p "$WORK/tree/docs"
  cp docs/design.md "$WORK/tree/docs/" && cp -R app include "$WORK/tree/"
}
# plant NAME FILE LINE-TO-ADD EXPECTED-TEXT: the check fails and names FILE and the rule
plant() {
  fresh
  printf '%s\n' "$3" >>"$WORK/tree/$2"
  n=$(wc -l <"$WORK/tree/$2" | tr -d ' ')
  expect_exit "$1: the check fails" 1 sh tests/tools/layers.sh "$WORK/tree"
  if grep -qF "$2:$n: $4" "$WORK/last.out"; then ok "$1: named as $2:$n"
  else notok "$1: named as $2:$n"; sed 's/^/#   /' "$WORK/last.out" | head -n 10; fi
}

fresh
expect_exit "an untouched copy passes" 0 sh tests/tools/layers.sh "$WORK/tree"
plant "core includes an io header" app/core/geom.c '#include "store.h"' \
  'includes "store.h" (io): core may include'
plant "core includes the file reader of its own types" app/core/plan.c '#include "protocol_file.h"' \
  'includes "protocol_file.h" (io)'
plant "core includes SDL" app/core/pixels.c '#include <SDL.h>' 'includes <SDL.h> (sdl2): core'
plant "io includes ncurses" app/io/svg.c '#include <curses.h>' 'includes <curses.h> (ncurses): io'
plant "SQLite outside the store" app/io/export.c '#include <sqlite3.h>' \
  'includes <sqlite3.h> (sqlite), allowed only in'
plant "present knows the store" app/present/display.c '#include "store.h"' \
  'includes "store.h" (io): present'
plant "console reaches the presenter" app/console/live.c '#include "display.h"' \
  'includes "display.h" (present): console'
plant "a core header includes an io header" include/geom.h '#include "image.h"' \
  'includes "image.h" (io): core'
plant "another folder's private header" app/io/svg.c '#include "../run/run_private.h"' \
  'includes "../run/run_private.h": project headers are named without a folder'
plant "GSL is allowed, cJSON is not, in core" app/core/stats.c '#include <cJSON.h>' \
  'includes <cJSON.h> (cjson): core'

# A new module named after its file needs no table row; one in a new folder does.
fresh
printf '#include "geom.h"\n' >"$WORK/tree/app/core/newmod.c"
printf '#include "diag.h"\n' >"$WORK/tree/include/newmod.h"
printf '#include "newmod.h"\n' >>"$WORK/tree/app/io/svg.c"
expect_exit "a new core module is found by its file name" 0 sh tests/tools/layers.sh "$WORK/tree"
mkdir -p "$WORK/tree/app/extra" && printf '#include <stdio.h>\n' >"$WORK/tree/app/extra/x.c"
expect_exit "a folder missing from the table fails" 1 sh tests/tools/layers.sh "$WORK/tree"
grep -q 'app/extra/ is no layer' "$WORK/last.out" && ok "the new folder is named" \
  || notok "the new folder is named"
