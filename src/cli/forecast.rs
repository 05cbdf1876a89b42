//! `provisio forecast DATA --out DIR` (the main job) and `provisio backtest DATA`.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::Context;
use clap::{Args, ValueEnum};

use super::{load, load_until, print_accounting, CleanArgs, ReadArgs};
use provisio::backtest::BacktestSettings;
use provisio::calendar::YearMonth;
use provisio::metrics::Score;
use provisio::output;
use provisio::pipeline::{forecast_all, ForecastSettings, ProductForecast};
use provisio::select::SelectSettings;

#[derive(ValueEnum, Debug, Clone, Copy)]
enum ScoreArg {
    Mape,
    Wape,
    Mase,
    Rmse,
}

#[derive(ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
enum DetailArg {
    Chosen,
    All,
}

/// Options of the evaluation, shared by `forecast` and `backtest`.
#[derive(Args, Debug, Clone)]
pub struct EvalArgs {
    /// Number of rolling backtest origins (K).
    #[arg(long, default_value_t = 12, value_name = "K")]
    origins: usize,
    /// Months forecast at each backtest origin (H).
    #[arg(long, default_value_t = 12, value_name = "H")]
    backtest_horizon: usize,
    /// Score models also on months that are mostly imputed (default: leave them out).
    #[arg(long)]
    score_imputed: bool,
    /// Score to choose models by (falls back to WAPE when over a third of months are zero).
    #[arg(long, value_enum, default_value_t = ScoreArg::Mape)]
    select_by: ScoreArg,
    /// Relative gap to the best score counted as a near-tie (then the simpler model or the combination wins).
    #[arg(long, default_value_t = 0.10, value_name = "SHARE")]
    tie_margin: f64,
    /// Backtest forecasts written to backtest.csv: `chosen` (chosen model, runner-up, combination) or `all` models.
    #[arg(long, value_enum, default_value_t = DetailArg::Chosen)]
    backtest_detail: DetailArg,
    /// CSV of pinned models: columns product, model.
    #[arg(long, value_name = "FILE")]
    pin: Option<PathBuf>,
}

#[derive(Args, Debug)]
pub struct ForecastArgs {
    /// Input data: a CSV, or a workbook (.xlsx, .xlsm, .xls, .ods; see --sheet), long format: product, month, consumed, optional stockout_days, reporting_rate, site.
    data: PathBuf,
    /// Directory for the outputs (created if needed).
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// Write into DIR even if it holds files provisio did not write.
    #[arg(long)]
    overwrite: bool,
    /// Months to project (1-60).
    #[arg(long, default_value_t = 24, value_name = "MONTHS")]
    horizon: usize,
    /// Use only rows dated up to this month (YYYY-MM), as if forecasting then; for `review` later.
    #[arg(long, value_name = "YYYY-MM", value_parser = parse_month)]
    until: Option<YearMonth>,
    /// Skip the charts and report.html (for thousands of products; `provisio report DIR` builds them later).
    #[arg(long)]
    no_report: bool,
    /// Skip the planner's workbook forecast.xlsx (`provisio report DIR` builds it later).
    #[arg(long)]
    no_workbook: bool,
    #[command(flatten)]
    eval: EvalArgs,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    clean: CleanArgs,
}

#[derive(Args, Debug)]
pub struct BacktestArgs {
    /// Input data: a CSV or a workbook (.xlsx, .xlsm, .xls, .ods), long format.
    data: PathBuf,
    /// Also write scores.csv and backtest.csv to this directory.
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
    /// Write into DIR even if it holds files provisio did not write.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    eval: EvalArgs,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    clean: CleanArgs,
}

/// The time now in UTC, `2026-03-01T09:30:00Z`, for the manifest.
fn utc_now() -> Option<String> {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .ok()?
        .as_secs();
    let t = chrono::DateTime::from_timestamp(i64::try_from(secs).ok()?, 0)?;
    Some(t.format("%Y-%m-%dT%H:%M:%SZ").to_string())
}

fn parse_month(s: &str) -> Result<YearMonth, String> {
    YearMonth::parse(s)
}

fn settings(eval: &EvalArgs, horizon: usize) -> ForecastSettings {
    ForecastSettings {
        backtest: BacktestSettings {
            origins: eval.origins,
            horizon: eval.backtest_horizon,
            exclude_imputed: !eval.score_imputed,
        },
        select: SelectSettings {
            score: match eval.select_by {
                ScoreArg::Mape => Score::Mape,
                ScoreArg::Wape => Score::Wape,
                ScoreArg::Mase => Score::Mase,
                ScoreArg::Rmse => Score::Rmse,
            },
            tie_margin: eval.tie_margin,
        },
        horizon,
        backtest_detail: match eval.backtest_detail {
            DetailArg::Chosen => provisio::pipeline::BacktestDetail::Chosen,
            DetailArg::All => provisio::pipeline::BacktestDetail::All,
        },
    }
}

