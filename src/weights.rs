//! The run's weighted mean: the candidates' forecasts combined with
//! weights learned across the run's products on their backtests.
//!
//! The weights come from forward selection with replacement from a
//! library of models (Caruana, Niculescu-Mizil, Crew & Ksikes, *ICML*
//! 2004): start from an empty mean; at each of [`STEPS`] steps add the
//! candidate — again, if it is already in — whose addition gives the mean
//! the lowest mean scaled absolute error over every backtest point of the
//! run's products (products with intermittent demand left out); a
//! candidate's weight is the share of steps that added it. The weights are
//! one set for the whole run, a few numbers learned from tens of thousands
//! of points, so they cannot fit one product's backtest windows the way a
//! per-product choice can; learning combination weights across series
//! rather than per series is cross-learning (Montero-Manso, Athanasopoulos,
//! Hyndman & Talagala, *IJF* 36(1), 2020).
//!
//! Where a member did not forecast at an origin (too little history there),
//! its share is filled by the fixed combination's forecast, when learning
//! and when combining; the projection on the whole history drops a member
//! whose fit fails and averages the rest.
//!
//! Whether the weighted mean becomes the run's default is decided in
//! [`crate::default_rule::decide`], on weights learned on the earlier half
//! of the backtest origins only ([`RunWeights::early`]) and scored on the
//! later origins' months they never saw ([`check`]).

use crate::backtest::{Backtest, ModelRun, RunStatus, COMBINATION};
use crate::default_rule::BEST_MEAN;
use crate::models::Forecast;

/// Name of the weighted mean.
pub const WEIGHTED_MEAN: &str = "weighted-mean";
/// Steps of the forward selection: weights are multiples of 1 / STEPS.
pub const STEPS: usize = 20;
/// Fewest products whose backtests the weights are learned on.
pub const MIN_PRODUCTS: usize = crate::default_rule::MIN_PRODUCTS;

/// The run's learned weights.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RunWeights {
    /// Learned on every backtest origin: the members, a name once per step
    /// that added it ([`STEPS`] names, most frequent first).
    pub members: Vec<String>,
    /// Learned on the earlier half of each product's backtest origins only,
    /// for [`check`] and the ranges' calibration.
    pub early: Vec<String>,
    /// Products the weights were learned on.
    pub products: usize,
    /// Backtest points they were learned on.
    pub points: usize,
}

impl RunWeights {
    /// Each member with its weight, largest first.
    pub fn shares(&self) -> Vec<(String, f64)> {
        shares(&self.members)
    }
}

