//! STL decomposition (Cleveland, Cleveland, McRae & Terpenning, *J.
//! Official Statistics* 6(1), 1990) for monthly series, without
//! robustness iterations: the decomposition of `mstl-ets` and the seasonal
//! strength test of `arima-auto` and `theta`.
//!
//! Without robustness weights every loess smoother of STL is a fixed linear
//! map: the weight a month gets in a fitted value depends only on the
//! series length, the window and the degree, never on the data. So each
//! smoother's weights are worked out once per (length, window, degree) and
//! kept per thread, and every pass of the five inner iterations — at every
//! backtest origin of every series of that length — is then a sum of
//! products. The weights are computed by the same arithmetic, in the same
//! order, as the netlib Fortran STL as ported by the `stlrs` crate 0.4 (the
//! decomposition used before, through `augurs`), and the sums run in the
//! same order, so the components are the same to the last bit
//! (`tests/reference_stl.rs` checks them against `stlrs` on open series).
//! On 1,000 generated series the decompositions took about an eighth of
//! the forecasting time with `stlrs`, which recomputes every weight at
//! every pass.
//!
//! | setting | value |
//! |---|---|
//! | period | 12 |
//! | seasonal window, degree | 11, 0 |
//! | trend window, degree | 21 (smallest odd above 1.5·12 / (1 − 1.5/11)), 1 |
//! | low-pass window, degree | 13 (smallest odd above 12), 1 |
//! | smoother jumps | 1 (every point fitted) |
//! | inner iterations | 5 |
//! | robustness iterations | 0 |
//!
//! The settings are those statsforecast 2.1.1's `mstl` passes to
//! statsmodels' `STL` (see [`super::decomposition`]).

use std::cell::RefCell;
use std::collections::HashMap;
use std::rc::Rc;

use super::PERIOD;

const SEASONAL_WINDOW: usize = 11;
const SEASONAL_DEGREE: u8 = 0;
const TREND_WINDOW: usize = 21;
const TREND_DEGREE: u8 = 1;
const LOW_PASS_WINDOW: usize = 13;
const LOW_PASS_DEGREE: u8 = 1;
const INNER: usize = 5;
/// Smoothers kept per thread (each a few kB for a five-year series).
const MAX_KEPT: usize = 256;

/// The three components.
#[derive(Debug, Clone)]
pub struct Stl {
    /// Seasonal component.
    pub seasonal: Vec<f64>,
    /// Trend component.
    pub trend: Vec<f64>,
    /// Series less seasonal and trend.
    pub remainder: Vec<f64>,
}

impl Stl {
    /// Seasonal strength max(0, 1 − Var(R) / Var(S + R)) (Wang, Smith &
    /// Hyndman 2006), variances with divisor n − 1.
    pub fn seasonal_strength(&self) -> f64 {
        let sr: Vec<f64> = self
            .seasonal
            .iter()
            .zip(&self.remainder)
            .map(|(a, b)| a + b)
            .collect();
        (1.0 - variance(&self.remainder) / variance(&sr)).max(0.0)
    }
}

fn variance(v: &[f64]) -> f64 {
    let mean = v.iter().sum::<f64>() / v.len() as f64;
    v.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (v.len() as f64 - 1.0)
}

