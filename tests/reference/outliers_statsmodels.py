"""Reference values for the outlier flags (src/clean/outliers.rs).

The decomposition comes from statsmodels' STL (robust LOESS, period 12,
seasonal window 11, seasonal degree 0, 1 inner and 15 robustness
iterations: the settings of R's stl(robust = TRUE) that the Rust code asks
stlrs for). The rule applied to its remainder (quartiles, k interquartile
ranges, seasonal strength with MAD spreads, factor-2 materiality) is our
construction after Hyndman's published outlier method, recomputed here in
numpy so the Rust code is checked against values it did not make.

Series: AirPassengers and wineind as in datasets.json (open datasets that
R's `datasets` and `forecast` packages ship), on the log scale, with
invented entry errors injected (x10 and /10).

    python3 tests/reference/outliers_statsmodels.py   # writes outliers_statsmodels.json
"""

import json
import os

import numpy as np
import statsmodels
from statsmodels.tsa.seasonal import STL

HERE = os.path.dirname(os.path.abspath(__file__))


def flags(y, k):
    x = np.log(y)
    r = STL(x, period=12, seasonal=11, seasonal_deg=0, trend_deg=1, low_pass_deg=1, robust=True).fit(
        inner_iter=1, outer_iter=15
    )
    s, t, rem = r.seasonal, r.trend, r.resid

    def rsd(v):
        return 1.4826 * np.median(np.abs(v - np.median(v)))

    strength = max(0.0, 1 - rsd(rem) ** 2 / rsd(s + rem) ** 2)
    fit = t + s if strength >= 0.6 else t
    resid = x - fit
    q1, q3 = np.percentile(resid, [25, 75])
    iqr = q3 - q1
    out = []
    for i, (v, f, e) in enumerate(zip(y, fit, resid)):
        expected = float(np.exp(f))
        beyond = (e > q3 + k * iqr) or (e < q1 - k * iqr)
        if beyond and abs(np.log(v / expected)) >= np.log(2):
            out.append({"t": i, "expected": expected})
    return {"strength": float(strength), "flags": out}


def main():
    data = json.load(open(os.path.join(HERE, "datasets.json")))["datasets"]
    cases = []
    for name, errors in [("AirPassengers", {70: 10.0}), ("wineind", {50: 0.1, 100: 10.0}), ("wineind", {})]:
        y = np.array(data[name]["values"], dtype=float)
        for t, f in errors.items():
            y[t] *= f
        for k in (3.0, 5.0):
            cases.append({"series": name, "errors": {str(t): f for t, f in errors.items()}, "k": k,
                          "values": y.tolist(), **flags(y, k)})
    meta = {"generated_by": "tests/reference/outliers_statsmodels.py", "statsmodels": statsmodels.__version__,
            "numpy": np.__version__}
    with open(os.path.join(HERE, "outliers_statsmodels.json"), "w") as f:
        json.dump({"meta": meta, "cases": cases}, f, indent=1)
        f.write("\n")
    for c in cases:
        print(c["series"], c["errors"], c["k"], round(c["strength"], 3), [x["t"] for x in c["flags"]])


if __name__ == "__main__":
    main()
