# e2e calibrate — `tachist calibrate` from CSV and typed at the terminal, the rig's [luminance]
# section, background_cd and linearize in `check` and `run`.
. tests/e2e/lib.sh
PY=/usr/bin/python3
cp assets-demo/rig.ini "$WORK/rig.ini"
cp "$WORK/rig.ini" "$WORK/rig.orig"

# Invented readings from a gamma-2.35 display with photometer noise (seeded).
$PY - "$WORK/readings.csv" <<'EOF'
import random, sys
random.seed(11)
with open(sys.argv[1], "w") as f:
    f.write("code,cd_m2\n")
    for i in range(17):
        c = round(i * 255 / 16)
        f.write("%d,%.4f\n" % (c, 0.35 + 96.0 * (c / 255) ** 2.35 + random.gauss(0, 0.25)))
EOF

# 1. The fit equals scipy.optimize.curve_fit (Levenberg-Marquardt on the same model, tight
#    tolerances) to 1e-6 relative in gamma, L_min and L_max.
"$TACHIST" calibrate --rig "$WORK/rig.ini" --from "$WORK/readings.csv" --dry-run --json >"$WORK/fit.json" 2>"$WORK/fit.err"
expect_eq "dry run leaves the rig unchanged" "same" "$(cmp -s "$WORK/rig.ini" "$WORK/rig.orig" && echo same)"
res=$($PY - "$WORK/readings.csv" "$WORK/fit.json" <<'EOF'
import json, sys
import numpy as np
from scipy.optimize import curve_fit
d = np.loadtxt(sys.argv[1], delimiter=",", skiprows=1)
f = lambda v, a, b, g: a + (b - a) * (v / 255.0) ** g
p, _ = curve_fit(f, d[:, 0], d[:, 1], p0=[d[0, 1], d[-1, 1], 2.2], xtol=1e-15, ftol=1e-15,
                 gtol=1e-15, maxfev=100000)
c = json.load(open(sys.argv[2]))["channels"][0]
got = [c["l_min"], c["l_max"], c["gamma"]]
rel = max(abs(g - w) / abs(w) for g, w in zip(got, p))
print("ok" if rel < 1e-6 else "bad: ours %r scipy %r (rel %.2g)" % (got, list(p), rel))
EOF
)
expect_eq "gamma fit equals scipy curve_fit to 1e-6 relative" "ok" "$res"

# 2. Writing: the section is added, every other line of the profile stays as it was, the profile
#    still loads, and a second calibration replaces the section rather than adding another.
expect_exit "calibrate writes the rig" 0 "$TACHIST" calibrate --rig "$WORK/rig.ini" --from "$WORK/readings.csv" --measured 2026-11-20
head -n "$(wc -l <"$WORK/rig.orig")" "$WORK/rig.ini" >"$WORK/rig.head"
expect_eq "other sections and comments kept" "same" "$(cmp -s "$WORK/rig.head" "$WORK/rig.orig" && echo same)"
expect_eq "one [luminance] section" "1" "$(grep -c '^\[luminance\]' "$WORK/rig.ini")"
expect_eq "seventeen readings stored" "17" "$(grep -c '^reading = ' "$WORK/rig.ini")"
printf '\n; a note the experimenter added\n[marker2]\n' >/dev/null
"$TACHIST" calibrate --rig "$WORK/rig.ini" --from "$WORK/readings.csv" --measured 2026-11-25 >/dev/null 2>&1
expect_eq "recalibration replaces the section" "1 2026-11-25" "$(grep -c '^\[luminance\]' "$WORK/rig.ini") $(sed -n 's/^measured = //p' "$WORK/rig.ini")"
expect_exit "calibrated rig loads (calc pixels)" 0 "$TACHIST" calc pixels --deg 2 --rig "$WORK/rig.ini"
expect_eq "no temporary files left" "" "$(ls "$WORK" | grep '^rig\.ini\.' || true)"