/// Decomposes a monthly series with the settings of the module docs.
/// `None` with fewer than two full years.
pub fn decompose(y: &[f64]) -> Option<Stl> {
    let n = y.len();
    let np = PERIOD;
    if n / 2 < np {
        return None;
    }
    let trend_smoother = smoother(n, TREND_WINDOW, TREND_DEGREE);
    let low_pass = smoother(n, LOW_PASS_WINDOW, LOW_PASS_DEGREE);
    // Cycle-subseries smoothers: subseries j has (n − 1 − j) / 12 + 1
    // months, fitted at each month and one month beyond either end.
    let cycles: Vec<Rc<Smoother>> = (0..np)
        .map(|j| cycle_smoother((n - 1 - j) / np + 1))
        .collect();
    let mut trend = vec![0.0; n];
    let mut season = vec![0.0; n];
    let mut detrended = vec![0.0; n];
    let mut cycle = vec![0.0; n + 2 * np];
    let mut sub = Vec::with_capacity(n / np + 1);
    let mut ma = vec![0.0; n + 2 * np];
    let mut ma2 = vec![0.0; n + 2 * np];
    let mut low = vec![0.0; n];
    for _ in 0..INNER {
        for i in 0..n {
            detrended[i] = y[i] - trend[i];
        }
        for (j, sm) in cycles.iter().enumerate() {
            sub.clear();
            sub.extend((j..n).step_by(np).map(|t| detrended[t]));
            for (m, row) in sm.rows.iter().enumerate() {
                cycle[m * np + j] = row.apply(&sub);
            }
        }
        // Low-pass filter of the cycle: moving averages of 12, 12 and 3,
        // then a loess.
        moving_average(&cycle, np, &mut ma);
        moving_average(&ma[..n + np + 1], np, &mut ma2);
        moving_average(&ma2[..n + 2], 3, &mut ma);
        for (i, row) in low_pass.rows.iter().enumerate() {
            low[i] = row.apply(&ma[..n]);
        }
        for i in 0..n {
            season[i] = cycle[np + i] - low[i];
        }
        for i in 0..n {
            detrended[i] = y[i] - season[i];
        }
        for (i, row) in trend_smoother.rows.iter().enumerate() {
            trend[i] = row.apply(&detrended);
        }
    }
    let remainder = (0..n).map(|i| y[i] - season[i] - trend[i]).collect();
    Some(Stl {
        seasonal: season,
        trend,
        remainder,
    })
}

/// Moving averages of `len` over `x` into the first `x.len() − len + 1`
/// places of `out`, by a running sum.
fn moving_average(x: &[f64], len: usize, out: &mut [f64]) {
    let count = x.len() - len + 1;
    let flen = len as f64;
    let mut v: f64 = x[..len].iter().sum();
    out[0] = v / flen;
    for m in 1..count {
        v = v - x[m - 1] + x[len + m - 1];
        out[m] = v / flen;
    }
}

/// One fitted value: the sum of `weights` times the months from `start`.
#[derive(Debug, Clone)]
struct Row {
    start: usize,
    weights: Vec<f64>,
}

impl Row {
    fn apply(&self, x: &[f64]) -> f64 {
        let mut s = 0.0;
        for (w, v) in self.weights.iter().zip(&x[self.start..]) {
            s += w * v;
        }
        s
    }
}

/// The fitted values of a loess smoother, row by row.
#[derive(Debug)]
struct Smoother {
    rows: Vec<Row>,
}

/// A smoother's key: points, window, degree, and whether it is a
/// cycle-subseries smoother.
type Key = (usize, usize, u8, bool);

thread_local! {
    static SMOOTHERS: RefCell<HashMap<Key, Rc<Smoother>>> = RefCell::new(HashMap::new());
}

/// Kept smoother of `n` points (`cycle`: with the two end extrapolations
/// of a cycle-subseries).
fn cached(n: usize, len: usize, degree: u8, cycle: bool) -> Rc<Smoother> {
    SMOOTHERS.with(|c| {
        let mut c = c.borrow_mut();
        // Series of many different lengths (a long history has one length
        // per backtest origin) would otherwise keep every smoother: start
        // again past a bound, so the memory stays a few MB per thread.
        if c.len() >= MAX_KEPT && !c.contains_key(&(n, len, degree, cycle)) {
            c.clear();
        }
        c.entry((n, len, degree, cycle))
            .or_insert_with(|| {
                Rc::new(if cycle {
                    build_cycle(n)
                } else {
                    build(n, len, degree)
                })
            })
            .clone()
    })
}

fn smoother(n: usize, len: usize, degree: u8) -> Rc<Smoother> {
    cached(n, len, degree, false)
}

fn cycle_smoother(k: usize) -> Rc<Smoother> {
    cached(k, SEASONAL_WINDOW, SEASONAL_DEGREE, true)
}

