//! Command-line definitions and dispatch.

mod changes;
mod clean;
mod crosscheck;
mod docs;
mod evaluate;
mod forecast;
mod generate;
mod inspect;
mod models;
mod plan;
mod report;
mod review;

use std::io::IsTerminal;
use std::sync::OnceLock;

use clap::parser::ValueSource;
use clap::{ArgMatches, Args, CommandFactory, FromArgMatches, Parser, Subcommand, ValueEnum};

/// Forecast monthly consumption of public-health commodities from facility
/// reports, with every adjustment to the data logged.
#[derive(Parser, Debug)]
#[command(
    name = "provisio",
    version,
    about,
    long_about = None,
    after_help = "Exit codes: 0 success; 1 input, data or configuration refused (the message says where and why); 2 command-line usage error.\nColour: only on a terminal, never when NO_COLOR is set.\n\nExample:\n  provisio forecast datasets/demo/consumption.csv --config datasets/demo/run.toml --out demo-output"
)]
pub struct Cli {
    /// No progress bar, no summary (warnings and errors still go to standard error).
    #[arg(long, short, global = true)]
    quiet: bool,
    /// Print a machine-readable summary (JSON) on standard output instead of the tables.
    #[arg(long, global = true)]
    json: bool,
    #[command(subcommand)]
    command: Command,
}

/// How much the binary prints, set once from the global options.
#[derive(Debug, Clone, Copy, Default)]
struct Mode {
    quiet: bool,
    json: bool,
}

static MODE: OnceLock<Mode> = OnceLock::new();

fn mode() -> Mode {
    MODE.get().copied().unwrap_or_default()
}

/// Whether the human summary is printed (not with --quiet or --json).
fn human() -> bool {
    let m = mode();
    !m.quiet && !m.json
}

/// Whether progress and notes go to standard error (not with --quiet).
fn chatty() -> bool {
    !mode().quiet
}

/// A duration for people: "0.047 s", "2.3 s", "41 s".
fn fmt_secs(secs: f64) -> String {
    if secs < 1.0 {
        format!("{secs:.3} s")
    } else if secs < 10.0 {
        format!("{secs:.1} s")
    } else {
        format!("{secs:.0} s")
    }
}

/// Whether --json was given.
fn json_wanted() -> bool {
    mode().json
}

/// Prints the JSON summary on standard output when --json was given.
fn json_summary(value: impl FnOnce() -> serde_json::Value) {
    if mode().json {
        println!(
            "{}",
            serde_json::to_string_pretty(&value()).unwrap_or_default()
        );
    }
}

/// `println!` for the human summary: silent with --quiet or --json.
macro_rules! say {
    () => {
        if $crate::cli::human() {
            println!();
        }
    };
    ($($t:tt)*) => {
        if $crate::cli::human() {
            println!("{}", $crate::cli::terminal_text(&format!($($t)*)));
        }
    };
}
/// `eprintln!` for notes and progress: silent with --quiet.
macro_rules! note {
    ($($t:tt)*) => {
        if $crate::cli::chatty() {
            eprintln!("{}", $crate::cli::terminal_text(&format!($($t)*)));
        }
    };
}
pub(crate) use {note, say};

/// Whether to colour a stream: only a terminal, and never when `NO_COLOR`
/// is set to anything non-empty (no-color.org).
fn colour_allowed(is_terminal: bool, no_color: Option<std::ffi::OsString>) -> bool {
    is_terminal && no_color.map_or(true, |v| v.is_empty())
}

fn stderr_colour() -> bool {
    static C: OnceLock<bool> = OnceLock::new();
    *C.get_or_init(|| {
        colour_allowed(
            std::io::stderr().is_terminal(),
            std::env::var_os("NO_COLOR"),
        )
    })
}

/// A message prefix such as `warning:`, bold and coloured when allowed
/// (`code`: an ANSI colour number).
fn prefix(word: &str, code: u8) -> String {
    if stderr_colour() {
        format!("\x1b[1;{code}m{word}:\x1b[0m")
    } else {
        format!("{word}:")
    }
}

/// Prints a warning on standard error (also with --quiet).
fn warn(message: &str) {
    eprintln!(
        "{} {}",
        prefix("warning", 33),
        terminal_text(&shown_paths(message))
    );
}

