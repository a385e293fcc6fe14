#!/bin/sh
# Lists the functions in C files longer than a limit (default 120 lines, counted from the line
# that opens the definition to its closing brace), as FILE:LINE: NAME is N lines. Exit 1 when any
# is listed, 0 when none.
#
#   sh tests/tools/fnlen.sh [-n LIMIT] [FILE...]      (default: every app/*/*.c)
#
# It relies on the layout every file here follows: a definition starts at the start of a line
# (after a blank line, a comment or a declaration) and its body opens with "{" alone on a line and
# closes with "}" at the start of a line.
limit=120
if [ "$1" = "-n" ]; then limit=$2; shift 2; fi
[ $# -gt 0 ] || set -- app/*/*.c
awk -v limit="$limit" '
# Outside a body, a definition starts on the line after the last blank line, declaration, comment
# end, preprocessor line or closing brace; its name is the word before the first "(" from there.
FNR == 1 { inbody = 0; head = ""; start = 1 }
inbody && /^\}/ {
	inbody = 0
	n = FNR - start + 1
	if (n > limit) { printf "%s:%d: %s is %d lines\n", FILENAME, start, name, n; bad++ }
	head = ""; start = FNR + 1
	next
}
inbody { next }
/^\{[ \t]*$/ {
	if (head ~ /\(/) {
		inbody = 1
		name = head; sub(/\(.*/, "", name); sub(/.*[ \t*]/, "", name)
	}
	next
}
/^[ \t]*$/ || /;[ \t]*$/ || /\*\/[ \t]*$/ || /^#/ || /^\}/ { head = ""; start = FNR + 1; next }
{ head = head " " $0 }
END { exit bad ? 1 : 0 }
' "$@"