fn read_pins(path: &Path) -> anyhow::Result<HashMap<String, String>> {
    let mut r = csv::ReaderBuilder::new()
        .flexible(true)
        .from_path(path)
        .with_context(|| format!("{}: cannot read the pin file", path.display()))?;
    let headers: Vec<String> = r
        .headers()
        .with_context(|| format!("{}: cannot read the header", path.display()))?
        .iter()
        .map(|h| h.trim().to_lowercase())
        .collect();
    let col = |name: &str| {
        headers.iter().position(|h| h == name).ok_or_else(|| {
            anyhow::anyhow!(
                "{}:1: missing column '{name}'; the pin file needs columns product, model",
                path.display()
            )
        })
    };
    let (pc, mc) = (col("product")?, col("model")?);
    let names: Vec<String> = provisio::models::candidates()
        .iter()
        .map(|m| m.name())
        .collect();
    let mut pins = HashMap::new();
    for rec in r.records() {
        let rec = rec.with_context(|| format!("{}: cannot read a row", path.display()))?;
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        let product = rec.get(pc).unwrap_or("").trim().to_string();
        let model = rec.get(mc).unwrap_or("").trim().to_string();
        if model != provisio::backtest::COMBINATION && !names.contains(&model) {
            anyhow::bail!(
                "{}:{line}: column 'model': '{model}' is not a candidate model; valid: {}, combination",
                path.display(),
                names.join(", ")
            );
        }
        pins.insert(product, model);
    }
    Ok(pins)
}

/// What an evaluation run produced: data, cleaning, results, the settings
/// used and the seconds taken.
type EvalRun = (
    provisio::data::Dataset,
    provisio::clean::Cleaned,
    Vec<ProductForecast>,
    ForecastSettings,
    f64,
);

