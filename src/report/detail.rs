//! The compact data of the report: one index row per product (what the
//! product list searches, filters and sorts) and one detail record per
//! product (what the report's script draws when the product is opened).
//!
//! Both are JSON written inside `<script type="application/json">`
//! elements, which the browser neither runs nor lays out, so a report of
//! 10,000 products shows its first view without building 10,000 charts.
//! Numbers the page shows as text are formatted here, with the same
//! functions the rest of the report uses; chart values are rounded to four
//! significant digits (far below a pixel).

use std::collections::BTreeMap;

use serde::Serialize;

use super::read::ProductResult;
use super::{
    adjusted_total, capitalise, chosen_score, pct, signed_pct, verdict_class, MAX_ADJUSTMENT_ROWS,
};
use crate::calendar::YearMonth;
use crate::chart;
use crate::clean::MonthStatus;

/// Index flags: bits of the last field of an index row.
pub mod flag {
    /// The product has warnings.
    pub const WARNINGS: u32 = 1;
    /// Its data quality is "not fit".
    pub const NOT_FIT: u32 = 2;
    /// Its chosen model's backtest bias is beyond ±20%.
    pub const LARGE_BIAS: u32 = 4;
    /// Its model is pinned.
    pub const PINNED: u32 = 8;
    /// It could not be backtested.
    pub const NOT_BACKTESTED: u32 = 16;
    /// It is on one of the "needs attention" lists.
    pub const ATTENTION: u32 = 32;
}

/// Backtest bias (%) beyond which a product is listed as largely biased
/// (common practice: ±20% is where planners start to question a forecast).
pub const LARGE_BIAS_PCT: f64 = 20.0;

/// A value rounded to four significant digits, for chart data.
fn r4(v: f64) -> f64 {
    if v == 0.0 || !v.is_finite() {
        return if v.is_finite() { v } else { 0.0 };
    }
    let mag = v.abs().log10().floor() as i32;
    let scale = 10f64.powi(3 - mag);
    (v * scale).round() / scale
}

/// A quantity for the product table: whole units from 1,000 up, as the
/// terminal and the detail card show it (four significant digits would put
/// a national total 40,000 units away from the same figure elsewhere), four
/// significant digits below.
fn whole(v: Option<f64>) -> Option<f64> {
    v.filter(|x| x.is_finite())
        .map(|x| if x.abs() >= 1000.0 { x.round() } else { r4(x) })
}

fn r4o(v: Option<f64>) -> Option<f64> {
    v.filter(|x| x.is_finite()).map(r4)
}

/// A chart value, written without a fraction when it has none ("4793",
/// not "4793.0"): the chart data is most of a large report.
#[derive(Clone, Copy)]
struct Q(f64);

impl Serialize for Q {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        if self.0.fract() == 0.0 && self.0.abs() < 1e15 {
            s.serialize_i64(self.0 as i64)
        } else {
            s.serialize_f64(self.0)
        }
    }
}

fn q4(v: f64) -> Q {
    Q(r4(v))
}

fn q4o(v: Option<f64>) -> Option<Q> {
    r4o(v).map(Q)
}

/// Adjustment rows in the detail of a product in a run of more than
/// [`super::ALL_DETAILS_UP_TO`] products: the latest ones (the whole log is
/// in `adjustments.csv`).
pub const LARGE_RUN_ADJUSTMENT_ROWS: usize = 12;

/// The flags of one product (see [`flag`]); `attention` comes from the
/// report's lists.
pub fn flags(p: &ProductResult, attention: bool) -> u32 {
    let mut f = 0;
    if !p.warnings.is_empty() {
        f |= flag::WARNINGS;
    }
    if p.quality.as_ref().is_some_and(|q| q.verdict == "not fit") {
        f |= flag::NOT_FIT;
    }
    if p.selection
        .scores
        .bias
        .is_some_and(|b| b.abs() > LARGE_BIAS_PCT)
    {
        f |= flag::LARGE_BIAS;
    }
    if p.selection.pinned {
        f |= flag::PINNED;
    }
    if !p.selection.backtested {
        f |= flag::NOT_BACKTESTED;
    }
    if attention {
        f |= flag::ATTENTION;
    }
    f
}

