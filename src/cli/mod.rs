//! Command-line definitions and dispatch.

mod clean;
mod forecast;
mod generate;
mod inspect;
mod models;
mod report;
mod review;

use clap::{Args, Parser, Subcommand, ValueEnum};

/// Forecast monthly consumption of public-health commodities from facility
/// reports, with every adjustment to the data logged.
#[derive(Parser, Debug)]
#[command(name = "provisio", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// The main job: inspect, clean, backtest every model, select per product, and project with 80%/95% ranges.
    #[command(
        after_help = "Example:\n  provisio forecast datasets/demo/consumption.csv --out demo-output --horizon 24"
    )]
    Forecast(forecast::ForecastArgs),
    /// Run only the rolling-origin evaluation of every model, for comparing models.
    #[command(
        after_help = "Example:\n  provisio backtest datasets/demo/consumption.csv --origins 12 --backtest-horizon 12"
    )]
    Backtest(forecast::BacktestArgs),
    /// Check the whole procedure out of sample: hide the last months, select on the rest, score against the hidden months beside every single model.
    #[command(
        after_help = "Example:\n  provisio evaluate datasets/demo/consumption.csv --holdout 12"
    )]
    Evaluate(forecast::EvaluateArgs),
    /// Profile the data quality of each product: gaps, stockouts, reporting, outliers, and a verdict.
    #[command(
        after_help = "Example:\n  provisio inspect datasets/demo/consumption.csv --csv quality.csv"
    )]
    Inspect(inspect::InspectArgs),
    /// Clean the data (stockout and reporting adjustments, filling, outlier flags) and write the adjustment log.
    #[command(
        after_help = "Example:\n  provisio clean datasets/demo/consumption.csv --out cleaned/"
    )]
    Clean(clean::CleanCmdArgs),
    /// Rebuild the charts and the one-file HTML report from a forecast's output directory.
    #[command(after_help = "Example:\n  provisio report demo-output")]
    Report(report::ReportArgs),
    /// Score past forecasts against the consumption reported since: accuracy, bias, coverage, tracking signal, value added over naive, audit of adjustments; several past directories are compared as vintages.
    #[command(
        after_help = "Example:\n  provisio forecast datasets/demo/consumption.csv --until 2025-10 --out past\n  provisio review past --actuals datasets/demo/consumption.csv --out review"
    )]
    Review(review::ReviewArgs),
    /// Write an invented dataset: the demo scenario, or a synthetic set of any size for benchmarks.
    #[command(
        after_help = "Examples:\n  provisio generate --demo --out datasets/demo/consumption.csv\n  provisio generate --products 1000 --sites 5 --months 60 --out big.csv"
    )]
    Generate(generate::GenerateArgs),
    /// List the candidate forecasting models: name, what each needs from a series, and what it is.
    #[command(after_help = "Example:\n  provisio models --csv models.csv")]
    Models(models::ModelsArgs),
}

