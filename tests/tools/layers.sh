#!/bin/sh
# Checks every #include in app/ and include/ against the layer rules in docs/design.md (its
# "Layers" tables: what each layer may include, which headers belong to which library, and the
# layer of headers not named after their file). Prints one line per violation as
# FILE:LINE: message and exits 1 when there is any, 0 (with a one-line summary) when none.
#
#   sh tests/tools/layers.sh [ROOT]          ROOT: the source tree (default: the current folder)
#
# `make layers` runs it; tests/e2e/layers.sh plants violations in a copy of the tree.
root=${1:-.}
cd "$root" || exit 2
[ -f docs/design.md ] || { echo "layers: docs/design.md not found in $root" >&2; exit 2; }
list=$(mktemp) || exit 2
trap 'rm -f "$list"' EXIT
ls app/*/*.c app/*/*.h include/*.h 2>/dev/null >"$list"
# shellcheck disable=SC2046
awk -v listfile="$list" '
function trim(s) { gsub(/^[ \t]+|[ \t]+$/, "", s); return s }
function ticks(s, out,   n, t) {   # backticked words of S into out[1..n]
	n = 0
	while (match(s, /`[^`]*`/)) {
		t = substr(s, RSTART + 1, RLENGTH - 2); s = substr(s, RSTART + RLENGTH)
		out[++n] = t
	}
	return n
}
function glob_match(pat, s,   re) {   # shell-style * only
	re = pat; gsub(/[.+?()|\[\]{}^$]/, "\\\\&", re); gsub(/\*/, ".*", re)
	return s ~ ("^" re "$")
}
function allowed(layer, what,   k, n, a) {
	if (layer == what) return 1
	n = split(may[layer], a, ",")
	for (k = 1; k <= n; k++) if (trim(a[k]) == what) return 1
	return 0
}
function header_layer(h,   base, k, n, found, f, parts) {
	if (h in hdrlayer) return hdrlayer[h]
	base = h; sub(/\.h$/, "", base)
	found = ""
	for (f in srcfile) {
		n = split(f, parts, "/")
		if (parts[3] == base ".c") {
			k = folderlayer["app/" parts[2] "/"]
			if (found != "" && found != k) return "?" found "," k
			found = k
		}
	}
	if (found != "") return found
	for (f in srcfile) {
		n = split(f, parts, "/")
		if (index(parts[3], base "_") == 1 && parts[3] ~ /\.c$/) {
			k = folderlayer["app/" parts[2] "/"]
			if (found != "" && found != k) return "?" found "," k
			found = k
		}
	}
	return found
}
function complain(msg) { printf "%s:%d: %s\n", FILENAME, FNR, msg; bad++ }
BEGIN {
	while ((getline f < listfile) > 0) srcfile[f] = 1
	close(listfile)
}
FILENAME == "docs/design.md" {
	if ($0 ~ /^\| *layer *\| *folder *\| *may include *\|/) { tab = "layers"; next }
	if ($0 ~ /^\| *library *\| *headers *\| *only in *\|/) { tab = "libs"; next }
	if ($0 ~ /^\| *header *\| *layer *\|/) { tab = "headers"; next }
	if ($0 !~ /^\|/) { tab = ""; next }
	if ($0 ~ /^\|[-| ]*$/) next
	split($0, c, "|")
	if (tab == "layers") {
		l = trim(c[2]); ticks(c[3], t); folder = t[1]
		layerof[folder] = l; folderlayer[folder] = l; may[l] = c[4]; nlayers++
	} else if (tab == "libs") {
		nlib++; libname[nlib] = trim(c[2])
		libpats[nlib] = ""; n = ticks(c[3], t)
		for (k = 1; k <= n; k++) libpats[nlib] = libpats[nlib] " " t[k]
		libonly[nlib] = ""; n = ticks(c[4], t)
		for (k = 1; k <= n; k++) libonly[nlib] = libonly[nlib] " " t[k]
	} else if (tab == "headers") {
		ticks(c[2], t); hdrlayer[t[1]] = trim(c[3])
	}
	next
}
FNR == 1 {
	if (!nlayers) { print "layers: no layer table in docs/design.md"; exit 2 }
	checked++
	dir = FILENAME; sub(/[^\/]*$/, "", dir)
	if (dir == "include/") {
		h = FILENAME; sub(/^include\//, "", h)
		mine = header_layer(h)
		if (mine == "" || mine ~ /^\?/) {
			complain("no layer for include/" h ": name it in the header table of docs/design.md")
			mine = ""
		}
	} else {
		mine = folderlayer[dir]
		if (mine == "")
			complain(dir " is no layer: add it to the layer table of docs/design.md")
	}
}
mine != "" && /^[ \t]*#[ \t]*include[ \t]*"/ {
	h = $0; sub(/^[^"]*"/, "", h); sub(/".*/, "", h)
	if (h ~ /\//) { complain("includes \"" h "\": project headers are named without a folder"); next }
	if (dir != "include/" && ((dir h) in srcfile)) next          # private header of its own folder
	if (!(("include/" h) in srcfile)) {
		complain("includes \"" h "\", which is neither in include/ nor in " dir); next
	}
	hl = header_layer(h)
	if (hl == "" || hl ~ /^\?/) { complain("includes \"" h "\", a header with no layer (name it in docs/design.md)"); next }
	if (!allowed(mine, hl))
		complain("includes \"" h "\" (" hl "): " mine " may include " trim(may[mine]))
	next
}
mine != "" && /^[ \t]*#[ \t]*include[ \t]*</ {
	h = $0; sub(/^[^<]*</, "", h); sub(/>.*/, "", h)
	lib = ""
	for (i = 1; i <= nlib && lib == ""; i++) {
		n = split(libpats[i], p, " ")
		for (k = 1; k <= n; k++) if (glob_match(p[k], h)) { lib = libname[i]; li = i; break }
	}
	if (lib == "") { complain("includes <" h ">, which no library in docs/design.md names"); next }
	if (!allowed(mine, lib)) {
		complain("includes <" h "> (" lib "): " mine " may include " trim(may[mine])); next
	}
	if (libonly[li] != "") {
		n = split(libonly[li], p, " "); ok = 0
		for (k = 1; k <= n; k++) if (index(FILENAME, p[k]) == 1) ok = 1
		if (!ok) complain("includes <" h "> (" lib "), allowed only in" libonly[li])
	}
}
END {
	if (bad) { printf "layers: %d violation%s\n", bad, bad == 1 ? "" : "s"; exit 1 }
	printf "layers: %d files follow docs/design.md\n", checked
}
' docs/design.md $(cat "$list")
