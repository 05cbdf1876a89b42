#!/usr/bin/env bash
# Peak memory of reading and cleaning at national scale: `provisio inspect`
# and `provisio clean` (and, with FORECAST=1, `forecast --no-report
# --no-workbook`) on N generated products of 60 months at one site
# (`provisio generate --products N --sites 1 --months 60 --seed 3`,
# invented data; every month carries a reporting rate, so most rows are
# adjusted and the adjustment log is about as long as the file).
#
#   cargo build --release && benches/memory.sh 10000 100000
#   FORECAST=1 benches/memory.sh 100000
#
# Prints one line per N and command: wall seconds and peak memory (GNU
# time, "Maximum resident set size"), and the peak per product.
set -euo pipefail
cd "$(dirname "$0")/.."
BIN=${PROVISIO:-target/release/provisio}
WORK=${MEMORY_DIR:-${TMPDIR:-/tmp}/provisio-memory}
mkdir -p "$WORK"
sizes=("$@")
[ ${#sizes[@]} -eq 0 ] && sizes=(10000)
commands=(inspect clean)
[ "${FORECAST:-0}" = 1 ] && commands+=(forecast)
printf "%9s %9s %8s %9s %12s\n" products command wall_s peak_MB per_product_KB
for n in "${sizes[@]}"; do
    data="$WORK/g$n.csv"
    [ -f "$data" ] || "$BIN" generate --products "$n" --sites 1 --months 60 --seed 3 --out "$data" >/dev/null 2>&1
    for cmd in "${commands[@]}"; do
        out="$WORK/$cmd$n"
        rm -rf "$out"
        case $cmd in
            inspect) args=(inspect "$data") ;;
            clean) args=(clean "$data" --out "$out") ;;
            forecast) args=(forecast "$data" --out "$out" --no-report --no-workbook) ;;
        esac
        /usr/bin/time -f "%e %M" -o "$WORK/time.txt" "$BIN" "${args[@]}" --quiet >/dev/null 2>&1
        read -r wall kb <"$WORK/time.txt"
        awk -v n="$n" -v c="$cmd" -v w="$wall" -v kb="$kb" \
            'BEGIN { printf "%9s %9s %8s %9.0f %12.1f\n", n, c, w, kb / 1024, kb / n }'
    done
done