/// Whether a character is shown as `<U+XXXX>` on a terminal: control
/// characters other than tab and line feed (ESC starts terminal commands,
/// BEL rings, NUL and CR hide text), and the invisible format characters
/// that reorder or hide text (bidirectional overrides and isolates,
/// zero-width spaces and joiners, the byte-order mark).
fn is_hidden_on_terminal(c: char) -> bool {
    (c.is_control() && c != '\n' && c != '\t')
        || matches!(
            c,
            '\u{061C}'
                | '\u{200B}'..='\u{200F}'
                | '\u{202A}'..='\u{202E}'
                | '\u{2060}'..='\u{2069}'
                | '\u{FEFF}'
        )
}

/// The one sanitiser for text printed to a terminal: every message, table
/// cell and warning that may hold data goes through it (`say!`, `note!`,
/// `warn`, errors, rejected rows, table cells), so data can neither send
/// terminal commands nor hide or reorder what is shown.
pub(crate) fn terminal_text(s: &str) -> std::borrow::Cow<'_, str> {
    if !s.chars().any(is_hidden_on_terminal) {
        return std::borrow::Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 16);
    for c in s.chars() {
        if is_hidden_on_terminal(c) {
            out.push_str(&format!("<U+{:04X}>", c as u32));
        } else {
            out.push(c);
        }
    }
    std::borrow::Cow::Owned(out)
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
    Evaluate(evaluate::EvaluateArgs),
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
    /// Rebuild the one-file HTML report (and chart files on request) and the workbook from a forecast's output directory.
    #[command(after_help = "Example:\n  provisio report demo-output")]
    Report(report::ReportArgs),
    /// Score past forecasts against the consumption reported since: accuracy, bias, coverage, tracking signal, value added over naive, audit of adjustments; several past directories are compared as vintages.
    #[command(
        after_help = "Example:\n  provisio forecast datasets/demo/consumption.csv --until 2025-10 --out past\n  provisio review past --actuals datasets/demo/consumption.csv --out review"
    )]
    Review(review::ReviewArgs),
    /// Compare the consumption forecast with what services data and population data imply, per product, with plain-words flags where they diverge.
    #[command(
        after_help = "Example:\n  provisio crosscheck demo-output --services datasets/demo/services.csv --population datasets/demo/population.csv"
    )]
    Crosscheck(crosscheck::CrossCheckArgs),
    /// Turn a forecast into a supply plan: month-by-month stock projection, months of stock, stockout and overstock flags, and proposed orders under a max–min rule.
    #[command(
        after_help = "Example:\n  provisio forecast datasets/demo/consumption.csv --out demo-output\n  provisio plan demo-output --stock datasets/demo/stock.csv --on-order datasets/demo/on_order.csv"
    )]
    Plan(plan::PlanArgs),
    /// Write an invented dataset: the demo scenario, or a synthetic set of any size for benchmarks.
    #[command(
        after_help = "Examples:\n  provisio generate --demo --out datasets/demo/consumption.csv\n  provisio generate --products 1000 --sites 5 --months 60 --out big.csv"
    )]
    Generate(generate::GenerateArgs),
    /// List the candidate forecasting models: name, what each needs from a series, and what it is.
    #[command(after_help = "Examples:\n  provisio models\n  provisio models --csv models.csv")]
    Models(models::ModelsArgs),
    /// Print a shell completion script on standard output.
    #[command(
        after_help = "Examples:\n  provisio completions bash > ~/.local/share/bash-completion/completions/provisio\n  provisio completions zsh > ~/.zfunc/_provisio\n  provisio completions fish > ~/.config/fish/completions/provisio.fish"
    )]
    Completions(docs::CompletionsArgs),
    /// Write the manual pages (provisio.1 and one per command) to a folder.
    #[command(after_help = "Example:\n  provisio man --out man/ && man man/provisio-forecast.1")]
    Man(docs::ManArgs),
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
    /// Sheet to read from a workbook (.xlsx, .xlsm, .xls, .ods); default: the active sheet (the one the workbook opens on) when visible, else the first visible sheet.
    #[arg(long, value_name = "NAME")]
    sheet: Option<String>,
    /// How the table is laid out: long (a row per product and month), wide (a row per product, or product and site, and a column per month), or auto (found from the header).
    #[arg(long, value_enum, default_value_t = Layout::Auto)]
    layout: Layout,
    /// Wide layout: stockout days as a table of the same shape (product rows, month columns) in this file, CSV or workbook.
    #[arg(long, value_name = "FILE")]
    stockout_file: Option<std::path::PathBuf>,
    /// Wide layout: stockout days on this sheet (of --stockout-file when given, else of the input workbook).
    #[arg(long, value_name = "NAME")]
    stockout_sheet: Option<String>,
    /// Wide layout: reporting rates as a table of the same shape in this file, CSV or workbook.
    #[arg(long, value_name = "FILE")]
    rate_file: Option<std::path::PathBuf>,
    /// Wide layout: reporting rates on this sheet (of --rate-file when given, else of the input workbook).
    #[arg(long, value_name = "NAME")]
    rate_sheet: Option<String>,
}

