#!/usr/bin/env python3
"""Regenerate the reference values under tests/reference/.

The JSON files next to this script hold outputs of general-purpose, open-source
Python forecasting libraries (statsmodels, statsforecast) on real, open datasets
that ship inside PyPI wheels (statsforecast, pmdarima, sktime).  The Rust tests
read the JSON files only; Python is needed only to regenerate them.

How to run (from the repository root):

    python3 -m venv /work/refvenv            # any path will do
    /work/refvenv/bin/pip install -r tests/reference/requirements.txt
    /work/refvenv/bin/python tests/reference/generate.py

No network access is needed at run time: every dataset is loaded from files or
arrays inside the installed packages.  The script is deterministic (no random
numbers of its own; statsforecast's Theta interval simulation uses its own
fixed seed 0), so running it twice gives byte-identical files.

Besides calling the libraries, the script re-implements a few recursions in
plain numpy (Holt-Winters, SES/Holt, Croston/SBA/TSB) and asserts that they
reproduce the library's fitted values and SSE.  Those checks exist to pin down
the exact conventions (initial-state indexing, smoothing-parameter meaning) for
the Rust implementation; the maximum absolute differences are written to the
JSON files under "recursion_check".  Metrics on cross-validation rows (MAPE,
bias, WAPE, RMSE) are computed here with numpy formulas from statsforecast's
cross-validation output.
"""

import json
import math
import os
import platform
import sys
import warnings
from importlib.metadata import version as pkg_version

import numpy as np
import pandas as pd

OUT_DIR = os.path.dirname(os.path.abspath(__file__))
M = 12  # seasonal period of every monthly series used here

VERSIONS = {
    name: pkg_version(name)
    for name in [
        "statsmodels",
        "statsforecast",
        "pmdarima",
        "sktime",
        "numpy",
        "pandas",
        "scipy",
    ]
}


# --------------------------------------------------------------------------
# JSON helpers
# --------------------------------------------------------------------------
def to_jsonable(obj):
    """Convert numpy/pandas objects; NaN and inf become null."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [to_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (pd.Series, pd.Index)):
        return [to_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (pd.Timestamp, np.datetime64)):
        return pd.Timestamp(obj).strftime("%Y-%m-%d")
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating, float)):
        f = float(obj)
        if math.isnan(f) or math.isinf(f):
            return None
        return f
    if isinstance(obj, str) or obj is None or isinstance(obj, int):
        return obj
    raise TypeError(f"cannot serialise {type(obj)}")


def write_json(name, payload):
    path = os.path.join(OUT_DIR, name)
    with open(path, "w", encoding="utf-8") as fh:
        json.dump(to_jsonable(payload), fh, indent=2, allow_nan=False)
        fh.write("\n")
    print(f"wrote {path}")


def fl(values):
    return [float(v) for v in np.asarray(values, dtype=float)]


def run_quiet(fn):
    """Run fn(), returning (result, list of warning messages it emitted)."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = fn()
    msgs = sorted({f"{w.category.__name__}: {w.message}" for w in caught})
    return result, msgs


# --------------------------------------------------------------------------
# Datasets (all shipped inside wheels; nothing is downloaded)
# --------------------------------------------------------------------------
def load_datasets():
    from pmdarima.datasets import load_airpassengers, load_wineind
    from sktime.datasets import load_airline, load_PBS_dataset
    from statsforecast.utils import AirPassengers

    ds = {}

    air = np.asarray(AirPassengers, dtype=float)
    # Cross-check against the copies shipped by two other packages.
    same_sktime = bool(np.array_equal(air, load_airline().to_numpy(dtype=float)))
    same_pmdarima = bool(np.array_equal(air, np.asarray(load_airpassengers(), dtype=float)))
    assert air.size == 144 and same_sktime and same_pmdarima
    ds["AirPassengers"] = {
        "name": "AirPassengers",
        "description": "Monthly totals of international airline passengers (thousands), 1949-01..1960-12 (Box & Jenkins).",
        "source": f"statsforecast {VERSIONS['statsforecast']}, statsforecast.utils.AirPassengers",
        "identical_copies": [
            f"sktime {VERSIONS['sktime']}, sktime.datasets.load_airline()" if same_sktime else None,
            f"pmdarima {VERSIONS['pmdarima']}, pmdarima.datasets.load_airpassengers()" if same_pmdarima else None,
        ],
        "start": "1949-01",
        "frequency": "monthly",
        "values": fl(air),
    }

    ds["AirPassengers_last60"] = {
        "name": "AirPassengers_last60",
        "description": "The last 60 values of AirPassengers (1956-01..1960-12), used for non-seasonal models.",
        "source": f"statsforecast {VERSIONS['statsforecast']}, statsforecast.utils.AirPassengers[-60:]",
        "derived_from": "AirPassengers",
        "start": "1956-01",
        "frequency": "monthly",
        "values": fl(air[-60:]),
    }

    wine = load_wineind(as_series=True)
    assert str(wine.index[0]) == "Jan 1980" and str(wine.index[-1]) == "Aug 1994"
    wv = wine.to_numpy(dtype=float)
    assert wv.size == 176 and wv.min() > 0
    ds["wineind"] = {
        "name": "wineind",
        "description": "Australian total wine sales by wine makers in bottles <= 1 litre, monthly, 1980-01..1994-08.",
        "source": f"pmdarima {VERSIONS['pmdarima']}, pmdarima.datasets.load_wineind(as_series=True)",
        "start": "1980-01",
        "frequency": "monthly",
        "values": fl(wv),
    }

    pbs = load_PBS_dataset()
    assert str(pbs.index[0]) == "1991-07" and str(pbs.index[-1]) == "2008-06"
    pv = pbs.to_numpy(dtype=float)
    ds["PBS_immune_sera"] = {
        "name": "PBS_immune_sera",
        "description": (
            "Australian Pharmaceutical Benefits Scheme: number of scripts per month for immune sera "
            "and immunoglobulin products, 1991-07..2008-06. Intermittent (many zero months)."
        ),
        "source": f"sktime {VERSIONS['sktime']}, sktime.datasets.load_PBS_dataset()",
        "start": "1991-07",
        "frequency": "monthly",
        "intermittent": True,
        "n_zeros": int((pv == 0).sum()),
        "values": fl(pv),
    }
    ds["PBS_immune_sera_first60"] = {
        "name": "PBS_immune_sera_first60",
        "description": (
            "The first 60 values of PBS_immune_sera (1991-07..1996-06): an intermittent window that still has "
            "recent demand (the full series ends with 38 zero months)."
        ),
        "source": f"sktime {VERSIONS['sktime']}, sktime.datasets.load_PBS_dataset()[:60]",
        "derived_from": "PBS_immune_sera",
        "start": "1991-07",
        "frequency": "monthly",
        "intermittent": True,
        "n_zeros": int((pv[:60] == 0).sum()),
        "values": fl(pv[:60]),
    }
    for d in ds.values():
        d["n"] = len(d["values"])
        d["identical_copies"] = [c for c in d.get("identical_copies", []) if c]
    return ds


