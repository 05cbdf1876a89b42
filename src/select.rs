//! Choosing a model per product from its backtest, with the evidence.
//!
//! The model with the lowest backtest score wins (MAPE by default). When
//! more than a third of the scored actuals are zero, MAPE is undefined for
//! too many months and WAPE is used instead, and the reason says so. Scores
//! within `tie_margin` of the best are near-ties: the combination is
//! preferred among them, then the simplest model (see [`complexity`]),
//! because picking by a few backtest windows is noisy and simpler models
//! and combinations generalise better.

use crate::backtest::{Backtest, RunStatus, Scores, COMBINATION};
use crate::error::{Error, Result};
use crate::metrics::Score;

/// Selection settings as given.
///
/// | setting | default | range |
/// |---|---|---|
/// | `score` | MAPE | MAPE, WAPE, MASE, RMSE |
/// | `tie_margin` | 0.02 | 0–0.5: relative gap counted as a near-tie |
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SelectSettings {
    /// Score to minimise.
    pub score: Score,
    /// Relative gap to the best score within which models count as tied.
    pub tie_margin: f64,
}

impl Default for SelectSettings {
    fn default() -> Self {
        SelectSettings {
            score: Score::Mape,
            tie_margin: 0.10,
        }
    }
}

impl SelectSettings {
    /// Validates the settings.
    pub fn check(self) -> Result<Self> {
        if !(0.0..=0.5).contains(&self.tie_margin) {
            return Err(Error::setting(
                "tie-margin",
                format!("must be between 0 and 0.5, got {}", self.tie_margin),
            ));
        }
        Ok(self)
    }
}

/// Share of zero actuals above which selection falls back to WAPE.
pub const ZERO_SHARE_FOR_WAPE: f64 = 1.0 / 3.0;

/// Number of estimated quantities a model family has, used to break
/// near-ties toward the simpler model (smaller is simpler).
pub fn complexity(model: &str) -> usize {
    match model {
        m if m.starts_with("moving-average") => 0,
        "naive" | "seasonal-naive" => 0,
        COMBINATION => 0,
        "croston" | "croston-sba" | "ets-simple" => 2,
        "tsb" => 3,
        "theta" | "ets-holt" => 3,
        "ets-damped" | "ets-auto" => 5,
        "mstl-ets" => 6,
        m if m.starts_with("holt-winters") => 16,
        _ => 10,
    }
}

/// The choice for one product.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Selection {
    /// Model used for the projection (the pinned one, when pinned).
    pub chosen: String,
    /// Model the selection procedure picks (best score, near-ties broken).
    pub best: String,
    /// Whether the user pinned the model.
    pub pinned: bool,
    /// Score the choice was made by.
    pub score: Score,
    /// Scores of the chosen model (`None` when not backtested).
    pub chosen_scores: Option<Scores>,
    /// Runner-up and its score.
    pub runner_up: Option<(String, f64)>,
    /// Runner-up's score above the chosen one, in percent of the chosen.
    pub margin_pct: Option<f64>,
    /// Whether the product could be backtested at all.
    pub backtested: bool,
    /// Plain-words reason.
    pub reason: String,
}

fn fmt_score(score: Score, v: f64) -> String {
    match score {
        Score::Mape | Score::Wape => format!("{v:.1}%"),
        Score::Mase => format!("{v:.3}"),
        Score::Rmse => format!("{v:.1}"),
    }
}