/// One row of the product index: name, anchor stem, verdict class, verdict,
/// chosen model, MAPE, bias, next-12-month total (statistical), AMC last
/// and next 12 months, flags, and the adjusted next-12-month total (known
/// changes applied; null for a product no change touched).
#[derive(Serialize)]
pub struct IndexRow<'a>(
    &'a str,
    &'a str,
    &'static str,
    &'a str,
    &'a str,
    Option<f64>,
    Option<f64>,
    Option<f64>,
    Option<f64>,
    Option<f64>,
    u32,
    Option<f64>,
);

/// The index row of one product.
pub fn index_row<'a>(p: &'a ProductResult, stem: &'a str, attention: bool) -> IndexRow<'a> {
    let s = &p.selection;
    let verdict = p.quality.as_ref().map(|q| q.verdict.as_str()).unwrap_or("");
    let two = |v: Option<f64>| {
        v.filter(|x| x.is_finite())
            .map(|x| (x * 100.0).round() / 100.0)
    };
    IndexRow(
        &p.product,
        stem,
        verdict_class(p.quality.as_ref().map(|q| q.verdict.as_str())),
        verdict,
        &s.chosen,
        two(s.scores.mape),
        two(s.scores.bias),
        whole(s.total_1_12),
        whole(s.amc_last_12),
        whole(s.amc_next_12),
        flags(p, attention),
        whole(adjusted_total(p, 0, 12)),
    )
}

/// What the script needs to draw one product's chart: months as offsets
/// from `y`/`m` (the first history month), values rounded.
#[derive(Serialize)]
struct ChartData {
    /// Year and month of offset 0.
    y: i32,
    m: u32,
    /// Reported and cleaned values per history month (null: none).
    rep: Vec<Option<Q>>,
    cl: Vec<Option<Q>>,
    /// Status per history month: r reported (or changed no more than the
    /// product's usual), a changed by cleaning beyond the usual
    /// ([`chart::changed_by_cleaning`]), p partly filled, i imputed.
    st: String,
    /// Offsets of flagged outliers.
    out: Vec<usize>,
    /// Offset of the first projected month, and the projection with its
    /// 80% and 95% bounds.
    p0: i64,
    p: Vec<Q>,
    l80: Vec<Option<Q>>,
    u80: Vec<Option<Q>>,
    l95: Vec<Option<Q>>,
    u95: Vec<Option<Q>>,
    /// Backtest paths: origin offset, then (offset, forecast) pairs flat.
    bt: Vec<(i64, Vec<Q>)>,
    /// Model of the backtest paths.
    btm: String,
    /// Legend label of the projection.
    pl: String,
    /// The adjusted forecast (known changes applied) as (offset, value)
    /// pairs; left out for a product no change touched.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    a: Vec<(i64, Q)>,
}