def series(ds, name):
    d = ds[name]
    idx = pd.date_range(d["start"] + "-01", periods=d["n"], freq="MS")
    return pd.Series(np.asarray(d["values"], dtype=float), index=idx, name=name)


# --------------------------------------------------------------------------
# numpy re-implementations used only as convention checks
# --------------------------------------------------------------------------
def hw_recursion(y, alpha, beta, gamma, phi, l0, b0, s0, trend, seasonal, m=M):
    """Textbook (FPP 2nd ed. section 7.3/7.4) Holt-Winters recursion in the form
    statsmodels.tsa.holtwinters uses. Returns (one-step fitted, final level,
    final trend, last m seasonal states s_{n-m+1..n})."""
    n = len(y)
    lvl, b = l0, (b0 if trend else 0.0)
    s = list(s0) if seasonal else []
    phi = phi if phi is not None else 1.0
    fitted = np.empty(n)
    for t in range(n):
        base = lvl + phi * b if trend else lvl
        st = s[t] if seasonal else None
        if seasonal == "mul":
            fitted[t] = base * st
            new_l = alpha * y[t] / st + (1 - alpha) * base
        elif seasonal == "add":
            fitted[t] = base + st
            new_l = alpha * (y[t] - st) + (1 - alpha) * base
        else:
            fitted[t] = base
            new_l = alpha * y[t] + (1 - alpha) * base
        if trend:
            b = beta * (new_l - lvl) + (1 - beta) * phi * b
        if seasonal == "mul":
            s.append(gamma * y[t] / base + (1 - gamma) * st)
        elif seasonal == "add":
            s.append(gamma * (y[t] - base) + (1 - gamma) * st)
        lvl = new_l
    return fitted, lvl, (b if trend else None), (np.array(s[-m:]) if seasonal else None)


def textbook_forecast(level, trend_b, last_seasons, phi, h, seasonal, m=M):
    """y_{n+k} = (l_n + (phi + ... + phi^k) b_n) (+ or *) s_{n+k-m*(floor((k-1)/m)+1)}."""
    out = []
    for k in range(1, h + 1):
        if trend_b is None:
            damp = 0.0
        elif phi is None:
            damp = float(k)
        else:
            damp = sum(phi**j for j in range(1, k + 1))
        base = level + damp * (trend_b if trend_b is not None else 0.0)
        if seasonal is None:
            out.append(base)
        else:
            s = last_seasons[(k - 1) % m]  # last_seasons[m-1] is s_n
            out.append(base * s if seasonal == "mul" else base + s)
    return np.array(out)


def ses_first_value(x, alpha):
    """SES initialised at the first observation (statsforecast's _ses_forecast):
    fitted[0] = nan, level_0 = x[0], fitted[t] = level_{t-1}; returns (forecast, fitted)."""
    x = np.asarray(x, dtype=float)
    fitted = np.full(x.size, np.nan)
    lvl = x[0]
    for t in range(1, x.size):
        fitted[t] = lvl
        lvl = alpha * x[t] + (1 - alpha) * lvl
    return lvl, fitted


