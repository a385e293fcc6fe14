# e2e console_session — a whole session driven through the console in tmux, headless with the model
# observer: set up, run both blocks, read the results (accuracy, curve, confusions, timing), export
# CSV, close, find it in the sessions list, quit. The database must hold every trial, and the
# session must equal, trial for trial, one run by `tachist run` with the same seed (before the
# warm-up block is run again): the console
# adds no dropped frames and changes nothing in what the observer is shown.
. tests/e2e/lib.sh
. tests/e2e/console.inc

SPEC="model:shape=weibull,threshold=18,slope=-3,lapse=0.02,rt=550,seed=7"
console_proto "$WORK/quick.ini" quick 'exemplar=3'

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=
tm_console
expect_screen "console opens" "Before anyone sits down"
tm_keys Enter
expect_screen "set-up form" "New session"
tm_keys Up Enter C-u
tm_type "$WORK/quick.ini"
tm_keys Enter
expect_screen "the protocol checks clean" "ready: 2 blocks, 30 trials"
tm_keys Down Enter
tm_type S01
tm_keys Enter Down Down Enter C-u
tm_type 4242
tm_keys Enter Down Right
expect_screen "display: headless, as fast as possible" "headless, as fast as possible"
expect_screen "observer: the model (no display here)" "model observer (simulated answers)"
expect_screen "the model's spec is shown" "$SPEC"
tm_keys g
expect_screen "blocks screen opens with the session" "Session "
expect_screen "blocks: the practice block is marked" "warmup                  6"
expect_screen "blocks: practice kind" "practice   not run"
expect_screen "blocks: the main block and its trial count" "main                   24"
tm_keys Enter
expect_screen "block 1 runs and reports" 'Block "warmup" done: 6 trials'
tm_keys Enter
expect_screen "block 2 runs and reports" 'Block "main" done: 24 trials'
expect_screen "both blocks are done" "practice   done"
tm_keys Up a
expect_screen "running a block again asks first" 'Run block 1 ("warmup") again?'
tm_keys y
expect_screen "the block runs again" "run 2 times"

tm_keys r
expect_screen "results: accuracy view" "1 accuracy"
expect_screen "results: practice trials are left out" "(12 practice trials left out)"
expect_screen "results: the interval scale" "95% Wilson"
for lv in 0 8 16 32; do
  expect_screen "results: a row for level $lv" "main           $lv "
done
tm_keys 2
expect_screen "results: the curve's axis" "level"
expect_screen "results: chance marked on the curve" "chance"
# One fit in the program: the curve shows the same fit (or the same refusal) as `tachist report`.
rep=$("$TACHIST" report --db "$DB" --boot 0 2>/dev/null | sed -n 's/^  subject S01, block main: //p' | head -n 1)
case "$rep" in
  "no fit: "*) want=$(printf '%s' "$rep" | cut -c1-60) ;;
  *) want="$(printf '%s' "$rep" | cut -d' ' -f1) fit" ;;
esac
check "report has a fit line for the main block ($rep)" test -n "$rep"
expect_screen "results: the curve shows the report's fit ($want)" "$want"
tm_keys 3
expect_screen "results: the confusion matrix" "rows: true category, columns: answer"
expect_screen "results: the shade legend" "75% or more"
tm_keys 4
expect_screen "results: timing mode" "Timing mode       simulated"
expect_screen "results: exposure" "Exact exposure"

tm_keys x
expect_screen "export screen" "Export session"
expect_screen "export: CSV first" "CSV (comma-separated, RFC 4180)"
tm_keys Enter C-u
tm_type "$WORK/nofolder/out.csv"
tm_keys Enter
expect_screen "export: a folder that does not exist" "no such folder: $WORK/nofolder"
tm_keys C-u Enter
expect_screen "export: an empty path" "path needs a value"
tm_type "$WORK/out.csv"
tm_keys Enter
expect_screen "export: written" "Wrote 36 trials of 1 session to $WORK/out.csv"
tm_keys w
expect_screen "export: an existing file is not replaced without asking" "exists. Replace what is there?"
tm_keys n
expect_screen "export: no means nothing written" "nothing written"
lines=$(wc -l < "$WORK/out.csv" | tr -d ' ')
expect_eq "the CSV has a header and 36 rows" 37 "$lines"
check "the CSV header is the export's" grep -q '^session_id,subject,protocol,started_utc,block,block_name,practice,block_trial,trial,image' "$WORK/out.csv"

tm_keys q q
expect_screen "back on the blocks screen" 'Block "warmup" done'
tm_keys c
expect_screen "closing asks first" "Close this session?"
tm_keys y
expect_screen "the session closes" "Session closed."
tm_keys q q
expect_screen "back on the first screen" "Before anyone sits down"
expect_screen "the first screen counts the stored sessions" "1 session stored"
tm_keys s
expect_screen "sessions list" "1 session"
expect_screen "sessions list: subject, status and trials" "complete        36"
tm_keys Enter
expect_screen "results from the sessions list" "1 accuracy"
tm_keys q q q
expect_screen "quit" "console-exit=0"
tm_stty_same "terminal modes restored"

n=$(sqlite3 "$DB" "select count(*) from trials")
expect_eq "the database holds every trial, the repeated block's too" 36 "$n"
st=$(sqlite3 "$DB" "select status from sessions")
expect_eq "the session is complete" complete "$st"

# The same session without the console: identical trials, timing flags and dropped frames.
expect_exit "tachist run with the same seed" 0 "$TACHIST" run "$WORK/quick.ini" --subject S01 \
  --seed 4242 --headless --observer "$SPEC" --db "$WORK/cli.db"
q="select block, block_trial, trial, image, response_key, correct, rt_ms, frames_planned,
   frames_actual, dropped_frames, timing_ok from trials where trial < 30 order by trial"
sqlite3 "$DB" "$q" > "$WORK/console.rows"
sqlite3 "$WORK/cli.db" "$q" > "$WORK/cli.rows"
check "console and command line give the same 30 trials" cmp -s "$WORK/console.rows" "$WORK/cli.rows"
d1=$(sqlite3 "$DB" "select sum(dropped_frames) || '/' || sum(1 - timing_ok) from trials where trial < 30")
d2=$(sqlite3 "$WORK/cli.db" "select sum(dropped_frames) || '/' || sum(1 - timing_ok) from trials")
expect_eq "no dropped frames or flagged trials added by the console" "$d2" "$d1"