#[derive(ValueEnum, Debug, Clone, Copy)]
enum Layout {
    /// Found from the header: wide when it has a product column, no month column, and mostly months as columns.
    Auto,
    /// One row per product (and site) and month.
    Long,
    /// One row per product (and site), one column per month.
    Wide,
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

impl Numbers {
    fn format(self) -> provisio::data::NumberFormat {
        match self {
            Numbers::Plain => provisio::data::NumberFormat::Plain,
            Numbers::Grouped => provisio::data::NumberFormat::Grouped,
            Numbers::DecimalComma => provisio::data::NumberFormat::DecimalComma,
        }
    }
}

impl Encoding {
    fn encoding(self) -> provisio::data::Encoding {
        match self {
            Encoding::Utf8 => provisio::data::Encoding::Utf8,
            Encoding::Latin1 => provisio::data::Encoding::Latin1,
            Encoding::Windows1252 => provisio::data::Encoding::Windows1252,
        }
    }
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
    /// Takes the `[input]` values of the configuration for options not
    /// given on the command line.
    fn apply_config(
        &mut self,
        c: &provisio::config::InputSection,
        given: &Given,
        dir: &std::path::Path,
    ) -> anyhow::Result<()> {
        if let (Some(v), false) = (&c.duplicates, given.cli("duplicates")) {
            self.duplicates = enum_value(v)?;
        }
        if let (Some(v), false) = (&c.numbers, given.cli("numbers")) {
            self.numbers = enum_value(v)?;
        }
        if let (Some(v), false) = (&c.encoding, given.cli("encoding")) {
            self.encoding = enum_value(v)?;
        }
        if let (Some(v), false) = (&c.sheet, given.cli("sheet")) {
            self.sheet = Some(v.clone());
        }
        if let (Some(v), false) = (&c.layout, given.cli("layout")) {
            self.layout = enum_value(v)?;
        }
        let path = |p: &String| {
            let p = std::path::Path::new(p);
            if p.is_absolute() {
                p.to_path_buf()
            } else {
                dir.join(p)
            }
        };
        if let (Some(v), false) = (&c.stockout_file, given.cli("stockout_file")) {
            self.stockout_file = Some(path(v));
        }
        if let (Some(v), false) = (&c.stockout_sheet, given.cli("stockout_sheet")) {
            self.stockout_sheet = Some(v.clone());
        }
        if let (Some(v), false) = (&c.rate_file, given.cli("rate_file")) {
            self.rate_file = Some(path(v));
        }
        if let (Some(v), false) = (&c.rate_sheet, given.cli("rate_sheet")) {
            self.rate_sheet = Some(v.clone());
        }
        Ok(())
    }

    /// The `[input]` values in effect.
    fn to_config(&self, c: &mut provisio::config::InputSection, dir: &std::path::Path) {
        let o = self.options();
        c.duplicates = Some(format!("{:?}", o.duplicates).to_lowercase());
        c.numbers = Some(o.numbers.name().to_string());
        c.encoding = Some(o.encoding.name().to_string());
        c.sheet = self.sheet.clone();
        c.layout = Some(o.layout.name().to_string());
        let path =
            |p: &Option<std::path::PathBuf>| p.as_ref().map(|p| forecast::path_for_config(p, dir));
        c.stockout_file = path(&self.stockout_file);
        c.stockout_sheet = self.stockout_sheet.clone();
        c.rate_file = path(&self.rate_file);
        c.rate_sheet = self.rate_sheet.clone();
    }

    fn options(&self) -> provisio::data::ReadOptions {
        provisio::data::ReadOptions {
            duplicates: match self.duplicates {
                Duplicates::Reject => provisio::data::DuplicatePolicy::Reject,
                Duplicates::Sum => provisio::data::DuplicatePolicy::Sum,
            },
            numbers: self.numbers.format(),
            encoding: self.encoding.encoding(),
            latest_month: current_month(),
            sheet: self.sheet.clone(),
            limits: sheet_limits(),
            layout: match self.layout {
                Layout::Auto => provisio::data::TableLayout::Auto,
                Layout::Long => provisio::data::TableLayout::Long,
                Layout::Wide => provisio::data::TableLayout::Wide,
            },
            stockout: companion(&self.stockout_file, &self.stockout_sheet),
            rate: companion(&self.rate_file, &self.rate_sheet),
        }
    }

