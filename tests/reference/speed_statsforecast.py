"""Speed and accuracy of provisio against statsforecast 2.1.1 (a general-purpose
open-source forecasting library) on the same protocol as `provisio forecast`.

Protocol (provisio's defaults, src/backtest.rs, src/pipeline.rs, src/select.rs):
rolling origin, expanding window, the last K=12 origins that leave H=12 months
of actuals, one month apart; every model refitted at each origin and forecast
1..12 months ahead with 80% and 95% intervals; then a 24-month projection on
the whole history with 80% and 95% intervals. In statsforecast this is
`cross_validation(h=12, n_windows=12, step_size=1, level=[80, 95])` followed by
`forecast(h=24, level=[80, 95])`; its cutoffs are provisio's origins (checked
against backtest.csv on the open set; the script checks that every series and
model has the same number of scored points, `points_equal`).

Both tools see the same cleaned series: the script runs provisio first and
gives statsforecast provisio's `cleaned.csv` (for the generated set that
removes stockout and reporting-rate effects; for the open set it fills the
co2 months with no reading). Cleaning time is therefore counted for provisio
and not for statsforecast.

Model mapping (provisio candidate -> statsforecast 2.1.1):

| provisio | statsforecast |
|---|---|
| moving-average-3/6/12 | WindowAverage(3/6/12) |
| naive | Naive() |
| seasonal-naive | SeasonalNaive(12) |
| theta | Theta(season_length=12) |
| croston | CrostonOptimized() (provisio estimates its constant) |
| croston-sba | CrostonSBA() (fixed alpha 0.1; statsforecast has no estimated SBA) |
| tsb | TSB(alpha_d=0.1, alpha_p=0.1) (fixed; provisio estimates them) |
| holt-winters-additive | AutoETS(model="AAA", damped=False) |
| holt-winters-additive-damped | AutoETS(model="AAA", damped=True) |
| holt-winters-multiplicative | AutoETS(model="MAM", damped=False) |
| holt-winters-multiplicative-damped | AutoETS(model="MAM", damped=True) |
| ets-simple / ets-holt / ets-damped | AutoETS(model="ANN" / "AAN" / "AAN" damped) |
| ets-auto | AutoETS(season_length=12) (model="ZZZ": best of its seasonal and non-seasonal forms by AICc) |
| mstl-ets | MSTL(season_length=12, trend_forecaster=AutoETS(model="ZZN")) |
| arima-auto | AutoARIMA(season_length=12) (stepwise search by AICc, KPSS and seasonal-strength tests) |
| combination | mean of the AutoETS(season_length=12), AutoARIMA and Theta forecasts above, each clipped at zero first as provisio's members are (derived from their outputs: no fit of its own) |

The candidate list is `provisio models` (19 models) plus the combination.

Differences: provisio's Holt-Winters is fitted by least squares from heuristic
initial states; statsforecast's seasonal ETS maximises the likelihood with
estimated states (MAM: multiplicative errors), so those four are near
equivalents, not the same estimator. `ets-auto` and AutoETS(season_length=12)
both choose among the 15 ETS forms by AICc, and `arima-auto` and
AutoARIMA(season_length=12) both run a stepwise AICc search after unit-root
and seasonal-strength tests, but starting values, optimisers, parameter
bounds and search details differ, so these two pairs (and the combination
built on them) are near equivalents too, not the same estimators; their
scores are compared side by side, as for Holt-Winters. WindowAverage, the Croston family and
TSB have no intervals of their own in statsforecast; they get
ConformalIntervals(h=12, n_windows=2) (statsforecast's own way), which adds
two extra fits per window. provisio also runs selection; statsforecast does
not select. Forecasts are clipped at zero before scoring,
as provisio clips them. A model that fails on a series (MAM on data with
zeros: provisio calls it not applicable) is replaced by statsforecast's
`fallback_model=Naive()` so one series cannot stop the run; those scores are
left out of the comparison. Each use of the fallback is counted per model
(`fallbacks` in the results) so that no other model's scores are silently
the fallback's.

Scores are provisio's (README, "Backtest"): per series and model over all
origins and horizons, MAPE = mean |F - A| / A over A > 0; WAPE = sum|F - A| /
sum A; MASE = mean of |F - A| / (in-sample MAE of the 12-month seasonal naive
on each origin's training window; lag 1 when the window has <= 12 months).
Months provisio leaves out of scoring (at least half imputed) are left out
here too.

Hold-out check: the last 12 months of each open series are hidden;
statsforecast's AutoETS(season_length=12), AutoTheta(season_length=12),
AutoARIMA(season_length=12) and their simple mean are fitted on the rest and
scored on the hidden months the way `provisio evaluate --holdout 12` scores
its per-product selection (MAPE per series then mean and median; MASE with
the scale of the training months; WAPE over all).

Timing: wall clock (time.perf_counter) of cross_validation + forecast (and
the combination's mean), with n_jobs=1 and n_jobs=2 (`--n-jobs`), after a
warm-up call on two series that pays the first call's one-off costs (its
time is reported separately; statsforecast 2.1.1 needs no numba, so there
is no JIT compilation to exclude); the 1-, 5- and 15-minute load averages
are recorded before and after every timed run; provisio: the release
binary `provisio forecast DATA --out DIR --no-report --no-workbook -q`, wall
clock of the whole process (reading, cleaning, backtest, selection,
projection, writing every CSV).

Run (from the repository root, after `cargo build --release`):

    target/release/provisio generate --products 1000 --sites 1 --months 60 --seed 3 --out /tmp/big1000.csv
    python3 tests/reference/speed_statsforecast.py \
        --provisio target/release/provisio --big /tmp/big1000.csv --big-limit 100 \
        --out tests/reference/speed_statsforecast.json
    # then, with the machine quiet, provisio alone on all 1,000 series:
    cargo bench --bench throughput --no-run   # prints the bench binary's path
    python3 tests/reference/speed_statsforecast.py \
        --provisio target/release/provisio --big /tmp/big1000.csv \
        --quiet-runs target/release/deps/throughput-<hash> --out tests/reference/speed_statsforecast.json
"""
import argparse
import json
import os
import platform
import subprocess
import sys
import tempfile
import time