# --------------------------------------------------------------------------
# statsmodels: Holt-Winters / SES / Holt / ETSModel
# --------------------------------------------------------------------------
HW_CONVENTIONS = {
    "library": f"statsmodels {VERSIONS['statsmodels']}, statsmodels.tsa.holtwinters",
    "notation": (
        "t = 1..n indexes observations y_1..y_n (y_1 = values[0]). l_0 = initial_level, b_0 = initial_trend, "
        "initial_seasons[j] = s_{j+1-m} for j = 0..m-1, so initial_seasons[0] is the seasonal state applied to "
        "the FIRST observation y_1, initial_seasons[1] to y_2, ..., initial_seasons[m-1] to y_m. phi = 1 when not damped."
    ),
    "beta_meaning": (
        "statsmodels holtwinters smoothing_trend IS the beta* of Hyndman & Athanasopoulos FPP (component form, "
        "b_t = beta*(l_t - l_{t-1}) + (1 - beta*) phi b_{t-1}). It is NOT the state-space beta (= alpha*beta*). "
        "smoothing_seasonal is the FPP gamma of the component form (not gamma*(1-alpha)). "
        "By contrast statsmodels ETSModel (tsa.exponential_smoothing.ets) uses the state-space beta = alpha*beta*."
    ),
    "recursions": {
        "one_step_prediction_add_season": "yhat_t = l_{t-1} + phi*b_{t-1} + s_{t-m}",
        "one_step_prediction_mul_season": "yhat_t = (l_{t-1} + phi*b_{t-1}) * s_{t-m}",
        "additive_seasonal (trend=add, seasonal=add)": [
            "l_t = alpha*(y_t - s_{t-m}) + (1-alpha)*(l_{t-1} + phi*b_{t-1})",
            "b_t = beta*(l_t - l_{t-1}) + (1-beta)*phi*b_{t-1}",
            "s_t = gamma*(y_t - l_{t-1} - phi*b_{t-1}) + (1-gamma)*s_{t-m}",
        ],
        "multiplicative_seasonal (trend=add, seasonal=mul)": [
            "l_t = alpha*(y_t / s_{t-m}) + (1-alpha)*(l_{t-1} + phi*b_{t-1})",
            "b_t = beta*(l_t - l_{t-1}) + (1-beta)*phi*b_{t-1}",
            "s_t = gamma*(y_t / (l_{t-1} + phi*b_{t-1})) + (1-gamma)*s_{t-m}",
        ],
        "SimpleExpSmoothing": ["yhat_t = l_{t-1}", "l_t = alpha*y_t + (1-alpha)*l_{t-1}"],
        "Holt (damped when phi < 1)": [
            "yhat_t = l_{t-1} + phi*b_{t-1}",
            "l_t = alpha*y_t + (1-alpha)*(l_{t-1} + phi*b_{t-1})",
            "b_t = beta*(l_t - l_{t-1}) + (1-beta)*phi*b_{t-1}",
        ],
        "seasonal_update_uses": "the PRIOR level and trend (l_{t-1} + phi*b_{t-1}), not l_t",
        "sse": "sum_t (y_t - yhat_t)^2 over t = 1..n (res.sse); the first one-step prediction uses l_0, b_0, initial_seasons[0]",
        "aic_holtwinters": (
            "aic = n*ln(SSE/n) + 2k, k = m*has_seasonal + 2*has_trend + 2 + damped; "
            "aicc = aic + 2(k+2)(k+3)/(n-k-3); bic = n*ln(SSE/n) + k*ln(n) (from statsmodels source _predict)"
        ),
        "textbook_forecast": "yhat_{n+h} = l_n + (phi+phi^2+...+phi^h)*b_n  (+ or *)  s_{n+h-m*(floor((h-1)/m)+1)}",
    },
    "optimiser_constraints": (
        "statsmodels.tsa.holtwinters estimates with the restrictions sqrt(eps) <= alpha <= 1-sqrt(eps), "
        "0 <= beta <= alpha, 0 <= gamma <= 1-alpha (to_restricted in holtwinters/_smoothers.py), "
        "0.8 <= phi <= 0.995 (default bounds in _construct_bounds); initial level, trend and all m initial seasons "
        "are estimated freely together with the smoothing parameters (initialization_method='estimated'), "
        "with no normalisation of the initial seasons. The objective minimised is the SSE of the one-step "
        "predictions. Several fits below sit on these bounds (e.g. beta == alpha, alpha + gamma == 1, phi == 0.995), "
        "so an implementation with other bounds will find other optima."
    ),
    "forecast_quirk": (
        "In statsmodels 0.15.0, res.forecast(h) for a SEASONAL model does NOT follow the textbook formula at "
        "horizons h = m, 2m, ...: there it uses s_{n-m} (the seasonal state from one full cycle earlier) instead "
        "of s_n. All other horizons match the textbook formula exactly. Each seasonal fit therefore records both "
        "'forecast' (res.forecast(12), as statsmodels returns it) and 'forecast_textbook_from_final_states' "
        "(computed in generate.py from statsmodels' own fitted final level/trend/seasonal states); "
        "'forecast_mismatch_horizons' lists the horizons where they differ by more than 1e-8."
    ),
    "fit_options": {
        "constructor": "ExponentialSmoothing(y, trend=..., damped_trend=..., seasonal=..., seasonal_periods=12, initialization_method='estimated')",
        "fit_call": "fit(optimized=True) with all other arguments at their defaults: use_brute=True, method=None (=> 'L-BFGS-B'), remove_bias=False, start_params=None, minimize_kwargs=None",
        "y": "pandas Series with a month-start DatetimeIndex (freq='MS')",
    },
}