    /// The companion files read with the data, by option name.
    fn companion_files(&self) -> [(&'static str, Option<&std::path::Path>); 2] {
        [
            ("--stockout-file", self.stockout_file.as_deref()),
            ("--rate-file", self.rate_file.as_deref()),
        ]
    }
}

/// A table of stockout days or reporting rates (wide layout), when a file
/// or a sheet is named.
fn companion(
    file: &Option<std::path::PathBuf>,
    sheet: &Option<String>,
) -> Option<provisio::data::Companion> {
    (file.is_some() || sheet.is_some()).then(|| provisio::data::Companion {
        file: file.clone(),
        sheet: sheet.clone(),
    })
}

/// The workbook limits, raised by environment variables when a genuine
/// workbook is larger than the defaults allow.
fn sheet_limits() -> provisio::data::SheetLimits {
    use provisio::data::SheetLimits;
    let mut limits = SheetLimits::default();
    let read = |var: &str| -> Option<u64> {
        let v = std::env::var(var).ok()?;
        match v.trim().parse::<u64>() {
            Ok(n) if n > 0 => Some(n),
            _ => {
                warn(&format!(
                    "{var}={v:?} is not a whole number above 0; the default limit is used"
                ));
                None
            }
        }
    };
    if let Some(n) = read(SheetLimits::CELLS_VAR) {
        limits.max_cells = usize::try_from(n).unwrap_or(usize::MAX);
    }
    if let Some(n) = read(SheetLimits::UNPACKED_VAR) {
        limits.max_unpacked_bytes = n.saturating_mul(1 << 20);
    }
    limits
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
    /// Interquartile ranges beyond the quartiles of the seasonal decomposition's remainder at which a month is flagged as an outlier.
    #[arg(long, default_value_t = provisio::clean::outliers::DEFAULT_THRESHOLD, value_name = "K")]
    outlier_threshold: f64,
    /// Fit the models on the expected value of a flagged outlier month instead of the reported one (default true: measured to forecast true demand better; the reported value stays in cleaned.csv and the log). `--replace-outliers false` flags only.
    #[arg(long, value_name = "true|false", default_value_t = true, num_args = 0..=1, default_missing_value = "true", action = clap::ArgAction::Set)]
    replace_outliers: bool,
    /// Stockout thresholds of single products (from the configuration file).
    #[arg(skip)]
    stockout_days_by_product: std::collections::BTreeMap<String, f64>,
}

impl CleanArgs {
    /// Takes the `[cleaning]` values of the configuration for options not
    /// given on the command line.
    fn apply_config(&mut self, c: &provisio::config::CleaningSection, given: &Given) {
        fn set<T: Copy>(field: &mut T, v: Option<T>, on_cli: bool) {
            if let (Some(v), false) = (v, on_cli) {
                *field = v;
            }
        }
        set(
            &mut self.max_stockout_days,
            c.max_stockout_days,
            given.cli("max_stockout_days"),
        );
        set(
            &mut self.reporting_floor,
            c.reporting_floor,
            given.cli("reporting_floor"),
        );
        set(
            &mut self.nonreporting_weight,
            c.nonreporting_weight,
            given.cli("nonreporting_weight"),
        );
        set(
            &mut self.site_trailing_fill,
            c.site_trailing_fill,
            given.cli("site_trailing_fill"),
        );
        set(
            &mut self.outlier_threshold,
            c.outlier_threshold,
            given.cli("outlier_threshold"),
        );
        set(
            &mut self.replace_outliers,
            c.replace_outliers,
            given.cli("replace_outliers"),
        );
    }

    /// Takes each product's own stockout threshold from the configuration.
    fn apply_products(&mut self, cfg: &provisio::config::RunConfig) {
        for (name, p) in &cfg.products {
            if let Some(d) = p.max_stockout_days {
                self.stockout_days_by_product.insert(name.clone(), d);
            }
        }
    }

    /// The `[cleaning]` values in effect.
    fn to_config(&self) -> provisio::config::CleaningSection {
        provisio::config::CleaningSection {
            max_stockout_days: Some(self.max_stockout_days),
            reporting_floor: Some(self.reporting_floor),
            nonreporting_weight: Some(self.nonreporting_weight),
            site_trailing_fill: Some(self.site_trailing_fill),
            outlier_threshold: Some(self.outlier_threshold),
            replace_outliers: Some(self.replace_outliers),
        }
    }