import numpy as np
import pandas as pd
import statsforecast
from statsforecast import StatsForecast
from statsforecast.models import (
    MSTL,
    AutoARIMA,
    AutoETS,
    AutoTheta,
    CrostonOptimized,
    CrostonSBA,
    Naive,
    SeasonalNaive,
    Theta,
    TSB,
    WindowAverage,
)
from statsforecast.utils import ConformalIntervals

H = 12
K = 12
PROJECTION = 24
LEVELS = [80, 95]
PERIOD = 12


def models(h=H):
    """The statsforecast models; each alias is the provisio name. `h`: the
    horizon their conformal intervals are calibrated for (must equal the
    forecast horizon)."""
    ci = lambda: ConformalIntervals(h=h, n_windows=2)  # noqa: E731
    return [
        WindowAverage(3, alias="moving-average-3", prediction_intervals=ci()),
        WindowAverage(6, alias="moving-average-6", prediction_intervals=ci()),
        WindowAverage(12, alias="moving-average-12", prediction_intervals=ci()),
        Naive(alias="naive"),
        SeasonalNaive(PERIOD, alias="seasonal-naive"),
        Theta(season_length=PERIOD, alias="theta"),
        CrostonOptimized(alias="croston", prediction_intervals=ci()),
        CrostonSBA(alias="croston-sba", prediction_intervals=ci()),
        TSB(alpha_d=0.1, alpha_p=0.1, alias="tsb", prediction_intervals=ci()),
        AutoETS(season_length=PERIOD, model="AAA", damped=False, alias="holt-winters-additive"),
        AutoETS(season_length=PERIOD, model="AAA", damped=True, alias="holt-winters-additive-damped"),
        AutoETS(season_length=PERIOD, model="MAM", damped=False, alias="holt-winters-multiplicative"),
        AutoETS(
            season_length=PERIOD, model="MAM", damped=True, alias="holt-winters-multiplicative-damped"
        ),
        AutoETS(season_length=1, model="ANN", alias="ets-simple"),
        AutoETS(season_length=1, model="AAN", damped=False, alias="ets-holt"),
        AutoETS(season_length=1, model="AAN", damped=True, alias="ets-damped"),
        AutoETS(season_length=PERIOD, model="ZZZ", alias="ets-auto"),
        MSTL(season_length=PERIOD, trend_forecaster=AutoETS(model="ZZN"), alias="mstl-ets"),
        AutoARIMA(season_length=PERIOD, alias="arima-auto"),
    ]


COMBINATION = "combination"
COMBINATION_MEMBERS = ["ets-auto", "arima-auto", "theta"]  # provisio's src/backtest.rs


