#!/usr/bin/env bash
# The default command at national scale: `provisio forecast DATA --out DIR`
# with default options on N generated series of 60 months (invented data,
# `provisio generate --seed 3`), measured whole and without the report and
# the workbook, so the writing part shows apart from the forecasting.
#
#   cargo build --release && benches/scale.sh 1000 10000
#
# Prints one line per N: seconds the forecasting took (manifest
# `seconds`), wall seconds and peak memory (GNU time, "Maximum resident
# set size") of the whole command and of `--no-report --no-workbook`, the
# seconds of the whole command after the forecasting (reading the input,
# cleaning, writing every file), the size of the output folder and of
# report.html.
set -euo pipefail
cd "$(dirname "$0")/.."
BIN=${PROVISIO:-target/release/provisio}
WORK=${SCALE_DIR:-${TMPDIR:-/tmp}/provisio-scale}
mkdir -p "$WORK"
sizes=("$@")
[ ${#sizes[@]} -eq 0 ] && sizes=(1000 10000)
measure() { # out-dir args... -> "wall_s peak_MB"
    local out=$1; shift
    rm -rf "$out"
    /usr/bin/time -f "%e %M" -o "$WORK/time.txt" "$BIN" forecast "$@" --out "$out" --quiet 2>/dev/null
    awk '{printf "%.1f %.0f\n", $1, $2/1024}' "$WORK/time.txt"
}
printf "%8s %12s %16s %14s %10s %12s %17s %10s %12s\n" series forecasting_s no_report_wall_s no_report_MB full_wall_s full_peak_MB after_forecast_s folder_MB report_html_MB
for n in "${sizes[@]}"; do
    data="$WORK/g$n.csv"
    [ -f "$data" ] || "$BIN" generate --products "$n" --sites 1 --months 60 --seed 3 --out "$data" >/dev/null
    read -r nr_wall nr_mb < <(measure "$WORK/nr$n" "$data" --no-report --no-workbook)
    read -r wall mb < <(measure "$WORK/full$n" "$data")
    secs=$(grep -o '"seconds": [0-9.]*' "$WORK/full$n/manifest.json" | awk '{printf "%.1f", $2}')
    folder=$(du -sm "$WORK/full$n" | cut -f1)
    html=$(du -m --apparent-size "$WORK/full$n/report.html" | cut -f1)
    after=$(awk -v w="$wall" -v s="$secs" 'BEGIN{printf "%.1f", w - s}')
    printf "%8s %12s %16s %14s %10s %12s %17s %10s %12s\n" "$n" "$secs" "$nr_wall" "$nr_mb" "$wall" "$mb" "$after" "$folder" "$html"
done