/// Loess fitted at every point 1..=n (window `len`, jump 1), windows placed
/// as the Fortran `ess` places them.
fn build(n: usize, len: usize, degree: u8) -> Smoother {
    let mut rows = Vec::with_capacity(n);
    if n < 2 {
        rows.push(Row {
            start: 0,
            weights: vec![1.0],
        });
        return Smoother { rows };
    }
    if len >= n {
        for i in 1..=n {
            rows.push(fit_row(n, len, degree, i as f64, 1, n, i));
        }
    } else {
        let half = len.div_ceil(2);
        let (mut left, mut right) = (1, len);
        for i in 1..=n {
            if i > half && right != n {
                left += 1;
                right += 1;
            }
            rows.push(fit_row(n, len, degree, i as f64, left, right, i));
        }
    }
    Smoother { rows }
}

/// The cycle-subseries smoother of a subseries of `k` months: its fitted
/// values at months 0..=k+1 (0 and k + 1 extrapolated one cycle beyond the
/// ends; where no weight reaches them, the neighbouring fitted value).
fn build_cycle(k: usize) -> Smoother {
    let mut rows = build(k, SEASONAL_WINDOW, SEASONAL_DEGREE).rows;
    let right = SEASONAL_WINDOW.min(k);
    let left = (k as i64 - SEASONAL_WINDOW as i64 + 1).max(1) as usize;
    let first = match weights(k, SEASONAL_WINDOW, SEASONAL_DEGREE, 0.0, 1, right) {
        Some(w) => Row {
            start: 0,
            weights: w,
        },
        None => rows[0].clone(),
    };
    let last = match weights(k, SEASONAL_WINDOW, SEASONAL_DEGREE, (k + 1) as f64, left, k) {
        Some(w) => Row {
            start: left - 1,
            weights: w,
        },
        None => rows[rows.len() - 1].clone(),
    };
    rows.insert(0, first);
    rows.push(last);
    Smoother { rows }
}

/// A row at `xs` over months `left..=right` (1-based), or the month
/// itself (`own`) when no weight reaches it.
fn fit_row(
    n: usize,
    len: usize,
    degree: u8,
    xs: f64,
    left: usize,
    right: usize,
    own: usize,
) -> Row {
    match weights(n, len, degree, xs, left, right) {
        Some(w) => Row {
            start: left - 1,
            weights: w,
        },
        None => Row {
            start: own - 1,
            weights: vec![1.0],
        },
    }
}

/// Loess weights of months `left..=right` (1-based) for the fitted value
/// at `xs`: tricube weights over the distance to the farthest month of the
/// window (widened when the window is longer than the series), summing to
/// one, tilted for a local line when `degree` is 1 and the months are
/// spread enough. `None` when every weight is zero. The Fortran `est`'s
/// arithmetic, step by step.
fn weights(
    n: usize,
    len: usize,
    degree: u8,
    xs: f64,
    left: usize,
    right: usize,
) -> Option<Vec<f64>> {
    let range = n as f64 - 1.0;
    let mut h = (xs - left as f64).max(right as f64 - xs);
    if len > n {
        h += ((len - n) / 2) as f64;
    }
    let h9 = 0.999 * h;
    let h1 = 0.001 * h;
    let mut w = vec![0.0; right - left + 1];
    let mut a = 0.0;
    for (k, j) in (left..=right).enumerate() {
        let r = (j as f64 - xs).abs();
        if r <= h9 {
            w[k] = if r <= h1 {
                1.0
            } else {
                let q = r / h;
                let u = 1.0 - q * q * q;
                u * u * u
            };
            a += w[k];
        }
    }
    if a <= 0.0 {
        return None;
    }
    for v in w.iter_mut() {
        *v /= a;
    }
    if h > 0.0 && degree > 0 {
        let mut centre = 0.0;
        for (k, j) in (left..=right).enumerate() {
            centre += w[k] * j as f64;
        }
        let mut b = xs - centre;
        let mut c = 0.0;
        for (k, j) in (left..=right).enumerate() {
            let d = j as f64 - centre;
            c += w[k] * (d * d);
        }
        if c.sqrt() > 0.001 * range {
            b /= c;
            for (k, j) in (left..=right).enumerate() {
                w[k] *= b * (j as f64 - centre) + 1.0;
            }
        }
    }
    Some(w)
}
