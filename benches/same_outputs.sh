#!/usr/bin/env bash
# Checks that two builds of provisio write the same cleaning outputs:
# `clean` (cleaned.csv, adjustments.csv, quality.csv, rejected.csv, and the
# manifest without its timing and version fields) and `inspect --json`, on
# the demo data (an invented scenario), generated files with and without
# sites (`provisio generate`, invented data) and with non-default cleaning
# settings (outliers replaced, a non-reporting weight, a lower stockout
# limit). For a change meant to leave every output byte-identical.
#
#   benches/same_outputs.sh OLD_BINARY NEW_BINARY
#
# Prints one line per case and exits 1 on the first difference.
set -euo pipefail
cd "$(dirname "$0")/.."
OLD=$1
NEW=$2
WORK=${SAME_DIR:-${TMPDIR:-/tmp}/provisio-same}
rm -rf "$WORK"
mkdir -p "$WORK"
"$NEW" generate --products 300 --sites 1 --months 60 --seed 3 --out "$WORK/g1.csv" >/dev/null
"$NEW" generate --products 40 --sites 12 --months 36 --seed 5 --out "$WORK/g12.csv" >/dev/null
# Every rule and every reason text: a month no site covers, a quantity not
# reported, a month with no row, rates below the floor, a long stockout.
cat >"$WORK/rules.csv" <<'CSV'
product,site,month,consumed,stockout_days,reporting_rate
A,north,2024-01,10,,1
A,north,2024-02,12,,0.9
A,north,2024-03,,,1
A,north,2024-04,11,20,1
A,north,2024-06,13,3,0.3
A,south,2024-09,9,,1
A,south,2024-10,8,,0.95
CSV
cat >"$WORK/rules-no-site.csv" <<'CSV'
product,month,consumed,stockout_days,reporting_rate
B,2024-01,5,,1
B,2024-02,,,1
B,2024-04,7,2,0.8
B,2024-05,6,31,1
B,2024-06,6,,1
CSV
# Copies of a row: exact, with other values, three of one key, out of order.
cat >"$WORK/copies.csv" <<'CSV'
product,site,month,consumed,stockout_days,reporting_rate
A,north,2024-01,10,,
A,north,2024-02,12,,
A,north,2024-01,10,,
B,south,2024-03,5,,
A,north,2024-02,13,,
A,north,2024-02,14,2,
A,south,2024-01,7,,0.9
B,south,2024-03,6,,
A,south,2024-01,8,,0.9
A,north,2024-03,9,,
B,south,2024-01,4,,
A,south,2024-01,8,1,0.9
CSV
# The wide layout, one product on two lines.
cat >"$WORK/wide.csv" <<'CSV'
product,2024-01,2024-02,2024-03,2024-04
A,10,12,,11
B,5,6,7,8
A,10,13,9,
CSV
cases=(
    "wide-reject|$WORK/wide.csv|"
    "wide-sum|$WORK/wide.csv|--duplicates sum"
    "copies-reject|$WORK/copies.csv|"
    "copies-sum|$WORK/copies.csv|--duplicates sum"
    "every-rule|$WORK/rules.csv|--site-trailing-fill 0"
    "every-rule-no-site|$WORK/rules-no-site.csv|"
    "demo|datasets/demo/consumption.csv|"
    "demo-options|datasets/demo/consumption.csv|--replace-outliers --nonreporting-weight 0.5 --max-stockout-days 5"
    "generated-1-site|$WORK/g1.csv|"
    "generated-12-sites|$WORK/g12.csv|--replace-outliers --reporting-floor 0.6"
)
# Fields of the manifest that differ between any two runs.
strip() { grep -v -E '"(seconds|created|version|started|finished|elapsed|git)[a-z_]*":' "$1" || true; }
status=0
for c in "${cases[@]}"; do
    IFS='|' read -r name data opts <<<"$c"
    for side in old new; do
        bin=$OLD
        [ "$side" = new ] && bin=$NEW
        # shellcheck disable=SC2086
        "$bin" clean "$data" --out "$WORK/$name-$side" --quiet $opts >/dev/null 2>"$WORK/$name-$side.err" || true
        # shellcheck disable=SC2086
        "$bin" inspect "$data" --json --quiet $opts >"$WORK/$name-$side.json" 2>>"$WORK/$name-$side.err" || true
        strip "$WORK/$name-$side/manifest.json" >"$WORK/$name-$side.manifest"
    done
    bad=""
    for f in cleaned.csv adjustments.csv quality.csv rejected.csv; do
        cmp -s "$WORK/$name-old/$f" "$WORK/$name-new/$f" || bad="$bad $f"
    done
    for f in json err manifest; do
        cmp -s "$WORK/$name-old.$f" "$WORK/$name-new.$f" || bad="$bad $f"
    done
    rows=$(($(wc -l <"$WORK/$name-new/adjustments.csv") - 1))
    if [ -n "$bad" ]; then
        echo "$name: DIFFERENT:$bad"
        status=1
    else
        echo "$name: same ($rows adjustment-log entries)"
    fi
done
exit $status