fn chart_data(p: &ProductResult) -> ChartData {
    let pl = format!("projection ({})", p.selection.chosen);
    let Some(first) = p
        .history
        .first()
        .map(|h| h.month)
        .or_else(|| p.projection.first().map(|x| x.month))
    else {
        // No month at all: an empty chart.
        return ChartData {
            y: 2000,
            m: 1,
            rep: Vec::new(),
            cl: Vec::new(),
            st: String::new(),
            out: Vec::new(),
            p0: 0,
            p: Vec::new(),
            l80: Vec::new(),
            u80: Vec::new(),
            l95: Vec::new(),
            u95: Vec::new(),
            bt: Vec::new(),
            btm: String::new(),
            pl,
            a: Vec::new(),
        };
    };
    let off = |m: YearMonth| first.months_until(m);
    let last_h = p.history.last().map(|h| off(h.month)).unwrap_or(-1);
    let n = usize::try_from(last_h + 1).unwrap_or(0);
    let mut rep = vec![None; n];
    let mut cl = vec![None; n];
    let mut st = vec![b'r'; n];
    let mut out = Vec::new();
    let changed = chart::changed_by_cleaning(&p.history);
    for (h, changed) in p.history.iter().zip(changed) {
        let Ok(i) = usize::try_from(off(h.month)) else {
            continue;
        };
        if i >= n {
            continue;
        }
        rep[i] = q4o(h.reported);
        cl[i] = q4o(h.cleaned);
        st[i] = match h.status {
            MonthStatus::Reported => b'r',
            // Only a month changed beyond the product's usual gets the dot.
            MonthStatus::Adjusted if changed => b'a',
            MonthStatus::Adjusted => b'r',
            MonthStatus::PartlyFilled => b'p',
            MonthStatus::Imputed => b'i',
        };
        if h.outlier {
            out.push(i);
        }
    }
    let p0 = p
        .projection
        .first()
        .map(|x| off(x.month))
        .unwrap_or(n as i64);
    let lo = |r: Option<(f64, f64)>| q4o(r.map(|x| x.0));
    let hi = |r: Option<(f64, f64)>| q4o(r.map(|x| x.1));
    let bt = p
        .backtest
        .as_ref()
        .map(|b| {
            b.paths
                .iter()
                .map(|path| {
                    let flat = path
                        .points
                        .iter()
                        .flat_map(|(m, v)| [Q(off(*m) as f64), q4(*v)])
                        .collect();
                    (off(path.origin), flat)
                })
                .collect()
        })
        .unwrap_or_default();
    ChartData {
        y: first.year(),
        m: first.month(),
        rep,
        cl,
        st: String::from_utf8(st).unwrap_or_default(),
        out,
        p0,
        p: p.projection.iter().map(|x| q4(x.point)).collect(),
        l80: p.projection.iter().map(|x| lo(x.range80)).collect(),
        u80: p.projection.iter().map(|x| hi(x.range80)).collect(),
        l95: p.projection.iter().map(|x| lo(x.range95)).collect(),
        u95: p.projection.iter().map(|x| hi(x.range95)).collect(),
        bt,
        btm: p
            .backtest
            .as_ref()
            .map(|b| b.model.clone())
            .unwrap_or_default(),
        pl,
        a: p.adjusted.iter().map(|(m, v)| (off(*m), q4(*v))).collect(),
    }
}

/// Everything the product's detail shows, as text ready to display (the
/// script puts it in the page with `textContent`, never as markup).
#[derive(Serialize)]
struct Detail<'a> {
    name: &'a str,
    verdict: &'a str,
    vc: &'static str,
    chosen: &'a str,
    members: &'a str,
    pinned: bool,
    best: &'a str,
    reason: String,
    subtitle: String,
    keys: Vec<(String, String)>,
    by: &'a str,
    /// Score table rows: model, status, MAPE, bias, WAPE, MASE, RMSE, in
    /// 80%, in 95%, forecasts, note.
    scores: Vec<[String; 12]>,
    quality: Option<(String, &'a [String])>,
    adj_total: usize,
    adj_counts: String,
    /// Adjustment rows: month, site, rule, before, after, reason, line.
    adj: Vec<[String; 7]>,
    /// The rows listed are the latest (not the first) of the log.
    adj_latest: bool,
    warnings: &'a [String],
    /// Chart image files written for this product (PNG, SVG), when asked.
    files: bool,
    /// The unit its quantities are counted in, plural ("tests"; "base
    /// units" when none is configured).
    units: String,
    chart: ChartData,
}

/// What scaling for incomplete reporting added to a product's history:
/// Σ(after − before) of its `reporting-scaled` log entries ÷ its reported
/// volume. `None` when nothing was scaled or nothing was reported.
pub fn reporting_uplift(p: &ProductResult) -> Option<f64> {
    let reported: f64 = p.history.iter().filter_map(|h| h.reported).sum();
    let mut any = false;
    let added: f64 = p
        .adjustments
        .iter()
        .filter(|a| a.rule == "reporting-scaled")
        .filter_map(|a| Some(a.after? - a.before?))
        .inspect(|_| any = true)
        .sum();
    (any && reported > 0.0).then(|| added / reported)
}

