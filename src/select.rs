//! Choosing a model per product from its backtest, with the evidence.
//!
//! Each product starts from a **default**: the fixed combination of strong
//! automatic models ([`crate::backtest::COMBINATION_MEMBERS`]) for smooth
//! and erratic demand, the SBA method for intermittent demand. It departs
//! from the default only when the backtest gives clear evidence that
//! another candidate forecasts this product better:
//!
//! 1. the challenger's score is lower than the default's by more than
//!    `tie_margin` (50%), **and**
//! 2. it is better at enough of the backtest origins: a one-sided sign test
//!    on the origin-level scores (Diebold & Mariano, JBES 13(3), 1995, §3
//!    give the sign test as an exact small-sample test of equal accuracy)
//!    at level [`EVIDENCE_LEVEL`].
//!
//! Picking the single best of twenty models on a few backtest windows is
//! noisy: on the development benchmarks (M1 monthly, tourism monthly;
//! see the README) choosing the lowest backtest score per product loses to
//! applying one good method to every product, while starting from a robust
//! combination and departing only on evidence beats every single method.
//!
//! The score is MASE by default: scale-free, so products of any size
//! weigh alike, and unlike MAPE it does not reward under-forecasting
//! (MAPE's penalty for an over-forecast is unbounded, for an
//! under-forecast at most 100%). Intermittent demand is scored by RMSSE
//! (M5 competition), because absolute errors favour a forecast of zero on
//! mostly-zero months.
//!
//! Without a default (a short series, or a candidate set without it), the
//! lowest score wins, and scores within `tie_margin` of it are near-ties
//! won by the simplest model (see [`complexity`]).

use crate::backtest::{Backtest, RunStatus, Scores, COMBINATION};
use crate::error::{Error, Result};
use crate::metrics::Score;

/// Selection settings as given.
///
/// | setting | default | range |
/// |---|---|---|
/// | `score` | MASE | MAPE, WAPE, MASE, RMSE, RMSSE |
/// | `tie_margin` | 0.5 | 0–0.9: relative gap a challenger must beat the default by (and, without a default, the gap counted as a near-tie) |
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SelectSettings {
    /// Score to minimise.
    pub score: Score,
    /// Relative gap by which a challenger must beat the default.
    pub tie_margin: f64,
    /// How the run's default is set (see [`crate::default_rule`]).
    #[serde(default)]
    pub default_rule: crate::default_rule::DefaultRule,
}

impl Default for SelectSettings {
    fn default() -> Self {
        SelectSettings {
            score: Score::Mase,
            tie_margin: 0.5,
            default_rule: crate::default_rule::DefaultRule::Auto,
        }
    }
}

impl SelectSettings {
    /// Validates the settings.
    pub fn check(self) -> Result<Self> {
        if !(0.0..=0.9).contains(&self.tie_margin) {
            return Err(Error::setting(
                "tie-margin",
                format!("must be between 0 and 0.9, got {}", self.tie_margin),
            ));
        }
        Ok(self)
    }
}

/// Share of zero actuals above which selection by MAPE falls back to WAPE.
pub const ZERO_SHARE_FOR_WAPE: f64 = 1.0 / 3.0;

/// Level of the one-sided sign test a challenger must pass to replace the
/// default: it must be better at so many origins that, were both equally
/// accurate, so many wins would happen by chance at most this often.
/// With 12 origins: at least 10 wins (p = 0.019). Measured on the
/// development benchmarks (README, "Does selection beat the best single
/// model?"): laxer rules (p ≤ 0.10, 10–35% margins) let products depart
/// from the combination more often than it paid.
pub const EVIDENCE_LEVEL: f64 = 0.02;

/// Largest relative gap counted as a near-tie when there is no default to
/// keep (the simpler model then wins): the margin against a default is
/// deliberately wide, but among equals a wide margin would hand the choice
/// to the crudest model (on M1 monthly, a 50% near-tie chose a 3-month
/// moving average for 22 short series).
pub const NEAR_TIE: f64 = 0.10;