# 3. Bad readings: each a FILE:LINE message (or a sentence), exit 1, and the rig unchanged.
cp "$WORK/rig.ini" "$WORK/rig.before"
bad() { # NAME CSV-TEXT EXPECTED-WORDS
  printf "$2" >"$WORK/bad.csv"
  "$TACHIST" calibrate --rig "$WORK/rig.ini" --from "$WORK/bad.csv" >"$WORK/bad.out" 2>"$WORK/bad.err"; rc=$?
  if [ $rc = 1 ] && grep -q "$3" "$WORK/bad.err" && cmp -s "$WORK/rig.ini" "$WORK/rig.before"; then
    ok "refused: $1"
  else
    notok "refused: $1 (exit $rc)"; sed 's/^/#   /' "$WORK/bad.err"
  fi
}
bad "not a number" 'code,cd_m2\n0,0.3\n128,lots\n255,90\n' "bad.csv:3: error: reading 'lots' is not a luminance"
bad "negative" '0,0.3\n128,-4\n255,90\n' "bad.csv:2: error: reading '-4' is not a luminance"
bad "hexadecimal" '0,0.3\n128,0x14\n255,90\n' "bad.csv:2: error"
bad "fewer than 3 points" '0,0.3\n255,90\n' "a fit needs at least 3"
bad "all equal" '0,20\n128,20\n255,20\n' "does not change with the code"
bad "code out of range" '0,0.3\n300,20\n255,90\n' "bad.csv:2: error: code '300'"
bad "code twice" '0,0.3\n128,20\n128,21\n255,90\n' "bad.csv:3: error: code 128 (grey) is read twice"
bad "unknown channel" '0,0.3,grey\n128,20,purple\n255,90,grey\n' "channel 'purple'"
bad "falling light" '0,90\n128,20\n255,1\n' "fall as the code rises"
expect_exit "a readings file that is a folder is refused" 1 "$TACHIST" calibrate --rig "$WORK/rig.ini" --from "$WORK"

# 4. Typed at the terminal, in ascending order, headless: each code fills the screen (the saved
#    frame is that grey everywhere), and the readings are fitted as from CSV.
mkdir -p "$WORK/shots"
$PY -c 'print("\n".join("%.9f" % (0.2 + 80 * (round(i*255/4)/255) ** 2.2) for i in range(5)))' >"$WORK/typed.txt"
"$TACHIST" calibrate --rig "$WORK/rig.ini" --headless --order ascending --steps 5 --dry-run --json \
  --screenshots "$WORK/shots" <"$WORK/typed.txt" >"$WORK/typed.json" 2>"$WORK/typed.err"
rc=$?
expect_eq "typed readings accepted" 0 $rc
expect_eq "five frames saved" 5 "$(ls "$WORK/shots" | wc -l)"
px=$($PY - "$WORK/shots" <<'EOF'
import os, sys
sys.path.insert(0, "tests/tools")
from stimset import read_png
out = []
for name in sorted(os.listdir(sys.argv[1])):
    a = read_png(os.path.join(sys.argv[1], name))
    code = int(name.split("-")[-1].split(".")[0])
    out.append("ok" if (a[..., :3] == code).all() else "bad %s" % name)
print(" ".join(out))
EOF
)
expect_eq "each frame is its code on every pixel" "ok ok ok ok ok" "$px"
g=$($PY -c 'import json,sys; print("%.6f" % json.load(open(sys.argv[1]))["channels"][0]["gamma"])' "$WORK/typed.json")
expect_eq "typed power-law readings give gamma 2.2" "2.200000" "$g"

