//! `provisio forecast DATA --out DIR` (the main job) and `provisio backtest DATA`.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::Context;
use clap::{Args, ValueEnum};

use super::{
    enum_value, load_until, note, print_accounting, say, warn, CleanArgs, Given, ReadArgs,
};
use provisio::backtest::BacktestSettings;
use provisio::calendar::YearMonth;
use provisio::config::RunConfig;
use provisio::default_rule::DefaultRule;
use provisio::metrics::Score;
use provisio::output;
use provisio::pipeline::ProductOptions;
use provisio::pipeline::{forecast_run, ForecastSettings, ProductForecast};
use provisio::select::SelectSettings;

#[derive(ValueEnum, Debug, Clone, Copy)]
enum ScoreArg {
    Mape,
    Wape,
    Mase,
    Rmse,
    Rmsse,
}

#[derive(ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
enum DetailArg {
    Chosen,
    Compared,
    All,
}

impl DetailArg {
    /// The rows of backtest.csv and scores_by_horizon.csv.
    fn rows(self) -> output::EvidenceRows {
        match self {
            DetailArg::Chosen => output::EvidenceRows::Chosen,
            DetailArg::Compared => output::EvidenceRows::Compared,
            DetailArg::All => output::EvidenceRows::All,
        }
    }
}

/// How the run's default is set (see `provisio::default_rule`).
#[derive(ValueEnum, Debug, Clone, Copy)]
enum DefaultArg {
    /// Chosen for the run on its own backtest.
    Auto,
    /// The fixed combination of ets-auto, arima-auto and theta.
    Combination,
    /// The mean of each product's five best models by backtest.
    BestFiveMean,
    /// The run's weighted mean: weights learned across its products'
    /// backtests.
    WeightedMean,
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
    /// Score to choose models by (intermittent demand is always scored by RMSSE; MAPE falls back to WAPE when over a third of months are zero).
    #[arg(long, value_enum, default_value_t = ScoreArg::Mase)]
    select_by: ScoreArg,
    /// Relative gap by which another model must beat the default (the run's default, see --default-model; SBA for intermittent demand), besides winning at enough backtest origins.
    #[arg(long, default_value_t = 0.5, value_name = "SHARE")]
    tie_margin: f64,
    /// The default each product starts from (intermittent demand keeps SBA): the fixed combination, the mean of the product's five best models by backtest, the run's weighted mean (weights learned across its products' backtests; needs 30 products), or `auto`, chosen for the run by checking each out of sample: the best five chosen on a backtest a year earlier and scored on the months after it (or, with too little history, chosen on the backtest's earlier origins and scored on the later ones' unseen months) against the combination; then the weighted mean, its weights learned on the earlier origins, against the default so chosen on the later origins' unseen months.
    #[arg(long, value_enum, default_value_t = DefaultArg::Auto)]
    default_model: DefaultArg,
    /// Backtest forecasts written to backtest.csv and scores_by_horizon.csv: `chosen` model only, `compared` (chosen model, runner-up, combination) or `all` models.
    #[arg(long, value_enum, default_value_t = DetailArg::Chosen)]
    backtest_detail: DetailArg,
    /// CSV of pinned models: columns product, model.
    #[arg(long, value_name = "FILE")]
    pub(super) pin: Option<PathBuf>,
}

#[derive(Args, Debug)]
pub struct ForecastArgs {
    /// Input data: a CSV, or a workbook (.xlsx, .xlsm, .xls, .ods; see --sheet); long layout (product, month, consumed, optional stockout_days, reporting_rate, site) or wide (product, optional site, a column per month; see --layout); may instead come from the configuration file.
    data: Option<PathBuf>,
    /// Directory for the outputs (created if needed); may instead come from the configuration file.
    #[arg(long, value_name = "DIR")]
    out: Option<PathBuf>,
    /// Run configuration file (TOML): every option of this command and per-product settings; options given here override it.
    #[arg(long, value_name = "FILE")]
    config: Option<PathBuf>,
    /// Write the effective configuration (every key) to FILE and stop, without forecasting.
    #[arg(long, value_name = "FILE")]
    write_config: Option<PathBuf>,
    /// Write into DIR even if it holds files provisio did not write.
    #[arg(long)]
    overwrite: bool,
    /// Months to project (1-60), counted from the month after the data set's last month for every product.
    #[arg(long, default_value_t = 24, value_name = "MONTHS")]
    horizon: usize,
    /// Warn that a product is possibly discontinued when its last month is more than this many months before the data set's last month (0-120).
    #[arg(long, default_value_t = provisio::project::DEFAULT_SILENCE_LIMIT, value_name = "MONTHS")]
    silence_limit: usize,
    /// Use only rows dated up to this month (YYYY-MM), as if forecasting then; for `review` later.
    #[arg(long, value_name = "YYYY-MM", value_parser = parse_month)]
    until: Option<YearMonth>,
    /// Known changes ahead (CSV or workbook: product, kind, first_month, last_month, value, ...): applied to the statistical projection, giving the adjusted forecast beside it.
    #[arg(long, value_name = "FILE")]
    changes: Option<PathBuf>,
    /// Skip report.html (`provisio report DIR` builds it later).
    #[arg(long)]
    no_report: bool,
    /// Skip the planner's workbook forecast.xlsx (`provisio report DIR` builds it later).
    #[arg(long)]
    no_workbook: bool,
    /// Also write chart image files (PNG and SVG under charts/) for this product, or `all`; repeat for several.
    #[arg(long, value_name = "PRODUCT")]
    chart_files: Vec<String>,
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
    /// Run configuration file (TOML); its input, cleaning, backtest and selection settings and products apply, options given here override it.
    #[arg(long, value_name = "FILE")]
    config: Option<PathBuf>,
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

/// A configuration file as loaded: its settings, its folder (relative
/// paths in it start there), the path as given and its SHA-256.
pub(super) struct LoadedConfig {
    cfg: RunConfig,
    dir: PathBuf,
    path: PathBuf,
    sha256: String,
}

impl LoadedConfig {
    /// Applies the `[input]` reading options, `[cleaning]` and the
    /// products' stockout thresholds (what `inspect` and `clean` use).
    pub(super) fn apply_cleaning(
        &self,
        given: &Given,
        read: &mut ReadArgs,
        clean: &mut CleanArgs,
    ) -> anyhow::Result<()> {
        read.apply_config(&self.cfg.input, given, &self.dir)?;
        clean.apply_config(&self.cfg.cleaning, given);
        clean.apply_products(&self.cfg);
        Ok(())
    }