/// Default model for intermittent and lumpy demand: Croston's method with
/// the Syntetos–Boylan approximation (IJF 21(2), 2005), which corrects
/// Croston's upward bias and never forecasts zero for a product with demand.
pub const INTERMITTENT_DEFAULT: &str = "croston-sba";

/// Number of estimated quantities a model family has, used to break
/// near-ties toward the simpler model (smaller is simpler).
pub fn complexity(model: &str) -> usize {
    match model {
        m if m.starts_with("moving-average") => 0,
        "naive" | "seasonal-naive" => 0,
        COMBINATION | crate::default_rule::BEST_MEAN | crate::weights::WEIGHTED_MEAN => 0,
        "croston" | "croston-sba" | "ets-simple" => 2,
        "tsb" => 3,
        "theta" | "ets-holt" => 3,
        "ets-damped" | "ets-auto" => 5,
        "mstl-ets" => 6,
        "arima-auto" => 8,
        m if m.starts_with("holt-winters") => 16,
        _ => 10,
    }
}

/// The choice for one product.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Selection {
    /// Model used for the projection (the pinned one, when pinned).
    pub chosen: String,
    /// Model the selection procedure picks.
    pub best: String,
    /// Whether the user pinned the model.
    pub pinned: bool,
    /// Score the choice was made by.
    pub score: Score,
    /// Scores of the chosen model (`None` when not backtested).
    pub chosen_scores: Option<Scores>,
    /// The model that came second and its score: the best model other
    /// than the chosen one (it may have scored better and still lost, for
    /// want of clear evidence; see `reason`).
    pub runner_up: Option<(String, f64)>,
    /// Runner-up's score above the chosen one, in percent of the chosen
    /// (negative: the runner-up scored better but not clearly enough).
    pub margin_pct: Option<f64>,
    /// Whether the product could be backtested at all: the backtest ran at
    /// its origins (`chosen_scores` may still be `None` when the score is
    /// undefined on the history; the reason says so).
    pub backtested: bool,
    /// Plain-words reason.
    pub reason: String,
}

fn fmt_score(score: Score, v: f64) -> String {
    match score {
        Score::Mape | Score::Wape => format!("{v:.1}%"),
        Score::Mase | Score::Rmsse => format!("{v:.3}"),
        Score::Rmse => format!("{v:.1}"),
    }
}

/// One-sided sign test: the chance of at least `wins` successes in `n`
/// fair coin tosses.
pub fn sign_test_p(wins: usize, n: usize) -> f64 {
    if n == 0 {
        return 1.0;
    }
    // Σ_{k ≥ wins} C(n, k) / 2^n, by a running binomial coefficient.
    let mut c = 1.0f64;
    let mut tail = 0.0;
    for k in 0..=n {
        if k >= wins {
            tail += c;
        }
        c = c * (n - k) as f64 / (k + 1) as f64;
    }
    tail / 2f64.powi(n as i32)
}

/// Origins at which `a` scores better (lower) than `b`, and the number of
/// origins where both have a score.
fn origin_wins(bt: &Backtest, a: &str, b: &str, score: Score) -> (usize, usize) {
    let (Some(ra), Some(rb)) = (bt.run(a), bt.run(b)) else {
        return (0, 0);
    };
    let (pa, pb) = (bt.points(ra), bt.points(rb));
    let (mut wins, mut n) = (0, 0);
    for &o in &bt.origins {
        let sa = Scores::of(
            &pa.iter()
                .copied()
                .filter(|p| p.origin == o)
                .collect::<Vec<_>>(),
        );
        let sb = Scores::of(
            &pb.iter()
                .copied()
                .filter(|p| p.origin == o)
                .collect::<Vec<_>>(),
        );
        let pick = |s: &Scores| s.get(score).or(s.wape);
        if let (Some(x), Some(y)) = (pick(&sa), pick(&sb)) {
            n += 1;
            wins += usize::from(x < y);
        }
    }
    (wins, n)
}

