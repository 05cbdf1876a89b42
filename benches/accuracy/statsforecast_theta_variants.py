"""Would a trend-following Theta make a better combination member?

Runs statsforecast 2.1.1's AutoETS, AutoARIMA, Theta (the standard theta
model), OptimizedTheta and DynamicOptimizedTheta (Fiorucci, Pellegrini,
Louzada, Petropoulos & Koehler, IJF 32(4), 2016), season_length=12, on the
split `provisio evaluate --holdout H` uses, and scores single models and
means of three the way statsforecast_baseline.py does (mean MASE with the
in-sample seasonal-naive scale, WAPE and bias over all hidden months,
forecasts clipped at zero):

    mean3  AutoETS, AutoARIMA, Theta                 (the published benchmark)
    meanD  AutoETS, AutoARIMA, DynamicOptimizedTheta
    meanO  AutoETS, AutoARIMA, OptimizedTheta
    mean4  AutoETS, AutoARIMA, Theta, DynamicOptimizedTheta

    python3 benches/accuracy/statsforecast_theta_variants.py DATA.csv H > OUT.txt

DATA.csv has columns product, month, consumed (export.py writes M1 and
tourism monthly; for the generated set, run.sh's generated_truth.csv with
true_demand summed over sites per product and month as `consumed`). Results are in statsforecast_theta_variants_*.txt; the
README's accuracy section says what was concluded. M3 monthly is not run.
"""
import sys

import numpy as np
from statsforecast import StatsForecast
from statsforecast.models import (
    AutoARIMA,
    AutoETS,
    DynamicOptimizedTheta,
    OptimizedTheta,
    Theta,
)

from statsforecast_baseline import mase_scale, split


def main():
    path, h = sys.argv[1], int(sys.argv[2])
    train, test = split(path, h)
    models = [
        AutoETS(season_length=12),
        AutoARIMA(season_length=12),
        Theta(season_length=12),
        DynamicOptimizedTheta(season_length=12),
        OptimizedTheta(season_length=12),
    ]
    fc = StatsForecast(models=models, freq="MS", n_jobs=2).forecast(df=train, h=h)
    fc["mean3"] = fc[["AutoETS", "AutoARIMA", "Theta"]].mean(axis=1)
    fc["meanD"] = fc[["AutoETS", "AutoARIMA", "DynamicOptimizedTheta"]].mean(axis=1)
    fc["meanO"] = fc[["AutoETS", "AutoARIMA", "OptimizedTheta"]].mean(axis=1)
    fc["mean4"] = fc[["AutoETS", "AutoARIMA", "Theta", "DynamicOptimizedTheta"]].mean(axis=1)
    trains = {uid: g["y"].to_numpy() for uid, g in train.groupby("unique_id", sort=False)}
    print(f"{path}, last {h} months hidden, statsforecast {__import__('statsforecast').__version__}")
    print(f"{'method':24s} {'mean MASE':>9s} {'WAPE':>6s} {'bias':>6s}")
    for m in ["AutoETS", "AutoARIMA", "Theta", "DynamicOptimizedTheta", "OptimizedTheta",
              "mean3", "meanD", "meanO", "mean4"]:
        mases, abs_err, total, signed = [], 0.0, 0.0, 0.0
        for uid, g in fc.groupby("unique_id", sort=False):
            f = np.clip(g[m].to_numpy(), 0, None)
            a = test[uid]
            s = mase_scale(trains[uid])
            if s is not None:
                mases.append(np.mean(np.abs(f - a)) / s)
            abs_err += np.abs(f - a).sum()
            total += np.abs(a).sum()
            signed += (f - a).sum()
        print(f"{m:24s} {np.mean(mases):9.4f} {100 * abs_err / total:6.2f} {100 * signed / total:6.2f}")


if __name__ == "__main__":
    main()
