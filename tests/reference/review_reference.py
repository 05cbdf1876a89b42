#!/usr/bin/env python3
"""Reference values for `provisio review`, written to review_statsforecast.json.

A backtest slice of AirPassengers (shipped in statsforecast.utils): two
forecasts made as if at the end of 1959 and at mid-1960, by statsforecast's
SeasonalNaive(season_length=12) and Naive() with 80% and 95% intervals, are
scored against the months of 1960 that followed. The scores are computed here
with pandas / numpy / scipy, independently of provisio:

- MAPE = mean |f - a| / a, bias = sum(f - a) / sum(a), WAPE = sum|f - a| / sum(a)
  (as fractions; provisio writes percentages; bias > 0 = over-forecast);
- coverage = share of actuals inside [lo, hi]; a one-sided exact binomial
  p-value scipy.stats.binom.cdf(inside, n, nominal);
- tracking signal = sum(f - a) / mean|f - a| (running-sum form; Trigg, 1964);
- baselines made at the same origin: statsforecast Naive() point forecast
  ("same as last month") and SeasonalNaive(12) point forecast, their WAPE, and
  the value added = baseline WAPE - model WAPE;
- between the two vintages, on the months both forecast: WAPE of each and which
  was closer.

Run from the repository root, in the venv of requirements.txt:

    /tmp/refvenv/bin/python tests/reference/review_reference.py
"""

import json
import os
from importlib.metadata import version as pkg_version

import numpy as np
import pandas as pd
from scipy.stats import binom
from statsforecast.models import Naive, SeasonalNaive
from statsforecast.utils import AirPassengers

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "review_statsforecast.json")
MONTHS = pd.date_range("1949-01-01", periods=144, freq="MS")


def forecast(model, y, h):
    out = model.forecast(y=np.asarray(y, dtype=float), h=h, level=[80, 95])
    return {k: [float(v) for v in out[k]] for k in ["mean", "lo-80", "hi-80", "lo-95", "hi-95"]}


def scores(actual, fc, naive, snaive):
    df = pd.DataFrame(
        {
            "a": actual,
            "f": fc["mean"],
            "lo80": fc["lo-80"],
            "hi80": fc["hi-80"],
            "lo95": fc["lo-95"],
            "hi95": fc["hi-95"],
            "naive": naive,
            "snaive": snaive,
        }
    )
    err = df.f - df.a
    n = len(df)
    in80 = int(((df.a >= df.lo80) & (df.a <= df.hi80)).sum())
    in95 = int(((df.a >= df.lo95) & (df.a <= df.hi95)).sum())
    wape = float(err.abs().sum() / df.a.abs().sum())
    naive_wape = float((df.naive - df.a).abs().sum() / df.a.sum())
    snaive_wape = float((df.snaive - df.a).abs().sum() / df.a.sum())
    return {
        "n": n,
        "mape": float((err.abs() / df.a.abs()).mean()),
        "bias": float(err.sum() / df.a.sum()),
        "wape": wape,
        "coverage_80": in80 / n,
        "coverage_95": in95 / n,
        "coverage_80_p_value": float(binom.cdf(in80, n, 0.80)),
        "coverage_95_p_value": float(binom.cdf(in95, n, 0.95)),
        "cumulative_error": float(err.sum()),
        "mad": float(err.abs().mean()),
        "tracking_signal": float(err.sum() / err.abs().mean()),
        "naive_wape": naive_wape,
        "seasonal_naive_wape": snaive_wape,
        "value_added_vs_naive": naive_wape - wape,
        "value_added_vs_seasonal_naive": snaive_wape - wape,
    }


def main():
    y = np.asarray(AirPassengers, dtype=float)
    assert len(y) == 144
    result = {
        "meta": {
            "dataset": "AirPassengers, statsforecast.utils.AirPassengers, 1949-01..1960-12",
            "versions": {p: pkg_version(p) for p in ["statsforecast", "numpy", "pandas", "scipy"]},
            "fractions": "mape, bias, wape and coverage are fractions; provisio writes percentages",
            "sign": "errors are forecast - actual: bias and tracking signal > 0 = over-forecast",
        },
        "vintages": {},
    }
    closest = {}
    for origin, h in [("1959-12", 12), ("1960-06", 6)]:
        n_train = int(np.where(MONTHS == pd.Timestamp(origin + "-01"))[0][0]) + 1
        train, actual = y[:n_train], y[n_train : n_train + h]
        naive = forecast(Naive(), train, h)
        snaive = forecast(SeasonalNaive(season_length=12), train, h)
        months = [d.strftime("%Y-%m") for d in MONTHS[n_train : n_train + h]]
        vintage = {"origin": origin, "months": months, "actual": [float(v) for v in actual]}
        for name, fc in [("SeasonalNaive", snaive), ("Naive", naive)]:
            vintage[name] = {
                "call": f"statsforecast.models.{name}({'season_length=12' if name == 'SeasonalNaive' else ''}).forecast(y=AirPassengers[:{n_train}], h={h}, level=[80, 95])",
                "forecast": fc,
                "scores": scores(actual, fc, naive["mean"], snaive["mean"]),
            }
        result["vintages"][origin] = vintage
    # Vintages on their common months (1960-07..1960-12).
    old, new = result["vintages"]["1959-12"], result["vintages"]["1960-06"]
    common = [m for m in old["months"] if m in new["months"]]
    for name in ["SeasonalNaive", "Naive"]:
        a = np.array([new["actual"][new["months"].index(m)] for m in common])
        w = {}
        for key, v in [("1959-12", old), ("1960-06", new)]:
            f = np.array([v[name]["forecast"]["mean"][v["months"].index(m)] for m in common])
            w[key] = float(np.abs(f - a).sum() / a.sum())
        closest[name] = {"common_months": common, "wape": w, "closest": min(w, key=w.get)}
    result["vintage_comparison"] = closest
    with open(OUT, "w", encoding="utf-8") as fh:
        json.dump(result, fh, indent=2, allow_nan=False)
        fh.write("\n")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