/// Options shared by every command that reads input data.
#[derive(Args, Debug, Clone)]
pub struct ReadArgs {
    /// What to do with two rows for the same product, month and site.
    #[arg(long, value_enum, default_value_t = Duplicates::Reject)]
    duplicates: Duplicates,
    /// How numbers are written in the file.
    #[arg(long, value_enum, default_value_t = Numbers::Plain)]
    numbers: Numbers,
    /// Text encoding of the file.
    #[arg(long, value_enum, default_value_t = Encoding::Utf8)]
    encoding: Encoding,
    /// Sheet to read from a workbook (.xlsx, .xlsm, .xls, .ods); default: the first sheet.
    #[arg(long, value_name = "NAME")]
    sheet: Option<String>,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
enum Numbers {
    /// 1234 or 1234.5 (no thousands separator).
    Plain,
    /// 1,234.5 or 1 234.5 (comma or space between groups of three digits).
    Grouped,
    /// 1234,5, 1.234,5 or 1 234,5 (comma as decimal mark).
    DecimalComma,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
enum Encoding {
    /// UTF-8 (a byte-order mark is stripped).
    #[value(name = "utf-8", alias = "utf8")]
    Utf8,
    /// ISO-8859-1.
    #[value(alias = "iso-8859-1")]
    Latin1,
    /// Windows-1252 (Latin-1 with the euro sign, curly quotes and dashes).
    #[value(name = "windows-1252", alias = "cp1252")]
    Windows1252,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
enum Duplicates {
    /// Reject them (an exact copy is dropped, the first copy kept).
    Reject,
    /// Add their quantities together.
    Sum,
}

impl ReadArgs {
    fn options(&self) -> provisio::data::ReadOptions {
        provisio::data::ReadOptions {
            duplicates: match self.duplicates {
                Duplicates::Reject => provisio::data::DuplicatePolicy::Reject,
                Duplicates::Sum => provisio::data::DuplicatePolicy::Sum,
            },
            numbers: match self.numbers {
                Numbers::Plain => provisio::data::NumberFormat::Plain,
                Numbers::Grouped => provisio::data::NumberFormat::Grouped,
                Numbers::DecimalComma => provisio::data::NumberFormat::DecimalComma,
            },
            encoding: match self.encoding {
                Encoding::Utf8 => provisio::data::Encoding::Utf8,
                Encoding::Latin1 => provisio::data::Encoding::Latin1,
                Encoding::Windows1252 => provisio::data::Encoding::Windows1252,
            },
            latest_month: current_month(),
            sheet: self.sheet.clone(),
        }
    }
}

/// The current calendar month (UTC): rows for later months are refused.
fn current_month() -> Option<provisio::calendar::YearMonth> {
    use chrono::Datelike;
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .ok()?
        .as_secs();
    let now = chrono::DateTime::from_timestamp(i64::try_from(secs).ok()?, 0)?;
    provisio::calendar::YearMonth::new(now.year(), now.month())
}

/// Cleaning options shared by `inspect` and `clean`.
#[derive(Args, Debug, Clone)]
pub struct CleanArgs {
    /// A month with more stockout days than this is treated as missing.
    #[arg(long, default_value_t = 15.0, value_name = "DAYS")]
    max_stockout_days: f64,
    /// A month reported below this reporting rate (fraction) is treated as missing.
    #[arg(long, default_value_t = 0.5, value_name = "RATE")]
    reporting_floor: f64,
    /// k: how much non-reporting facilities are assumed to consume relative to reporting ones (1 = divide by the rate).
    #[arg(long, default_value_t = 1.0, value_name = "K")]
    nonreporting_weight: f64,
    /// Months a site is still filled after its last report before it counts as stopped.
    #[arg(long, default_value_t = 3, value_name = "MONTHS")]
    site_trailing_fill: u32,
    /// Modified z-score above which a month is flagged as an outlier.
    #[arg(long, default_value_t = 3.5, value_name = "Z")]
    outlier_threshold: f64,
    /// Replace flagged outliers by their robust expected value (default: flag only).
    #[arg(long)]
    replace_outliers: bool,
}

impl CleanArgs {
    fn settings(&self) -> provisio::clean::CleanSettings {
        provisio::clean::CleanSettings {
            max_stockout_days: self.max_stockout_days,
            reporting_floor: self.reporting_floor,
            nonreporting_weight: self.nonreporting_weight,
            site_trailing_fill: self.site_trailing_fill,
            outlier_threshold: self.outlier_threshold,
            replace_outliers: self.replace_outliers,
        }
    }
}

/// Exit code for input the tool refuses.
const EXIT_REFUSED: i32 = 1;

/// Parses arguments and runs the command; returns the exit code.
pub fn run() -> i32 {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Forecast(a) => forecast::run_forecast(a),
        Command::Backtest(a) => forecast::run_backtest(a),
        Command::Evaluate(a) => forecast::run_evaluate(a),
        Command::Inspect(a) => inspect::run(a),
        Command::Clean(a) => clean::run(a),
        Command::Report(a) => report::run(a),
        Command::Review(a) => review::run(a),
        Command::Generate(a) => generate::run(a),
        Command::Models(a) => models::run(a),
    };
    match result {
        Ok(()) => 0,
        Err(e) => {
            eprintln!("error: {e:#}");
            EXIT_REFUSED
        }
    }
}

/// Reads and cleans an input file, as `inspect` and `clean` both do.
fn load(
    data: &std::path::Path,
    read: &ReadArgs,
    clean: &CleanArgs,
) -> anyhow::Result<(provisio::data::Dataset, provisio::clean::Cleaned)> {
    load_until(data, read, clean, None)
}

/// [`load`], keeping only rows dated up to `until` when given.
fn load_until(
    data: &std::path::Path,
    read: &ReadArgs,
    clean: &CleanArgs,
    until: Option<provisio::calendar::YearMonth>,
) -> anyhow::Result<(provisio::data::Dataset, provisio::clean::Cleaned)> {
    let settings = clean.settings().check()?;
    let mut ds = provisio::data::read_path(data, &read.options())?;
    if let Some(last) = until {
        ds.keep_until(last);
        if ds.rows.is_empty() {
            anyhow::bail!(
                "{}: no accepted row is dated {last} or earlier (--until {last}); the first month in the file is later",
                data.display()
            );
        }
    }
    let cleaned = provisio::clean::clean(&ds, &settings);
    if cleaned.series.is_empty() {
        let why = cleaned
            .unusable
            .first()
            .map(|(p, r)| format!("; product '{p}': {r}"))
            .unwrap_or_default();
        anyhow::bail!(
            "{}: no product has a usable month of consumption{why}",
            data.display()
        );
    }
    Ok((ds, cleaned))
}

/// Prints the row accounting line and the reading warnings.
fn print_accounting(
    ds: &provisio::data::Dataset,
    cleaned: &provisio::clean::Cleaned,
    quiet_rows: usize,
) {
    let r = cleaned.rows;
    eprintln!(
        "rows read: {} = {} used as reported + {} adjusted + {} rejected{}",
        r.read,
        r.used,
        r.adjusted,
        r.rejected,
        if r.balances() {
            ""
        } else {
            "  (DOES NOT ADD UP: please report this)"
        }
    );
    for w in &ds.warnings {
        eprintln!("warning: {w}");
    }
    for rej in ds.rejected.iter().take(quiet_rows) {
        eprintln!("rejected: {}: {}", ds.place(rej), rej.reason);
    }
    if ds.rejected.len() > quiet_rows {
        eprintln!("rejected: ... and {} more", ds.rejected.len() - quiet_rows);
    }
    for w in cleaned.warnings.iter().take(quiet_rows) {
        eprintln!("warning: {w}");
    }
    if cleaned.warnings.len() > quiet_rows {
        eprintln!(
            "warning: ... and {} more",
            cleaned.warnings.len() - quiet_rows
        );
    }
}

/// Writes the cleaning outputs shared by `clean` and `forecast`; returns
/// the adjustment count per rule and every warning so far.
fn write_clean_outputs(
    out: &std::path::Path,
    ds: &provisio::data::Dataset,
    cleaned: &provisio::clean::Cleaned,
) -> anyhow::Result<(std::collections::BTreeMap<String, usize>, Vec<String>)> {
    use provisio::output;
    let profiles = provisio::quality::profile_all(cleaned);
    output::write_cleaned(&out.join("cleaned.csv"), &cleaned.series)?;
    output::write_adjustments(&out.join("adjustments.csv"), &cleaned.log)?;
    output::write_rejected_of(&out.join("rejected.csv"), ds)?;
    output::write_quality(&out.join("quality.csv"), &profiles)?;
    let mut by_rule = std::collections::BTreeMap::new();
    for e in &cleaned.log {
        *by_rule.entry(e.rule.name().to_string()).or_default() += 1;
    }
    let mut warnings = ds.warnings.clone();
    warnings.extend(cleaned.warnings.iter().cloned());
    Ok((by_rule, warnings))
}

/// Text for a terminal table cell: control characters shown as spaces,
/// cut to `n` characters with an ellipsis.
fn truncate(s: &str, n: usize) -> String {
    provisio::chart::cut(s, n)
}

/// Pads text with spaces to `n` characters.
fn pad(s: &str, n: usize) -> String {
    let len = s.chars().count();
    format!("{s}{}", " ".repeat(n.saturating_sub(len)))
}
