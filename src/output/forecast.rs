//! The tables written by `forecast`.

use std::path::Path;

use super::{csv_text, fmt_num, fmt_opt, write_atomic};
use crate::backtest::{RunStatus, Scores};
use crate::error::Result;
use crate::pipeline::ProductForecast;

/// Version of the layout of a `forecast` output directory (file names,
/// columns, manifest keys) as `review` reads it; written into the manifest
/// as `format_version`. Raise it when a change would make an older
/// directory be read wrongly.
pub const FORECAST_FORMAT_VERSION: u32 = 1;

fn io_err(e: csv::Error) -> std::io::Error {
    std::io::Error::other(e)
}

/// Units of one product, from the run configuration: written at the end
/// of each `forecast.csv` row.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Units {
    /// Base unit the quantities are counted in.
    pub units: Option<String>,
    /// Base units per pack; the forecast in packs is forecast ÷ pack size.
    pub pack_size: Option<f64>,
}

/// `forecast.csv`: product, month, model, forecast, lower/upper 80, lower/upper 95,
/// units, pack size, packs, and `bridged` (`yes` for a month between the
/// product's last month and the common projection start, else `no`).
pub fn write_forecast(path: &Path, results: &[ProductForecast]) -> Result<()> {
    write_forecast_units(path, results, &std::collections::HashMap::new())
}

/// [`write_forecast`] with three more columns at the end: `units`,
/// `pack_size` and `packs` (the forecast ÷ pack size, not rounded), empty
/// for products without them.
pub fn write_forecast_units(
    path: &Path,
    results: &[ProductForecast],
    units: &std::collections::HashMap<String, Units>,
) -> Result<()> {
    let none = Units::default();
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        c.write_record([
            "product",
            "month",
            "model",
            "forecast",
            "lower_80",
            "upper_80",
            "lower_95",
            "upper_95",
            "units",
            "pack_size",
            "packs",
            "bridged",
        ])
        .map_err(io_err)?;
        for r in results {
            let Some(p) = &r.projection else { continue };
            let u = units.get(&r.product).unwrap_or(&none);
            let unit = u.units.as_deref().unwrap_or("");
            let pack = u.pack_size.map(fmt_num).unwrap_or_default();
            let i80 = p.forecast.interval(0.80);
            let i95 = p.forecast.interval(0.95);
            for (k, v) in p.forecast.point.iter().enumerate() {
                let b = |i: Option<&crate::models::Interval>, lower: bool| {
                    i.map(|i| fmt_num(if lower { i.lower[k] } else { i.upper[k] }))
                        .unwrap_or_default()
                };
                let packs = u.pack_size.map(|s| fmt_num(v / s)).unwrap_or_default();
                c.write_record([
                    &*csv_text(&r.product),
                    &p.start.plus(k as i64).to_string(),
                    p.model.as_str(),
                    &fmt_num(*v),
                    &b(i80, true),
                    &b(i80, false),
                    &b(i95, true),
                    &b(i95, false),
                    unit,
                    &pack,
                    &packs,
                    if p.is_bridged(k) { "yes" } else { "no" },
                ])
                .map_err(io_err)?;
            }
        }
        c.flush()
    })
}

/// `forecast_wide.csv`: the same numbers as `forecast.csv` laid out wide,
/// products as rows and months as columns: five rows per product (`row`:
/// forecast, lower_80, upper_80, lower_95, upper_95), then `bridged`: how
/// many of the product's first months are bridged (forecast between its
/// last month and the common projection start). A month a product has no
/// projection for is empty.
pub fn write_forecast_wide(path: &Path, results: &[ProductForecast]) -> Result<()> {
    let mut months: Vec<crate::calendar::YearMonth> = results
        .iter()
        .filter_map(|r| r.projection.as_ref())
        .flat_map(|p| (0..p.forecast.point.len()).map(|k| p.start.plus(k as i64)))
        .collect();
    months.sort();
    months.dedup();
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        let mut header = vec![
            "product".to_string(),
            "model".into(),
            "row".into(),
            "bridged".into(),
        ];
        header.extend(months.iter().map(|m| m.to_string()));
        c.write_record(&header).map_err(io_err)?;
        for r in results {
            let Some(p) = &r.projection else { continue };
            let i80 = p.forecast.interval(0.80);
            let i95 = p.forecast.interval(0.95);
            let rows: [(&str, Option<&[f64]>); 5] = [
                ("forecast", Some(&p.forecast.point[..])),
                ("lower_80", i80.map(|i| &i.lower[..])),
                ("upper_80", i80.map(|i| &i.upper[..])),
                ("lower_95", i95.map(|i| &i.lower[..])),
                ("upper_95", i95.map(|i| &i.upper[..])),
            ];
            for (label, values) in rows {
                let mut rec = vec![
                    csv_text(&r.product).into_owned(),
                    p.model.clone(),
                    label.to_string(),
                    p.bridged.to_string(),
                ];
                rec.extend(months.iter().map(|m| {
                    let k = p.start.months_until(*m);
                    values
                        .filter(|_| k >= 0)
                        .and_then(|v| v.get(k as usize))
                        .map(|x| fmt_num(*x))
                        .unwrap_or_default()
                }));
                c.write_record(&rec).map_err(io_err)?;
            }
        }
        c.flush()
    })
}

