//! `provisio evaluate DATA --holdout H`: the out-of-sample check of the
//! whole procedure. The last H months of every series are hidden; cleaning,
//! backtest, selection and projection run on the rest; the selected
//! projection — and every single candidate, and the fixed combination,
//! applied to every product — are scored on the hidden months, which no
//! step saw. Also scores the ranges (calibrated and the models' own) and
//! whether products that carried a warning were in fact forecast worse.

use std::collections::HashMap;
use std::path::PathBuf;
use std::time::Instant;

use clap::Args;

use super::forecast::{apply_shared, product_options, read_pins, settings, EvalArgs, LoadedConfig};
use super::{print_accounting, say, CleanArgs, Given, ReadArgs};
use provisio::output;

#[derive(Args, Debug)]
pub struct EvaluateArgs {
    /// Input data: a CSV or a workbook (.xlsx, .xlsm, .xls, .ods), long format.
    data: PathBuf,
    /// Run configuration file (TOML); its input, cleaning, backtest and selection settings apply, options given here override it.
    #[arg(long, value_name = "FILE")]
    config: Option<PathBuf>,
    /// Months hidden at the end of each series and forecast out of sample.
    #[arg(long, default_value_t = 12, value_name = "MONTHS")]
    holdout: usize,
    /// Also write the comparison as CSV.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
    /// Also write one row per product: the model selected, its MASE on the hidden months, the fixed combination's and best-five-mean's, the warnings it carried, then every other candidate's MASE (`MODEL_mase`, blank where it did not apply).
    #[arg(long, value_name = "FILE")]
    per_product: Option<PathBuf>,
    /// Score the hidden months against the data's `true_demand` column (a CSV written by `provisio generate --true-demand`) instead of the cleaned consumption: product-months summed over sites; months where a site wrote no row or a blank true_demand are left out.
    #[arg(long)]
    truth: bool,
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

/// The first five product names quoted, then "…" when there are more.
fn first_named(products: &[&str]) -> String {
    let mut out: Vec<String> = products.iter().take(5).map(|p| format!("'{p}'")).collect();
    if products.len() > 5 {
        out.push("…".to_string());
    }
    out.join(", ")
}

pub fn run_evaluate(mut a: EvaluateArgs, given: &Given) -> anyhow::Result<()> {
    let config = LoadedConfig::load_opt(a.config.as_ref())?;
    if let Some(c) = &config {
        apply_shared(c, given, &mut a.read, &mut a.clean, &mut a.eval)?;
    }
    let mut inputs = vec![
        ("input", Some(a.data.as_path())),
        ("--config", a.config.as_deref()),
        ("--pin", a.eval.pin.as_deref()),
    ];
    inputs.extend(a.read.companion_files());
    super::refuse_same_file(
        &[
            ("--csv", a.csv.as_deref()),
            ("--per-product", a.per_product.as_deref()),
        ],
        &inputs,
    )?;
    if a.holdout == 0 || a.holdout > provisio::project::MAX_HORIZON {
        anyhow::bail!(
            "--holdout must be 1-{}, got {}",
            provisio::project::MAX_HORIZON,
            a.holdout
        );
    }
    let fs = settings(&a.eval, a.holdout);
    let checked = fs.check()?;
    let (mut ds, cleaned) = super::load(&a.data, &a.read, &a.clean)?;
    if a.truth {
        // The true demand column is used here, by the scoring.
        ds.warnings
            .retain(|w| !w.ends_with("extra columns kept in the file but not used: true_demand"));
    }
    // Read before the run, so a file without the column is refused at once.
    let truth = a.truth.then(|| read_truth(&a.data)).transpose()?;
    let t0 = Instant::now();
    let pins = match &a.eval.pin {
        Some(p) => read_pins(p)?,
        None => HashMap::new(),
    };
    let options = product_options(config.as_ref(), pins, given.cli("pin"));
    // The hidden months are left out before cleaning: each product's
    // history is cleaned from its rows up to the month before its last
    // `holdout` months, so no fill, outlier flag or adjustment of the
    // history the selection sees used a hidden month. (The whole file,
    // cleaned, gives the hidden months' actuals.)
    let cuts: HashMap<String, provisio::calendar::YearMonth> = cleaned
        .series
        .iter()
        .filter(|s| s.len() > a.holdout)
        .map(|s| (s.product.to_string(), s.month(s.len() - a.holdout - 1)))
        .collect();
    let train: HashMap<String, provisio::clean::CleanSeries> =
        super::load_cut(&a.data, &a.read, &a.clean, &cuts)?
            .series
            .into_iter()
            .map(|s| (s.product.to_string(), s))
            .collect();
    let (mut results, default_choice) = provisio::pipeline::holdout_run(
        &cleaned.series,
        &checked,
        a.holdout,
        &options,
        Some(&train),
    );
    // Long enough, but its cleaned history stops before the hidden months
    // (its last rows before them are missing): named, not evaluated.
    let stopped: Vec<&str> = cleaned
        .series
        .iter()
        .filter(|s| s.len() > a.holdout + 24)
        .filter(|s| provisio::pipeline::training_history(s, a.holdout, &train).is_none())
        .map(|s| &*s.product)
        .collect();
    // Too short to hide the months and keep 24 for the backtest: named.
    let short: Vec<&str> = cleaned
        .series
        .iter()
        .filter(|s| s.len() <= a.holdout + 24)
        .map(|s| &*s.product)
        .collect();
    if !short.is_empty() && short.len() < cleaned.series.len() {
        super::warn(&format!(
            "{} product(s) not evaluated: {} months of history are needed (--holdout {} + 24 for the backtest): {}",
            short.len(),
            a.holdout + 25,
            a.holdout,
            first_named(&short)
        ));
    }
    if !stopped.is_empty() {
        super::warn(&format!(
            "{} product(s) not evaluated: cleaned without the hidden months, their history does not reach the month before them (no row there), so the forecast would not start where the hidden months do: {}",
            stopped.len(),
            first_named(&stopped)
        ));
    }
    if let Some(truth) = &truth {
        let left_out = score_against_truth(&mut results, &cleaned.series, truth, a.holdout);
        say!(
            "scored against the true demand in {}{}",
            a.data.display(),
            if left_out > 0 {
                format!(" ({left_out} hidden product-month(s) left out: a site wrote no row or no true demand)")
            } else {
                String::new()
            }
        );
    }
    print_accounting(&ds, &cleaned, 5);
    if results.is_empty() {
        let longest = cleaned
            .series
            .iter()
            .map(|s| s.values.len())
            .max()
            .unwrap_or(0);
        let fits = longest.saturating_sub(25);
        let hint = if fits >= 1 {
            format!("; the longest has {longest} months: use --holdout {fits} or less")
        } else {
            format!("; the longest has {longest} months, too few to hide any")
        };
        anyhow::bail!(
            "no product is longer than {} months (holdout + 24), so none can be evaluated{hint}",
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
    say!(
        "out-of-sample check: last {} months of {n} product(s) hidden; selection ran on the rest",
        a.holdout
    );
    say!(
        "default for smooth and erratic demand: {}",
        default_choice.reason
    );
    say!(
        "{:<36} {:>9} {:>10} {:>12} {:>10} {:>10} {:>9}",
        "method",
        "products",
        "mean MAPE",
        "median MAPE",
        "mean MASE",
        "WAPE",
        "bias"
    );
    let mut rows = vec![&selected];
    rows.extend(all.iter().copied());
    for t in &rows {
        say!(
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
    // The pool of each product's best five and the run's weighted mean are
    // rules over the candidates, learned on the run's backtest, not single
    // models: the comparison lines leave them out.
    let singles_only: Vec<&Tally> = all
        .iter()
        .copied()
        .filter(|t| {
            t.name != provisio::default_rule::BEST_MEAN
                && t.name != provisio::weights::WEIGHTED_MEAN
        })
        .collect();
    if let Some(best) = singles_only.first() {
        say!(
            "best single model applied to every product: {} (mean MAPE {}); selection: {}",
            best.name,
            fmt(best.mape()),
            fmt(selected.mape())
        );
    }
    let best_mase = singles_only
        .iter()
        .filter_map(|t| t.mase().map(|m| (m, t)))
        .min_by(|x, y| x.0.total_cmp(&y.0));
    if let Some((m, t)) = best_mase {
        say!(
            "best single model by mean MASE: {} ({}); selection: {}",
            t.name,
            fmt3(Some(m)),
            fmt3(selected.mase())
        );
    }
    // MASE is undefined where the history's seasonal-naive error is zero
    // (a constant or all-zero series): the mean is over the others.
    if selected.mase_n < selected.products {
        say!(
            "(mean MASE is over {} of the {} products: the others' history has no seasonal-naive error to scale by, a constant or all-zero series)",
            selected.mase_n,
            selected.products
        );
    }
    say!(
        "(models that did not apply to every product are left out of this table; {:.1} s)",
        t0.elapsed().as_secs_f64()
    );
    let ranges = range_tallies(&results);
    print_ranges(&ranges);
    let warned = warning_tallies(&results);
    print_warnings(&warned, n);
    super::json_summary(|| {
        let row = |t: &Tally| {
            serde_json::json!({
                "method": t.name,
                "products": t.products,
                "mean_mape_pct": t.mape(),
                "median_mape_pct": t.median_mape(),
                "mean_mase": t.mase(),
                "mase_products": t.mase_n,
                "wape_pct": t.wape(),
                "bias_pct": t.bias(),
            })
        };
        serde_json::json!({
            "command": "evaluate",
            "input": ds.source,
            "holdout": a.holdout,
            "products": n,
            "default": default_choice,
            // Every method, as the --csv file has them; `products` says how
            // many products each applied to.
            "methods": std::iter::once(&selected)
                .chain(singles.iter())
                .map(row)
                .collect::<Vec<_>>(),
            "ranges": ranges.iter().map(|r| serde_json::json!({
                "ranges": r.name,
                "inside_80_pct": r.inside(0),
                "inside_95_pct": r.inside(1),
                "msis_95": r.msis(),
            })).collect::<Vec<_>>(),
            "warnings": warned.iter().map(|w| serde_json::json!({
                "warning": w.kind,
                "products": w.tally.products,
                "mean_mase": w.tally.mase(),
                "others_mean_mase": w.others.mase(),
            })).collect::<Vec<_>>(),
        })
    });
    if let Some(path) = &a.per_product {
        write_per_product(path, &results)?;
    }
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

/// Coverage and interval score of one kind of range on the hidden months.
struct RangeTally {
    name: &'static str,
    inside: [usize; 2],
    points: usize,
    msis_sum: f64,
    msis_n: usize,
}

impl RangeTally {
    fn new(name: &'static str) -> Self {
        RangeTally {
            name,
            inside: [0, 0],
            points: 0,
            msis_sum: 0.0,
            msis_n: 0,
        }
    }
    /// Adds one product's ranges against its hidden actuals.
    fn add(&mut self, a: &[f64], f: &provisio::models::Forecast, scale: Option<f64>) {
        let (Some(i80), Some(i95)) = (f.interval(0.80), f.interval(0.95)) else {
            return;
        };
        for (k, &y) in a.iter().enumerate() {
            self.points += 1;
            self.inside[0] += usize::from(y >= i80.lower[k] && y <= i80.upper[k]);
            self.inside[1] += usize::from(y >= i95.lower[k] && y <= i95.upper[k]);
        }
        if let Some(s) = scale {
            self.msis_sum += msis(a, &i95.lower, &i95.upper, 0.05) / s;
            self.msis_n += 1;
        }
    }
    fn inside(&self, level: usize) -> Option<f64> {
        (self.points > 0).then(|| 100.0 * self.inside[level] as f64 / self.points as f64)
    }
    fn msis(&self) -> Option<f64> {
        (self.msis_n > 0).then(|| self.msis_sum / self.msis_n as f64)
    }
}

/// Mean interval score of a (1 − alpha) range, unscaled (Gneiting &
/// Raftery, JASA 102(477), 2007; scaled by the MASE denominator it is the
/// MSIS of the M4 competition, Makridakis et al., IJF 36(1), 2020).
fn msis(a: &[f64], lower: &[f64], upper: &[f64], alpha: f64) -> f64 {
    let n = a.len().min(lower.len()).min(upper.len());
    let s: f64 = (0..n)
        .map(|k| {
            let (l, u, y) = (lower[k], upper[k], a[k]);
            (u - l) + 2.0 / alpha * ((l - y).max(0.0) + (y - u).max(0.0))
        })
        .sum();
    s / n.max(1) as f64
}

fn range_tallies(results: &[provisio::pipeline::HoldoutResult]) -> [RangeTally; 2] {
    let mut cal = RangeTally::new("calibrated on the backtest (default)");
    let mut own = RangeTally::new("the models' own intervals");
    for r in results {
        cal.add(&r.actual, &r.selected_ranges, r.scale);
        if let Some(m) = &r.model_ranges {
            own.add(&r.actual, m, r.scale);
        }
    }
    [cal, own]
}

fn print_ranges(ranges: &[RangeTally]) {
    let fmt = |v: Option<f64>| v.map(|x| format!("{x:.1}")).unwrap_or_else(|| "-".into());
    say!("ranges of the selected projection on the hidden months (share of actuals inside; MSIS at 95%, lower is better):");
    say!(
        "{:<40} {:>11} {:>11} {:>9}",
        "ranges",
        "inside 80%",
        "inside 95%",
        "MSIS 95%"
    );
    for r in ranges {
        say!(
            "{:<40} {:>11} {:>11} {:>9}",
            r.name,
            fmt(r.inside(0)),
            fmt(r.inside(1)),
            r.msis()
                .map(|x| format!("{x:.2}"))
                .unwrap_or_else(|| "-".into())
        );
    }
}

/// Accuracy of the products that carried one kind of warning, beside the
/// products that did not carry it.
struct WarningTally {
    kind: &'static str,
    tally: Tally,
    others: Tally,
}

/// The kind of a forecast warning, from its wording.
fn warning_kind(w: &str) -> &'static str {
    if w.contains("projected at zero") {
        "all-zero projection of a product in use"
    } else if w.contains("missed by") {
        "backtest WAPE above 100%"
    } else if w.contains("differ from the last 12") {
        "jump between history and projection"
    } else if w.contains("scale-up slowly") {
        "sustained scale-up followed slowly"
    } else if w.contains("range held only") {
        "ranges too narrow in the backtest"
    } else if w.contains("months of history") {
        "short history"
    } else {
        "other"
    }
}

fn warning_tallies(results: &[provisio::pipeline::HoldoutResult]) -> Vec<WarningTally> {
    let mut kinds: Vec<&'static str> = results
        .iter()
        .flat_map(|r| r.warnings.iter().map(|w| warning_kind(w)))
        .collect();
    kinds.sort_unstable();
    kinds.dedup();
    let mut out: Vec<WarningTally> = std::iter::once("any warning")
        .chain(kinds)
        .map(|kind| WarningTally {
            kind,
            tally: Tally::new(kind),
            others: Tally::new(kind),
        })
        .collect();
    for r in results {
        for w in out.iter_mut() {
            let has = if w.kind == "any warning" {
                !r.warnings.is_empty()
            } else {
                r.warnings.iter().any(|x| warning_kind(x) == w.kind)
            };
            let t = if has { &mut w.tally } else { &mut w.others };
            t.add(&r.actual, &r.selected_forecast, r.scale);
        }
    }
    out
}

fn print_warnings(warned: &[WarningTally], n: usize) {
    let fmt3 = |v: Option<f64>| v.map(|x| format!("{x:.3}")).unwrap_or_else(|| "-".into());
    if warned.iter().all(|w| w.tally.products == 0) {
        say!("no product carried a warning");
        return;
    }
    let fmt1 = |v: Option<f64>| v.map(|x| format!("{x:.1}")).unwrap_or_else(|| "-".into());
    say!("do warnings point at worse forecasts? mean MASE and bias (%) on the hidden months:");
    say!(
        "{:<42} {:>9} {:>10} {:>14} {:>7} {:>13}",
        "warning",
        "products",
        "mean MASE",
        "others' MASE",
        "bias",
        "others' bias"
    );
    for w in warned {
        say!(
            "{:<42} {:>9} {:>10} {:>14} {:>7} {:>13}",
            w.kind,
            format!("{}/{n}", w.tally.products),
            fmt3(w.tally.mase()),
            fmt3(w.others.mase()),
            fmt1(w.tally.bias()),
            fmt1(w.others.bias())
        );
    }
}

/// One row per product: what was selected and how it did on the hidden
/// months beside the fixed combination.
fn write_per_product(
    path: &std::path::Path,
    results: &[provisio::pipeline::HoldoutResult],
) -> anyhow::Result<()> {
    let mase = |a: &[f64], f: &[f64], s: Option<f64>| {
        s.and_then(|s| provisio::metrics::mase(a, f, s))
            .map(|v| format!("{v:.4}"))
            .unwrap_or_default()
    };
    // Every other candidate's MASE follows, a column each, in the order the
    // candidates were first met.
    let fixed = [
        provisio::backtest::COMBINATION,
        provisio::default_rule::BEST_MEAN,
    ];
    let mut others: Vec<&str> = Vec::new();
    for (name, _) in results.iter().flat_map(|r| r.single.iter()) {
        if !fixed.contains(&name.as_str()) && !others.contains(&name.as_str()) {
            others.push(name);
        }
    }
    output::write_atomic(path, |w| {
        let mut c = csv::Writer::from_writer(w);
        let e = std::io::Error::other;
        let mut header = vec![
            "product".to_string(),
            "selected".into(),
            "selected_mase".into(),
            "combination_mase".into(),
            "best_five_mean_mase".into(),
            "warnings".into(),
        ];
        header.extend(others.iter().map(|n| format!("{n}_mase")));
        c.write_record(&header).map_err(e)?;
        for r in results {
            let of = |name: &str| {
                r.single
                    .iter()
                    .find(|(n, _)| n == name)
                    .and_then(|(_, f)| f.as_ref())
                    .map(|f| mase(&r.actual, f, r.scale))
                    .unwrap_or_default()
            };
            let mut row = vec![
                output::csv_text(&r.product).into_owned(),
                r.selected.clone(),
                mase(&r.actual, &r.selected_forecast, r.scale),
                of(provisio::backtest::COMBINATION),
                of(provisio::default_rule::BEST_MEAN),
                r.warnings.join(" | "),
            ];
            row.extend(others.iter().map(|n| of(n)));
            c.write_record(&row).map_err(e)?;
        }
        c.flush()
    })?;
    Ok(())
}

/// True demand per product and month, summed over the rows (sites) that
/// carry it, and the number of sites each product has.
struct Truth {
    demand: HashMap<(String, String), (f64, usize)>,
    sites: HashMap<String, usize>,
}

/// Reads the `true_demand` column of a generated CSV.
fn read_truth(path: &std::path::Path) -> anyhow::Result<Truth> {
    let what = "`--truth` reads the `true_demand` column of a CSV written by `provisio generate --true-demand`";
    let mut r = csv::ReaderBuilder::new()
        .flexible(true)
        .from_path(path)
        .map_err(|e| anyhow::anyhow!("{}: cannot read: {e}; {what}", path.display()))?;
    let header = r
        .headers()
        .map_err(|e| anyhow::anyhow!("{}: line 1: {e}; {what}", path.display()))?
        .clone();
    let col = |name: &str| header.iter().position(|h| h.trim() == name);
    let (Some(pc), Some(mc), Some(tc)) = (col("product"), col("month"), col("true_demand")) else {
        anyhow::bail!(
            "{}: line 1: needs columns product, month and true_demand (has {}); {what}",
            path.display(),
            header.iter().collect::<Vec<_>>().join(", ")
        );
    };
    let sc = col("site");
    let mut demand: HashMap<(String, String), (f64, usize)> = HashMap::new();
    let mut sites: HashMap<String, std::collections::HashSet<String>> = HashMap::new();
    for (i, rec) in r.records().enumerate() {
        let line = i + 2;
        let rec = rec.map_err(|e| anyhow::anyhow!("{}: line {line}: {e}", path.display()))?;
        let field = |c: usize| rec.get(c).unwrap_or("").trim();
        let raw = field(tc);
        let product = field(pc).to_string();
        sites
            .entry(product.clone())
            .or_default()
            .insert(sc.map(|c| field(c).to_string()).unwrap_or_default());
        if raw.is_empty() {
            // Unknown: the product-month is left out of the scoring.
            continue;
        }
        let v: f64 = raw
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite() && *v >= 0.0)
            .ok_or_else(|| {
                anyhow::anyhow!(
                    "{}: line {line}, column {} (true_demand): '{}' is not a number of 0 or more (or blank when unknown)",
                    path.display(),
                    tc + 1,
                    raw
                )
            })?;
        let e = demand
            .entry((product, field(mc).to_string()))
            .or_insert((0.0, 0));
        e.0 += v;
        e.1 += 1;
    }
    Ok(Truth {
        demand,
        sites: sites.into_iter().map(|(p, s)| (p, s.len())).collect(),
    })
}

/// Replaces each result's hidden actuals by the true demand, leaving out
/// months whose truth is incomplete; returns how many were left out.
fn score_against_truth(
    results: &mut [provisio::pipeline::HoldoutResult],
    series: &[provisio::clean::CleanSeries],
    truth: &Truth,
    holdout: usize,
) -> usize {
    let by_name: HashMap<&str, &provisio::clean::CleanSeries> =
        series.iter().map(|s| (s.product.as_str(), s)).collect();
    let mut left_out = 0;
    for r in results.iter_mut() {
        let Some(s) = by_name.get(r.product.as_str()) else {
            continue;
        };
        let sites = truth.sites.get(&r.product).copied().unwrap_or(0);
        let n = s.len();
        let keep: Vec<bool> = (n - holdout..n)
            .map(|t| {
                let key = (r.product.clone(), s.month(t).to_string());
                truth
                    .demand
                    .get(&key)
                    .is_some_and(|&(_, rows)| sites > 0 && rows == sites)
            })
            .collect();
        for (k, t) in (n - holdout..n).enumerate() {
            if keep[k] {
                let key = (r.product.clone(), s.month(t).to_string());
                r.actual[k] = truth.demand[&key].0;
            }
        }
        left_out += keep.iter().filter(|k| !**k).count();
        r.retain_months(&keep);
    }
    left_out
}

#[cfg(test)]
mod tests {
    use super::msis;

    #[test]
    fn interval_score_by_hand() {
        // Interval score of Gneiting & Raftery (JASA 2007, eq. 43):
        // (u − l) + 2/α (l − y)⁺ + 2/α (y − u)⁺. A 95% range [10, 20]:
        // inside (y = 15) scores its width 10; 5 above or below scores
        // 10 + 40 × 5 = 210. Mean over the three: 430 / 3.
        let s = msis(&[15.0, 25.0, 5.0], &[10.0; 3], &[20.0; 3], 0.05);
        assert!((s - 430.0 / 3.0).abs() < 1e-12, "{s}");
    }
}
