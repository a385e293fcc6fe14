# e2e check — `tachist check` on the demo protocol (plan printed, exit 0), JSON output, usage errors.
. tests/e2e/lib.sh
PY=/usr/bin/python3
expect_exit "demo protocol checks clean" 0 "$TACHIST" check protocols/demo.ini --rig assets-demo/rig.ini
check "plan lists the practice block" grep -q '^1  *practice  *12 yes' "$WORK/last.out"
check "plan lists the main block" grep -q '^2  *main  *144 no' "$WORK/last.out"
check "stimulus epoch is 12 frames at 60 Hz" grep -q '^stimulus  *200  *12  *200.0' "$WORK/last.out"
check "estimated length printed" grep -q '^total 156 trials in 2 blocks, about ' "$WORK/last.out"
expect_eq "no diagnostics for the demo" "" "$(cat "$WORK/last.err")"

expect_exit "check --json exits 0" 0 "$TACHIST" check protocols/demo.ini --rig assets-demo/rig.ini --json
expect_eq "json: ok, trials, stimulus px" "True 156 63 12" "$($PY -c '
import json,sys; j=json.load(open(sys.argv[1]))
print(j["ok"], j["trials"], j["stimulus"]["pixels"], j["epochs"][2]["frames"])' "$WORK/last.out")"

# Default rig falls back to the demo rig with a warning (no XDG rig in a scratch HOME).
expect_exit "default rig falls back to the demo rig" 0 env HOME="$WORK" XDG_CONFIG_HOME="$WORK/cfg" "$TACHIST" check protocols/demo.ini
check "fallback warns on stderr" grep -q 'using the demo rig' "$WORK/last.err"

# A problem gives exit 1, FILE:LINE, and the JSON lists it.
sed 's/^stimulus_ms = 200/stimulus_ms = -1/' protocols/demo.ini > "$WORK/bad.ini"
sed -i "s#^list = .*#list = $ROOT/assets-demo/stimuli.csv#" "$WORK/bad.ini"
expect_exit "bad protocol exits 1" 1 "$TACHIST" check "$WORK/bad.ini" --rig assets-demo/rig.ini
expect_eq "bad protocol message" "$WORK/bad.ini:20: error: stimulus_ms = -1 is out of range (above 0, up to 60000 ms)" "$(head -n 1 "$WORK/last.err")"
expect_exit "bad protocol --json exits 1" 1 "$TACHIST" check "$WORK/bad.ini" --rig assets-demo/rig.ini --json
expect_eq "json lists the problem" "False 20" "$($PY -c '
import json,sys; j=json.load(open(sys.argv[1]))
print(j["ok"], j["problems"][0]["line"])' "$WORK/last.out")"

expect_exit "check without a protocol is a usage error" 2 "$TACHIST" check
expect_exit "check with an unknown option is a usage error" 2 "$TACHIST" check protocols/demo.ini --frob