def hw_record(res, y, trend, seasonal, damped):
    p = res.params
    phi = float(p["damping_trend"]) if damped else None
    beta = float(p["smoothing_trend"]) if trend else None
    gamma = float(p["smoothing_seasonal"]) if seasonal else None
    s0 = np.asarray(p["initial_seasons"], dtype=float) if seasonal else None
    b0 = float(p["initial_trend"]) if trend else None
    rec = {
        "smoothing_level": float(p["smoothing_level"]),
        "smoothing_trend": beta,
        "smoothing_seasonal": gamma,
        "damping_trend": phi,
        "initial_level": float(p["initial_level"]),
        "initial_trend": b0,
    }
    if seasonal:
        rec["initial_seasons"] = fl(s0)
    rec["sse"] = float(res.sse)
    rec["aic"] = float(res.aic)
    rec["aicc"] = float(res.aicc)
    rec["bic"] = float(res.bic)
    rec["fitted_values"] = fl(res.fittedvalues)
    rec["final_level"] = float(res.level.iloc[-1])
    if trend:
        rec["final_trend"] = float(res.trend.iloc[-1])
    if seasonal:
        rec["final_seasons_s_{n-11}_to_s_n"] = fl(res.season.iloc[-M:])
    fc = res.forecast(12).to_numpy(dtype=float)
    rec["forecast"] = fl(fc)

    # Convention check with the numpy recursion.
    fitted, lvl_n, b_n, s_last = hw_recursion(
        y.to_numpy(dtype=float), rec["smoothing_level"], beta, gamma, phi,
        rec["initial_level"], b0, s0, trend, seasonal,
    )
    sse_np = float(np.sum((y.to_numpy() - fitted) ** 2))
    fit_diff = float(np.max(np.abs(fitted - res.fittedvalues.to_numpy())))
    assert fit_diff < 1e-6 * max(1.0, float(np.max(np.abs(fitted)))), fit_diff
    assert abs(sse_np - rec["sse"]) < 1e-8 * rec["sse"] + 1e-9
    tb = textbook_forecast(
        float(res.level.iloc[-1]),
        float(res.trend.iloc[-1]) if trend else None,
        res.season.iloc[-M:].to_numpy(dtype=float) if seasonal else None,
        phi, 12, seasonal,
    )
    rec["recursion_check"] = {
        "max_abs_diff_fitted_numpy_vs_statsmodels": fit_diff,
        "sse_numpy": sse_np,
        "final_level_numpy": float(lvl_n),
    }
    if seasonal or trend:
        rec["forecast_textbook_from_final_states"] = fl(tb)
        rec["forecast_mismatch_horizons"] = [int(k + 1) for k in np.where(np.abs(tb - fc) > 1e-8)[0]]
    else:
        assert np.allclose(tb, fc, rtol=0, atol=1e-8)
    return rec


def statsmodels_section(ds):
    from statsmodels.tsa.exponential_smoothing.ets import ETSModel
    from statsmodels.tsa.holtwinters import ExponentialSmoothing, Holt, SimpleExpSmoothing

    out = {
        "library": f"statsmodels {VERSIONS['statsmodels']}",
        "conventions": HW_CONVENTIONS,
        "datasets": {},
    }
    hw_specs = {
        "hw_additive": ("add", "add", False),
        "hw_additive_damped": ("add", "add", True),
        "hw_multiplicative": ("add", "mul", False),
        "hw_multiplicative_damped": ("add", "mul", True),
    }
    for name in ["AirPassengers", "wineind", "AirPassengers_last60"]:
        y = series(ds, name)
        block = {}
        if name != "AirPassengers_last60":
            for key, (trend, seasonal, damped) in hw_specs.items():
                res, w = run_quiet(lambda: ExponentialSmoothing(
                    y, trend=trend, damped_trend=damped, seasonal=seasonal,
                    seasonal_periods=M, initialization_method="estimated",
                ).fit(optimized=True))
                rec = {
                    "call": (
                        f"ExponentialSmoothing(y, trend='{trend}', damped_trend={damped}, seasonal='{seasonal}', "
                        f"seasonal_periods=12, initialization_method='estimated').fit(optimized=True)"
                    ),
                    "warnings": w,
                }
                rec.update(hw_record(res, y, trend, seasonal, damped))
                block[key] = rec
        # non-seasonal forms
        nonseasonal = {
            "ses": ("SimpleExpSmoothing(y, initialization_method='estimated').fit()",
                    lambda: SimpleExpSmoothing(y, initialization_method="estimated").fit(), None, False),
            "holt": ("Holt(y, initialization_method='estimated').fit()",
                     lambda: Holt(y, initialization_method="estimated").fit(), "add", False),
            "holt_damped": ("Holt(y, damped_trend=True, initialization_method='estimated').fit()",
                            lambda: Holt(y, damped_trend=True, initialization_method="estimated").fit(), "add", True),
        }
        for key, (call, fn, trend, damped) in nonseasonal.items():
            res, w = run_quiet(fn)
            rec = {"call": call, "warnings": w}
            rec.update(hw_record(res, y, trend, None, damped))
            block[key] = rec
        if name == "AirPassengers_last60":
            block["ets_model"] = ets_model_block(y, ETSModel)
        out["datasets"][name] = block
    return out


