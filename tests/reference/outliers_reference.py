"""Reference cases for the outlier flags (src/clean/outliers.rs).

Open series that R's `datasets` and `forecast` packages ship
(AirPassengers, wineind; tests/reference/datasets.json), whole and
shortened to four or five years, with invented entry errors injected at
known months (x10: a digit too many; /10: one too few), and in one case
the two months before a last-month error marked untrusted (stockouts, so
bridged by a straight line). The known months and the values before
injection are the truth the Rust test checks against: every injected month
flagged, no other, and its expected value near the value before injection.

For comparison the script also applies the same rule (interquartile range
of the remainder, seasonal strength with MAD spreads, factor-2
materiality) to statsmodels' robust STL (period 12, seasonal window 11,
seasonal degree 0, 15 robustness iterations: R's stl(robust = TRUE)), the
decomposition provisio used before, through the `stlrs` crate
("stl_flags" in the output; untrusted months bridged on the log scale as
provisio does). statsmodels agrees on every case here; `stlrs` 0.4 did
not always (README, cleaning section), which is why provisio now uses
running medians.

    python3 tests/reference/outliers_reference.py   # writes outliers_reference.json
"""

import json
import os

import numpy as np
import statsmodels
from statsmodels.tsa.seasonal import STL

HERE = os.path.dirname(os.path.abspath(__file__))


def stl_flags(y, k, untrusted):
    x = np.log(y)
    idx = np.arange(len(x))
    ok = np.array([i not in untrusted for i in idx])
    x = np.interp(idx, idx[ok], x[ok])
    r = STL(x, period=12, seasonal=11, seasonal_deg=0, trend_deg=1, low_pass_deg=1, robust=True).fit(
        inner_iter=1, outer_iter=15
    )
    s, t, rem = r.seasonal, r.trend, r.resid

    def rsd(v):
        return 1.4826 * np.median(np.abs(v - np.median(v)))

    strength = max(0.0, 1 - rsd(rem) ** 2 / rsd(s + rem) ** 2)
    fit = t + s if strength >= 0.6 else t
    resid = x - fit
    out = []
    q1, q3 = np.percentile(resid[ok], [25, 75])
    iqr = q3 - q1
    for i, (v, f, e) in enumerate(zip(y, fit, resid)):
        if i in untrusted:
            continue
        beyond = (e > q3 + k * iqr) or (e < q1 - k * iqr)
        if beyond and abs(np.log(v / np.exp(f))) >= np.log(2):
            out.append(i)
    return out


def main():
    data = json.load(open(os.path.join(HERE, "datasets.json")))["datasets"]
    specs = [
        ("AirPassengers", None, {70: 10.0}),
        ("wineind", None, {50: 0.1, 100: 10.0}),
        ("wineind", None, {}),
        ("AirPassengers_last60", None, {44: 10.0}),
        ("wineind", (128, 176), {33: 10.0}),
        ("AirPassengers_last60", None, {59: 10.0}, [57, 58]),
    ]
    cases = []
    for name, cut, errors, *rest in specs:
        untrusted = rest[0] if rest else []
        clean = np.array(data[name]["values"], dtype=float)
        if cut:
            clean = clean[cut[0]:cut[1]]
        y = clean.copy()
        for t, f in errors.items():
            y[t] *= f
        label = name if not cut else f"{name}[{cut[0]}:{cut[1]}]"
        for k in (3.0, 5.0):
            cases.append({
                "series": label,
                "k": k,
                "values": y.tolist(),
                "untrusted": untrusted,
                "injected": [{"t": t, "factor": f, "before": float(clean[t])} for t, f in errors.items()],
                "stl_flags": stl_flags(y, k, untrusted),
            })
    meta = {"generated_by": "tests/reference/outliers_reference.py", "statsmodels": statsmodels.__version__,
            "numpy": np.__version__}
    with open(os.path.join(HERE, "outliers_reference.json"), "w") as f:
        json.dump({"meta": meta, "cases": cases}, f, indent=1)
        f.write("\n")
    for c in cases:
        print(c["series"], c["k"], "injected", [e["t"] for e in c["injected"]], "robust STL flags", c["stl_flags"])


if __name__ == "__main__":
    main()