def model_names():
    return [m.alias for m in models()] + [COMBINATION]


def add_combination(frame):
    """The combination's columns (point and every interval bound): the mean of
    its members' columns, each clipped at zero first, as provisio's
    `mean_forecast` does (src/backtest.rs)."""
    suffixes = [""] + [f"-{side}-{lv}" for lv in LEVELS for side in ("lo", "hi")]
    combined = {
        COMBINATION + sfx: frame[[m + sfx for m in COMBINATION_MEMBERS]].clip(lower=0.0).mean(axis=1, skipna=False)
        for sfx in suffixes
    }
    return pd.concat([frame, pd.DataFrame(combined, index=frame.index)], axis=1)


class CountedNaive(Naive):
    """statsforecast's Naive as the fallback, noting in FALLBACK_LOG which
    model failed each time it stands in (statsforecast's fallback is silent).
    The failing model is read from the caller's frame (statsforecast 2.1.1's
    core.py calls the fallback with that model in its local `model`)."""

    def _note(self):
        path = os.environ.get("PROVISIO_SPEED_FALLBACK_LOG")
        if not path:
            return
        try:
            name = repr(sys._getframe(2).f_locals.get("model", "unknown"))
        except (ValueError, AttributeError):
            name = "unknown"
        with open(path, "a") as f:
            f.write(name + "\n")

    def forecast(self, *args, **kwargs):
        self._note()
        return super().forecast(*args, **kwargs)

    def fit(self, *args, **kwargs):
        self._note()
        return super().fit(*args, **kwargs)


def fallback_counts(path):
    if not os.path.exists(path):
        return {}
    with open(path) as f:
        names = [line.strip() for line in f if line.strip()]
    return {n: names.count(n) for n in sorted(set(names))}


def run_provisio(binary, data, out):
    t0 = time.perf_counter()
    subprocess.run(
        [binary, "forecast", data, "--out", out, "--no-report", "--no-workbook", "--overwrite", "-q"],
        check=True,
        stderr=subprocess.DEVNULL,
    )
    return time.perf_counter() - t0


def cleaned_long(folder):
    """provisio's cleaned.csv as statsforecast's long frame, plus the scorable flag."""
    c = pd.read_csv(os.path.join(folder, "cleaned.csv"))
    df = pd.DataFrame(
        {
            "unique_id": c["product"].astype(str),
            "ds": pd.to_datetime(c["month"] + "-01"),
            "y": c["cleaned"].astype(float),
            "scorable": c["imputed_share"].astype(float) < 0.5,
        }
    )
    return df.sort_values(["unique_id", "ds"]).reset_index(drop=True)


def sf_run(df, n_jobs):
    """The protocol in statsforecast; returns (cv, forecast, seconds cv, seconds forecast)."""
    t0 = time.perf_counter()
    sf = StatsForecast(models=models(H), freq="MS", n_jobs=n_jobs, fallback_model=CountedNaive())
    cv = add_combination(sf.cross_validation(df=df, h=H, n_windows=K, step_size=1, level=LEVELS))
    t1 = time.perf_counter()
    sf = StatsForecast(models=models(PROJECTION), freq="MS", n_jobs=n_jobs, fallback_model=CountedNaive())
    fc = add_combination(sf.forecast(df=df, h=PROJECTION, level=LEVELS))
    t2 = time.perf_counter()
    return cv, fc, t1 - t0, t2 - t1


def mase_scale(train):
    lag = PERIOD if len(train) > PERIOD else 1
    if len(train) <= lag:
        return None
    s = np.abs(train[lag:] - train[:-lag]).mean()
    return s if s > 0 else None