def ets_model_block(y, ETSModel):
    specs = {
        "ANN": dict(error="add", trend=None, damped_trend=False, seasonal=None),
        "AAN": dict(error="add", trend="add", damped_trend=False, seasonal=None),
        "AAdN": dict(error="add", trend="add", damped_trend=True, seasonal=None),
    }
    block = {
        "_notes": (
            "statsmodels ETSModel (tsa.exponential_smoothing.ets), initialization_method='estimated' (default), "
            "fit(disp=False) with defaults otherwise (maxiter=1000). smoothing_trend here is the state-space beta "
            "(= alpha * beta* of the component form). Prediction intervals: "
            "res.get_prediction(start=60, end=71, method='exact').summary_frame(alpha=0.2 / 0.05) "
            "(columns mean, pi_lower, pi_upper). aic = -2*llf + 2*(n_params+1) where the +1 is the error variance; "
            "aicc = aic + 2*(k)*(k+1)/(n-k-1) with k = n_params+1."
        ),
    }
    for key, kw in specs.items():
        model = ETSModel(y, initialization_method="estimated", **kw)
        res, w = run_quiet(lambda: model.fit(disp=False))
        pred = res.get_prediction(start=len(y), end=len(y) + 11, method="exact")
        f80 = pred.summary_frame(alpha=0.2)
        f95 = pred.summary_frame(alpha=0.05)
        rec = {
            "call": f"ETSModel(y, error='add', trend={kw['trend']!r}, damped_trend={kw['damped_trend']}, seasonal=None).fit(disp=False)",
            "warnings": w,
            "converged": bool(res.mle_retvals.get("converged")) if isinstance(res.mle_retvals, dict) else None,
            "params": {n: float(v) for n, v in zip(res.param_names, np.asarray(res.params))},
            "llf": float(res.llf),
            "aic": float(res.aic),
            "aicc": float(res.aicc),
            "bic": float(res.bic),
            "sse": float(np.sum(np.asarray(res.resid) ** 2)),
            "forecast": fl(res.forecast(12)),
            "pi_80": {"lower": fl(f80["pi_lower"]), "upper": fl(f80["pi_upper"])},
            "pi_95": {"lower": fl(f95["pi_lower"]), "upper": fl(f95["pi_upper"])},
        }
        assert np.allclose(f80["mean"].to_numpy(), rec["forecast"], rtol=0, atol=1e-9)
        block[key] = rec
    return block


# --------------------------------------------------------------------------
# statsforecast
# --------------------------------------------------------------------------
def sf_forecast(model, y, level=None):
    res, w = run_quiet(lambda: model.forecast(y=np.asarray(y, dtype=float), h=12, level=level))
    out = {"forecast": fl(res["mean"])}
    if level:
        for lv in level:
            out[f"lo_{lv}"] = fl(res[f"lo-{lv}"])
            out[f"hi_{lv}"] = fl(res[f"hi-{lv}"])
    out["warnings"] = w
    return out