    fn load(path: &Path) -> anyhow::Result<LoadedConfig> {
        let bytes = std::fs::read(path)
            .with_context(|| format!("{}: cannot read the configuration file", path.display()))?;
        let text = String::from_utf8(bytes).map_err(|e| {
            anyhow::anyhow!(
                "{}: the configuration file is not UTF-8 text (bad byte at offset {}); save it as UTF-8",
                path.display(),
                e.utf8_error().valid_up_to()
            )
        })?;
        let cfg = RunConfig::parse(&path.display().to_string(), &text)?;
        use sha2::Digest;
        let sha256 = sha2::Sha256::digest(text.as_bytes())
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect();
        let dir = path
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."))
            .to_path_buf();
        Ok(LoadedConfig {
            cfg,
            dir,
            path: path.to_path_buf(),
            sha256,
        })
    }

    pub(super) fn load_opt(path: Option<&PathBuf>) -> anyhow::Result<Option<LoadedConfig>> {
        path.map(|p| LoadedConfig::load(p)).transpose()
    }

    /// A path written in the file, relative to its folder.
    fn resolve(&self, p: &str) -> PathBuf {
        let p = Path::new(p);
        if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.dir.join(p)
        }
    }

    /// Manifest entries: the file and its hash.
    pub(super) fn manifest(c: Option<&LoadedConfig>) -> (Option<String>, Option<String>) {
        match c {
            Some(c) => (Some(c.path.display().to_string()), Some(c.sha256.clone())),
            None => (None, None),
        }
    }
}

/// A path as written into a configuration file in `dir`: relative to that
/// folder (with `..` as needed), absolute when they share no root.
pub(super) fn path_for_config(p: &Path, dir: &Path) -> String {
    use std::path::Component;
    let abs = |x: &Path| std::path::absolute(x).unwrap_or_else(|_| x.to_path_buf());
    // Lexical: `a/./b` and `a/../b` folded so the common prefix is found.
    fn norm(x: &Path) -> Vec<Component<'_>> {
        let mut v: Vec<Component> = Vec::new();
        for c in x.components() {
            match c {
                Component::CurDir => {}
                Component::ParentDir if matches!(v.last(), Some(Component::Normal(_))) => {
                    v.pop();
                }
                other => v.push(other),
            }
        }
        v
    }
    let (pa, da) = (abs(p), abs(dir));
    let (pc, dc) = (norm(&pa), norm(&da));
    let common = pc.iter().zip(&dc).take_while(|(a, b)| a == b).count();
    // Sharing only the root (or drive): an absolute path reads better than
    // a climb to the root.
    let named = pc[..common]
        .iter()
        .any(|c| matches!(c, Component::Normal(_)));
    if !named {
        return pa.display().to_string();
    }
    let mut rel = PathBuf::new();
    for _ in common..dc.len() {
        rel.push("..");
    }
    for c in &pc[common..] {
        rel.push(c.as_os_str());
    }
    rel.display().to_string()
}

/// Applies a configuration to the options shared by every evaluating
/// command (reading, cleaning, backtest, selection, per-product cleaning).
pub(super) fn apply_shared(
    c: &LoadedConfig,
    given: &Given,
    read: &mut ReadArgs,
    clean: &mut CleanArgs,
    eval: &mut EvalArgs,
) -> anyhow::Result<()> {
    c.apply_cleaning(given, read, clean)?;
    eval.apply_config(c, given)
}

impl EvalArgs {
    fn apply_config(&mut self, c: &LoadedConfig, given: &Given) -> anyhow::Result<()> {
        let (b, s) = (&c.cfg.backtest, &c.cfg.selection);
        if let (Some(v), false) = (b.origins, given.cli("origins")) {
            self.origins = v;
        }
        if let (Some(v), false) = (b.backtest_horizon, given.cli("backtest_horizon")) {
            self.backtest_horizon = v;
        }
        if let (Some(v), false) = (b.score_imputed, given.cli("score_imputed")) {
            self.score_imputed = v;
        }
        if let (Some(v), false) = (&b.backtest_detail, given.cli("backtest_detail")) {
            self.backtest_detail = enum_value(v)?;
        }
        if let (Some(v), false) = (&s.select_by, given.cli("select_by")) {
            self.select_by = enum_value(v)?;
        }
        if let (Some(v), false) = (s.tie_margin, given.cli("tie_margin")) {
            self.tie_margin = v;
        }
        if let (Some(v), false) = (&s.default_model, given.cli("default_model")) {
            self.default_model = enum_value(v)?;
        }
        if let (Some(v), false) = (&s.pin, given.cli("pin")) {
            self.pin = Some(c.resolve(v));
        }
        Ok(())
    }

    fn to_config(&self, cfg: &mut RunConfig, dir: &Path) {
        let name = |v: &dyn Fn() -> Option<clap::builder::PossibleValue>| {
            v().map(|p| p.get_name().to_string())
        };
        cfg.backtest.origins = Some(self.origins);
        cfg.backtest.backtest_horizon = Some(self.backtest_horizon);
        cfg.backtest.score_imputed = Some(self.score_imputed);
        cfg.backtest.backtest_detail = name(&|| self.backtest_detail.to_possible_value());
        cfg.selection.select_by = name(&|| self.select_by.to_possible_value());
        cfg.selection.tie_margin = Some(self.tie_margin);
        cfg.selection.default_model = name(&|| self.default_model.to_possible_value());
        cfg.selection.pin = self.pin.as_ref().map(|p| path_for_config(p, dir));
    }
}