/// The score a product is selected by: `settings.score`, except RMSSE for
/// intermittent demand and WAPE instead of MAPE when many months are zero.
/// Returns the score and a note for the reason.
/// Whether the backtest ran: some candidate forecast at every origin.
fn backtest_ran(bt: &Backtest) -> bool {
    bt.runs.iter().any(|r| r.status == RunStatus::Complete)
}

/// Why no model has a backtest score: no origin fits in the history, or
/// the backtest ran but the score is undefined on this history (a series
/// that never changes gives MASE and RMSSE no scale to divide by).
pub(crate) fn unscored_reason(bt: &Backtest, score: Score) -> String {
    if backtest_ran(bt) {
        format!(
            "no backtest score: the backtest ran at {} origins, but {} is undefined on this history (it does not change from month to month, so errors have no scale to be measured against)",
            bt.origins.len(),
            score.name()
        )
    } else {
        format!(
            "not backtested: the history is too short for a backtest origin with {} months after it",
            bt.horizon
        )
    }
}

pub(crate) fn score_for(
    bt: &Backtest,
    settings: &SelectSettings,
    intermittent: bool,
) -> (Score, String) {
    if intermittent && settings.score != Score::Rmsse {
        return (
            Score::Rmsse,
            format!(
                "; scored by RMSSE instead of {} because demand is intermittent (absolute errors favour forecasting zero; M5 competition)",
                settings.score.name()
            ),
        );
    }
    let scored_targets: Vec<f64> = bt
        .origins
        .iter()
        .flat_map(|&o| (1..=bt.horizon).map(move |h| o + h))
        .filter(|&t| t < bt.actual.len() && bt.scorable[t])
        .map(|t| bt.actual[t])
        .collect();
    let zeros = scored_targets.iter().filter(|&&a| a == 0.0).count();
    let zero_share = if scored_targets.is_empty() {
        0.0
    } else {
        zeros as f64 / scored_targets.len() as f64
    };
    if settings.score == Score::Mape && zero_share > ZERO_SHARE_FOR_WAPE {
        return (
            Score::Wape,
            format!(
                "; WAPE used instead of MAPE because {:.0}% of the backtest months are zero",
                zero_share * 100.0
            ),
        );
    }
    (settings.score, String::new())
}

type Ranked = (String, f64, Scores);