def intermittent_block(y):
    from statsforecast.models import TSB, CrostonClassic, CrostonSBA

    block = {}
    y = np.asarray(y, dtype=float)
    # numpy convention checks (constants read from statsforecast source:
    # _croston_classic uses SES with alpha=0.1 on demand sizes and on intervals;
    # _croston_sba multiplies by 0.95; TSB smooths P(y>0) with alpha_p, sizes with alpha_d).
    demand = y[y > 0]
    nz = np.where(y != 0)[0]
    intervals = np.diff(nz + 1, prepend=0).astype(float)
    zd, _ = ses_first_value(demand, 0.1)
    pi, _ = ses_first_value(intervals, 0.1)
    croston_np = zd / pi
    pp, _ = ses_first_value((y != 0).astype(float), 0.2)
    zz, _ = ses_first_value(demand, 0.2)
    tsb_np = pp * zz

    for key, model, params, check in [
        ("CrostonClassic", CrostonClassic(), {"alpha_demand": 0.1, "alpha_interval": 0.1, "fixed_in_source": True}, croston_np),
        ("CrostonSBA", CrostonSBA(), {"alpha_demand": 0.1, "alpha_interval": 0.1, "sba_factor": 0.95, "fixed_in_source": True}, 0.95 * croston_np),
        ("TSB", TSB(alpha_d=0.2, alpha_p=0.2), {"alpha_d": 0.2, "alpha_p": 0.2}, tsb_np),
    ]:
        rec = {"call": f"statsforecast.models.{key}" + ("(alpha_d=0.2, alpha_p=0.2)" if key == "TSB" else "()") + ".forecast(y, h=12)",
               "params": params}
        rec.update(sf_forecast(model, y))
        f = np.asarray(rec["forecast"])
        assert np.allclose(f, f[0], rtol=0, atol=0)
        rec["value"] = float(f[0])
        rec["recursion_check"] = {"numpy_value": float(check), "abs_diff": float(abs(check - f[0]))}
        assert abs(check - f[0]) < 1e-9 * max(1.0, abs(check))
        block[key] = rec
    block["_notes"] = (
        "Croston: demand sizes z (the non-zero values, in order) and inter-demand intervals p "
        "(p_1 = 1-based index of the first non-zero value, then differences of 1-based indices) are each smoothed by SES "
        "with alpha = 0.1 (hard-coded in statsforecast), the SES being initialised at its first element; "
        "forecast = z_hat / p_hat. SBA = 0.95 * Croston. TSB: SES on the 0/1 occurrence indicator (alpha_p) over "
        "every period and SES on the non-zero sizes (alpha_d), both initialised at their first element; "
        "forecast = p_hat * z_hat. SES here: level_1 = x_1, level_t = alpha*x_t + (1-alpha)*level_{t-1}; "
        "forecast = level_n. Verified in generate.py by a numpy re-implementation (recursion_check)."
    )
    return block


def seasonality_test(y, m=M):
    """Same formula as statsforecast.theta.auto_theta (ACF at lag m vs 90% two-sided bound)."""
    from scipy.stats import norm
    from statsmodels.tsa.stattools import acf

    r = acf(y, nlags=m, fft=False)[1:]
    stat = np.sqrt((1 + 2 * np.sum(r[:-1] ** 2)) / len(y))
    return {
        "acf_lag_m": float(r[-1]),
        "se": float(stat),
        "ratio": float(abs(r[-1]) / stat),
        "threshold_norm_ppf_0.95": float(norm.ppf(0.95)),
        "decompose": bool(abs(r[-1]) / stat > norm.ppf(0.95)),
    }


def theta_block(y):
    from statsforecast.models import AutoTheta, OptimizedTheta, Theta

    block = {
        "_theta_notes": (
            "statsforecast Theta-family, season_length=12, decomposition_type='multiplicative' (default). "
            "A seasonality test (|ACF at lag 12| / sqrt((1+2*sum_{k<12} ACF_k^2)/n) > norm.ppf(0.95)) decides "
            "whether the series is first divided by the classical multiplicative seasonal indices "
            "(statsmodels.tsa.seasonal.seasonal_decompose); 'seasonality_test' re-computes that statistic in "
            "generate.py with the same formula, and 'decompose' is what the fitted model recorded. "
            "Intervals come from statsforecast's own simulation (200 samples, seed 0, float32), so they are "
            "reproducible in Python but not analytically; compare them loosely."
        ),
        "seasonality_test": seasonality_test(y),
    }
    for key, cls in [("Theta", Theta), ("OptimizedTheta", OptimizedTheta), ("AutoTheta", AutoTheta)]:
        model = cls(season_length=12)
        rec = {"call": f"statsforecast.models.{key}(season_length=12).forecast(y, h=12, level=[80, 95])"}
        rec.update(sf_forecast(model, y, level=[80, 95]))
        fitted_model, _ = run_quiet(lambda: cls(season_length=12).fit(np.asarray(y, dtype=float)))
        mdl = fitted_model.model_
        rec["fitted_model"] = {
            "modeltype": mdl["modeltype"],
            "par": {k: float(v) for k, v in mdl["par"].items()},
            "mse": float(mdl["mse"]),
            "decompose": bool(mdl.get("decompose", False)),
            "decomposition_type": mdl.get("decomposition_type") if mdl.get("decompose", False) else None,
            "seasonal_indices_forecast": fl(mdl["seas_forecast"]["mean"]) if mdl.get("decompose", False) else None,
        }
        block[key] = rec
    return block