fn score_cells(s: Option<&Scores>) -> Vec<String> {
    match s {
        None => vec![String::new(); 10],
        Some(s) => vec![
            s.n.to_string(),
            fmt_opt(s.mape),
            s.zero_actuals.to_string(),
            fmt_opt(s.bias),
            fmt_opt(s.wape),
            fmt_opt(s.mase),
            fmt_opt(s.rmse),
            fmt_opt(s.rmsse),
            fmt_opt(s.coverage80),
            fmt_opt(s.coverage95),
        ],
    }
}

const SCORE_HEADER: [&str; 10] = [
    "points",
    "mape_pct",
    "zero_actuals",
    "bias_pct",
    "wape_pct",
    "mase",
    "rmse",
    "rmsse",
    "coverage_80_pct",
    "coverage_95_pct",
];

/// `selection.csv`: one row per product with the choice and its evidence.
pub fn write_selection(path: &Path, results: &[ProductForecast]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        let mut header = vec![
            "product",
            "chosen_model",
            "members",
            "pinned",
            "best_model",
            "selected_by",
        ];
        header.extend(SCORE_HEADER);
        header.extend([
            "runner_up",
            "runner_up_score",
            "margin_pct",
            "backtested",
            "amc_last_12",
            "amc_next_12",
            "total_months_1_12",
            "total_months_13_24",
            "reason",
            "ranges",
            "warnings",
        ]);
        c.write_record(&header).map_err(io_err)?;
        for r in results {
            let s = &r.selection;
            let p = r.projection.as_ref();
            let mut row = vec![
                csv_text(&r.product).into_owned(),
                s.chosen.clone(),
                p.map(|p| crate::weights::members_text(&p.members))
                    .unwrap_or_default(),
                if s.pinned { "yes" } else { "no" }.to_string(),
                s.best.clone(),
                s.score.name().to_string(),
            ];
            row.extend(score_cells(s.chosen_scores.as_ref()));
            row.push(
                s.runner_up
                    .as_ref()
                    .map(|r| r.0.clone())
                    .unwrap_or_default(),
            );
            row.push(fmt_opt(s.runner_up.as_ref().map(|r| r.1)));
            row.push(fmt_opt(s.margin_pct));
            row.push(if s.backtested { "yes" } else { "no" }.to_string());
            row.push(fmt_opt(p.map(|p| p.amc_last)));
            row.push(fmt_opt(p.map(|p| p.amc_next)));
            row.push(fmt_opt(p.and_then(|p| p.totals.first().copied())));
            row.push(fmt_opt(p.and_then(|p| p.totals.get(1).copied())));
            row.push(s.reason.clone());
            row.push(r.ranges.describe());
            // The product's forecast warnings, without the product name
            // each carries for the terminal.
            let prefix = format!("product '{}': ", r.product);
            let warnings: Vec<&str> = r
                .warnings
                .iter()
                .map(|w| w.strip_prefix(&prefix).unwrap_or(w))
                .collect();
            row.push(csv_text(&warnings.join(" | ")).into_owned());
            c.write_record(&row).map_err(io_err)?;
        }
        c.flush()
    })
}

/// `scores.csv`: product × model backtest scores (overall), with status.
pub fn write_scores(path: &Path, results: &[ProductForecast]) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        let mut header = vec!["product", "model", "status"];
        header.extend(SCORE_HEADER);
        header.push("note");
        c.write_record(&header).map_err(io_err)?;
        for r in results {
            for ms in &r.scores {
                let (status, note) = status_note(&ms.status);
                let mut row = vec![
                    csv_text(&r.product).into_owned(),
                    ms.model.clone(),
                    status.to_string(),
                ];
                row.extend(score_cells(ms.overall.as_ref()));
                row.push(note);
                c.write_record(&row).map_err(io_err)?;
            }
        }
        c.flush()
    })
}

fn status_note(status: &RunStatus) -> (&'static str, String) {
    match status {
        RunStatus::Complete => ("complete", String::new()),
        RunStatus::NotApplicable(why) => ("not applicable", why.clone()),
        RunStatus::Incomplete { failed, first } => {
            ("incomplete", format!("{failed} origin(s) missing: {first}"))
        }
    }
}