/// Chooses a model from a backtest. `default` names the model to keep
/// unless another is clearly better (see the module docs); `pinned` names
/// a model the user wants; `fallback` is the model to use when nothing
/// could be backtested; `intermittent` switches the score to RMSSE.
pub fn select(
    bt: &Backtest,
    settings: &SelectSettings,
    default: Option<&str>,
    pinned: Option<&str>,
    fallback: &str,
    intermittent: bool,
) -> Selection {
    let (score, note) = score_for(bt, settings, intermittent);
    let mut ranked: Vec<Ranked> = bt
        .runs
        .iter()
        .filter(|r| r.status == RunStatus::Complete)
        .filter_map(|r| {
            let s = bt.scores(r);
            s.get(score).map(|v| (r.model.clone(), v, s))
        })
        .collect();
    ranked.sort_by(|a, b| a.1.total_cmp(&b.1));
    if ranked.is_empty() {
        let chosen = pinned.unwrap_or(fallback).to_string();
        return Selection {
            chosen: chosen.clone(),
            best: fallback.to_string(),
            pinned: pinned.is_some(),
            score,
            chosen_scores: None,
            runner_up: None,
            margin_pct: None,
            // The backtest ran when some candidate forecast at every
            // origin, even if no score is defined on this history (the
            // reason says so; a tester saw "not backtested" beside "the
            // backtest ran at 12 origins").
            backtested: backtest_ran(bt),
            reason: format!(
                "{}; the simplest applicable model is used",
                unscored_reason(bt, score)
            ),
        };
    }
    let default_run = default.and_then(|d| ranked.iter().find(|r| r.0 == d).cloned());
    let (pick, mut reason) = match default_run {
        Some(d) => against_default(bt, &ranked, &d, settings, score),
        None => lowest(bt, &ranked, settings, score),
    };
    let runner = ranked
        .iter()
        .find(|r| r.0 != pick.0)
        .map(|r| (r.0.clone(), r.1));
    if let Some(b) = pick.2.bias {
        // Rounded before it is signed and named: a bias that shows as 0.0%
        // is neither an over- nor an under-forecast.
        let shown = crate::chart::fmt_signed(b);
        let direction = match shown.chars().next() {
            Some('+') => " (over-forecast)",
            Some('-') => " (under-forecast)",
            _ => "",
        };
        reason.push_str(&format!("; bias {shown}%{direction}"));
    }
    reason.push_str(&note);
    let margin_pct = runner
        .as_ref()
        .filter(|_| pick.1 > 0.0)
        .map(|(_, v)| 100.0 * (v - pick.1) / pick.1);
    let mut sel = Selection {
        chosen: pick.0.clone(),
        best: pick.0.clone(),
        pinned: false,
        score,
        chosen_scores: Some(pick.2),
        runner_up: runner,
        margin_pct,
        backtested: true,
        reason,
    };
    if let Some(p) = pinned {
        if p != sel.best {
            let pinned_scores = bt.run(p).map(|r| bt.scores(r));
            let pv = pinned_scores.and_then(|s| s.get(score));
            sel.reason = format!(
                "pinned by the user; the backtest's choice would be {} ({}){}",
                sel.best,
                sel.reason,
                pv.map(|v| format!("; pinned model {} {}", score.name(), fmt_score(score, v)))
                    .unwrap_or_default()
            );
            sel.chosen = p.to_string();
            sel.chosen_scores = pinned_scores;
            // The runner-up is the best model other than the one used, and
            // its margin is against the pinned model's score.
            sel.runner_up = ranked.iter().find(|r| r.0 != p).map(|r| (r.0.clone(), r.1));
            sel.margin_pct = match (&sel.runner_up, pv) {
                (Some((_, v)), Some(pv)) if pv > 0.0 => Some(100.0 * (v - pv) / pv),
                _ => None,
            };
        }
        sel.pinned = true;
    }
    sel
}

/// Keeps the default unless the best other model is clearly better.
fn against_default(
    bt: &Backtest,
    ranked: &[Ranked],
    d: &Ranked,
    settings: &SelectSettings,
    score: Score,
) -> (Ranked, String) {
    let n_points = d.2.n;
    let what = if d.0 == COMBINATION {
        "the default, a fixed combination"
    } else if d.0 == crate::default_rule::BEST_MEAN {
        "the default, the mean of this product's five best models by backtest"
    } else if d.0 == crate::weights::WEIGHTED_MEAN {
        "the default, the run's weighted mean (weights learned across its products' backtests)"
    } else {
        "the default for intermittent demand"
    };
    let Some(c) = ranked.iter().find(|r| r.0 != d.0) else {
        return (
            d.clone(),
            format!(
                "{what}; no other model completed the backtest; {} {} over {} origins × {} months ({n_points} forecasts)",
                score.name(),
                fmt_score(score, d.1),
                bt.origins.len(),
                bt.horizon
            ),
        );
    };
    let gain = if d.1 > 0.0 { 1.0 - c.1 / d.1 } else { 0.0 };
    let (wins, n) = origin_wins(bt, &c.0, &d.0, score);
    let p = sign_test_p(wins, n);
    let head = format!(
        "{} {} over {} origins × {} months ({n_points} forecasts)",
        score.name(),
        fmt_score(score, d.1),
        bt.origins.len(),
        bt.horizon
    );
    if gain > settings.tie_margin && p <= EVIDENCE_LEVEL {
        let reason = format!(
            "clearly better than {what} ({} {}): {} {} is {:.0}% lower and better at {wins} of {n} origins (sign test p {})",
            d.0,
            fmt_score(score, d.1),
            score.name(),
            fmt_score(score, c.1),
            gain * 100.0,
            crate::metrics::fmt_p(p),
        );
        return (c.clone(), reason);
    }
    let why = if gain <= 0.0 {
        format!(
            "the best other model, {} ({}), is not better",
            c.0,
            fmt_score(score, c.1)
        )
    } else if gain <= settings.tie_margin {
        format!(
            "the best other model, {} ({}), is only {:.1}% lower, within the {:.0}% margin",
            c.0,
            fmt_score(score, c.1),
            gain * 100.0,
            settings.tie_margin * 100.0
        )
    } else {
        format!(
            "the best other model, {} ({}), is {:.0}% lower but better at only {wins} of {n} origins (sign test p = {p:.2}, above {EVIDENCE_LEVEL}), not clear evidence",
            c.0,
            fmt_score(score, c.1),
            gain * 100.0
        )
    };
    (d.clone(), format!("{what}: {head}; kept because {why}"))
}