/// Each distinct name of `members` with its share of the list, largest
/// first (ties by name).
pub fn shares(members: &[String]) -> Vec<(String, f64)> {
    let mut out: Vec<(String, f64)> = Vec::new();
    for m in members {
        match out.iter_mut().find(|(n, _)| n == m) {
            Some(e) => e.1 += 1.0,
            None => out.push((m.clone(), 1.0)),
        }
    }
    let n = members.len().max(1) as f64;
    for e in out.iter_mut() {
        e.1 /= n;
    }
    out.sort_by(|a, b| b.1.total_cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
    out
}

/// Members as text: names alone when each appears once (an equal-weight
/// mean), otherwise `name:share` with shares to two decimals.
pub fn members_text(members: &[String]) -> String {
    let s = shares(members);
    if s.len() == members.len() {
        return members.join(" ");
    }
    s.iter()
        .map(|(m, w)| format!("{m}:{w:.2}"))
        .collect::<Vec<_>>()
        .join(" ")
}

/// Whether a run may be a member: a candidate model, not one of the means.
fn is_candidate(r: &ModelRun) -> bool {
    r.model != COMBINATION
        && r.model != BEST_MEAN
        && r.model != WEIGHTED_MEAN
        && !matches!(r.status, RunStatus::NotApplicable(_))
}

/// Backtest points gathered across products, a column per candidate.
#[derive(Debug, Default)]
pub struct Learner {
    models: Vec<String>,
    actual: Vec<f64>,
    inv_scale: Vec<f64>,
    combination: Vec<f64>,
    /// Per model, a forecast per point (NaN where it did not forecast).
    columns: Vec<Vec<f64>>,
    products: usize,
}

impl Learner {
    /// Adds one product's scored backtest points (only origins up to
    /// `last`, when given) where the fixed combination forecast and the
    /// scaled error is defined.
    pub fn add(&mut self, bt: &Backtest, last: Option<usize>) {
        let Some(combo) = bt.run(COMBINATION) else {
            return;
        };
        let runs: Vec<(usize, &ModelRun)> = bt
            .runs
            .iter()
            .filter(|r| is_candidate(r))
            .map(|r| (self.column(&r.model), r))
            .collect();
        let before = self.actual.len();
        for p in bt.points(combo) {
            let Some(scale) = p.scale.filter(|s| *s > 0.0 && s.is_finite()) else {
                continue;
            };
            if !p.scored || last.is_some_and(|l| p.origin > l) {
                continue;
            }
            let Ok(k) = bt.origins.binary_search(&p.origin) else {
                continue;
            };
            self.actual.push(p.actual);
            self.inv_scale.push(1.0 / scale);
            self.combination.push(p.forecast.max(0.0));
            let n = self.actual.len();
            for col in self.columns.iter_mut() {
                col.resize(n, f64::NAN);
            }
            for &(c, r) in &runs {
                if let Some(v) = point_of(r, k, p.horizon) {
                    self.columns[c][n - 1] = v;
                }
            }
        }
        if self.actual.len() > before {
            self.products += 1;
        }
    }

    fn column(&mut self, model: &str) -> usize {
        if let Some(i) = self.models.iter().position(|m| m == model) {
            return i;
        }
        self.models.push(model.to_string());
        self.columns.push(vec![f64::NAN; self.actual.len()]);
        self.models.len() - 1
    }

    /// Products added so far with at least one point.
    pub fn products(&self) -> usize {
        self.products
    }

    /// Points added so far.
    pub fn points(&self) -> usize {
        self.actual.len()
    }

    /// The forward selection (see the module docs): [`STEPS`] names, most
    /// frequent first; `None` with no point or no candidate.
    pub fn learn(&self) -> Option<Vec<String>> {
        let n = self.actual.len();
        if n == 0 || self.models.is_empty() {
            return None;
        }
        // Candidates in name order, so the outcome does not depend on the
        // order products were added in; a missing forecast is the
        // combination's.
        let mut order: Vec<usize> = (0..self.models.len()).collect();
        order.sort_by(|&a, &b| self.models[a].cmp(&self.models[b]));
        let filled: Vec<Vec<f64>> = order
            .iter()
            .map(|&c| {
                self.columns[c]
                    .iter()
                    .zip(&self.combination)
                    .map(|(v, c)| if v.is_nan() { *c } else { *v })
                    .collect()
            })
            .collect();
        let mut sum = vec![0.0; n];
        let mut picked = Vec::with_capacity(STEPS);
        for t in 1..=STEPS {
            let inv_t = 1.0 / t as f64;
            let mut best: Option<(f64, usize)> = None;
            for (j, col) in filled.iter().enumerate() {
                let mut e = 0.0;
                for i in 0..n {
                    e += ((sum[i] + col[i]) * inv_t - self.actual[i]).abs() * self.inv_scale[i];
                }
                if best.map_or(true, |(b, _)| e < b) {
                    best = Some((e, j));
                }
            }
            let (_, j) = best?;
            for (s, v) in sum.iter_mut().zip(&filled[j]) {
                *s += v;
            }
            picked.push(self.models[order[j]].clone());
        }
        let mut out = Vec::with_capacity(STEPS);
        for (m, _) in shares(&picked) {
            out.extend(picked.iter().filter(|p| **p == m).cloned());
        }
        Some(out)
    }
}

/// `r`'s point forecast at origin index `k`, `h` months ahead (≥ 0).
fn point_of(r: &ModelRun, k: usize, h: usize) -> Option<f64> {
    r.forecasts
        .get(k)?
        .as_ref()?
        .point
        .get(h.checked_sub(1)?)
        .map(|v| v.max(0.0))
}

/// Learns the run's weights from the backtests of its products whose
/// demand is not intermittent (`None` when fewer than [`MIN_PRODUCTS`]
/// products have points).
pub fn learn(backtests: &[&Backtest]) -> Option<RunWeights> {
    let mut all = Learner::default();
    let mut early = Learner::default();
    for bt in backtests {
        all.add(bt, None);
        if let Some(last) = early_last(bt) {
            early.add(bt, Some(last));
        }
    }
    if all.products() < MIN_PRODUCTS || early.products() < MIN_PRODUCTS {
        return None;
    }
    Some(RunWeights {
        members: all.learn()?,
        early: early.learn()?,
        products: all.products(),
        points: all.points(),
    })
}

/// The last origin of the earlier half of `bt`'s origins (`None` with
/// fewer than [`crate::default_rule::MIN_ORIGINS`]).
fn early_last(bt: &Backtest) -> Option<usize> {
    let k = bt.origins.len();
    (k >= crate::default_rule::MIN_ORIGINS).then(|| bt.origins[k / 2 - 1])
}

/// The weighted mean's forecast at origin `k`: the mean of `members`' (a
/// name per step), each missing one replaced by the combination's, with
/// the combination's ranges moved to it ([`crate::default_rule::recentre`]).
fn weighted_at(bt: &Backtest, members: &[String], k: usize) -> Option<Forecast> {
    let combination = bt
        .run(COMBINATION)
        .and_then(|c| c.forecasts.get(k))
        .and_then(Option::as_ref);
    let fcs: Vec<&Forecast> = members
        .iter()
        .filter_map(|m| {
            bt.run(m)
                .and_then(|r| r.forecasts.get(k))
                .and_then(Option::as_ref)
                .or(combination)
        })
        .collect();
    let mut f = crate::backtest::mean_forecast(&fcs)?;
    if let Some(c) = combination {
        crate::default_rule::recentre(&mut f, c);
    }
    Some(f)
}

/// The weighted mean's backtest run for one product (complete where the
/// combination or a member forecast at every origin).
pub fn weighted_run(bt: &Backtest, members: &[String]) -> ModelRun {
    let forecasts: Vec<Option<Forecast>> = (0..bt.origins.len())
        .map(|k| weighted_at(bt, members, k))
        .collect();
    let failed = forecasts.iter().filter(|f| f.is_none()).count();
    ModelRun {
        model: WEIGHTED_MEAN.to_string(),
        status: match failed {
            0 => RunStatus::Complete,
            f if f == forecasts.len() => {
                RunStatus::NotApplicable("neither the combination nor a member forecast".into())
            }
            f => RunStatus::Incomplete {
                failed: f,
                first: "neither the combination nor a member forecast at the earliest origins"
                    .into(),
            },
        },
        forecasts,
        members: vec![members.to_vec(); bt.origins.len()],
    }
}

/// The weighted mean's backtest forecasts for calibrating its ranges: the
/// early weights ([`RunWeights::early`]) at the later half of the origins,
/// nothing at the earlier ones (the run's own weights saw every origin;
/// see [`crate::default_rule::calibration_run`] for the pool's).
pub fn calibration_run(bt: &Backtest, weights: &RunWeights) -> Option<ModelRun> {
    let k = bt.origins.len();
    early_last(bt)?;
    let forecasts = (0..k)
        .map(|o| {
            (o >= k / 2)
                .then(|| weighted_at(bt, &weights.early, o))
                .flatten()
        })
        .collect();
    Some(ModelRun {
        model: WEIGHTED_MEAN.to_string(),
        status: RunStatus::Incomplete {
            failed: k / 2,
            first: "forecast only at the later origins".to_string(),
        },
        forecasts,
        members: vec![weights.early.clone(); k],
    })
}

/// One product's check of the weighted mean: mean scaled absolute errors
/// of (the combination, the pool, the weighted mean) on the later origins'
/// target months after the earlier half's last target, with the pool's
/// members chosen and the weights learned on the earlier half only (the
/// points of [`crate::default_rule::nested_check`]). The pool's error is
/// `None` where it has too few candidates.
pub fn check(bt: &Backtest, early: &[String]) -> Option<(f64, Option<f64>, f64)> {
    let last = early_last(bt)?;
    let cutoff = last + bt.horizon;
    let combo = bt.run(COMBINATION)?;
    let pool = crate::default_rule::early_members(bt);
    let (mut ec, mut ep, mut ew, mut n) = (0.0, 0.0, 0.0, 0usize);
    let mut pool_ok = pool.is_some();
    for c in bt
        .points(combo)
        .iter()
        .filter(|p| p.target > cutoff && p.scored && p.origin > last)
    {
        let Some(scale) = c.scale.filter(|s| *s > 0.0) else {
            continue;
        };
        let Ok(k) = bt.origins.binary_search(&c.origin) else {
            continue;
        };
        let cf = c.forecast.max(0.0);
        let w: f64 = early
            .iter()
            .map(|m| {
                bt.run(m)
                    .and_then(|r| point_of(r, k, c.horizon))
                    .unwrap_or(cf)
            })
            .sum::<f64>()
            / early.len().max(1) as f64;
        if let Some(members) = &pool {
            let fs: Option<Vec<f64>> = members.iter().map(|r| point_of(r, k, c.horizon)).collect();
            match fs {
                Some(fs) => {
                    ep += (fs.iter().sum::<f64>() / fs.len() as f64 - c.actual).abs() / scale
                }
                None => pool_ok = false,
            }
        }
        ec += (cf - c.actual).abs() / scale;
        ew += (w - c.actual).abs() / scale;
        n += 1;
    }
    (n > 0).then(|| {
        let n = n as f64;
        (ec / n, pool_ok.then(|| ep / n), ew / n)
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::backtest::Backtest;

    fn flat(v: f64, h: usize) -> Forecast {
        Forecast {
            point: vec![v; h],
            intervals: Vec::new(),
        }
    }

    /// A backtest of `n` months at 12 origins, horizon 3, where each
    /// model forecasts a constant.
    fn bt(actual: Vec<f64>, models: &[(&str, f64)]) -> Backtest {
        let n = actual.len();
        let origins: Vec<usize> = (n - 15..n - 3).collect();
        let runs = models
            .iter()
            .map(|(m, v)| ModelRun {
                model: m.to_string(),
                status: RunStatus::Complete,
                forecasts: origins.iter().map(|_| Some(flat(*v, 3))).collect(),
                members: vec![Vec::new(); origins.len()],
            })
            .collect();
        Backtest {
            origins,
            horizon: 3,
            actual,
            scorable: vec![true; n],
            runs,
            scales: Default::default(),
        }
    }

    /// A series repeating 96, 100, 104, 100, 100 (a five-month cycle, so
    /// the seasonal-naive scale is defined), whose median is 100: the
    /// constant with the lowest absolute error, and strictly lower than any
    /// other constant's.
    fn around_100(n: usize) -> Vec<f64> {
        (0..n)
            .map(|t| [96.0, 100.0, 104.0, 100.0, 100.0][t % 5])
            .collect()
    }

    #[test]
    fn an_exact_model_takes_every_step() {
        // By construction of the forward selection: a candidate whose
        // forecast equals the mean level beats any mean with a biased one
        // at the first step and stays best at every later one (adding a
        // biased forecast moves the mean off the level).
        let b = bt(
            around_100(48),
            &[
                ("low", 60.0),
                ("exact", 100.0),
                ("high", 150.0),
                (COMBINATION, 103.0),
            ],
        );
        let mut l = Learner::default();
        l.add(&b, None);
        let m = l.learn().unwrap();
        assert_eq!(m.len(), STEPS);
        assert!(m.iter().all(|x| x == "exact"), "{m:?}");
    }

    #[test]
    fn two_opposite_biases_are_mixed_in_equal_shares() {
        // Two candidates 20 below and 20 above the level: the mean of the
        // two in equal shares is on the level, so forward selection
        // alternates between them (common practice: the combination of
        // forecasts with opposite biases cancels them, Bates & Granger,
        // Oper. Res. Q. 20(4), 1969).
        let b = bt(
            around_100(48),
            &[("low", 80.0), ("high", 120.0), (COMBINATION, 130.0)],
        );
        let mut l = Learner::default();
        l.add(&b, None);
        let s = shares(&l.learn().unwrap());
        assert_eq!(s.len(), 2, "{s:?}");
        assert!((s[0].1 - 0.5).abs() < 1e-12 && (s[1].1 - 0.5).abs() < 1e-12);
        assert_eq!(members_text(&l.learn().unwrap()), "high:0.50 low:0.50");
    }

    #[test]
    fn the_means_are_not_members_and_a_missing_member_is_the_combinations() {
        let mut b = bt(
            around_100(48),
            &[
                ("m", 100.0),
                (COMBINATION, 100.0),
                (BEST_MEAN, 100.0),
                (WEIGHTED_MEAN, 100.0),
            ],
        );
        let mut l = Learner::default();
        l.add(&b, None);
        assert_eq!(l.models, vec!["m".to_string()]);
        // The member misses the first origin: the weighted mean takes the
        // combination's forecast there.
        b.runs[0].forecasts[0] = None;
        b.runs[1].forecasts[0] = Some(flat(77.0, 3));
        let r = weighted_run(&b, &["m".to_string(), "m".to_string()]);
        assert_eq!(r.status, RunStatus::Complete);
        assert_eq!(r.forecasts[0].as_ref().unwrap().point, vec![77.0; 3]);
        assert_eq!(r.forecasts[1].as_ref().unwrap().point, vec![100.0; 3]);
    }

    #[test]
    fn too_few_products_learn_nothing() {
        let b = bt(around_100(48), &[("m", 100.0), (COMBINATION, 100.0)]);
        let few: Vec<&Backtest> = vec![&b; MIN_PRODUCTS - 1];
        assert!(learn(&few).is_none());
        let enough: Vec<&Backtest> = vec![&b; MIN_PRODUCTS];
        let w = learn(&enough).unwrap();
        assert_eq!(w.products, MIN_PRODUCTS);
        assert_eq!(w.shares(), vec![("m".to_string(), 1.0)]);
    }
}