    fn settings(&self) -> provisio::clean::CleanSettings {
        provisio::clean::CleanSettings {
            max_stockout_days: self.max_stockout_days,
            reporting_floor: self.reporting_floor,
            nonreporting_weight: self.nonreporting_weight,
            site_trailing_fill: self.site_trailing_fill,
            outlier_threshold: self.outlier_threshold,
            replace_outliers: self.replace_outliers,
            stockout_days_by_product: self.stockout_days_by_product.clone(),
        }
    }
}

/// Exit code for input the tool refuses.
const EXIT_REFUSED: i32 = 1;

/// Parses arguments and runs the command; returns the exit code.
pub fn run() -> i32 {
    // Usage errors, --help and --version exit here (2 for usage errors).
    let matches = Cli::command().get_matches();
    let cli = match Cli::from_arg_matches(&matches) {
        Ok(c) => c,
        Err(e) => e.exit(),
    };
    let _ = MODE.set(Mode {
        quiet: cli.quiet,
        json: cli.json,
    });
    if let Some(name) = std::env::var_os("PROVISIO_TEST_FAIL_WRITE") {
        provisio::output::simulate_write_failure(&name.to_string_lossy());
    }
    let sub = matches
        .subcommand()
        .map(|(_, m)| m.clone())
        .unwrap_or_default();
    let given = Given(&sub);
    let result = match cli.command {
        Command::Forecast(a) => forecast::run_forecast(a, &given),
        Command::Backtest(a) => forecast::run_backtest(a, &given),
        Command::Evaluate(a) => evaluate::run_evaluate(a, &given),
        Command::Inspect(a) => inspect::run(a, &given),
        Command::Clean(a) => clean::run(a, &given),
        Command::Report(a) => report::run(a),
        Command::Review(a) => review::run(a),
        Command::Crosscheck(a) => crosscheck::run(a),
        Command::Plan(a) => plan::run(a),
        Command::Generate(a) => generate::run(a),
        Command::Models(a) => models::run(a),
        Command::Completions(a) => docs::completions(a),
        Command::Man(a) => docs::man(a),
    };
    match result {
        Ok(()) => 0,
        Err(e) if e.downcast_ref::<clap::Error>().is_some() => {
            let code = e.downcast_ref::<clap::Error>().map_or(2, |c| c.exit_code());
            if let Some(c) = e.downcast_ref::<clap::Error>() {
                let _ = c.print();
            }
            code
        }
        Err(e) => {
            let text = shown_paths(&error_text(&e));
            eprintln!("{} {}", prefix("error", 31), terminal_text(&text));
            EXIT_REFUSED
        }
    }
}

/// An error and its causes on one line, each cause once: a library error
/// that already quotes its cause (the operating system's message) does not
/// get it a second time.
fn error_text(e: &anyhow::Error) -> String {
    let mut out = String::new();
    for cause in e.chain() {
        let text = cause.to_string();
        if out.contains(&text) {
            continue;
        }
        if !out.is_empty() {
            out.push_str(": ");
        }
        out.push_str(&text);
    }
    out
}

/// Staging folders of the runs in progress and the output folders they
/// stand for: a message names the output folder, not the staging copy.
static STAGED: std::sync::Mutex<Vec<(String, String)>> = std::sync::Mutex::new(Vec::new());

/// Prepares the staging copy of a run's output folder (see
/// [`provisio::output::FolderRun`]) and returns the folder to write into;
/// messages from then on name the output folder, not the copy.
fn stage(run: &mut provisio::output::FolderRun) -> anyhow::Result<std::path::PathBuf> {
    let dir = run.prepare()?;
    if dir != run.target() {
        if let Ok(mut v) = STAGED.lock() {
            v.push((
                dir.display().to_string(),
                run.target().display().to_string(),
            ));
        }
    }
    Ok(dir)
}

/// For a command that adds files to an existing output folder: its lock,
/// when the folder exists (when not, the command's own reading says so).
fn start_existing(dir: &std::path::Path) -> anyhow::Result<Option<provisio::output::FolderRun>> {
    Ok(if dir.is_dir() {
        Some(provisio::output::FolderRun::start(dir)?)
    } else {
        None
    })
}

/// The folder to write into for a run from [`start_existing`].
fn stage_existing(
    run: &mut Option<provisio::output::FolderRun>,
    dir: &std::path::Path,
) -> anyhow::Result<std::path::PathBuf> {
    match run {
        Some(r) => stage(r),
        None => Ok(dir.to_path_buf()),
    }
}

/// `text` with each staging folder replaced by the output folder it
/// stands for.
fn shown_paths(text: &str) -> String {
    let mut out = text.to_string();
    if let Ok(v) = STAGED.lock() {
        for (stage, target) in v.iter() {
            out = out.replace(stage.as_str(), target);
        }
    }
    out
}

/// A usage error of a command found after parsing (exit code 2, like
/// clap's own).
fn usage_error(command: &str, message: &str) -> anyhow::Error {
    let mut cmd = Cli::command();
    cmd.build();
    let mut sub = cmd.find_subcommand(command).cloned().unwrap_or(cmd);
    anyhow::Error::new(sub.error(clap::error::ErrorKind::MissingRequiredArgument, message))
}

/// Which options the user gave on the command line (they override the
/// configuration file).
struct Given<'a>(&'a ArgMatches);

impl Given<'_> {
    /// Whether the option with this id (the field name) was given on the
    /// command line, not left at its default.
    fn cli(&self, id: &str) -> bool {
        self.0.value_source(id) == Some(ValueSource::CommandLine)
    }
}