def backtest_scores(df, cv):
    """Per series and model: points, MAPE, WAPE, MASE, as provisio defines them."""
    rows = []
    names = model_names()
    for uid, g in cv.groupby("unique_id", sort=True):
        series = df[df.unique_id == uid]
        y = series["y"].to_numpy()
        ds = series["ds"].to_numpy()
        scorable = dict(zip(series["ds"], series["scorable"]))
        scales = {}
        for cutoff in g["cutoff"].unique():
            n_train = int(np.searchsorted(ds, np.datetime64(cutoff), side="right"))
            scales[cutoff] = mase_scale(y[:n_train])
        keep = g[g["ds"].map(scorable)]
        a = keep["y"].to_numpy()
        sc = keep["cutoff"].map(scales).to_numpy(dtype=float)
        for name in names:
            if "multiplicative" in name and y.min() <= 0:
                continue  # MAM refuses such data (the fallback ran); provisio: not applicable
            f = np.clip(keep[name].to_numpy(dtype=float), 0.0, None)
            ok = np.isfinite(f)
            if not ok.all():
                rows.append({"product": uid, "model": name, "points": int(ok.sum()), "note": "non-finite"})
                continue
            pos = a != 0
            err = np.abs(f - a)
            rows.append(
                {
                    "product": uid,
                    "model": name,
                    "points": int(len(a)),
                    "mape_pct": float(100 * np.mean(err[pos] / a[pos])) if pos.any() else None,
                    "wape_pct": float(100 * err.sum() / np.abs(a).sum()) if a.sum() != 0 else None,
                    "mase": float(np.mean(err / sc)) if np.all(np.isfinite(sc)) else None,
                }
            )
    return pd.DataFrame(rows)


def compare_scores(sf_scores, provisio_folder):
    """Per model: median and max relative difference of MAPE and MASE across series."""
    p = pd.read_csv(os.path.join(provisio_folder, "scores.csv"))
    p = p[p["status"] == "complete"]
    m = sf_scores.merge(p, on=["product", "model"], suffixes=("_sf", "_pv"))
    out = {}
    for name, g in m.groupby("model", sort=False):
        entry = {"series": int(len(g))}
        for col in ["mape_pct", "mase", "wape_pct"]:
            a, b = g[f"{col}_sf"].astype(float), g[f"{col}_pv"].astype(float)
            rel = (a - b).abs() / b.abs().clip(lower=1e-12)
            entry[f"{col}_statsforecast_mean"] = round(float(a.mean()), 4)
            entry[f"{col}_provisio_mean"] = round(float(b.mean()), 4)
            entry[f"{col}_max_rel_diff"] = float(f"{rel.max():.3g}")
            entry[f"{col}_median_rel_diff"] = float(f"{rel.median():.3g}")
        entry["points_equal"] = bool((g["points_sf"] == g["points_pv"]).all())
        out[name] = entry
    order = model_names()
    return {k: out[k] for k in order if k in out}


def holdout_statsforecast(df):
    """AutoETS, AutoTheta, AutoARIMA (season 12) and their mean on the last 12 months hidden."""
    train_parts, test_parts, scales = [], [], {}
    for uid, g in df.groupby("unique_id", sort=True):
        if len(g) <= H + 24:  # provisio evaluate skips these too
            continue
        train_parts.append(g.iloc[:-H])
        test_parts.append(g.iloc[-H:])
        scales[uid] = mase_scale(g["y"].to_numpy()[:-H])
    train = pd.concat(train_parts)[["unique_id", "ds", "y"]]
    test = pd.concat(test_parts)
    ms = [
        AutoETS(season_length=PERIOD, alias="AutoETS"),
        AutoTheta(season_length=PERIOD, alias="AutoTheta"),
        AutoARIMA(season_length=PERIOD, alias="AutoARIMA"),
    ]
    t0 = time.perf_counter()
    fc = StatsForecast(models=ms, freq="MS", n_jobs=1).forecast(df=train, h=H)
    secs = time.perf_counter() - t0
    fc["mean of the three"] = fc[["AutoETS", "AutoTheta", "AutoARIMA"]].mean(axis=1)
    m = test.merge(fc, on=["unique_id", "ds"])
    table = {}
    for name in ["AutoETS", "AutoTheta", "AutoARIMA", "mean of the three"]:
        mapes, mases, abs_err, total = [], [], 0.0, 0.0
        for uid, g in m.groupby("unique_id", sort=True):
            a = g["y"].to_numpy()
            f = np.clip(g[name].to_numpy(dtype=float), 0.0, None)
            pos = a != 0
            if pos.any():
                mapes.append(100 * np.mean(np.abs(f[pos] - a[pos]) / a[pos]))
            if scales[uid]:
                mases.append(np.mean(np.abs(f - a)) / scales[uid])
            abs_err += np.abs(f - a).sum()
            total += a.sum()
        table[name] = {
            "series": int(m["unique_id"].nunique()),
            "series_with_mape": len(mapes),
            "mean_mase": round(float(np.mean(mases)), 3),
            "median_mape_pct": round(float(np.median(mapes)), 2),
            "mean_mape_pct": round(float(np.mean(mapes)), 2),
            "wape_pct": round(float(100 * abs_err / total), 2),
        }
    return table, secs


