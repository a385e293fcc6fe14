# e2e adaptive_check — `tachist check` on adaptive protocols: the example staircase protocol checks
# clean and shows its staircases; each bad adaptive value gives exit 1 and its FILE:LINE message.
. tests/e2e/lib.sh
RIG="--rig assets-demo/rig.ini"
expect_exit "staircase protocol checks clean" 0 "$TACHIST" check protocols/staircase.ini $RIG
check "up-down block: 2 staircases, 80 trials at most" grep -q '^1  *updown  *80 .*adaptive pair: updown, 2 staircases' "$WORK/last.out"
check "QUEST block: one staircase per category" grep -q '^2  *quest  *120 .*adaptive bycategory: quest, 6 staircases' "$WORK/last.out"
expect_eq "no diagnostics" "" "$(cat "$WORK/last.err")"

# bad NAME 'SED-SCRIPT' 'EXPECTED ERROR' (line numbers are those of protocols/staircase.ini; check
# sorts its diagnostics by line, so the expected one is looked for among all of them)
bad() {
  sed -e "s#^list = .*#list = $ROOT/assets-demo/stimuli.csv#" -e "$2" protocols/staircase.ini > "$WORK/$1.ini"
  expect_exit "$1: exit 1" 1 "$TACHIST" check "$WORK/$1.ini" $RIG
  expect_eq "$1: message" "$WORK/$1.ini:$3" "$(grep -F -x "$WORK/$1.ini:$3" "$WORK/last.err" | head -n 1)"
}
bad n0 's/^down = 2/down = 0/' '41: error: down = 0 is out of range (1 to 20)'
bad negstep 's/^step = 0.15/step = -0.15/' '42: error: step = -0.15 is out of range (above 0, up to 1e+12 axis units)'
bad floorceil 's/^start = 8, 32/start = 8, 32\nfloor = 30\nceiling = 10/' '41: error: floor = 30 must be below ceiling = 10 (line 42)'
bad startout 's/^start = 8, 32/start = 8, 32\nfloor = 10/' '40: error: start = 8 lies outside floor = 10 and ceiling = inf'
bad priorout 's/^prior_mean = 16/prior_mean = 100/' '51: error: block '"'"'quest'"'"' (adaptive bycategory): the prior mean 100 is outside the level range [8, 32]'
bad nolevels 's/^select = level=8,16,32/select = level=0/' '29: error: block '"'"'updown'"'"' (adaptive pair): no stimulus of the block has a level usable on a log (above 0) axis'
bad norule 's/^rule = updown/rule = staircase/' '37: error: rule = staircase is not one of updown, weighted, quest'
bad zerotrials 's/^trials = 40/trials = 0/' '46: error: trials = 0 is out of range (1 to 100000 trials)'
bad questlin 's/^prior_mean = 16/prior_mean = 16\naxis = linear/' '52: error: rule = quest works on a log axis; set axis = log (or leave it out)'
bad halving 's/^halve_after = 2/halve_after = 4, 2/' '43: error: halve_after = 4, 2: give whole reversal counts in increasing order'
bad noblock 's/^adaptive = pair/adaptive = pairs/' '30: error: block '"'"'updown'"'"': adaptive = pairs names no [adaptive pairs] section'

# Everything in one file is reported, not only the first problem.
sed -e "s#^list = .*#list = $ROOT/assets-demo/stimuli.csv#" -e 's/^down = 2/down = 0/' -e 's/^step = 0.15/step = -1/' -e 's/^prior_sd = 0.4/prior_sd = 0/' protocols/staircase.ini > "$WORK/many.ini"
expect_exit "several problems: exit 1" 1 "$TACHIST" check "$WORK/many.ini" $RIG
expect_eq "several problems: all listed" "3" "$(grep -c ': error: ' "$WORK/last.err")"