def simple_models_block(y):
    from statsforecast.models import Naive, SeasonalNaive, WindowAverage

    block = {}
    for key, model, call in [
        ("WindowAverage_3", WindowAverage(window_size=3), "WindowAverage(window_size=3)"),
        ("WindowAverage_6", WindowAverage(window_size=6), "WindowAverage(window_size=6)"),
        ("WindowAverage_12", WindowAverage(window_size=12), "WindowAverage(window_size=12)"),
        ("Naive", Naive(), "Naive()"),
        ("SeasonalNaive_12", SeasonalNaive(season_length=12), "SeasonalNaive(season_length=12)"),
    ]:
        rec = {"call": f"statsforecast.models.{call}.forecast(y, h=12, level=[80, 95])"}
        try:
            rec.update(sf_forecast(model, y, level=[80, 95]))
        except Exception as exc:  # WindowAverage gives no intervals without conformal settings
            rec["call"] = f"statsforecast.models.{call}.forecast(y, h=12)"
            rec["intervals"] = None
            rec["intervals_error"] = f"{type(exc).__name__}: {exc}"
            rec.update(sf_forecast(model, y))
        block[key] = rec
    # Convention checks for the interval formulas of Naive and SeasonalNaive.
    from scipy.stats import norm

    y = np.asarray(y, dtype=float)
    h = np.arange(1, 13)
    for key, resid, mean, steps in [
        ("Naive", np.diff(y), np.repeat(y[-1], 12), np.sqrt(h)),
        ("SeasonalNaive_12", y[12:] - y[:-12], y[-12:], np.sqrt((h - 1) // 12 + 1)),
    ]:
        sigma = float(np.sqrt(np.mean(resid**2)))
        diffs = []
        for lv in (80, 95):
            z = norm.ppf(0.5 + lv / 200)
            lo = mean - z * sigma * steps
            hi = mean + z * sigma * steps
            diffs.append(float(np.max(np.abs(lo - np.asarray(block[key][f"lo_{lv}"])))))
            diffs.append(float(np.max(np.abs(hi - np.asarray(block[key][f"hi_{lv}"])))))
        assert max(diffs) < 1e-8, (key, diffs)
        block[key]["interval_formula"] = (
            "mean +/- z * sigma * sqrt(k), z = norm.ppf(0.5 + level/200), sigma = sqrt(mean(residual^2)) over the "
            "in-sample residuals (no ddof correction); "
            + ("residual_t = y_t - y_{t-1}, k = h" if key == "Naive"
               else "residual_t = y_t - y_{t-12}, k = floor((h-1)/12) + 1")
            + ". Verified in generate.py (recursion_check)."
        )
        block[key]["recursion_check"] = {"sigma_numpy": sigma, "max_abs_diff_bounds": max(diffs)}
    return block


def autoets_block(y):
    from statsforecast.models import AutoETS

    model = AutoETS(season_length=1)
    rec = {"call": "statsforecast.models.AutoETS(season_length=1).forecast(y, h=12, level=[80, 95])"}
    rec.update(sf_forecast(model, y, level=[80, 95]))
    fitted, w = run_quiet(lambda: AutoETS(season_length=1).fit(np.asarray(y, dtype=float)))
    mdl = fitted.model_
    par = np.asarray(mdl["par"], dtype=float)
    rec["fitted_model"] = {
        "method": mdl["method"],
        "components": mdl["components"],
        "par_alpha_beta_gamma_phi": fl(par[:4]),
        "par_initial_states": fl(par[4:]),
        "loglik": float(mdl["loglik"]),
        "aic": float(mdl["aic"]),
        "aicc": float(mdl["aicc"]),
        "bic": float(mdl["bic"]),
        "sigma2": float(mdl["sigma2"]),
        "mse": float(mdl["mse"]),
        "n_params": int(mdl["n_params"]),
    }
    return rec


def cross_validation_block(ds):
    from statsforecast import StatsForecast
    from statsforecast.models import Naive, SeasonalNaive, WindowAverage

    y = series(ds, "AirPassengers")
    df = pd.DataFrame({"unique_id": "AirPassengers", "ds": y.index, "y": y.to_numpy()})
    sf = StatsForecast(
        models=[SeasonalNaive(season_length=12), WindowAverage(window_size=6), Naive()],
        freq="MS",
    )
    cv, w = run_quiet(lambda: sf.cross_validation(df=df, h=12, step_size=1, n_windows=12))
    cv = cv.reset_index() if "unique_id" not in cv.columns else cv
    cv = cv.sort_values(["cutoff", "ds"]).reset_index(drop=True)
    models = ["SeasonalNaive", "WindowAverage", "Naive"]
    horizon = (
        (cv["ds"].dt.year - cv["cutoff"].dt.year) * 12 + (cv["ds"].dt.month - cv["cutoff"].dt.month)
    ).to_numpy()
    assert horizon.min() == 1 and horizon.max() == 12
    rows = []
    for i, r in cv.iterrows():
        row = {
            "unique_id": r["unique_id"],
            "ds": r["ds"],
            "cutoff": r["cutoff"],
            "horizon": int(horizon[i]),
            "y": float(r["y"]),
        }
        for mname in models:
            row[mname] = float(r[mname])
        rows.append(row)

    def metrics(yv, fv):
        err = fv - yv
        return {
            "n": int(yv.size),
            "mape": float(np.mean(np.abs(err) / np.abs(yv))),
            "bias": float(np.sum(err) / np.sum(yv)),
            "wape": float(np.sum(np.abs(err)) / np.sum(np.abs(yv))),
            "rmse": float(np.sqrt(np.mean(err**2))),
        }

    yv = cv["y"].to_numpy(dtype=float)
    overall = {m: metrics(yv, cv[m].to_numpy(dtype=float)) for m in models}
    per_h = {
        m: {
            str(h): metrics(yv[horizon == h], cv[m].to_numpy(dtype=float)[horizon == h])
            for h in range(1, 13)
        }
        for m in models
    }
    return {
        "call": (
            "StatsForecast(models=[SeasonalNaive(season_length=12), WindowAverage(window_size=6), Naive()], "
            "freq='MS').cross_validation(df=AirPassengers_df, h=12, step_size=1, n_windows=12)"
        ),
        "input": "AirPassengers from datasets.json; df columns unique_id='AirPassengers', ds = month-start dates 1949-01-01..1960-12-01, y",
        "warnings": w,
        "cutoffs": sorted({r["cutoff"].strftime("%Y-%m-%d") for r in rows}),
        "rows": rows,
        "metrics_definition": (
            "computed in generate.py with numpy from the rows above, err = f - y: "
            "mape = mean(|err|/|y|) as a fraction; bias = sum(err)/sum(y); wape = sum|err|/sum|y|; "
            "rmse = sqrt(mean(err^2)). horizon = months between cutoff and ds (1..12)."
        ),
        "metrics_overall": overall,
        "metrics_per_horizon": per_h,
    }


def statsforecast_section(ds):
    air = np.asarray(ds["AirPassengers"]["values"])
    wine = np.asarray(ds["wineind"]["values"])
    last60 = np.asarray(ds["AirPassengers_last60"]["values"])
    pbs = np.asarray(ds["PBS_immune_sera"]["values"])
    out = {
        "library": f"statsforecast {VERSIONS['statsforecast']}",
        "api_note": (
            "Single-series results use the model objects' forecast(y=..., h=12, level=...) method on a float64 "
            "numpy array; keys lo_80/hi_80/lo_95/hi_95 are statsforecast's lo-80/hi-80/lo-95/hi-95 columns."
        ),
        "datasets": {
            "PBS_immune_sera": {"intermittent": intermittent_block(pbs)},
            "PBS_immune_sera_first60": {"intermittent": intermittent_block(pbs[:60])},
            "AirPassengers": {**simple_models_block(air), **theta_block(air)},
            "wineind": theta_block(wine),
            "AirPassengers_last60": {"AutoETS": autoets_block(last60)},
        },
        "cross_validation": cross_validation_block(ds),
    }
    return out


def mstl_block(y):
    """statsforecast MSTL(season_length=12) with its default trend forecaster
    AutoETS(model='ZZN'): decomposition, chosen trend model, forecast."""
    from statsforecast.models import MSTL

    y = np.asarray(y, dtype=float)
    rec = {
        "call": "statsforecast.models.MSTL(season_length=12).forecast(y, h=12, level=[80, 95])",
        "stl_settings": (
            "statsforecast.mstl.mstl calls statsmodels.tsa.seasonal.STL(x, period=12, seasonal=11, "
            "seasonal_deg=0) with every other argument at its statsmodels default: trend=None (smallest odd "
            "> 1.5*12/(1-1.5/11), i.e. 21), low_pass=None (13), trend_deg=1, low_pass_deg=1, jumps 1, "
            "robust=False (inner_iter=5, outer_iter=0); one period, so one MSTL iteration"
        ),
    }
    rec.update(sf_forecast(MSTL(season_length=12), y, level=[80, 95]))
    fitted, w = run_quiet(lambda: MSTL(season_length=12).fit(y))
    assert not w, w
    dec = fitted.model_
    rec["decomposition"] = {
        "trend": fl(dec["trend"]),
        "seasonal": fl(dec["seasonal"]),
        "remainder": fl(dec["remainder"]),
    }
    adjusted = (dec["trend"] + dec["remainder"]).to_numpy()
    rec["seasonally_adjusted_max_abs_diff_vs_y_minus_seasonal"] = float(
        np.max(np.abs(adjusted - (y - dec["seasonal"].to_numpy())))
    )
    mdl = fitted.trend_forecaster.model_
    par = np.asarray(mdl["par"], dtype=float)
    rec["trend_model"] = {
        "method": mdl["method"],
        "par_alpha_beta_gamma_phi": fl(par[:4]),
        "par_initial_states": fl(par[4:]),
        "aicc": float(mdl["aicc"]),
        "sigma2": float(mdl["sigma2"]),
    }
    again = fitted.predict(h=12, level=[80, 95])
    assert np.allclose(again["mean"], rec["forecast"], rtol=0, atol=1e-9)
    return rec


def mstl_section(ds):
    return {
        "library": f"statsforecast {VERSIONS['statsforecast']}, statsmodels {VERSIONS['statsmodels']}",
        "datasets": {
            name: {"MSTL": mstl_block(ds[name]["values"])}
            for name in ["AirPassengers_last60", "AirPassengers", "wineind"]
        },
    }


def main():
    meta = {
        "generated_by": "tests/reference/generate.py",
        "python": platform.python_version(),
        "versions": VERSIONS,
    }
    ds = load_datasets()
    write_json("datasets.json", {"meta": meta, "datasets": ds})
    write_json("ets_statsmodels.json", {"meta": meta, **statsmodels_section(ds)})
    write_json("statsforecast.json", {"meta": meta, **statsforecast_section(ds)})
    write_json("mstl_statsforecast.json", {"meta": meta, **mstl_section(ds)})
    return 0


if __name__ == "__main__":
    sys.exit(main())