def holdout_provisio(binary, data):
    r = subprocess.run(
        [binary, "evaluate", data, "--holdout", str(H), "--json", "-q"],
        check=True,
        capture_output=True,
        text=True,
    )
    return json.loads(r.stdout)


def machine():
    def sh(cmd):
        try:
            return subprocess.run(cmd, capture_output=True, text=True, shell=True).stdout.strip()
        except OSError:
            return None

    return {
        "cpu": sh("lscpu | grep 'Model name' | sed 's/.*: *//'"),
        "nproc": sh("nproc"),
        "memory": sh("free -g | awk '/Mem:/ {print $2 \" GiB\"}'"),
        "os": platform.platform(),
        "python": platform.python_version(),
        "statsforecast": statsforecast.__version__,
        "numpy": np.__version__,
        "pandas": pd.__version__,
        "provisio": sh(f"{ARGS.provisio} --version"),
    }


def load():
    """The 1-, 5- and 15-minute load averages (as `uptime` shows them)."""
    return [round(x, 2) for x in os.getloadavg()]


def time_dataset(label, data, repeats):
    """Times provisio and statsforecast on one dataset; returns the timing record and the cleaned frame."""
    tmp = tempfile.mkdtemp(prefix=f"speed_{label}_")
    pv_out = os.path.join(tmp, "provisio")
    rec = {"data": data, "provisio_s": [], "load_before": [], "load_after": []}
    for _ in range(repeats):
        rec["load_before"].append(load())
        rec["provisio_s"].append(round(run_provisio(ARGS.provisio, data, pv_out), 3))
        rec["load_after"].append(load())
    df = cleaned_long(pv_out)
    rec["series"] = int(df["unique_id"].nunique())
    rec["months_total"] = int(len(df))
    sdf = df[["unique_id", "ds", "y"]]
    cv = None
    for n_jobs in ARGS.n_jobs:
        key = f"statsforecast_n_jobs_{n_jobs}"
        rec[key] = []
        for _ in range(repeats):
            log = os.path.join(tmp, f"fallbacks_{n_jobs}_{len(rec[key])}.txt")
            os.environ["PROVISIO_SPEED_FALLBACK_LOG"] = log
            before = load()
            cv, fc, t_cv, t_fc = sf_run(sdf, n_jobs)
            after = load()
            os.environ.pop("PROVISIO_SPEED_FALLBACK_LOG")
            rec[key].append(
                {
                    "cross_validation_s": round(t_cv, 2),
                    "forecast_s": round(t_fc, 2),
                    "total_s": round(t_cv + t_fc, 2),
                    "load_before": before,
                    "load_after": after,
                    "fallbacks": fallback_counts(log),
                }
            )
            print(label, key, rec[key][-1], file=sys.stderr, flush=True)
    print(label, "provisio", rec["provisio_s"], file=sys.stderr, flush=True)
    return rec, df, cv, pv_out


def main():
    if ARGS.skip_open:
        with open(ARGS.out) as f:
            result = json.load(f)
    else:
        result = {"machine": machine(), "protocol": {"origins": K, "backtest_horizon": H,
                                                     "projection": PROJECTION, "levels": LEVELS}}
    result["warm_up" if not ARGS.skip_open else "warm_up_big"] = warm_up()
    if not ARGS.skip_open:
        open_part(result)
        write(result)  # the open set's results are kept even if the --big part is stopped
    if ARGS.big:
        big_part(result)
        write(result)


def write(result):
    tmp = ARGS.out + ".tmp"
    with open(tmp, "w") as f:
        json.dump(result, f, indent=1)
        f.write("\n")
    os.replace(tmp, ARGS.out)


def warm_up():
    """Pays statsforecast's one-off first-call costs on two open series and
    times a second call for comparison."""
    open_tmp = tempfile.mkdtemp(prefix="speed_warm_")
    run_provisio(ARGS.provisio, ARGS.open, open_tmp)
    warm = cleaned_long(open_tmp)
    warm = warm[warm.unique_id.isin(["AirPassengers", "wineind"])][["unique_id", "ds", "y"]]
    t0 = time.perf_counter()
    sf_run(warm, 1)
    first = time.perf_counter() - t0
    t0 = time.perf_counter()
    sf_run(warm, 1)
    second = time.perf_counter() - t0
    rec = {
        "series": 2,
        "first_call_s": round(first, 2),
        "second_call_s": round(second, 2),
        "first_call_overhead_s_about": round(first - second, 2),
    }
    print("warm-up", rec, file=sys.stderr, flush=True)
    return rec