/// The configuration names of the value enums defined here match the
/// library's lists (a unit test calls this).
#[cfg(test)]
pub fn check_config_names() {
    let names = |v: Vec<Option<clap::builder::PossibleValue>>| -> Vec<String> {
        v.into_iter()
            .flatten()
            .map(|p| p.get_name().to_string())
            .collect()
    };
    let scores = ScoreArg::value_variants()
        .iter()
        .map(|x| x.to_possible_value())
        .collect();
    assert_eq!(names(scores), provisio::config::SCORES);
    let details = DetailArg::value_variants()
        .iter()
        .map(|x| x.to_possible_value())
        .collect();
    assert_eq!(names(details), provisio::config::DETAILS);
    let defaults = DefaultArg::value_variants()
        .iter()
        .map(|x| x.to_possible_value())
        .collect();
    assert_eq!(names(defaults), provisio::config::DEFAULT_MODELS);
}

pub(super) fn settings(eval: &EvalArgs, horizon: usize) -> ForecastSettings {
    with_silence(eval, horizon, provisio::project::DEFAULT_SILENCE_LIMIT)
}

fn with_silence(eval: &EvalArgs, horizon: usize, silence_limit: usize) -> ForecastSettings {
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
                ScoreArg::Rmsse => Score::Rmsse,
            },
            tie_margin: eval.tie_margin,
            default_rule: match eval.default_model {
                DefaultArg::Auto => DefaultRule::Auto,
                DefaultArg::Combination => DefaultRule::Combination,
                DefaultArg::BestFiveMean => DefaultRule::BestMean,
                DefaultArg::WeightedMean => DefaultRule::WeightedMean,
            },
        },
        horizon,
        backtest_detail: match eval.backtest_detail {
            DetailArg::Chosen | DetailArg::Compared => provisio::pipeline::BacktestDetail::Chosen,
            DetailArg::All => provisio::pipeline::BacktestDetail::All,
        },
        data_end: None,
        silence_limit,
    }
}