/// Chooses a model from a backtest. `pinned` names a model the user wants;
/// `fallback` is the model to use when nothing could be backtested.
pub fn select(
    bt: &Backtest,
    settings: &SelectSettings,
    pinned: Option<&str>,
    fallback: &str,
) -> Selection {
    // Zero share of the scored actuals (same months for every model).
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
    let mut score = settings.score;
    let mut note = String::new();
    if score == Score::Mape && zero_share > ZERO_SHARE_FOR_WAPE {
        score = Score::Wape;
        note = format!(
            "; WAPE used instead of MAPE because {:.0}% of the backtest months are zero",
            zero_share * 100.0
        );
    }
    let mut ranked: Vec<(String, f64, Scores)> = bt
        .runs
        .iter()
        .filter(|r| r.status == RunStatus::Complete)
        .filter_map(|r| {
            let s = bt.scores(r);
            s.get(score).map(|v| (r.model.clone(), v, s))
        })
        .collect();
    ranked.sort_by(|a, b| a.1.total_cmp(&b.1));
    let Some(best) = ranked.first().cloned() else {
        let chosen = pinned.unwrap_or(fallback).to_string();
        return Selection {
            chosen: chosen.clone(),
            best: fallback.to_string(),
            pinned: pinned.is_some(),
            score,
            chosen_scores: None,
            runner_up: None,
            margin_pct: None,
            backtested: false,
            reason: format!(
                "not backtested: the history is too short for a backtest origin with {} months after it; the simplest applicable model is used",
                bt.horizon
            ),
        };
    };
    let limit = best.1 * (1.0 + settings.tie_margin) + 1e-12;
    let tied: Vec<&(String, f64, Scores)> = ranked.iter().filter(|r| r.1 <= limit).collect();
    let pick = tied
        .iter()
        .find(|r| r.0 == COMBINATION)
        .or_else(|| tied.iter().min_by_key(|r| complexity(&r.0)))
        .copied()
        .unwrap_or(&best);
    let runner = ranked
        .iter()
        .find(|r| r.0 != pick.0)
        .map(|r| (r.0.clone(), r.1));
    let n_points = pick.2.n;
    let mut reason = if pick.0 == best.0 {
        format!(
            "lowest {} over {} origins × {} months ({n_points} forecasts): {}",
            score.name(),
            bt.origins.len(),
            bt.horizon,
            fmt_score(score, pick.1)
        )
    } else {
        format!(
            "{} {} is within {:.0}% of the best ({} {}); the {} is preferred in a near-tie",
            score.name(),
            fmt_score(score, pick.1),
            settings.tie_margin * 100.0,
            best.0,
            fmt_score(score, best.1),
            if pick.0 == COMBINATION {
                "combination"
            } else {
                "simpler model"
            }
        )
    };
    if let Some((name, v)) = &runner {
        reason.push_str(&format!("; runner-up {name} {}", fmt_score(score, *v)));
    }
    if let Some(b) = pick.2.bias {
        reason.push_str(&format!(
            "; bias {b:+.1}% ({})",
            if b >= 0.0 {
                "over-forecast"
            } else {
                "under-forecast"
            }
        ));
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
        }
        sel.pinned = true;
    }
    sel
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::backtest::{BacktestSettings, ModelRun};
    use crate::models::Forecast;

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
        }
    }

    #[test]
    fn lowest_score_wins_with_runner_up_and_margin() {
        let bt = bt_with(&[("naive", 80.0), ("theta", 95.0), ("ets-auto", 110.0)]);
        let s = select(&bt, &SelectSettings::default(), None, "naive");
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
        // MAPE 0.5% vs 0.7%: not a near-tie at 2% relative...
        let s = select(&bt, &SelectSettings::default(), None, "naive");
        assert_eq!(s.chosen, "holt-winters-additive");
        // ...but it is with a generous margin.
        let s = select(
            &bt,
            &SelectSettings {
                tie_margin: 0.5,
                ..Default::default()
            },
            None,
            "naive",
        );
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
        let s = select(&bt, &SelectSettings::default(), Some("naive"), "naive");
        assert_eq!(s.chosen, "naive");
        assert_eq!(s.best, "theta");
        assert!(s.pinned);
        assert!(
            s.reason
                .starts_with("pinned by the user; the backtest's choice would be theta"),
            "{}",
            s.reason
        );
    }

    #[test]
    fn many_zeros_fall_back_to_wape() {
        let mut bt = bt_with(&[("naive", 1.0), ("croston", 2.0)]);
        for t in 6..10 {
            if t % 2 == 0 {
                bt.actual[t] = 0.0;
            }
        }
        let s = select(&bt, &SelectSettings::default(), None, "naive");
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
        };
        let s = select(&bt, &SelectSettings::default(), None, "moving-average-3");
        assert!(!s.backtested);
        assert_eq!(s.chosen, "moving-average-3");
        assert!(s.reason.starts_with("not backtested"));
    }
}