fn dash() -> String {
    "–".to_string()
}

/// The key numbers of the projection: the 12- and 24-month totals (beside
/// them the adjusted ones, when a known change touched the product) and
/// the AMC.
fn total_keys(p: &ProductResult) -> Vec<(String, String)> {
    let s = &p.selection;
    let q = |v: Option<f64>| v.map(chart::fmt_quantity).unwrap_or_else(dash);
    let changed = !p.adjusted.is_empty();
    let kind = if changed {
        "statistical, "
    } else {
        "projected, "
    };
    let mut keys = vec![(q(s.total_1_12), format!("{kind}next 12 months"))];
    if changed {
        keys.push((
            q(adjusted_total(p, 0, 12)),
            "adjusted for known changes, next 12 months".to_string(),
        ));
    }
    keys.push((q(s.total_13_24), format!("{kind}months 13–24")));
    if changed {
        keys.push((
            q(adjusted_total(p, 12, 24)),
            "adjusted for known changes, months 13–24".to_string(),
        ));
    }
    keys.push((
        match (s.amc_last_12, s.amc_next_12) {
            (Some(a), Some(n)) => {
                format!("{} → {}", chart::fmt_quantity(a), chart::fmt_quantity(n))
            }
            _ => dash(),
        },
        if changed {
            "AMC: last 12 → next 12 (statistical)".to_string()
        } else {
            "AMC: last 12 → next 12".to_string()
        },
    ));
    keys
}

/// Whether the selection reason says the backtest's own choice (which a
/// pin overrode) was clearly better than the default: it departed from the
/// default only on the margin and the sign test ([`crate::select`]), and
/// the reason records that as "clearly better than".
fn best_was_clearly_better(s: &super::Selection) -> bool {
    s.reason.starts_with(&format!(
        "pinned by the user; the backtest's choice would be {} (clearly better than",
        s.best
    ))
}

/// The key numbers of the backtest: the chosen (or pinned) model's score,
/// its bias, and the runner-up against it.
fn score_keys(s: &super::Selection) -> Vec<(String, String)> {
    let mut keys = Vec::new();
    match chosen_score(s) {
        Some((name, v)) if s.pinned => {
            keys.push((v, format!("backtest {name} of the pinned model")))
        }
        Some((name, v)) => keys.push((v, format!("backtest {name} (chosen by)"))),
        None => keys.push((dash(), "backtest score".to_string())),
    }
    keys.push((
        s.scores.bias.map(signed_pct).unwrap_or_else(dash),
        "bias (> 0 over-forecast)".to_string(),
    ));
    let label = if s.pinned {
        runner_up_of_pinned(s)
    } else {
        "runner-up: its score against the chosen (below 0: it scored better, without clear evidence; see the reason)".to_string()
    };
    keys.push((
        s.margin
            .map(|v| format!("{} {}", s.runner_up, signed_pct(v)))
            .unwrap_or_else(dash),
        label,
    ));
    keys
}

/// The runner-up's label for a pinned model: the runner-up is the best
/// other model, and it may well score better than the pinned one.
fn runner_up_of_pinned(s: &super::Selection) -> String {
    let head = "runner-up: its score against the pinned model";
    match s.margin {
        Some(m) if m < 0.0 => {
            let how = if s.runner_up == s.best && best_was_clearly_better(s) {
                "it scored better; the backtest found it clearly better than the default and would choose it"
            } else if s.runner_up == s.best {
                "it scored better; the backtest would choose it"
            } else {
                "it scored better"
            };
            format!(
                "{head} (below 0: {how}; the model is used because it was pinned; see the reason)"
            )
        }
        Some(_) => format!("{head} (0 or above: it did not score better)"),
        None => head.to_string(),
    }
}