/// Which models' rows `backtest.csv` and `scores_by_horizon.csv` hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum EvidenceRows {
    /// The chosen model only (what the report draws; compact).
    #[default]
    Chosen,
    /// The chosen model, the runner-up and the combination.
    Compared,
    /// Every model (the results must keep every model's backtest, see
    /// [`crate::pipeline::BacktestDetail`]).
    All,
}

impl EvidenceRows {
    fn keeps(self, r: &ProductForecast, model: &str) -> bool {
        match self {
            EvidenceRows::Chosen => r.selection.chosen == model,
            EvidenceRows::Compared => {
                r.selection.chosen == model
                    || model == crate::backtest::COMBINATION
                    || r.selection.runner_up.as_ref().is_some_and(|x| x.0 == model)
            }
            EvidenceRows::All => true,
        }
    }
}

/// `scores_by_horizon.csv`: product × model × months ahead, every score,
/// for the models that forecast at some origin (all of them, or the chosen
/// one: `rows`).
pub fn write_scores_by_horizon(
    path: &Path,
    results: &[ProductForecast],
    rows: EvidenceRows,
) -> Result<()> {
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        let mut header = vec!["product", "model", "horizon"];
        header.extend(SCORE_HEADER);
        c.write_record(&header).map_err(io_err)?;
        for r in results {
            for ms in r.scores.iter().filter(|ms| rows.keeps(r, &ms.model)) {
                for (h, sc) in ms.by_horizon.iter().enumerate() {
                    let mut row = vec![
                        csv_text(&r.product).into_owned(),
                        ms.model.clone(),
                        (h + 1).to_string(),
                    ];
                    row.extend(score_cells(Some(sc)));
                    c.write_record(&row).map_err(io_err)?;
                }
            }
        }
        c.flush()
    })
}

/// `backtest.csv`: product, model, origin, horizon, month, actual, forecast,
/// interval bounds, scored; the models `rows` says.
pub fn write_backtest(
    path: &Path,
    results: &[ProductForecast],
    starts: &[(String, crate::calendar::YearMonth)],
    rows: EvidenceRows,
) -> Result<()> {
    use rayon::prelude::*;
    // Products formatted in parallel, a window at a time, and written in
    // their order: the file is the same as one written row by row, while
    // at most one window's text is held (the file runs to 150 MB at
    // 10,000 products).
    const WINDOW: usize = 1024;
    const CHUNK: usize = 64;
    let starts: std::collections::HashMap<&str, crate::calendar::YearMonth> =
        starts.iter().map(|(p, m)| (p.as_str(), *m)).collect();
    let format = |chunk: &[ProductForecast]| -> std::io::Result<Vec<u8>> {
        let mut c = csv::Writer::from_writer(Vec::new());
        for r in chunk {
            let Some(&start) = starts.get(r.product.as_str()) else {
                continue;
            };
            for run in r
                .backtest
                .runs
                .iter()
                .filter(|run| rows.keeps(r, &run.model))
            {
                for p in r.backtest.points(run) {
                    c.write_record([
                        &*csv_text(&r.product),
                        run.model.as_str(),
                        &start.plus(p.origin as i64).to_string(),
                        &p.horizon.to_string(),
                        &start.plus(p.target as i64).to_string(),
                        &fmt_num(p.actual),
                        &fmt_num(p.forecast),
                        &fmt_num(p.lower80),
                        &fmt_num(p.upper80),
                        &fmt_num(p.lower95),
                        &fmt_num(p.upper95),
                        if p.scored { "yes" } else { "no" },
                    ])
                    .map_err(io_err)?;
                }
            }
        }
        c.into_inner()
            .map_err(|e| std::io::Error::other(e.to_string()))
    };
    write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(&mut *w);
        c.write_record([
            "product", "model", "origin", "horizon", "month", "actual", "forecast", "lower_80",
            "upper_80", "lower_95", "upper_95", "scored",
        ])
        .map_err(io_err)?;
        c.flush()?;
        drop(c);
        for window in results.chunks(WINDOW) {
            let parts: Vec<std::io::Result<Vec<u8>>> =
                window.par_chunks(CHUNK).map(format).collect();
            for part in parts {
                w.write_all(&part?)?;
            }
        }
        Ok(())
    })
}

/// Writes any serialisable value as pretty JSON.
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<()> {
    write_atomic(path, |w| {
        serde_json::to_writer_pretty(&mut *w, value).map_err(std::io::Error::other)?;
        w.write_all(b"\n")
    })
}