/// Parses a value name of a clap value enum (the configuration was checked
/// against the same names, so a miss is a bug caught by a test).
fn enum_value<T: ValueEnum>(name: &str) -> anyhow::Result<T> {
    T::from_str(name, true).map_err(|e| anyhow::anyhow!("{e}"))
}

/// Reads and cleans an input file, as `inspect` and `clean` both do.
fn load(
    data: &std::path::Path,
    read: &ReadArgs,
    clean: &CleanArgs,
) -> anyhow::Result<(provisio::data::Dataset, provisio::clean::Cleaned)> {
    load_until(data, read, clean, None)
}

/// The data cleaned with each product's rows kept up to its month in
/// `cut` (a product not in it left out): the history `evaluate` selects
/// on, cleaned without the months it hides.
fn load_cut(
    data: &std::path::Path,
    read: &ReadArgs,
    clean: &CleanArgs,
    cut: &std::collections::HashMap<String, provisio::calendar::YearMonth>,
) -> anyhow::Result<provisio::clean::Cleaned> {
    let settings = clean.settings().check()?;
    let mut ds = provisio::data::read_path(data, &read.options())?;
    let keep = |p: &str, m: provisio::calendar::YearMonth| cut.get(p).is_some_and(|c| m <= *c);
    ds.rows.retain(|r| keep(&r.product, r.month));
    ds.merged.retain(|r| keep(&r.product, r.month));
    Ok(provisio::clean::clean_taking_rows(&mut ds, &settings))
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
        let latest = ds.rows.iter().map(|r| r.month).max();
        if let Some(end) = latest.filter(|end| *end < last) {
            ds.warnings.push(format!(
                "--until {last} is after the data's last month {end}: every row is used, as without it; the forecast starts after {end}"
            ));
        }
        ds.keep_until(last);
        if ds.rows.is_empty() {
            anyhow::bail!(
                "{}: no accepted row is dated {last} or earlier (--until {last}); the first month in the file is later",
                data.display()
            );
        }
    }
    // The rows move into the cleaned inputs: no command reads them after.
    let cleaned = provisio::clean::clean_taking_rows(&mut ds, &settings);
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

/// What scaling for incomplete reporting added to each product's history:
/// Σ(after − before) of its `reporting-scaled` log entries ÷ its reported
/// volume, for the products where it did anything.
fn reporting_uplift(cleaned: &provisio::clean::Cleaned) -> Vec<(&str, f64)> {
    let mut added: std::collections::HashMap<&str, f64> = std::collections::HashMap::new();
    for a in &cleaned.log {
        if a.rule() == provisio::clean::Rule::ReportingScaled {
            if let (Some(b), Some(x)) = (a.before, a.after) {
                *added.entry(&*a.product).or_default() += x - b;
            }
        }
    }
    cleaned
        .series
        .iter()
        .filter_map(|s| {
            let up = *added.get(s.product.as_str())?;
            let reported: f64 = s.reported.iter().flatten().sum();
            (reported > 0.0).then(|| (s.product.as_str(), up / reported))
        })
        .collect()
}

/// One line on the largest routine change cleaning makes: scaling up for
/// incomplete reporting, its range over the products and the largest.
pub(super) fn print_reporting_uplift(cleaned: &provisio::clean::Cleaned, where_: &str) {
    let mut up = reporting_uplift(cleaned);
    if up.is_empty() {
        return;
    }
    up.sort_by(|a, b| a.1.total_cmp(&b.1));
    let pct = |v: f64| format!("{:.1}%", 100.0 * v);
    let (lo, hi) = (up[0], up[up.len() - 1]);
    let median = up[up.len() / 2].1;
    let range = if up.len() == 1 {
        format!("{} to the reported volume of {}", pct(hi.1), hi.0)
    } else {
        format!(
            "{:.1}–{} to the reported volume ({} of {} products; median {}, the most: {} {})",
            100.0 * lo.1,
            pct(hi.1),
            up.len(),
            cleaned.series.len(),
            pct(median),
            hi.0,
            pct(hi.1)
        )
    };
    say!(
        "scaling for incomplete reporting added {range}; per product: {where_} (rule reporting-scaled)"
    );
}

