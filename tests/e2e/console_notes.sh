# e2e console_notes — the sessions screen's two writes go through a writer: a note typed there is
# stored as an event of the session, and a session without trials is deleted after the yes/no
# question, while one holding trials is refused with the reason. Checked in the database itself.
. tests/e2e/lib.sh
. tests/e2e/console.inc
FILL=$ROOT/$BUILD/tools/store_fill
"$FILL" "$DB" 1 4 --subject S01 --plain >/dev/null
"$FILL" "$DB" 1 0 --subject S02 --plain >"$WORK/empty.id"
empty=$(cat "$WORK/empty.id")
notes() { sqlite3 "$DB" "SELECT count(*) FROM events WHERE kind = 'note' AND session_id = '$1' AND detail = '$2'"; }

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=
tm_console
expect_screen "console opens" "Before anyone sits down"
tm_keys s
expect_screen "the sessions screen lists both sessions" "S02"
tm_keys n
tm_type "lamp flickered"
tm_keys Enter
expect_screen "the note is stored" "note stored with session $(echo "$empty" | cut -c1-8)"
expect_eq "the database holds the note on the chosen session" 1 "$(notes "$empty" 'lamp flickered')"
tm_keys d
expect_screen "deleting asks first" "Delete session $(echo "$empty" | cut -c1-8)"
tm_keys y
expect_screen "the session without trials is deleted" "session $(echo "$empty" | cut -c1-8) deleted"
expect_eq "it is gone from the database, its note with it" "0 0" \
  "$(sqlite3 "$DB" "SELECT count(*) FROM sessions WHERE id = '$empty'") $(notes "$empty" 'lamp flickered')"
tm_keys d
expect_screen "a session holding trials is not deleted" "holds 4 trials"
expect_eq "and stays in the database" 1 "$(sqlite3 "$DB" "SELECT count(*) FROM sessions WHERE subject = 'S01'")"
tm_keys q
tm_wait "console-exit=" 20 >/dev/null || { tm_keys Escape; tm_keys q; tm_keys y; }
expect_screen "the console ends" "console-exit=0" 20
