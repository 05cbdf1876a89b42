"""General-purpose library baseline for the development benchmarks:
statsforecast's AutoETS, AutoARIMA and Theta (season_length=12) and their
mean, on exactly the splits `provisio evaluate --holdout H` uses (the
competitions' official test months), scored the way provisio scores them.

Scores per method: mean MASE (scale: in-sample MAE of the seasonal naive
forecast, lag 12, on the training part; Hyndman & Koehler, IJF 22(4),
2006), mean and median MAPE over series (months with a zero actual left
out), WAPE and bias over all hidden months. Forecasts are clipped at zero
as provisio's are. Also the share of hidden actuals inside each method's
80% and 95% intervals and the mean scaled interval score (MSIS, M4
competition, Makridakis et al., IJF 36(1), 2020) at 95%.

    python3 benches/accuracy/statsforecast_baseline.py DATA.csv H OUT.json

DATA.csv is a file written by export.py. Takes a few minutes (AutoARIMA).
"""
import json
import sys
import time

import numpy as np
import pandas as pd
from statsforecast import StatsForecast
from statsforecast.models import AutoARIMA, AutoETS, Theta
import statsforecast


def mase_scale(train, m=12):
    lag = m if len(train) > m else 1
    d = np.abs(train[lag:] - train[:-lag])
    s = d.mean() if len(d) else 0.0
    return s if s > 0 else None


def split(path, h):
    """Reads DATA.csv (product, month, consumed) and hides each series'
    last h months: the training rows in statsforecast's long layout and
    the hidden actuals per series."""
    df = pd.read_csv(path)
    df["ds"] = pd.to_datetime(df["month"] + "-01")
    df = df.rename(columns={"product": "unique_id", "consumed": "y"})[["unique_id", "ds", "y"]]
    train_parts, test = [], {}
    for uid, g in df.groupby("unique_id", sort=False):
        g = g.sort_values("ds")
        train_parts.append(g.iloc[:-h])
        test[uid] = g["y"].to_numpy()[-h:]
    return pd.concat(train_parts), test


def main():
    path, h, out = sys.argv[1], int(sys.argv[2]), sys.argv[3]
    train, test = split(path, h)
    models = [AutoETS(season_length=12), AutoARIMA(season_length=12), Theta(season_length=12)]
    sf = StatsForecast(models=models, freq="MS", n_jobs=1)
    t0 = time.time()
    fc = sf.forecast(df=train, h=h, level=[80, 95])
    seconds = time.time() - t0
    names = ["AutoETS", "AutoARIMA", "Theta"]
    fc["mean3"] = fc[names].mean(axis=1)
    for lv in (80, 95):
        for side in ("lo", "hi"):
            fc[f"mean3-{side}-{lv}"] = fc[[f"{n}-{side}-{lv}" for n in names]].mean(axis=1)
    trains = {uid: g["y"].to_numpy() for uid, g in train.groupby("unique_id", sort=False)}
    results = {}
    for m in names + ["mean3"]:
        mases, mapes, abs_err, total, signed = [], [], 0.0, 0.0, 0.0
        in80 = in95 = npts = 0
        msis = []
        for uid, g in fc.groupby("unique_id", sort=False):
            f = np.clip(g[m].to_numpy(), 0, None)
            a = test[uid]
            s = mase_scale(trains[uid])
            if s is not None:
                mases.append(np.mean(np.abs(f - a)) / s)
            nz = a != 0
            if nz.any():
                mapes.append(100 * np.mean(np.abs(f[nz] - a[nz]) / np.abs(a[nz])))
            abs_err += np.abs(f - a).sum()
            total += np.abs(a).sum()
            signed += (f - a).sum()
            for lv in (80, 95):
                lo = np.clip(g[f"{m}-lo-{lv}"].to_numpy(), 0, None)
                hi = np.clip(g[f"{m}-hi-{lv}"].to_numpy(), 0, None)
                inside = int(((a >= lo) & (a <= hi)).sum())
                if lv == 80:
                    in80 += inside
                else:
                    in95 += inside
                    if s is not None:
                        al = 0.05
                        score = (hi - lo) + 2 / al * (lo - a) * (a < lo) + 2 / al * (a - hi) * (a > hi)
                        msis.append(score.mean() / s)
            npts += len(a)
        results[m] = {
            "series": len(mases),
            "mean_mase": float(np.mean(mases)),
            "mean_mape_pct": float(np.mean(mapes)),
            "median_mape_pct": float(np.median(mapes)),
            "wape_pct": float(100 * abs_err / total),
            "bias_pct": float(100 * signed / total),
            "coverage80_pct": 100 * in80 / npts,
            "coverage95_pct": 100 * in95 / npts,
            "msis95": float(np.mean(msis)),
        }
    json.dump(
        {
            "source": path,
            "holdout": h,
            "statsforecast": statsforecast.__version__,
            "seconds_forecast": seconds,
            "methods": results,
        },
        open(out, "w"),
        indent=1,
    )
    for m, r in results.items():
        print(m, {k: round(v, 3) for k, v in r.items()})


if __name__ == "__main__":
    main()