fn run_eval(
    data: &Path,
    read: &ReadArgs,
    clean: &CleanArgs,
    eval: &EvalArgs,
    horizon: usize,
    until: Option<YearMonth>,
) -> anyhow::Result<EvalRun> {
    let t0 = Instant::now();
    let fs = settings(eval, horizon);
    let checked = fs.clone().check()?;
    let pins = match &eval.pin {
        Some(p) => read_pins(p)?,
        None => HashMap::new(),
    };
    let (ds, cleaned) = load_until(data, read, clean, until)?;
    for p in pins.keys() {
        if !cleaned.series.iter().any(|s| &s.product == p) {
            eprintln!("warning: pinned product '{p}' is not in the data");
        }
    }
    let total = cleaned.series.len();
    // indicatif draws only on a terminal; hidden otherwise (and for tiny runs).
    let bar = if total >= 50 {
        indicatif::ProgressBar::new(total as u64)
    } else {
        indicatif::ProgressBar::hidden()
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "forecasting {bar:30} {pos}/{len} products ({eta} left)",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    let progress = || bar.inc(1);
    let results = forecast_all(&cleaned.series, &checked, &pins, &progress);
    bar.finish_and_clear();
    Ok((ds, cleaned, results, fs, t0.elapsed().as_secs_f64()))
}

fn print_summary(results: &[ProductForecast], horizon_shown: bool) {
    let w = results
        .iter()
        .map(|r| r.product.chars().count())
        .max()
        .unwrap_or(7)
        .clamp(7, 40);
    let cut = |s: &str| super::pad(&super::truncate(s, w), w);
    println!(
        "{}  {:<34} {:>8} {:>8} {:>10}{}",
        cut("product"),
        "chosen model",
        "score",
        "bias",
        "runner-up",
        if horizon_shown {
            "    next 12 months"
        } else {
            ""
        }
    );
    for r in results {
        let s = &r.selection;
        let sc = s.chosen_scores.as_ref().and_then(|x| x.get(s.score));
        let score = sc
            .map(|v| format!("{} {v:.1}", s.score.name()))
            .unwrap_or_else(|| "-".into());
        let bias = s
            .chosen_scores
            .as_ref()
            .and_then(|x| x.bias)
            .map(|b| format!("{b:+.1}%"))
            .unwrap_or_else(|| "-".into());
        let margin = s
            .margin_pct
            .map(|m| format!("{m:+.1}%"))
            .unwrap_or_else(|| "-".into());
        let next = r
            .projection
            .as_ref()
            .and_then(|p| p.totals.first())
            .map(|t| format!("{t:>18.0}"))
            .unwrap_or_else(|| format!("{:>18}", "-"));
        let mut chosen = s.chosen.clone();
        if s.pinned {
            chosen.push_str(" (pinned)");
        }
        if !s.backtested {
            chosen.push_str(" (not backtested)");
        }
        println!(
            "{}  {:<34} {:>8} {:>8} {:>10}{}",
            cut(&r.product),
            chosen,
            score,
            bias,
            margin,
            if horizon_shown { next } else { String::new() }
        );
    }
    println!("(score: backtest score of the chosen model on the cleaned series; bias > 0 = over-forecast; runner-up: its score above the chosen one; negative when the chosen model won a near-tie)");
    for r in results {
        for w in &r.warnings {
            eprintln!("warning: {w}");
        }
    }
}

pub fn run_forecast(a: ForecastArgs) -> anyhow::Result<()> {
    let out = output::OutputDir::check(&a.out, a.overwrite)?;
    let (ds, cleaned, results, fs, secs) =
        run_eval(&a.data, &a.read, &a.clean, &a.eval, a.horizon, a.until)?;
    out.prepare()?;
    let starts: Vec<_> = cleaned
        .series
        .iter()
        .map(|s| (s.product.clone(), s.start))
        .collect();
    output::write_forecast(&a.out.join("forecast.csv"), &results)?;
    output::write_forecast_wide(&a.out.join("forecast_wide.csv"), &results)?;
    output::write_selection(&a.out.join("selection.csv"), &results)?;
    output::write_scores(&a.out.join("scores.csv"), &results)?;
    output::write_scores_by_horizon(&a.out.join("scores_by_horizon.csv"), &results)?;
    output::write_backtest(&a.out.join("backtest.csv"), &results, &starts)?;
    let (by_rule, mut warnings) = super::write_clean_outputs(&a.out, &ds, &cleaned)?;
    warnings.extend(results.iter().flat_map(|r| r.warnings.iter().cloned()));
    let manifest = serde_json::json!({
        "tool": format!("provisio {}", env!("CARGO_PKG_VERSION")),
        "format_version": output::FORECAST_FORMAT_VERSION,
        "command": "forecast",
        "until": a.until.map(|m| m.to_string()),
        "date": utc_now(),
        "input": ds.source,
        "input_sha256": ds.input_sha256,
        "clean_settings": a.clean.settings(),
        "duplicates": format!("{:?}", a.read.options().duplicates).to_lowercase(),
        "numbers": a.read.options().numbers.name(),
        "encoding": a.read.options().encoding.name(),
        "sheet": ds.layout.sheet.as_ref().map(|s| s.name.clone()),
        "forecast_settings": fs,
        "pin_file": a.eval.pin.as_ref().map(|p| p.display().to_string()),
        "candidates": provisio::models::candidates().iter().map(|m| m.name()).collect::<Vec<_>>(),
        "scored_against": "cleaned series",
        "rows": cleaned.rows,
        "products": cleaned.series.len(),
        "products_unusable": cleaned.unusable.len(),
        "adjustments_by_rule": by_rule,
        "seconds": secs,
        "warnings": warnings,
    });
    output::write_json(&a.out.join("manifest.json"), &manifest)?;
    let report = if a.no_report {
        None
    } else {
        Some(provisio::report::write_report(&a.out)?)
    };
    print_accounting(&ds, &cleaned, 10);
    print_summary(&results, true);
    let products = results.len();
    // The workbook is built from the files just written; the results in
    // memory are no longer needed, and freeing them first keeps the peak
    // memory of large runs down.
    drop((ds, cleaned, results));
    let t_book = Instant::now();
    let workbook = if a.no_workbook {
        None
    } else {
        Some(provisio::report::workbook::write_workbook(&a.out)?)
    };
    let book_secs = t_book.elapsed().as_secs_f64();
    println!(
        "forecast {} product(s) for {} months in {:.1} s; wrote forecast.csv, forecast_wide.csv, selection.csv, scores.csv, scores_by_horizon.csv, backtest.csv, cleaned.csv, adjustments.csv, rejected.csv, quality.csv, manifest.json in {}",
        products,
        a.horizon,
        secs,
        a.out.display()
    );
    match workbook {
        Some(_) => println!("wrote forecast.xlsx (the planner's workbook) in {book_secs:.1} s"),
        None => println!(
            "no forecast.xlsx (--no-workbook); `provisio report {} --workbook-only` builds it",
            a.out.display()
        ),
    }
    match report {
        Some(r) => println!(
            "wrote report.html and {} chart files (charts/)",
            r.charts.len()
        ),
        None => println!(
            "no charts or report.html (--no-report); `provisio report {}` builds them",
            a.out.display()
        ),
    }
    println!("Decision support only: review with the responsible programme staff; national guidelines and local regulations take precedence.");
    Ok(())
}

pub fn run_backtest(a: BacktestArgs) -> anyhow::Result<()> {
    let out_dir = match &a.out {
        Some(out) => Some(output::OutputDir::check(out, a.overwrite)?),
        None => None,
    };
    let (ds, cleaned, results, _, secs) = run_eval(&a.data, &a.read, &a.clean, &a.eval, 12, None)?;
    print_accounting(&ds, &cleaned, 10);
    print_summary(&results, false);
    if let (Some(out), Some(dir)) = (&a.out, &out_dir) {
        dir.prepare()?;
        let starts: Vec<_> = cleaned
            .series
            .iter()
            .map(|s| (s.product.clone(), s.start))
            .collect();
        output::write_scores(&out.join("scores.csv"), &results)?;
        output::write_scores_by_horizon(&out.join("scores_by_horizon.csv"), &results)?;
        output::write_backtest(&out.join("backtest.csv"), &results, &starts)?;
        output::write_selection(&out.join("selection.csv"), &results)?;
        println!(
            "wrote scores.csv, scores_by_horizon.csv, backtest.csv, selection.csv in {}",
            out.display()
        );
    }
    println!(
        "backtest of {} product(s) in {secs:.1} s (scored against the cleaned series)",
        results.len()
    );
    Ok(())
}

#[derive(Args, Debug)]
pub struct EvaluateArgs {
    /// Input data: a CSV or a workbook (.xlsx, .xlsm, .xls, .ods), long format.
    data: PathBuf,
    /// Months hidden at the end of each series and forecast out of sample.
    #[arg(long, default_value_t = 12, value_name = "MONTHS")]
    holdout: usize,
    /// Also write the comparison as CSV.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    #[command(flatten)]
    eval: EvalArgs,
    #[command(flatten)]
    read: ReadArgs,
    #[command(flatten)]
    clean: CleanArgs,
}

/// Accuracy of one method across products on the hidden months.
struct Tally {
    name: String,
    products: usize,
    mape_sum: f64,
    mape_n: usize,
    abs_err: f64,
    actual: f64,
    signed: f64,
    mapes: Vec<f64>,
    mase_sum: f64,
    mase_n: usize,
}

impl Tally {
    fn new(name: &str) -> Self {
        Tally {
            name: name.to_string(),
            products: 0,
            mape_sum: 0.0,
            mape_n: 0,
            abs_err: 0.0,
            actual: 0.0,
            signed: 0.0,
            mapes: Vec::new(),
            mase_sum: 0.0,
            mase_n: 0,
        }
    }
    /// Adds one product: hidden actuals, forecasts, and the MASE scale of
    /// its training months.
    fn add(&mut self, a: &[f64], f: &[f64], scale: Option<f64>) {
        self.products += 1;
        if let (Some(m), _) = provisio::metrics::mape(a, f) {
            self.mape_sum += m;
            self.mape_n += 1;
            self.mapes.push(m);
        }
        if let Some(s) = scale {
            let mae =
                a.iter().zip(f).map(|(x, y)| (y - x).abs()).sum::<f64>() / a.len().max(1) as f64;
            self.mase_sum += mae / s;
            self.mase_n += 1;
        }
        for (x, y) in a.iter().zip(f) {
            self.abs_err += (y - x).abs();
            self.signed += y - x;
            self.actual += x;
        }
    }
    fn mape(&self) -> Option<f64> {
        (self.mape_n > 0).then(|| self.mape_sum / self.mape_n as f64)
    }
    fn median_mape(&self) -> Option<f64> {
        let mut v = self.mapes.clone();
        v.sort_by(f64::total_cmp);
        let n = v.len();
        (n > 0).then(|| {
            if n % 2 == 1 {
                v[n / 2]
            } else {
                0.5 * (v[n / 2 - 1] + v[n / 2])
            }
        })
    }
    fn mase(&self) -> Option<f64> {
        (self.mase_n > 0).then(|| self.mase_sum / self.mase_n as f64)
    }
    fn wape(&self) -> Option<f64> {
        (self.actual > 0.0).then(|| 100.0 * self.abs_err / self.actual)
    }
    fn bias(&self) -> Option<f64> {
        (self.actual > 0.0).then(|| 100.0 * self.signed / self.actual)
    }
}

pub fn run_evaluate(a: EvaluateArgs) -> anyhow::Result<()> {
    if a.holdout == 0 || a.holdout > provisio::project::MAX_HORIZON {
        anyhow::bail!(
            "--holdout must be 1-{}, got {}",
            provisio::project::MAX_HORIZON,
            a.holdout
        );
    }
    let fs = settings(&a.eval, a.holdout);
    let checked = fs.check()?;
    let (ds, cleaned) = load(&a.data, &a.read, &a.clean)?;
    let t0 = Instant::now();
    let results = provisio::pipeline::holdout_all(&cleaned.series, &checked, a.holdout);
    print_accounting(&ds, &cleaned, 5);
    if results.is_empty() {
        anyhow::bail!(
            "no product is longer than {} months (holdout + 24), so none can be evaluated",
            a.holdout + 24
        );
    }
    let mut selected = Tally::new("selected per product");
    let mut singles: Vec<Tally> = results[0]
        .single
        .iter()
        .map(|(n, _)| Tally::new(n))
        .collect();
    for r in &results {
        selected.add(&r.actual, &r.selected_forecast, r.scale);
        for (t, (_, f)) in singles.iter_mut().zip(&r.single) {
            if let Some(f) = f {
                t.add(&r.actual, f, r.scale);
            }
        }
    }
    let n = results.len();
    let mut all: Vec<&Tally> = singles.iter().filter(|t| t.products == n).collect();
    all.sort_by(|x, y| {
        x.mape()
            .unwrap_or(f64::MAX)
            .total_cmp(&y.mape().unwrap_or(f64::MAX))
    });
    let fmt = |v: Option<f64>| v.map(|x| format!("{x:.2}")).unwrap_or_else(|| "-".into());
    let fmt3 = |v: Option<f64>| v.map(|x| format!("{x:.3}")).unwrap_or_else(|| "-".into());
    println!(
        "out-of-sample check: last {} months of {n} product(s) hidden; selection ran on the rest",
        a.holdout
    );
    println!(
        "{:<36} {:>9} {:>10} {:>12} {:>10} {:>10} {:>9}",
        "method", "products", "mean MAPE", "median MAPE", "mean MASE", "WAPE", "bias"
    );
    let mut rows = vec![&selected];
    rows.extend(all.iter().copied());
    for t in &rows {
        println!(
            "{:<36} {:>9} {:>10} {:>12} {:>10} {:>10} {:>9}",
            t.name,
            t.products,
            fmt(t.mape()),
            fmt(t.median_mape()),
            fmt3(t.mase()),
            fmt(t.wape()),
            fmt(t.bias())
        );
    }
    if let Some(best) = all.first() {
        println!(
            "best single model applied to every product: {} (mean MAPE {}); selection: {}",
            best.name,
            fmt(best.mape()),
            fmt(selected.mape())
        );
    }
    let best_mase = all
        .iter()
        .filter_map(|t| t.mase().map(|m| (m, t)))
        .min_by(|x, y| x.0.total_cmp(&y.0));
    if let Some((m, t)) = best_mase {
        println!(
            "best single model by mean MASE: {} ({}); selection: {}",
            t.name,
            fmt3(Some(m)),
            fmt3(selected.mase())
        );
    }
    println!(
        "(models that did not apply to every product are left out of this table; {:.1} s)",
        t0.elapsed().as_secs_f64()
    );
    if let Some(path) = &a.csv {
        output::write_atomic(path, |w| {
            let mut c = csv::Writer::from_writer(w);
            let e = std::io::Error::other;
            c.write_record([
                "method",
                "products",
                "mean_mape_pct",
                "median_mape_pct",
                "mean_mase",
                "wape_pct",
                "bias_pct",
            ])
            .map_err(e)?;
            for t in std::iter::once(&selected).chain(singles.iter()) {
                c.write_record([
                    t.name.clone(),
                    t.products.to_string(),
                    fmt(t.mape()),
                    fmt(t.median_mape()),
                    fmt3(t.mase()),
                    fmt(t.wape()),
                    fmt(t.bias()),
                ])
                .map_err(e)?;
            }
            c.flush()
        })?;
    }
    Ok(())
}