pub(super) fn read_pins(path: &Path) -> anyhow::Result<HashMap<String, String>> {
    let bytes = std::fs::read(path)
        .with_context(|| format!("{}: cannot read the pin file", path.display()))?;
    let body = provisio::data::lf_line_ends(&bytes);
    let mut r = csv::ReaderBuilder::new()
        .flexible(true)
        .from_reader(&body[..]);
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
    let mut first_line: HashMap<String, u64> = HashMap::new();
    for rec in r.records() {
        let rec = rec.with_context(|| format!("{}: cannot read a row", path.display()))?;
        let line = rec.position().map(|p| p.line()).unwrap_or(0);
        // A name copied from provisio's CSV outputs may carry the
        // apostrophe they put before formula-like text; it is taken off.
        let product = provisio::output::csv_text_read(rec.get(pc).unwrap_or("").trim()).to_string();
        let model = rec.get(mc).unwrap_or("").trim().to_string();
        if model != provisio::backtest::COMBINATION && !names.contains(&model) {
            anyhow::bail!(
                "{}:{line}: column 'model': '{model}' is not a candidate model; valid: {}, combination",
                path.display(),
                names.join(", ")
            );
        }
        if product.is_empty() {
            anyhow::bail!(
                "{}:{line}: column 'product': the product is empty; name the product to pin, exactly as in the data",
                path.display()
            );
        }
        if let Some(earlier) = pins.get(&product).filter(|m| **m != model) {
            anyhow::bail!(
                "{}:{line}: column 'product': '{product}' is pinned again, to {model}, after line {} pinned it to {earlier}; keep one row per product",
                path.display(),
                first_line[&product]
            );
        }
        first_line.entry(product.clone()).or_insert(line);
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
    provisio::default_rule::DefaultChoice,
);

/// Per-product options: the configuration's `[products]` tables, then the
/// pin file (which wins over a product's `model` only when given on the
/// command line).
pub(super) fn product_options(
    cfg: Option<&LoadedConfig>,
    pins: HashMap<String, String>,
    pin_on_cli: bool,
) -> HashMap<String, ProductOptions> {
    let mut options = cfg.map(|c| c.cfg.product_options()).unwrap_or_default();
    for (p, m) in pins {
        let o = options.entry(p).or_default();
        if pin_on_cli || o.model.is_none() {
            o.model = Some(m);
        }
    }
    options
}

#[allow(clippy::too_many_arguments)]
fn run_eval(
    data: &Path,
    read: &ReadArgs,
    clean: &CleanArgs,
    eval: &EvalArgs,
    (horizon, silence_limit): (usize, usize),
    until: Option<YearMonth>,
    cfg: Option<&LoadedConfig>,
    given: &Given,
    (workbook, chart_files): (bool, &[String]),
) -> anyhow::Result<EvalRun> {
    let t0 = Instant::now();
    let fs = with_silence(eval, horizon, silence_limit);
    let checked = fs.clone().check()?;
    let pins = match &eval.pin {
        Some(p) => read_pins(p)?,
        None => HashMap::new(),
    };
    let pinned: Vec<String> = pins.keys().cloned().collect();
    let options = product_options(cfg, pins, given.cli("pin"));
    let (ds, cleaned) = load_until(data, read, clean, until)?;
    // Products named for chart files are checked before the long work.
    for n in chart_files.iter().filter(|n| *n != "all") {
        if !cleaned
            .series
            .iter()
            .any(|s| s.product.as_str() == n.as_str())
        {
            let from = match cfg {
                Some(c) if !given.cli("chart_files") => {
                    format!("[output] chart_files of {}", c.path.display())
                }
                _ => "--chart-files".to_string(),
            };
            anyhow::bail!(
                "no product '{n}' for {from} in {}; give a product name exactly as in the data, or all",
                data.display()
            );
        }
    }
    if workbook {
        let products: std::collections::HashSet<&str> =
            cleaned.series.iter().map(|s| s.product.as_ref()).collect();
        provisio::output::check_workbook_fits(products.len()).map_err(anyhow::Error::msg)?;
    }
    let known = |p: &str| cleaned.series.iter().any(|s| s.product == p);
    // A name that matches a product of the data but for case or spacing.
    let loose = |p: &str| {
        p.split_whitespace()
            .collect::<Vec<_>>()
            .join(" ")
            .to_lowercase()
    };
    let near = |p: &str| {
        cleaned
            .series
            .iter()
            .find(|s| loose(&s.product) == loose(p))
            .map(|s| format!(" (the data has '{}': names must match exactly)", s.product))
            .unwrap_or_default()
    };
    for p in &pinned {
        if !known(p) {
            warn(&format!(
                "pinned product '{p}' is not in the data{}",
                near(p)
            ));
        }
    }
    if let Some(c) = cfg {
        for p in c.cfg.products.keys().filter(|p| !known(p)) {
            warn(&format!(
                "{}: [products.{}] names a product that is not in the data{}; its settings are not used",
                c.path.display(),
                toml_quote(p),
                near(p)
            ));
        }
    }
    let total = cleaned.series.len();
    // indicatif draws only on a terminal; hidden otherwise (and for tiny runs).
    let bar = if total >= 50 && super::chatty() {
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
    let (results, choice) = forecast_run(&cleaned.series, &checked, &options, &progress);
    bar.finish_and_clear();
    let mut ds = ds;
    if let Some(w) = origins_cut(&results, &fs.backtest) {
        // Printed with the data's other warnings, and kept in the manifest.
        ds.warnings.push(w);
    }
    Ok((ds, cleaned, results, fs, t0.elapsed().as_secs_f64(), choice))
}

/// A warning when products ran the backtest at fewer origins than asked
/// for, because their history has no room for more
/// ([`provisio::backtest::usable_origins`]); `None` when every product got
/// them all.
fn origins_cut(
    results: &[ProductForecast],
    b: &provisio::backtest::BacktestSettings,
) -> Option<String> {
    if b.origins <= provisio::backtest::BacktestSettings::default().origins {
        // The default count: a short history's fewer origins are explained
        // in its selection reason.
        return None;
    }
    let mut by_count: std::collections::BTreeMap<usize, usize> = Default::default();
    for r in results
        .iter()
        .filter(|r| r.backtest.origins.len() < b.origins)
    {
        *by_count.entry(r.backtest.origins.len()).or_default() += 1;
    }
    if by_count.is_empty() {
        return None;
    }
    let counts: Vec<String> = by_count
        .iter()
        .rev()
        .map(|(k, n)| format!("{n} product(s) ran at {k}"))
        .collect();
    Some(format!(
        "the backtest asked for {} origins, but {} of {} products have no room for them: {} (an origin needs {} months after it, and origins beyond the default {} need {} months of history before them); ask for fewer origins, or a shorter --backtest-horizon",
        b.origins,
        by_count.values().sum::<usize>(),
        results.len(),
        counts.join(", "),
        b.horizon,
        provisio::backtest::BacktestSettings::default().origins,
        provisio::backtest::EXTRA_ORIGIN_MIN_TRAIN,
    ))
}

/// A product name as a TOML key.
fn toml_quote(p: &str) -> String {
    serde_json::to_string(p).unwrap_or_else(|_| format!("\"{p}\""))
}

fn print_summary(results: &[ProductForecast], horizon_shown: bool) {
    for r in results {
        for w in &r.warnings {
            warn(w);
        }
    }
    if !super::human() {
        return;
    }
    let w = super::name_width(results.iter().map(|r| &r.product));
    let cut = |s: &str| super::pad(&super::truncate(s, w), w);
    println!(
        "{}  {:<34} {:>11} {:>8} {:>30}{}",
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
            .map(|v| match s.score {
                provisio::metrics::Score::Mase | provisio::metrics::Score::Rmsse => {
                    format!("{} {v:.3}", s.score.name())
                }
                _ => format!("{} {v:.1}", s.score.name()),
            })
            .unwrap_or_else(|| "-".into());
        let bias = s
            .chosen_scores
            .as_ref()
            .and_then(|x| x.bias)
            .map(|b| format!("{}%", provisio::chart::fmt_signed(b)))
            .unwrap_or_else(|| "-".into());
        let margin = s
            .runner_up
            .as_ref()
            .zip(s.margin_pct)
            .map(|((name, _), m)| format!("{name} {}%", provisio::chart::fmt_signed(m)))
            .unwrap_or_else(|| "-".into());
        let next = r
            .projection
            .as_ref()
            .and_then(|p| p.totals.first())
            .map(|&t| format!("{:>18}", fmt_total(t)))
            .unwrap_or_else(|| format!("{:>18}", "-"));
        let mut chosen = s.chosen.clone();
        if s.pinned {
            chosen.push_str(" (pinned)");
        }
        if !s.backtested {
            chosen.push_str(" (not backtested)");
        } else if s.chosen_scores.is_none() {
            chosen.push_str(" (no backtest score)");
        }
        println!(
            "{}  {:<34} {:>11} {:>8} {:>30}{}",
            cut(&r.product),
            chosen,
            score,
            bias,
            margin,
            if horizon_shown { next } else { String::new() }
        );
    }
    println!("(score: backtest score of the chosen model on the cleaned series; bias > 0 = over-forecast; runner-up: the best other model and its score against the chosen one, negative when it scored better but without clear evidence — selection.csv's reason says why)");
}

/// A 12-month total for the terminal: whole units from 10 up, two
/// significant digits below, so that a small total (0.12 of a unit) does
/// not print as a projection of zero.
fn fmt_total(t: f64) -> String {
    if t == 0.0 || !t.is_finite() || t.abs() >= 10.0 {
        return format!("{t:.0}");
    }
    let decimals = (1 - t.abs().log10().floor() as i32).clamp(1, 12) as usize;
    format!("{t:.decimals$}")
}

/// The machine-readable summary of one product (see README, "JSON summary");
/// `projected`: the run projects (forecast, not backtest).
fn product_json(r: &ProductForecast, projected: bool) -> serde_json::Value {
    let s = &r.selection;
    let scores = s.chosen_scores.as_ref();
    serde_json::json!({
        "product": r.product,
        // No model for a product given no projection (a tester read
        // "naive" for a one-month product that was never forecast); its
        // warnings say why.
        "model": (!projected || r.projection.is_some()).then_some(&s.chosen),
        "pinned": s.pinned,
        "backtested": s.backtested,
        "selected_by": s.score.name(),
        "score": scores.and_then(|x| x.get(s.score)),
        "mape_pct": scores.and_then(|x| x.mape),
        "bias_pct": scores.and_then(|x| x.bias),
        "wape_pct": scores.and_then(|x| x.wape),
        "mase": scores.and_then(|x| x.mase),
        "runner_up": s.runner_up.as_ref().map(|x| &x.0),
        "runner_up_margin_pct": s.margin_pct,
        "next_12_months": r.projection.as_ref().and_then(|p| p.totals.first()),
        "projection_start": r.projection.as_ref().map(|p| p.horizon_start().to_string()),
        "bridged_months": r.projection.as_ref().map(|p| p.bridged),
        "reason": s.reason,
        "warnings": r.warnings,
    })
}

/// Applies the configuration file to `forecast`'s options (command-line
/// values win) and resolves the input file and output folder.
fn apply_forecast_config(
    a: &mut ForecastArgs,
    c: &LoadedConfig,
    given: &Given,
) -> anyhow::Result<()> {
    apply_shared(c, given, &mut a.read, &mut a.clean, &mut a.eval)?;
    let cfg = &c.cfg;
    if let (Some(v), None) = (&cfg.input.data, &a.data) {
        a.data = Some(c.resolve(v));
    }
    if let (Some(v), false) = (&cfg.input.until, given.cli("until")) {
        a.until = Some(
            YearMonth::parse(v).map_err(|e| anyhow::anyhow!("{}: until: {e}", c.path.display()))?,
        );
    }
    if let (Some(v), false) = (cfg.projection.horizon, given.cli("horizon")) {
        a.horizon = v;
    }
    if let (Some(v), false) = (&cfg.projection.changes, given.cli("changes")) {
        a.changes = Some(c.resolve(v));
    }
    if let (Some(v), false) = (cfg.projection.silence_limit, given.cli("silence_limit")) {
        a.silence_limit = v;
    }
    if let (Some(v), None) = (&cfg.output.out, &a.out) {
        a.out = Some(c.resolve(v));
    }
    if let (Some(v), false) = (cfg.output.overwrite, given.cli("overwrite")) {
        a.overwrite = v;
    }
    if let (Some(v), false) = (cfg.output.no_report, given.cli("no_report")) {
        a.no_report = v;
    }
    if let (Some(v), false) = (cfg.output.no_workbook, given.cli("no_workbook")) {
        a.no_workbook = v;
    }
    if let (Some(v), false) = (&cfg.output.chart_files, given.cli("chart_files")) {
        a.chart_files = v.clone();
    }
    Ok(())
}

/// The effective configuration of a `forecast` run, paths relative to `dir`
/// (the folder of the file it will be written to). `cli_pins`: the pin
/// file's models when it was given on the command line, where it wins over
/// a product's `model` (in a file, `[selection] pin` does not), so the
/// written file names them in the products' own tables.
fn effective_config(
    a: &ForecastArgs,
    c: Option<&LoadedConfig>,
    dir: &Path,
    cli_pins: Option<&HashMap<String, String>>,
) -> RunConfig {
    let mut cfg = RunConfig {
        products: c.map(|c| c.cfg.products.clone()).unwrap_or_default(),
        ..RunConfig::default()
    };
    for (name, p) in cfg.products.iter_mut().filter(|(_, p)| p.model.is_some()) {
        if let Some(m) = cli_pins.and_then(|pins| pins.get(name)) {
            p.model = Some(m.clone());
        }
    }
    cfg.input.data = a.data.as_ref().map(|p| path_for_config(p, dir));
    cfg.input.until = a.until.map(|m| m.to_string());
    a.read.to_config(&mut cfg.input, dir);
    cfg.cleaning = a.clean.to_config();
    a.eval.to_config(&mut cfg, dir);
    cfg.projection.horizon = Some(a.horizon);
    cfg.projection.changes = a.changes.as_ref().map(|p| path_for_config(p, dir));
    cfg.projection.silence_limit = Some(a.silence_limit);
    cfg.output.out = a.out.as_ref().map(|p| path_for_config(p, dir));
    cfg.output.overwrite = Some(a.overwrite);
    cfg.output.no_report = Some(a.no_report);
    cfg.output.no_workbook = Some(a.no_workbook);
    cfg.output.chart_files = Some(a.chart_files.clone());
    cfg
}

pub fn run_forecast(mut a: ForecastArgs, given: &Given) -> anyhow::Result<()> {
    let config = LoadedConfig::load_opt(a.config.as_ref())?;
    if let Some(c) = &config {
        apply_forecast_config(&mut a, c, given)?;
    }
    if let Some(path) = &a.write_config {
        let mut inputs = vec![
            ("input", a.data.as_deref()),
            ("--config", a.config.as_deref()),
            ("--pin", a.eval.pin.as_deref()),
            ("--changes", a.changes.as_deref()),
        ];
        inputs.extend(a.read.companion_files());
        super::refuse_same_file(&[("--write-config", Some(path.as_path()))], &inputs)?;
        let dir = path
            .parent()
            .filter(|p| !p.as_os_str().is_empty())
            .unwrap_or(Path::new("."));
        let cli_pins = match (&a.eval.pin, given.cli("pin")) {
            (Some(p), true) => Some(read_pins(p)?),
            _ => None,
        };
        let cfg = effective_config(&a, config.as_ref(), dir, cli_pins.as_ref());
        // Refuse what the run would refuse, before writing it down.
        cfg.clean_settings(a.clean.settings()).check()?;
        with_silence(&a.eval, a.horizon, a.silence_limit).check()?;
        let text = cfg.to_toml();
        if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent)
                .with_context(|| format!("{}: cannot create the folder", parent.display()))?;
        }
        output::write_atomic(path, |w| w.write_all(text.as_bytes()))?;
        note!(
            "wrote the configuration to {}; run it with `provisio forecast --config {}`",
            path.display(),
            path.display()
        );
        super::json_summary(
            || serde_json::json!({ "command": "forecast", "config_written": path.display().to_string() }),
        );
        return Ok(());
    }
    let data = a.data.clone().ok_or_else(|| {
        super::usage_error(
            "forecast",
            "no input file: give DATA, or set data in the [input] section of a --config file",
        )
    })?;
    let out_path = a.out.clone().ok_or_else(|| {
        super::usage_error(
            "forecast",
            "no output folder: give --out DIR, or set out in the [output] section of a --config file",
        )
    })?;
    if a.no_report && !a.chart_files.is_empty() {
        // Both in the configuration file: the file is at fault (exit 1,
        // with its line), not the command line (a tester saw exit 2 and a
        // usage hint for a file that contradicted itself).
        if let (Some(c), false, false) = (&config, given.cli("chart_files"), given.cli("no_report"))
        {
            let text = std::fs::read_to_string(&c.path).unwrap_or_default();
            let line = text
                .lines()
                .position(|l| {
                    let t = l.trim_start();
                    t.starts_with("no_report") && t[9..].trim_start().starts_with('=')
                })
                .map_or(0, |i| i as u64 + 1);
            return Err(provisio::Error::Config {
                file: c.path.display().to_string(),
                line,
                column: u64::from(line > 0),
                message: "[output] no_report = true skips the report, and [output] chart_files in the same file draws the report's charts: drop one of the two (or run `provisio report DIR --chart-files PRODUCT` later)".to_string(),
            }
            .into());
        }
        // Name where each came from: a setting of the file cannot be
        // switched off on the command line.
        let from = |cli: &str, flag: &str, key: &str| match (&config, given.cli(cli)) {
            (Some(c), false) => format!("{key} in {}", c.path.display()),
            _ => flag.to_string(),
        };
        return Err(super::usage_error(
            "forecast",
            &format!(
                "{} draws the report's charts, and {} skips the report: drop one (or run `provisio report DIR --chart-files PRODUCT` later)",
                from("chart_files", "--chart-files", "[output] chart_files"),
                from("no_report", "--no-report", "[output] no_report = true"),
            ),
        ));
    }
    let out = output::OutputDir::check(&out_path, a.overwrite)?;
    out.refuse_input_inside(&data)?;
    // Held from here: a second run into the same folder is refused at once.
    let mut run = out.start()?;
    // The changes file is read before the long work, so a mistake in it
    // is said at once; its products and months are checked after.
    let changes = a
        .changes
        .as_ref()
        .map(|p| provisio::changes::read_changes(p, a.read.options().numbers))
        .transpose()?;
    let (ds, cleaned, results, fs, secs, choice) = run_eval(
        &data,
        &a.read,
        &a.clean,
        &a.eval,
        (a.horizon, a.silence_limit),
        a.until,
        config.as_ref(),
        given,
        (!a.no_workbook, &a.chart_files),
    )?;
    let applied = match &changes {
        Some(c) => Some(super::changes::apply(c, &results)?),
        None => None,
    };
    // Everything is written into a staging copy of the folder, which
    // replaces it at the end: the outputs appear together or not at all.
    let a_out = super::stage(&mut run)?;
    let starts: Vec<_> = cleaned
        .series
        .iter()
        .map(|s| (s.product.clone(), s.start))
        .collect();
    let units: HashMap<String, output::Units> = config
        .as_ref()
        .map(|c| {
            c.cfg
                .products
                .iter()
                .map(|(p, s)| {
                    let u = output::Units {
                        units: s.units.clone(),
                        pack_size: s.pack_size,
                    };
                    (p.clone(), u)
                })
                .collect()
        })
        .unwrap_or_default();
    let stages = Stages::new(
        8 + usize::from(!a.no_workbook) + usize::from(!a.no_report),
        results.len(),
    );
    let rows = a.eval.backtest_detail.rows();
    // The tables are independent files: written in parallel, each
    // atomically; the first error (in this order) is reported.
    let tables: Vec<(&str, TableJob)> = vec![
        (
            "forecast.csv",
            Box::new(|p| output::write_forecast_units(p, &results, &units)),
        ),
        (
            "forecast_wide.csv",
            Box::new(|p| output::write_forecast_wide(p, &results)),
        ),
        (
            "selection.csv",
            Box::new(|p| output::write_selection(p, &results)),
        ),
        (
            "scores.csv",
            Box::new(|p| output::write_scores(p, &results)),
        ),
        (
            "scores_by_horizon.csv",
            Box::new(|p| output::write_scores_by_horizon(p, &results, rows)),
        ),
        (
            "backtest.csv",
            Box::new(|p| output::write_backtest(p, &results, &starts, rows)),
        ),
    ];
    let (written, clean_out) = rayon::join(
        || {
            use rayon::prelude::*;
            tables
                .par_iter()
                .map(|(name, job)| {
                    let r = job(&a_out.join(name));
                    stages.done(name);
                    r
                })
                .collect::<Vec<_>>()
        },
        || {
            let r = super::write_clean_outputs(&a_out, &ds, &cleaned);
            stages.done("cleaned.csv, adjustments.csv, quality.csv");
            r
        },
    );
    drop(tables);
    for r in written {
        r?;
    }
    // The adjusted forecast goes beside the statistical one once both
    // forecast files are written.
    if let Some(ap) = &applied {
        output::add_adjusted(&a_out, ap)?;
    }
    let (by_rule, mut warnings) = clean_out?;
    warnings.extend(results.iter().flat_map(|r| r.warnings.iter().cloned()));
    if let (Some(c), Some(ap)) = (&changes, &applied) {
        warnings.extend(c.warnings.iter().cloned());
        warnings.extend(ap.warnings.iter().cloned());
    }
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
        "wide": ds.layout.wide.as_ref().map(|w| w.manifest()),
        "forecast_settings": fs,
        "default_model": choice,
        "pin_file": a.eval.pin.as_ref().map(|p| p.display().to_string()),
        "changes_file": changes.as_ref().map(|c| c.file.clone()),
        "changes_sha256": changes.as_ref().map(|c| c.sha256.clone()),
        "changes_sheet": changes.as_ref().and_then(|c| c.sheet.clone()),
        "changes_rows": changes.as_ref().map(|c| c.changes.len()),
        "config_file": LoadedConfig::manifest(config.as_ref()).0,
        "config_sha256": LoadedConfig::manifest(config.as_ref()).1,
        "product_settings": config.as_ref().map(|c| &c.cfg.products),
        "candidates": provisio::models::candidates().iter().map(|m| m.name()).collect::<Vec<_>>(),
        "scored_against": "cleaned series",
        "rows": cleaned.rows,
        "products": cleaned.series.len(),
        "products_unusable": cleaned.unusable.len(),
        "adjustments_by_rule": by_rule,
        "seconds": secs,
        "warnings": warnings,
    });
    output::write_json(&a_out.join("manifest.json"), &manifest)?;
    // The new forecast is complete: a plan or cross-check made from the
    // one it replaced no longer matches it.
    let retired = output::retire_derived(&a_out)?;
    let retired_warning = (!retired.is_empty()).then(|| {
        format!(
            "{}: moved {} file(s) of an earlier plan or cross-check ({}) to {}: they were made from the forecast this run replaced; run `provisio plan` or `provisio crosscheck` again on the new forecast",
            a_out.display(),
            retired.len(),
            retired.join(", "),
            a_out.join(output::RETIRED_DIR).display()
        )
    });
    // So are the known changes of an earlier run, when this one applied
    // none (with a changes file, this run has just rewritten them).
    let retired_changes = if applied.is_none() {
        output::retire_changes(&a_out)?
    } else {
        Vec::new()
    };
    let changes_warning = (!retired_changes.is_empty()).then(|| {
        format!(
            "{}: moved {} file(s) of the known changes an earlier run applied ({}) to {}: this run applied no changes file, so they do not describe its forecast, which has no adjusted forecast; give --changes again (or `changes` in the run configuration) to apply known changes",
            a_out.display(),
            retired_changes.len(),
            retired_changes.join(", "),
            a_out.join(output::RETIRED_DIR).display()
        )
    });
    print_accounting(&ds, &cleaned, 10);
    print_summary(&results, true);
    if a.horizon < 12 {
        super::note!(
            "--horizon {0} is under a year: the 12-month totals (next 12 months, total_months_1_12) are left blank rather than summing {0} months; amc_next_12 averages the {0} months projected",
            a.horizon
        );
    } else if a.horizon < 24 && a.horizon != 12 {
        super::note!(
            "--horizon {} is not whole years: total_months_13_24 is left blank rather than summing {} months",
            a.horizon,
            a.horizon - 12
        );
    }
    say!("default for smooth and erratic demand: {}", choice.reason);
    super::print_reporting_uplift(&cleaned, "report.html, and adjustments.csv");
    if let (Some(c), Some(ap)) = (&changes, &applied) {
        super::changes::print_applied(c, ap);
    }
    let products = results.len();
    let unprojected = results.iter().filter(|r| r.projection.is_none()).count();
    let summary = super::json_wanted().then(|| {
        serde_json::json!({
            "command": "forecast",
            "input": ds.source,
            "horizon": a.horizon,
            "config_file": LoadedConfig::manifest(config.as_ref()).0,
            "rows": cleaned.rows,
            "products": results.iter().map(|r| product_json(r, true)).collect::<Vec<_>>(),
            "products_unusable": cleaned.unusable.iter().map(|(p, r)| serde_json::json!({"product": p, "reason": r})).collect::<Vec<_>>(),
            "out": out_path.display().to_string(),
            "files": forecast_files(&out_path, !a.no_report, !a.no_workbook, applied.is_some()),
            "changes": applied.as_ref().map(super::changes::changes_json),
            "default_model": choice,
            "seconds": secs,
            // The run's own warnings (each product's are with it).
            "warnings": retired_warning.iter().chain(changes_warning.iter()).collect::<Vec<_>>(),
        })
    });
    // The workbook and the report are built from the files just written;
    // the results in memory are no longer needed, and freeing them first
    // keeps the peak memory of large runs down. The two are independent
    // files, written side by side; the report links the workbook it knows
    // is being written.
    let changed = applied.is_some();
    drop((ds, cleaned, results, applied));
    stages.done("manifest.json");
    let t_book = Instant::now();
    let options = provisio::report::ReportOptions {
        chart_files: provisio::report::ChartFiles::from_values(&a.chart_files),
        workbook_linked: !a.no_workbook,
    };
    let (workbook, report) = rayon::join(
        || {
            (!a.no_workbook).then(|| {
                let r = provisio::report::workbook::write_workbook(&a_out);
                stages.done("forecast.xlsx");
                (r, t_book.elapsed().as_secs_f64())
            })
        },
        || {
            (!a.no_report).then(|| {
                let r = provisio::report::write_report_with(&a_out, &options);
                stages.done("report.html");
                r
            })
        },
    );
    stages.finish();
    let (workbook, book_secs) = match workbook {
        Some((r, secs)) => (Some(r?), secs),
        None => (None, 0.0),
    };
    let report = report.transpose()?;
    run.commit()?;
    let a_out = out_path;
    if let Some(v) = summary {
        super::json_summary(|| v);
    }
    let counted = if unprojected == 0 {
        format!("{products} product(s)")
    } else {
        // A tester's one-month product: "forecast 3 product(s)" with 2
        // projected.
        format!(
            "{} of {products} product(s) (no projection for {unprojected}: see the warnings)",
            products - unprojected
        )
    };
    say!(
        "forecast {} for {} months in {}; wrote forecast.csv, forecast_wide.csv, selection.csv, scores.csv, scores_by_horizon.csv, backtest.csv, cleaned.csv, adjustments.csv, rejected.csv, quality.csv, manifest.json in {}",
        counted,
        a.horizon,
        super::fmt_secs(secs),
        a_out.display()
    );
    if let Some(w) = &retired_warning {
        super::warn(w);
    }
    if let Some(w) = &changes_warning {
        super::warn(w);
    }
    if changed {
        say!("wrote changes_applied.csv (every month a change touched) and changes_summary.csv (each change's effect on the totals); forecast.csv and forecast_wide.csv hold the statistical and the adjusted forecast side by side");
    }
    match workbook {
        Some(_) => say!(
            "wrote forecast.xlsx (the planner's workbook) in {}",
            super::fmt_secs(book_secs)
        ),
        None => say!(
            "no forecast.xlsx (--no-workbook); `provisio report {} --workbook-only` builds it",
            a_out.display()
        ),
    }
    for w in report.iter().flat_map(|r| &r.warnings) {
        super::warn(w);
    }
    match report {
        Some(r) if r.charts.is_empty() => say!("wrote report.html"),
        Some(r) => say!(
            "wrote report.html and {} chart files (charts/)",
            r.charts.len()
        ),
        None => say!(
            "no charts or report.html (--no-report); `provisio report {}` builds them",
            a_out.display()
        ),
    }
    say!("Decision support only: review with the responsible programme staff; national guidelines and local regulations take precedence.");
    Ok(())
}