/// Prints the row accounting line and the reading warnings.
fn print_accounting(
    ds: &provisio::data::Dataset,
    cleaned: &provisio::clean::Cleaned,
    quiet_rows: usize,
) {
    let r = cleaned.rows;
    note!(
        "rows read: {} = {} used as reported + {} corrected by cleaning + {} rejected{}{}",
        r.read,
        r.used,
        r.adjusted,
        r.rejected,
        match &ds.layout.wide {
            Some(w) if w.site_column.is_some() => " (wide layout: each counted here is one value, a product, site and month with something in its cell)",
            Some(_) => " (wide layout: each counted here is one value, a product and month with something in its cell)",
            None => "",
        },
        if r.balances() {
            ""
        } else {
            "  (DOES NOT ADD UP: please report this)"
        }
    );
    for w in &ds.warnings {
        warn(w);
    }
    for rej in ds.rejected.iter().take(quiet_rows) {
        eprintln!(
            "{} {}",
            prefix("rejected", 33),
            terminal_text(&format!("{}: {}", ds.place(rej), rej.reason))
        );
    }
    if ds.rejected.len() > quiet_rows {
        eprintln!(
            "{} ... and {} more",
            prefix("rejected", 33),
            ds.rejected.len() - quiet_rows
        );
    }
    for w in cleaned.warnings.iter().take(quiet_rows) {
        warn(w);
    }
    if cleaned.warnings.len() > quiet_rows {
        warn(&format!(
            "... and {} more",
            cleaned.warnings.len() - quiet_rows
        ));
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
        *by_rule.entry(e.rule().name().to_string()).or_default() += 1;
    }
    let mut warnings = ds.warnings.clone();
    warnings.extend(cleaned.warnings.iter().cloned());
    Ok((by_rule, warnings))
}

/// Width of a name column: the longest name, at least 7 ("product") and at
/// most 40 characters (longer names are cut with [`truncate`]).
fn name_width<S: AsRef<str>>(names: impl IntoIterator<Item = S>) -> usize {
    names
        .into_iter()
        .map(|n| n.as_ref().chars().count())
        .max()
        .unwrap_or(7)
        .clamp(7, 40)
}

/// Text for a terminal table cell: hidden characters made visible
/// ([`terminal_text`]), tabs and line breaks shown as spaces,
/// cut to `n` characters with an ellipsis.
fn truncate(s: &str, n: usize) -> String {
    provisio::chart::cut(&terminal_text(s), n)
}

/// Pads text with spaces to `n` characters.
fn pad(s: &str, n: usize) -> String {
    let len = s.chars().count();
    format!("{s}{}", " ".repeat(n.saturating_sub(len)))
}

/// A path as it will be opened: canonical when it exists, else its
/// canonical folder joined with its name (an output not yet written).
fn resolved_path(p: &std::path::Path) -> Option<std::path::PathBuf> {
    if let Ok(c) = std::fs::canonicalize(p) {
        return Some(c);
    }
    let parent = p
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(std::path::Path::new("."));
    Some(std::fs::canonicalize(parent).ok()?.join(p.file_name()?))
}

/// Refuses single-file outputs that name a file the command reads, or
/// each other: writing one would replace the data while it is being read,
/// or one output would silently replace the other. Checked before any
/// work, so nothing is written. `outputs` and `inputs` pair an option name
/// with the path given to it.
/// Refuses an input that is one of the files a command writes into the
/// forecast folder `dir` (`outputs`, by name): running would replace it.
fn refuse_input_named_as_output(
    command: &str,
    dir: &std::path::Path,
    outputs: &[&str],
    inputs: &[(&str, Option<&std::path::Path>)],
) -> anyhow::Result<()> {
    for (flag, input) in inputs {
        let Some(input) = input else { continue };
        let Ok(given) = std::fs::canonicalize(input) else {
            continue;
        };
        for name in outputs {
            if resolved_path(&dir.join(name)).is_some_and(|o| o == given) {
                anyhow::bail!(
                    "{flag} {} is the file `provisio {command}` writes as {name} in {}; running would replace it: move or rename the input file (keep it outside the forecast folder)",
                    input.display(),
                    dir.display()
                );
            }
        }
    }
    Ok(())
}