/// The detail record of one product, as JSON safe to put inside a
/// `<script type="application/json">` element. A `large_run` lists only
/// the latest [`LARGE_RUN_ADJUSTMENT_ROWS`] adjustments, a small one the
/// first [`MAX_ADJUSTMENT_ROWS`].
pub fn detail_json(p: &ProductResult, chart_files: bool, large_run: bool) -> String {
    let s = &p.selection;
    let mut keys = total_keys(p);
    keys.extend(score_keys(s));
    if let Some(u) = reporting_uplift(p) {
        keys.push((
            format!("{}%", chart::fmt_signed(100.0 * u)),
            "added for incomplete reporting (reporting-rate scaling, share of the reported volume)"
                .to_string(),
        ));
    }
    let quality = p.quality.as_ref().map(|q| {
        (
            format!(
                "{} months covered, {} reported, {} missing; {} with stockouts; mean reporting rate {}%; {} site(s).",
                q.months,
                q.months_reported,
                q.months_missing,
                q.months_with_stockouts,
                if q.mean_reporting_rate.is_empty() { "–" } else { &q.mean_reporting_rate },
                q.sites
            ),
            q.reasons.as_slice(),
        )
    });
    let mut by_rule: BTreeMap<&str, usize> = BTreeMap::new();
    for a in &p.adjustments {
        *by_rule.entry(a.rule.as_str()).or_default() += 1;
    }
    let adj_counts = by_rule
        .iter()
        .map(|(r, n)| format!("{n} {r}"))
        .collect::<Vec<_>>()
        .join(", ");
    let q = |v: Option<f64>| v.map(chart::fmt_quantity).unwrap_or_default();
    let shown = if large_run {
        let n = p.adjustments.len();
        &p.adjustments[n.saturating_sub(LARGE_RUN_ADJUSTMENT_ROWS)..]
    } else {
        &p.adjustments[..p.adjustments.len().min(MAX_ADJUSTMENT_ROWS)]
    };
    let adj = shown
        .iter()
        .map(|a| {
            [
                a.month.clone(),
                a.site.clone(),
                a.rule.clone(),
                q(a.before),
                q(a.after),
                a.reason.clone(),
                a.line.clone(),
            ]
        })
        .collect();
    let d = Detail {
        name: &p.product,
        verdict: p.quality.as_ref().map(|q| q.verdict.as_str()).unwrap_or(""),
        vc: verdict_class(p.quality.as_ref().map(|q| q.verdict.as_str())),
        chosen: &s.chosen,
        members: &s.members,
        pinned: s.pinned,
        best: &s.best,
        reason: capitalise(&s.reason),
        subtitle: super::subtitle(p),
        keys,
        by: &s.selected_by,
        scores: score_rows(p),
        quality,
        adj_total: p.adjustments.len(),
        adj_counts,
        adj,
        adj_latest: large_run,
        warnings: &p.warnings,
        files: chart_files,
        units: crate::chart::units_plural(p.units.as_deref()),
        chart: chart_data(p),
    };
    safe_json(&serde_json::to_string(&d).unwrap_or_else(|_| "null".into()))
}

/// JSON text made safe inside a `<script>` element: `<`, `>` and `&` as
/// `\u` escapes, so no text from the data can close the element.
pub fn safe_json(json: &str) -> String {
    let mut out = String::with_capacity(json.len() + 16);
    for c in json.chars() {
        match c {
            '<' => out.push_str("\\u003c"),
            '>' => out.push_str("\\u003e"),
            '&' => out.push_str("\\u0026"),
            '\u{2028}' => out.push_str("\\u2028"),
            '\u{2029}' => out.push_str("\\u2029"),
            c => out.push(c),
        }
    }
    out
}