/// One table writer of `forecast`: given the file's path, writes it.
type TableJob<'a> = Box<dyn Fn(&Path) -> provisio::error::Result<()> + Sync + 'a>;

/// A progress bar over the writing stages of `forecast` (drawn only on a
/// terminal, and only for runs large enough to take a while).
struct Stages(indicatif::ProgressBar);

impl Stages {
    fn new(stages: usize, products: usize) -> Stages {
        let bar = if products >= 50 && super::chatty() {
            indicatif::ProgressBar::new(stages as u64)
        } else {
            indicatif::ProgressBar::hidden()
        };
        bar.set_style(
            indicatif::ProgressStyle::with_template(
                "writing {bar:30} {pos}/{len} outputs ({elapsed}) {wide_msg}",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        bar.set_message("tables");
        bar.enable_steady_tick(std::time::Duration::from_millis(250));
        Stages(bar)
    }
    /// One stage finished.
    fn done(&self, what: &str) {
        self.0.set_message(format!("wrote {what}"));
        self.0.inc(1);
    }
    fn finish(&self) {
        self.0.finish_and_clear();
    }
}

/// Output files of a forecast run, with their paths.
fn forecast_files(out: &Path, report: bool, workbook: bool, changes: bool) -> Vec<String> {
    let mut names = vec![
        "forecast.csv",
        "forecast_wide.csv",
        "selection.csv",
        "scores.csv",
        "scores_by_horizon.csv",
        "backtest.csv",
        "cleaned.csv",
        "adjustments.csv",
        "rejected.csv",
        "quality.csv",
        "manifest.json",
    ];
    if changes {
        names.push("changes_applied.csv");
        names.push("changes_summary.csv");
    }
    if report {
        names.push("report.html");
    }
    if workbook {
        names.push("forecast.xlsx");
    }
    names
        .iter()
        .map(|n| out.join(n).display().to_string())
        .collect()
}

pub fn run_backtest(mut a: BacktestArgs, given: &Given) -> anyhow::Result<()> {
    let config = LoadedConfig::load_opt(a.config.as_ref())?;
    if let Some(c) = &config {
        apply_shared(c, given, &mut a.read, &mut a.clean, &mut a.eval)?;
    }
    let out_dir = match &a.out {
        Some(out) => Some(output::OutputDir::check(out, a.overwrite)?),
        None => None,
    };
    if let Some(o) = &out_dir {
        o.refuse_input_inside(&a.data)?;
    }
    let mut run = out_dir.as_ref().map(|o| o.start()).transpose()?;
    let (ds, cleaned, results, _, secs, choice) = run_eval(
        &a.data,
        &a.read,
        &a.clean,
        &a.eval,
        (12, provisio::project::DEFAULT_SILENCE_LIMIT),
        None,
        config.as_ref(),
        given,
        (false, &[]),
    )?;
    print_accounting(&ds, &cleaned, 10);
    print_summary(&results, false);
    say!("default for smooth and erratic demand: {}", choice.reason);
    if let (Some(shown), Some(mut run)) = (&a.out, run.take()) {
        let out = super::stage(&mut run)?;
        let starts: Vec<_> = cleaned
            .series
            .iter()
            .map(|s| (s.product.clone(), s.start))
            .collect();
        output::write_scores(&out.join("scores.csv"), &results)?;
        let rows = a.eval.backtest_detail.rows();
        output::write_scores_by_horizon(&out.join("scores_by_horizon.csv"), &results, rows)?;
        output::write_backtest(&out.join("backtest.csv"), &results, &starts, rows)?;
        output::write_selection(&out.join("selection.csv"), &results)?;
        run.commit()?;
        say!(
            "wrote scores.csv, scores_by_horizon.csv, backtest.csv, selection.csv in {}",
            shown.display()
        );
    }
    say!(
        "backtest of {} product(s) in {secs:.1} s (scored against the cleaned series)",
        results.len()
    );
    super::json_summary(|| {
        serde_json::json!({
            "command": "backtest",
            "input": ds.source,
            "config_file": LoadedConfig::manifest(config.as_ref()).0,
            "out": a.out.as_ref().map(|p| p.display().to_string()),
            "rows": cleaned.rows,
            "products": results.iter().map(|r| product_json(r, false)).collect::<Vec<_>>(),
            "products_unusable": cleaned.unusable.iter().map(|(p, r)| serde_json::json!({"product": p, "reason": r})).collect::<Vec<_>>(),
            "default_model": choice,
            "seconds": secs,
        })
    });
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::fmt_total;

    #[test]
    fn a_small_total_is_not_printed_as_zero() {
        // A tester's product of 0.01 a month: next 12 months 0.12, shown
        // as "0" before (the report and total_months_1_12 said 0.12).
        assert_eq!(fmt_total(0.12), "0.12");
        assert_eq!(fmt_total(0.1616), "0.16");
        assert_eq!(fmt_total(0.0071), "0.0071");
        assert_eq!(fmt_total(3.456), "3.5");
        assert_eq!(fmt_total(0.0), "0");
        assert_eq!(fmt_total(14003.4), "14003");
    }
}