def open_part(result):
    rec, df, cv, pv_out = time_dataset("open", ARGS.open, ARGS.repeats)
    result["open_timing"] = rec
    sf_scores = backtest_scores(df, cv)
    result["open_backtest_comparison"] = compare_scores(sf_scores, pv_out)
    if ARGS.scores_dir:
        sf_scores.to_csv(os.path.join(ARGS.scores_dir, "speed_statsforecast_open_scores.csv"), index=False,
                         float_format="%.6g")
    table, secs = holdout_statsforecast(df)
    result["open_holdout_statsforecast"] = table
    result["open_holdout_statsforecast_fit_s"] = round(secs, 2)
    result["open_holdout_provisio"] = holdout_provisio(ARGS.provisio, ARGS.open)


def big_part(result):
    full = {"data": ARGS.big, "provisio_s": [], "load_before": [], "load_after": []}
    big_tmp = tempfile.mkdtemp(prefix="speed_bigfull_")
    for _ in range(ARGS.repeats):
        full["load_before"].append(load())
        full["provisio_s"].append(round(run_provisio(ARGS.provisio, ARGS.big, big_tmp), 3))
        full["load_after"].append(load())
    print("big full provisio", full, file=sys.stderr, flush=True)
    result["big_full_provisio"] = full
    data = ARGS.big
    if ARGS.big_limit:
        raw = pd.read_csv(ARGS.big, dtype=str, keep_default_na=False)
        first = sorted(raw["product"].unique())[: ARGS.big_limit]
        data = os.path.join(big_tmp, f"first{ARGS.big_limit}.csv")
        raw[raw["product"].isin(first)].to_csv(data, index=False)
    rec, df_big, cv_big, pv_big = time_dataset("big", data, ARGS.repeats)
    rec["subset_of"] = ARGS.big if ARGS.big_limit else None
    result["big_timing"] = rec
    result["big_backtest_comparison"] = compare_scores(backtest_scores(df_big, cv_big), pv_big)


def quiet_runs():
    """provisio alone, added to an existing results file: the in-memory
    throughput bench binary (`cargo bench --bench throughput --no-run` builds
    it) and the whole command on --big, each run --repeats times."""
    with open(ARGS.out) as f:
        result = json.load(f)
    rec = {"bench_binary": ARGS.quiet_runs, "bench": [], "provisio_cli": []}
    for _ in range(ARGS.repeats):
        before = load()
        out = subprocess.run([ARGS.quiet_runs, "--bench", "1000"], check=True, capture_output=True,
                             text=True).stdout
        n, t_clean, t_fc, per_s, ms, peak = out.strip().splitlines()[-1].split()
        rec["bench"].append({"series": int(n), "clean_s": float(t_clean), "forecast_s": float(t_fc),
                             "series_per_s": float(per_s), "peak_mb": float(peak),
                             "load_before": before})
    tmp = tempfile.mkdtemp(prefix="speed_quiet_")
    for _ in range(ARGS.repeats):
        before = load()
        rec["provisio_cli"].append({"data": ARGS.big, "wall_s": round(run_provisio(ARGS.provisio, ARGS.big, tmp), 3),
                                    "load_before": before})
    result["quiet_runs"] = rec
    print(json.dumps(rec, indent=1), file=sys.stderr)
    with open(ARGS.out, "w") as f:
        json.dump(result, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--provisio", default="target/release/provisio")
    ap.add_argument("--open", default="datasets/open/monthly.csv")
    ap.add_argument("--big", default=None)
    ap.add_argument("--big-limit", type=int, default=None,
                    help="time both tools on only the first N products of --big (statsforecast is slow)")
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--n-jobs", type=lambda v: [int(x) for x in v.split(",")], default=[1, 2],
                    help="statsforecast's n_jobs values to time, comma-separated (default 1,2)")
    ap.add_argument("--skip-open", action="store_true",
                    help="keep the open-set results already in --out and time only --big")
    ap.add_argument("--scores-dir", default=None)
    ap.add_argument("--out", default="tests/reference/speed_statsforecast.json")
    ap.add_argument("--quiet-runs", default=None, metavar="BENCH_BINARY",
                    help="only add provisio's in-memory bench and whole-command runs on --big to --out")
    ARGS = ap.parse_args()
    quiet_runs() if ARGS.quiet_runs else main()