# 5. Shuffled order with a patch in degrees, answered prompt by prompt by a made-up sRGB display
#    (IEC 61966-2-1 decoding curve, 0.5 to 120.5 cd/m2), with a typo and a negative number first.
#    The table model gives code 128 = 0.2159 of the range (the standard's formula).
res=$($PY - "$TACHIST" "$WORK/rig.ini" <<'EOF'
import json, re, subprocess, sys
def srgb(c):
    u = c / 255
    return u / 12.92 if u <= 0.04045 else ((u + 0.055) / 1.055) ** 2.4
p = subprocess.Popen([sys.argv[1], "calibrate", "--rig", sys.argv[2], "--headless", "--seed", "4",
                      "--patch-deg", "5", "--model", "table", "--dry-run", "--json"],
                     stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
buf, order, typo = "", [], 2
while True:
    ch = p.stderr.read(1)
    if not ch:
        break
    buf += ch
    m = re.search(r"code (\d+) \(grey\): photometer reading in cd/m2 \(q to stop\): $", buf)
    if m:
        code = int(m.group(1))
        buf = ""
        if typo == 2:
            p.stdin.write("abc\n"); typo -= 1
        elif typo == 1:
            p.stdin.write("-3\n"); typo -= 1
        else:
            order.append(code)
            p.stdin.write("%.6f\n" % (0.5 + 120 * srgb(code)))
        p.stdin.flush()
out = p.stdout.read()
p.wait()
doc = json.loads(out)
c = doc["channels"][0]
r = {x["code"]: x["cd_m2"] for x in c["readings"]}
frac = (r[128] - 0.5) / 120
shuffled = order != sorted(order)
print("rc=%d n=%d shuffled=%s table=%s frac=%.4f" % (p.returncode, len(order), shuffled, c["uses_table"], frac))
EOF
)
expect_eq "shuffled prompts answered, typo and negative asked again" "rc=0 n=17 shuffled=True table=True frac=0.2159" "$res"

printf 'q\n' | "$TACHIST" calibrate --rig "$WORK/rig.ini" --headless >/dev/null 2>"$WORK/q.err"
rc=$?
expect_eq "q stops the calibration, rig unchanged" "1 same" "$rc $(cmp -s "$WORK/rig.ini" "$WORK/rig.before" && echo same)"
expect_exit "the demo rig is never written" 1 env XDG_CONFIG_HOME="$WORK/none" "$TACHIST" calibrate --from "$WORK/readings.csv"

# 6. The protocol: background in cd/m2 and linearised images need a calibration.
mkdir -p "$WORK/img"
$PY - "$WORK" <<'EOF'
import sys
sys.path.insert(0, "tests/tools")
import numpy as np
from stimset import write_png
root = sys.argv[1]
rows = ["image,category,level"]
for cat in ["a", "b"]:
    for k in range(4):
        write_png("%s/img/%s%d.png" % (root, cat, k), np.full((32, 32, 3), 128, np.uint8))
        rows.append("img/%s%d.png,%s,0" % (cat, k, cat))
open(root + "/list.csv", "w").write("\n".join(rows) + "\n")
EOF
cat >"$WORK/lin.ini" <<'EOF'
[experiment]
name = lin
list = list.csv
[categories]
a = f
b = j
[timing]
fixation_ms = 100
blank_ms = 0
stimulus_ms = 100
mask_ms = 0
response_ms = 1000
feedback_ms = 0
iti_ms = 100
[display]
size_deg = 2
background_cd = 20
linearize = yes
mask = none
[block only]
select = level=0
EOF
expect_exit "background_cd without a calibration is refused" 1 "$TACHIST" check "$WORK/lin.ini" --rig "$WORK/rig.orig"
grep -q "background_cd needs a rig calibrated" "$WORK/last.err" && ok "message names background_cd" || notok "message names background_cd"
$PY -c 'print("code,cd_m2"); [print("%d,%.6f" % (c, 0.5 + 100 * (c / 255) ** 2.2)) for c in range(0, 256, 15)]' >"$WORK/g22.csv"
"$TACHIST" calibrate --rig "$WORK/rig.ini" --from "$WORK/g22.csv" --measured 2026-01-05 >/dev/null 2>&1
"$TACHIST" check "$WORK/lin.ini" --rig "$WORK/rig.ini" >"$WORK/check.out" 2>"$WORK/check.err"
# background 20 cd/m2 on 0.5 + 100 (v/255)^2.2: v = 255 ((20 - 0.5) / 100)^(1/2.2) = 121.0 (arithmetic)
grep -q "background code 121 = " "$WORK/check.out" && ok "check prints the background's code and light" || { notok "check prints the background's code and light"; cat "$WORK/check.out" | sed 's/^/#   /'; }
grep -q "luminance calibration is [0-9]* days old" "$WORK/check.err" && ok "an old calibration is a warning" || notok "an old calibration is a warning"
"$TACHIST" check "$WORK/lin.ini" --rig "$WORK/rig.ini" --json >"$WORK/check.json" 2>/dev/null
expect_eq "check --json carries the background light" "121 True" "$($PY -c 'import json,sys; l=json.load(open(sys.argv[1]))["luminance"]; print(l["background_code"], abs(l["background_cd"]-20)<0.5)' "$WORK/check.json")"

# 7. A run with linearize: a uniform image of code 128 is shown as the code whose light is half
#    way, round(255 (128/255)^(1/2.2)) = 186 (arithmetic), and the background is code 121.
mkdir -p "$WORK/runshots"
"$TACHIST" run "$WORK/lin.ini" --subject S1 --db "$WORK/t.db" --rig "$WORK/rig.ini" --headless \
  --observer model:threshold=1,slope=2 --seed 3 --screenshots "$WORK/runshots" >"$WORK/run.out" 2>"$WORK/run.err"
expect_eq "linearised run completes" 0 $?
shown=$($PY - "$WORK/runshots" <<'EOF'
import os, sys
sys.path.insert(0, "tests/tools")
from stimset import read_png
names = sorted(os.listdir(sys.argv[1]))
stim = [n for n in names if "stimulus" in n][0]
a = read_png(os.path.join(sys.argv[1], stim))
h, w = a.shape[:2]
print(int(a[h // 2, w // 2, 0]), int(a[2, 2, 0]))
EOF
)
expect_eq "image 128 shown as 186, background 121" "186 121" "$shown"

# 8. The session carries the calibration in its metadata (JSON export and the BIDS sidecar). The
#    background achieved is the light of code 121: 0.5 + 100 (121/255)^2.2 = 19.9 cd/m2
#    (arithmetic), not the 20 asked for.
"$TACHIST" export --db "$WORK/t.db" --format json --out "$WORK/t.json" >/dev/null 2>&1
expect_eq "JSON export: calibration date, gamma 2.2, L_min 0.5, L_max 100.5, background 20, linearized" \
  "2026-01-05 2.2 0.5 100.5 19.9 1" "$($PY - "$WORK/t.json" <<'PYEOF'
import json, sys
d = json.load(open(sys.argv[1]))
s = d["sessions"][0] if isinstance(d, dict) else d[0]
print(s["luminance_measured"], round(s["luminance_gamma"], 3), round(s["luminance_min"], 3),
      round(s["luminance_max"], 3), round(s["background_luminance"], 1), int(s["linearized"]))
PYEOF
)"
"$TACHIST" export --db "$WORK/t.db" --format bids --out "$WORK/bids" >/dev/null 2>&1
side=$(find "$WORK/bids" -name '*_beh.json' | head -n 1)
expect_eq "BIDS sidecar: the calibration's gamma and the background light" "2.2 19.9" "$($PY - "$side" <<'PYEOF'
import json, sys
d = json.load(open(sys.argv[1]))
def find(o, k):
    if isinstance(o, dict):
        if k in o and not isinstance(o[k], dict):
            return o[k]
        for v in o.values():
            r = find(v, k)
            if r is not None:
                return r
    return None
print(round(find(d, "luminance_gamma"), 3), round(find(d, "background_luminance"), 1))
PYEOF
)"