/// The candidate models' scores as display text, ordered by the score the
/// choice was made by (models without it last).
fn score_rows(p: &ProductResult) -> Vec<[String; 12]> {
    let by = p.selection.selected_by.to_lowercase();
    let pick = |r: &super::ScoreRow| match by.as_str() {
        "wape" => r.scores.wape,
        "mase" => r.scores.mase,
        "rmse" => r.scores.rmse,
        "rmsse" => r.scores.rmsse,
        _ => r.scores.mape,
    };
    let mut rows: Vec<&super::ScoreRow> = p.scores.iter().collect();
    rows.sort_by(|a, b| match (pick(a), pick(b)) {
        (Some(x), Some(y)) => x.total_cmp(&y),
        (Some(_), None) => std::cmp::Ordering::Less,
        (None, Some(_)) => std::cmp::Ordering::Greater,
        (None, None) => a.model.cmp(&b.model),
    });
    let o = |v: Option<f64>, f: &dyn Fn(f64) -> String| v.map(f).unwrap_or_default();
    rows.into_iter()
        .map(|r| {
            let f = &r.scores;
            [
                r.model.clone(),
                r.status.clone(),
                o(f.mape, &pct),
                o(f.bias, &signed_pct),
                o(f.wape, &pct),
                o(f.mase, &|v| format!("{v:.2}")),
                o(f.rmse, &|v| {
                    if v.abs() < 100.0 {
                        format!("{v:.1}")
                    } else {
                        chart::fmt_quantity(v)
                    }
                }),
                o(f.rmsse, &|v| format!("{v:.2}")),
                o(f.coverage80, &|v| format!("{v:.0}%")),
                o(f.coverage95, &|v| format!("{v:.0}%")),
                o(r.points, &|v| format!("{v:.0}")),
                r.note.clone(),
            ]
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn four_significant_digits() {
        assert_eq!(r4(123456.0), 123500.0);
        assert_eq!(r4(0.012345), 0.01235);
        assert_eq!(r4(-98.765), -98.77);
        assert_eq!(r4(0.0), 0.0);
        assert_eq!(r4(f64::NAN), 0.0);
    }

    /// A pinned model's runner-up is called clearly better only when the
    /// selection reason (as `crate::select` words it) says the backtest's
    /// own choice cleared the margin and the sign test.
    #[test]
    fn pinned_runner_up_is_clearly_better_only_when_the_reason_says_so() {
        let mut s = crate::report::Selection {
            pinned: true,
            chosen: "naive".into(),
            best: "ets-damped".into(),
            runner_up: "ets-damped".into(),
            margin: Some(-79.1),
            selected_by: "MASE".into(),
            reason: "pinned by the user; the backtest's choice would be ets-damped (clearly better than the default, a fixed combination (combination 0.114): MASE 0.039 is 66% lower and better at 12 of 12 origins (sign test p < 0.001)); pinned model MASE 0.187".into(),
            ..Default::default()
        };
        s.scores.mase = Some(0.187);
        let label = |s: &crate::report::Selection| score_keys(s)[2].1.clone();
        assert!(label(&s).contains("clearly better"), "{}", label(&s));
        assert!(!label(&s).contains("without clear evidence"));
        assert_eq!(score_keys(&s)[0].1, "backtest MASE of the pinned model");
        // The backtest kept the default: the runner-up scored better than
        // the pinned model, but nothing says clearly.
        s.best = "combination".into();
        s.runner_up = "theta".into();
        s.reason = "pinned by the user; the backtest's choice would be combination (the default, a fixed combination: MASE 0.66 over 12 origins × 12 months (144 forecasts); kept because the best other model, theta (0.677), is not better)".into();
        assert!(label(&s).contains("it scored better"), "{}", label(&s));
        assert!(!label(&s).contains("clearly"), "{}", label(&s));
        // Not pinned: the choice's own wording.
        s.pinned = false;
        assert!(label(&s).contains("without clear evidence"));
        assert_eq!(score_keys(&s)[0].1, "backtest MASE (chosen by)");
    }

    #[test]
    fn json_cannot_close_its_script_element() {
        let s = safe_json(r#"{"n":"</script><b>&"}"#);
        assert!(!s.contains('<') && !s.contains('>') && !s.contains('&'));
        let back: serde_json::Value = serde_json::from_str(&s).unwrap();
        assert_eq!(back["n"], "</script><b>&");
    }
}