/// Lowest score, near-ties to the simplest model (no default available).
fn lowest(
    bt: &Backtest,
    ranked: &[Ranked],
    settings: &SelectSettings,
    score: Score,
) -> (Ranked, String) {
    let best = &ranked[0];
    let margin = settings.tie_margin.min(NEAR_TIE);
    let limit = best.1 * (1.0 + margin) + 1e-12;
    let pick = ranked
        .iter()
        .filter(|r| r.1 <= limit)
        .min_by_key(|r| complexity(&r.0))
        .unwrap_or(best);
    // Only models that forecast at every origin are ranked; when some
    // could not (too short a history at the earliest), say so, since their
    // scores in scores.csv may be lower (a tester read "lowest MASE 8.142"
    // beside partial scores of 2.6).
    let partial = bt
        .runs
        .iter()
        .any(|r| matches!(r.status, RunStatus::Incomplete { .. }));
    let among = if partial {
        " among the models that forecast at every origin"
    } else {
        ""
    };
    let reason = if pick.0 == best.0 {
        format!(
            "lowest {}{among} over {} origins × {} months ({} forecasts): {}",
            score.name(),
            bt.origins.len(),
            bt.horizon,
            pick.2.n,
            fmt_score(score, pick.1)
        )
    } else {
        format!(
            "{} {} is within {:.0}% of the best ({} {}); the simpler model is preferred in a near-tie",
            score.name(),
            fmt_score(score, pick.1),
            margin * 100.0,
            best.0,
            fmt_score(score, best.1),
        )
    };
    (pick.clone(), reason)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::backtest::{BacktestSettings, ModelRun};
    use crate::models::Forecast;

    fn margin10() -> SelectSettings {
        SelectSettings {
            tie_margin: 0.1,
            ..SelectSettings::default()
        }
    }

    fn mape() -> SelectSettings {
        SelectSettings {
            score: Score::Mape,
            tie_margin: 0.1,
            ..SelectSettings::default()
        }
    }

    fn flat(v: f64, h: usize) -> Forecast {
        Forecast::normal(vec![v; h], &vec![1.0; h], &crate::backtest::LEVELS).unwrap()
    }

    fn bt_with(models: &[(&str, f64)]) -> Backtest {
        let actual = vec![100.0; 10];
        let origins = vec![5, 6, 7];
        let runs = models
            .iter()
            .map(|(name, v)| ModelRun {
                model: name.to_string(),
                status: RunStatus::Complete,
                forecasts: origins.iter().map(|_| Some(flat(*v, 2))).collect(),
                members: Vec::new(),
            })
            .collect();
        let _ = BacktestSettings::default();
        Backtest {
            origins,
            horizon: 2,
            actual: actual.clone(),
            scorable: vec![true; 10],
            runs,
            scales: Default::default(),
        }
    }

    #[test]
    fn lowest_score_wins_with_runner_up_and_margin() {
        let bt = bt_with(&[("naive", 80.0), ("theta", 95.0), ("ets-auto", 110.0)]);
        let s = select(&bt, &mape(), None, None, "naive", false);
        assert_eq!(s.chosen, "theta"); // MAPE 5% vs 10% and 20%
        assert_eq!(s.runner_up.as_ref().unwrap().0, "ets-auto");
        assert!((s.margin_pct.unwrap() - 100.0).abs() < 1e-9);
        assert!(s.reason.contains("lowest MAPE"), "{}", s.reason);
        assert!(
            s.reason.contains("bias -5.0% (under-forecast)"),
            "{}",
            s.reason
        );
    }

    #[test]
    fn near_tie_prefers_simpler() {
        let bt = bt_with(&[("holt-winters-additive", 99.5), ("naive", 99.3)]);
        // MAPE 0.5% vs 0.7%: a 40% gap, not a near-tie...
        let s = select(&bt, &mape(), None, None, "naive", false);
        assert_eq!(s.chosen, "holt-winters-additive");
        // ...and not even with a 50% margin: without a default to keep,
        // near-ties are capped at NEAR_TIE (10%).
        let wide = SelectSettings {
            tie_margin: 0.5,
            score: Score::Mape,
            ..SelectSettings::default()
        };
        let s = select(&bt, &wide, None, None, "naive", false);
        assert_eq!(s.chosen, "holt-winters-additive");
        // MAPE 0.50% vs 0.54%: within 10%, the simpler model wins.
        let bt = bt_with(&[("holt-winters-additive", 99.5), ("naive", 99.46)]);
        let s = select(&bt, &wide, None, None, "naive", false);
        assert_eq!(s.chosen, "naive");
        assert!(
            s.reason.contains("simpler model is preferred"),
            "{}",
            s.reason
        );
    }

    #[test]
    fn pinned_model_reports_both() {
        let bt = bt_with(&[("naive", 80.0), ("theta", 95.0)]);
        let s = select(&bt, &mape(), None, Some("naive"), "naive", false);
        assert_eq!(s.chosen, "naive");
        assert_eq!(s.best, "theta");
        assert!(s.pinned);
        assert!(
            s.reason
                .starts_with("pinned by the user; the backtest's choice would be theta"),
            "{}",
            s.reason
        );
        // The runner-up is never the model used: here the backtest's own
        // choice, theta (MAPE 5%), against the pinned naive (20%): -75%.
        assert_eq!(s.runner_up.as_ref().unwrap().0, "theta");
        assert!((s.margin_pct.unwrap() + 75.0).abs() < 1e-9);
        // Pinned to the third of three: the runner-up is the best.
        let bt = bt_with(&[("naive", 80.0), ("theta", 95.0), ("ets-auto", 110.0)]);
        let s = select(&bt, &mape(), None, Some("naive"), "naive", false);
        assert_eq!(s.runner_up.as_ref().unwrap().0, "theta");
    }

    #[test]
    fn many_zeros_fall_back_to_wape() {
        let mut bt = bt_with(&[("naive", 1.0), ("croston", 2.0)]);
        for t in 6..10 {
            if t % 2 == 0 {
                bt.actual[t] = 0.0;
            }
        }
        let s = select(&bt, &mape(), None, None, "naive", false);
        assert_eq!(s.score, Score::Wape);
        assert!(
            s.reason.contains("WAPE used instead of MAPE"),
            "{}",
            s.reason
        );
    }

    #[test]
    fn nothing_backtested_uses_fallback() {
        let bt = Backtest {
            origins: vec![],
            horizon: 12,
            actual: vec![1.0; 5],
            scorable: vec![true; 5],
            runs: vec![],
            scales: Default::default(),
        };
        let s = select(&bt, &mape(), None, None, "moving-average-3", false);
        assert!(!s.backtested);
        assert_eq!(s.chosen, "moving-average-3");
        assert!(s.reason.starts_with("not backtested"));
    }

    /// A backtest of 12 origins × 1 month on a series cycling 100, 110,
    /// ..., 140 (so the MASE scale is not zero): each model forecasts
    /// `f(origin)`.
    fn bt_origins(models: &[(&str, &dyn Fn(usize) -> f64)]) -> Backtest {
        let actual: Vec<f64> = (0..40).map(truth_at).collect();
        let origins: Vec<usize> = (27..39).collect();
        let runs = models
            .iter()
            .map(|(name, f)| ModelRun {
                model: name.to_string(),
                status: RunStatus::Complete,
                forecasts: origins.iter().map(|&o| Some(flat(f(o), 1))).collect(),
                members: Vec::new(),
            })
            .collect();
        Backtest {
            origins,
            horizon: 1,
            actual,
            scorable: vec![true; 40],
            runs,
            scales: Default::default(),
        }
    }

    fn truth_at(t: usize) -> f64 {
        100.0 + 10.0 * (t % 5) as f64
    }

    /// The actual one month after origin `o`.
    fn truth(o: usize) -> f64 {
        truth_at(o + 1)
    }

    #[test]
    fn sign_test_tail_probabilities() {
        // Binomial(12, 1/2) upper tails (textbook arithmetic):
        // P(W ≥ 9) = (220 + 66 + 12 + 1) / 4096, P(W ≥ 10) = 79 / 4096.
        assert!((sign_test_p(9, 12) - 299.0 / 4096.0).abs() < 1e-12);
        assert!((sign_test_p(10, 12) - 79.0 / 4096.0).abs() < 1e-12);
        assert_eq!(sign_test_p(0, 12), 1.0);
        assert_eq!(sign_test_p(0, 0), 1.0);
    }

    #[test]
    fn the_default_is_kept_without_clear_evidence() {
        // The challenger is much better at 6 origins and worse at the other
        // 6: lower MASE overall, but only 6 of 12 wins (p = 0.61).
        let good = |o: usize| truth(o) + 1.0;
        let mixed = |o: usize| if o % 4 < 2 { truth(o) } else { truth(o) + 1.5 };
        let bt = bt_origins(&[(COMBINATION, &good), ("theta", &mixed)]);
        let combo = bt.scores(bt.run(COMBINATION).unwrap()).mase.unwrap();
        let theta = bt.scores(bt.run("theta").unwrap()).mase.unwrap();
        assert!(theta < combo * 0.9, "{theta} {combo}");
        let s = select(&bt, &margin10(), Some(COMBINATION), None, "naive", false);
        assert_eq!(s.chosen, COMBINATION);
        assert_eq!(s.runner_up.as_ref().unwrap().0, "theta");
        assert!(s.margin_pct.unwrap() < 0.0, "the runner-up scored better");
        assert!(s.reason.contains("6 of 12 origins"), "{}", s.reason);
        assert!(s.reason.contains("kept because"), "{}", s.reason);
    }

    #[test]
    fn a_clearly_better_model_replaces_the_default() {
        let off = |o: usize| truth(o) + 5.0;
        let close = |o: usize| truth(o) + 1.0;
        let bt = bt_origins(&[(COMBINATION, &off), ("theta", &close)]);
        let s = select(&bt, &margin10(), Some(COMBINATION), None, "naive", false);
        assert_eq!(s.chosen, "theta");
        assert!(s.reason.contains("12 of 12 origins"), "{}", s.reason);
        assert_eq!(s.runner_up.as_ref().unwrap().0, COMBINATION);
        // Better at every origin but within the margin: the default stays.
        let near = |o: usize| truth(o) + 4.8;
        let bt = bt_origins(&[(COMBINATION, &off), ("theta", &near)]);
        let s = select(&bt, &margin10(), Some(COMBINATION), None, "naive", false);
        assert_eq!(s.chosen, COMBINATION);
        assert!(s.reason.contains("within the 10% margin"), "{}", s.reason);
    }

    #[test]
    fn intermittent_demand_is_scored_by_rmsse() {
        let bt = bt_origins(&[("croston-sba", &|_| 110.0), ("naive", &|o| truth(o))]);
        let s = select(
            &bt,
            &SelectSettings::default(),
            Some("croston-sba"),
            None,
            "naive",
            true,
        );
        assert_eq!(s.score, Score::Rmsse);
        assert!(s.reason.contains("RMSSE instead of MASE"), "{}", s.reason);
    }
}