fn refuse_same_file(
    outputs: &[(&str, Option<&std::path::Path>)],
    inputs: &[(&str, Option<&std::path::Path>)],
) -> anyhow::Result<()> {
    let inputs: Vec<(&str, &std::path::Path, std::path::PathBuf)> = inputs
        .iter()
        .filter_map(|(n, p)| Some((*n, (*p)?, std::fs::canonicalize((*p)?).ok()?)))
        .collect();
    let mut seen: Vec<(&str, std::path::PathBuf)> = Vec::new();
    for (name, path) in outputs {
        let Some(path) = path else { continue };
        let Some(target) = resolved_path(path) else {
            continue;
        };
        if let Some((input, given, _)) = inputs.iter().find(|(_, _, c)| *c == target) {
            anyhow::bail!(
                "{name} {} is the same file as the {input} {}, which this command reads; \
                 writing it would replace that file: give {name} a different file name",
                path.display(),
                given.display()
            );
        }
        if let Some((other, _)) = seen.iter().find(|(_, c)| *c == target) {
            anyhow::bail!(
                "{name} {} is the same file as {other}; one would replace the other: \
                 give each output its own file name",
                path.display()
            );
        }
        seen.push((name, target));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_cause_already_quoted_is_not_repeated() {
        let io = std::io::Error::new(std::io::ErrorKind::NotFound, "No such file or directory");
        let e: anyhow::Error = provisio::error::Error::Io {
            path: "nope.csv".into(),
            action: "cannot read input",
            source: io,
        }
        .into();
        assert_eq!(
            error_text(&e),
            "nope.csv: cannot read input: No such file or directory"
        );
        // A cause not in the message is still shown.
        let e = anyhow::anyhow!("disk full").context("cannot write forecast.csv");
        assert_eq!(error_text(&e), "cannot write forecast.csv: disk full");
    }

    #[test]
    fn colour_only_on_a_terminal_without_no_color() {
        assert!(colour_allowed(true, None));
        assert!(!colour_allowed(false, None));
        assert!(!colour_allowed(true, Some("1".into())));
        // no-color.org: an empty NO_COLOR does not disable colour.
        assert!(colour_allowed(true, Some("".into())));
    }

    #[test]
    fn configuration_names_are_the_command_line_names() {
        use provisio::config as c;
        let names = |v: &[clap::builder::PossibleValue]| -> Vec<String> {
            v.iter().map(|p| p.get_name().to_string()).collect()
        };
        let pv = |all: &[Numbers]| {
            all.iter()
                .filter_map(|x| x.to_possible_value())
                .collect::<Vec<_>>()
        };
        assert_eq!(names(&pv(Numbers::value_variants())), c::NUMBERS);
        let e: Vec<_> = Encoding::value_variants()
            .iter()
            .filter_map(|x| x.to_possible_value())
            .collect();
        assert_eq!(names(&e), c::ENCODINGS);
        let l: Vec<_> = Layout::value_variants()
            .iter()
            .filter_map(|x| x.to_possible_value())
            .collect();
        assert_eq!(names(&l), c::LAYOUTS);
        let d: Vec<_> = Duplicates::value_variants()
            .iter()
            .filter_map(|x| x.to_possible_value())
            .collect();
        assert_eq!(names(&d), c::DUPLICATES);
        forecast::check_config_names();
        // Every run key is an option of `forecast` (same name, `-` for `_`).
        let cmd = Cli::command();
        let fc = cmd.find_subcommand("forecast").unwrap();
        for k in c::KEYS {
            let id = k.key;
            assert!(
                fc.get_arguments().any(|a| a.get_id() == id),
                "forecast has no option for {}",
                k.key
            );
        }
        // And every option of `forecast` is a key: a new option needs its
        // key in provisio::config (KEYS, the section struct, docs) and a
        // line in apply_config / to_config.
        let not_keys = ["config", "write_config", "quiet", "json", "help", "version"];
        for a in fc.get_arguments() {
            let id = a.get_id().as_str();
            assert!(
                not_keys.contains(&id) || c::KEYS.iter().any(|k| k.key == id),
                "option --{id} of forecast has no configuration key"
            );
        }
    }

    #[test]
    fn every_command_has_examples_in_its_help() {
        let mut cmd = Cli::command();
        cmd.build();
        for sub in cmd.get_subcommands().filter(|s| s.get_name() != "help") {
            let help = sub
                .get_after_help()
                .map(|h| h.to_string())
                .unwrap_or_default();
            assert!(
                help.starts_with("Example"),
                "{} has no examples",
                sub.get_name()
            );
            assert!(
                help.contains(&format!("provisio {}", sub.get_name())),
                "{}",
                sub.get_name()
            );
        }
    }
}
