//! End-to-end tests of the run configuration file and the command-line
//! conventions: precedence, --write-config round trip, located errors,
//! per-product settings in the outputs, --json, --quiet, exit codes,
//! completions, man pages and colour.

mod common;

use common::{repo, text, Workdir};

/// A working directory holding `data.csv`, the two invented products.
fn workdir() -> Workdir {
    let w = Workdir::new();
    w.write("data.csv", two_products());
    w
}

/// Two invented products over 48 months: Alpha seasonal, Beta flat with a
/// 10-day stockout in three months.
fn two_products() -> String {
    let mut s = String::from("product,month,consumed,stockout_days\n");
    for t in 0..48 {
        let (y, m) = (2021 + t / 12, t % 12 + 1);
        let season = (2.0 * std::f64::consts::PI * t as f64 / 12.0).sin();
        let alpha = 500.0 + 150.0 * season + ((t * 37) % 11) as f64;
        s.push_str(&format!("Alpha,{y}-{m:02},{alpha:.0},0\n"));
        let stockout = if t % 16 == 5 { 10 } else { 0 };
        let beta = 300 + (t * 13) % 17;
        s.push_str(&format!("Beta,{y}-{m:02},{beta},{stockout}\n"));
    }
    s
}

fn months_of(w: &Workdir, out: &str, product: &str) -> usize {
    let (_, rows) = w.read_csv_records(&format!("{out}/forecast.csv"));
    rows.iter().filter(|r| &r[0] == product).count()
}

const FAST: [&str; 5] = ["--origins", "3", "--backtest-horizon", "3", "--no-report"];

#[test]
fn command_line_overrides_the_file_which_overrides_defaults() {
    let w = workdir();
    w.write(
        "run.toml",
        "[input]\ndata = \"data.csv\"\n[projection]\nhorizon = 6\n[backtest]\norigins = 3\nbacktest_horizon = 3\n[output]\nno_report = true\nout = \"from-file\"\n",
    );
    // File over defaults: horizon 6, origins 3, data and out from the file.
    let o = w.run(&["forecast", "--config", "run.toml"]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(months_of(&w, "from-file", "Alpha"), 6);
    let m = w.manifest("from-file");
    assert_eq!(m["forecast_settings"]["backtest"]["origins"], 3);
    assert_eq!(m["config_file"], "run.toml");
    assert_eq!(m["config_sha256"].as_str().map(str::len), Some(64));
    assert!(!w.path("from-file/report.html").exists());
    // Command line over the file.
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--config",
        "run.toml",
        "--horizon",
        "9",
        "--out",
        "cli",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(months_of(&w, "cli", "Alpha"), 9);
    assert_eq!(
        w.manifest("cli")["forecast_settings"]["backtest"]["origins"],
        3
    );
    // An option given with its default value still wins over the file.
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--config",
        "run.toml",
        "--horizon",
        "24",
        "--out",
        "dflt",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(months_of(&w, "dflt", "Alpha"), 24);
    // No file: the built-in default of 24 months.
    let mut args = vec!["forecast", "data.csv", "--out", "none"];
    args.extend(FAST);
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    assert_eq!(months_of(&w, "none", "Alpha"), 24);
    assert!(w.manifest("none")["config_file"].is_null());
}

#[test]
fn written_configuration_reruns_the_same_way() {
    let w = workdir();
    w.write(
        "run.toml",
        "[cleaning]\nmax_stockout_days = 12\n[selection]\nselect_by = \"wape\"\n[products.\"Beta\"]\nunits = \"tablet\"\npack_size = 10\nseasonal = false\n",
    );
    let mut args = vec![
        "forecast",
        "data.csv",
        "--config",
        "run.toml",
        "--horizon",
        "7",
        "--out",
        "first",
    ];
    args.extend(FAST);
    let mut write = args.clone();
    write.extend(["--write-config", "saved/effective.toml"]);
    let o = w.run(&write);
    assert!(o.status.success(), "{}", text(&o));
    assert!(
        !w.path("first").exists(),
        "--write-config only writes the file"
    );
    let saved = std::fs::read_to_string(w.path("saved/effective.toml")).unwrap();
    // Every key is written, the command-line values included, paths
    // relative to the written file's folder.
    let v: toml::Table = saved.parse().unwrap();
    assert_eq!(v["projection"]["horizon"].as_integer(), Some(7));
    assert_eq!(v["backtest"]["origins"].as_integer(), Some(3));
    assert_eq!(v["cleaning"]["max_stockout_days"].as_float(), Some(12.0));
    assert_eq!(v["input"]["data"].as_str(), Some("../data.csv"));
    assert_eq!(v["output"]["out"].as_str(), Some("../first"));
    assert_eq!(v["products"]["Beta"]["pack_size"].as_float(), Some(10.0));
    for key in provisio::config::KEYS {
        assert!(saved.contains(&format!("{} = ", key.key)), "{}", key.key);
    }
    // Run as given, then from the written file alone: same settings, same forecast.
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&[
        "forecast",
        "--config",
        "saved/effective.toml",
        "--out",
        "second",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let (m1, m2) = (w.manifest("first"), w.manifest("second"));
    for k in [
        "clean_settings",
        "forecast_settings",
        "duplicates",
        "numbers",
        "encoding",
        "product_settings",
    ] {
        assert_eq!(m1[k], m2[k], "{k}");
    }
    assert_eq!(
        std::fs::read(w.path("first/forecast.csv")).unwrap(),
        std::fs::read(w.path("second/forecast.csv")).unwrap()
    );
}

#[test]
fn configuration_errors_name_file_line_column_and_exit_1() {
    let w = workdir();
    let cases = [
        (
            "[projection]\nhorizn = 12\n",
            "bad.toml line 2, column 1: unknown key 'horizn' in [projection]; did you mean 'horizon'?",
        ),
        (
            "[cleaning]\nreporting_floor = 2\n",
            "bad.toml line 2, column 19: reporting_floor: must be above 0",
        ),
        ("[projection\n", "bad.toml line 1, column 12"),
        (
            "[output]\nno_report = \"yes\"\n",
            "bad.toml line 2, column 13: invalid type: string \"yes\", expected true or false",
        ),
        (
            "[products.\"Beta\"]\nmodel = \"holt-winter-additive\"\n",
            "did you mean 'holt-winters-additive'?",
        ),
    ];
    for (toml, want) in cases {
        w.write("bad.toml", toml);
        let o = w.run(&["forecast", "data.csv", "--config", "bad.toml", "--out", "o"]);
        assert_eq!(o.status.code(), Some(1), "{}", text(&o));
        assert!(text(&o).contains(want), "{toml}: {}", text(&o));
        assert!(!w.path("o").exists(), "nothing written");
        // Not valid UTF-8 nor a panic.
        assert!(!text(&o).contains("panicked"));
    }
    std::fs::write(w.path("latin1.toml"), b"[products.\"Caf\xe9\"]\n").unwrap();
    let o = w.run(&["backtest", "data.csv", "--config", "latin1.toml"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    assert!(text(&o).contains("not UTF-8"), "{}", text(&o));
}

#[test]
fn a_product_not_in_the_data_is_a_warning() {
    let w = workdir();
    w.write("run.toml", "[products.\"Gamma\"]\nunits = \"vial\"\n");
    let mut args = vec!["forecast", "data.csv", "--config", "run.toml", "--out", "o"];
    args.extend(FAST);
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains(
            "warning: run.toml: [products.\"Gamma\"] names a product that is not in the data"
        ),
        "{err}"
    );
}

#[test]
fn product_settings_reach_the_outputs() {
    let w = workdir();
    // Beta: 10 stockout days in three months; with its own limit of 8 days
    // they are treated as missing, Alpha keeps the run's 15.
    w.write(
        "run.toml",
        "[products.\"Beta\"]\nunits = \"tablet\"\npack_size = 8\nmax_stockout_days = 8\nmin_months = 60\n[products.\"Alpha\"]\nseasonal = false\n",
    );
    let mut args = vec![
        "forecast", "data.csv", "--config", "run.toml", "--out", "o", "--until", "2024-06",
    ];
    args.extend(["--origins", "3", "--backtest-horizon", "3"]);
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    let (h, rows) = w.read_csv_records("o/forecast.csv");
    // Existing columns first, in their order; the new ones at the end.
    assert_eq!(
        h,
        [
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
            "bridged"
        ]
    );
    for r in &rows {
        if &r[0] == "Beta" {
            assert_eq!((&r[8], &r[9]), ("tablet", "8"));
            let (f, p): (f64, f64) = (r[3].parse().unwrap(), r[10].parse().unwrap());
            assert!((p - f / 8.0).abs() < 1e-3, "{f} / 8 vs {p}");
        } else {
            assert_eq!((&r[8], &r[9], &r[10]), ("", "", ""));
        }
    }
    let (sh, sel) = w.read_csv_records("o/selection.csv");
    let col = |n: &str| sh.iter().position(|h| h == n).unwrap();
    let reason = |p: &str| sel.iter().find(|r| &r[0] == p).unwrap()[col("reason")].to_string();
    assert!(
        reason("Beta").contains("min_months = 60"),
        "{}",
        reason("Beta")
    );
    assert!(
        reason("Alpha").contains("seasonal = false"),
        "{}",
        reason("Alpha")
    );
    // No seasonal model competes; theta (with ets-auto and arima-auto)
    // competes in its non-seasonal form, so the default combination stays.
    let seasonal = ["seasonal-naive", "holt-winters", "mstl-ets"];
    let (ch, scores) = w.read_csv_records("o/scores.csv");
    let (pc, mc) = (0, ch.iter().position(|h| h == "model").unwrap());
    let alpha: Vec<&str> = scores
        .iter()
        .filter(|r| &r[pc] == "Alpha")
        .map(|r| &r[mc])
        .collect();
    assert!(
        alpha
            .iter()
            .all(|m| !seasonal.iter().any(|s| m.starts_with(s))),
        "{alpha:?}"
    );
    assert!(alpha.contains(&"combination"), "{alpha:?}");
    assert!(
        reason("Alpha").contains("non-seasonal forms"),
        "{}",
        reason("Alpha")
    );
    let (_, adj) = w.read_csv_records("o/adjustments.csv");
    let missing = adj
        .iter()
        .filter(|r| &r[0] == "Beta" && r.iter().any(|c| c == "stockout-missing"))
        .count();
    assert_eq!(
        missing, 3,
        "three 10-day stockouts above Beta's 8-day limit"
    );
    // The report and review still read this folder.
    let o = w.run(&["report", "o"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&["review", "o", "--actuals", "data.csv", "--out", "rev"]);
    assert!(o.status.success(), "{}", text(&o));
}

#[test]
fn json_summary_and_quiet() {
    let w = workdir();
    let mut args = vec!["--json", "forecast", "data.csv", "--out", "o"];
    args.extend(FAST);
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    let v: serde_json::Value =
        serde_json::from_slice(&o.stdout).unwrap_or_else(|e| panic!("{e}: {}", text(&o)));
    assert_eq!(v["command"], "forecast");
    let products = v["products"].as_array().unwrap();
    assert_eq!(products.len(), 2);
    for p in products {
        assert!(p["model"].as_str().is_some_and(|m| !m.is_empty()));
        assert!(p["mape_pct"].as_f64().is_some(), "{p}");
        assert!(p["next_12_months"].as_f64().is_some_and(|t| t > 0.0));
    }
    for f in v["files"].as_array().unwrap() {
        assert!(w.path(f.as_str().unwrap()).is_file(), "{f}");
    }
    assert_eq!(v["rows"]["read"], 96);
    // --json also goes after the command; inspect and backtest have theirs.
    let o = w.run(&["backtest", "data.csv", "--json", "--origins", "3"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["products"][0]["product"], "Alpha");
    // forecast's keys that a backtest has too (README, "JSON summary").
    for key in [
        "config_file",
        "default_model",
        "products_unusable",
        "rows",
        "seconds",
    ] {
        assert!(v.get(key).is_some(), "backtest --json lacks {key}: {v}");
    }
    assert!(v["default_model"]["default"].is_string(), "{v}");
    let o = w.run(&["inspect", "data.csv", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["products"].as_array().map(Vec::len), Some(2));
    // --quiet: nothing on standard output, no accounting line.
    let mut args = vec!["forecast", "data.csv", "--out", "q", "--quiet"];
    args.extend(FAST);
    let o = w.run(&args);
    assert!(o.status.success(), "{}", text(&o));
    assert!(o.stdout.is_empty(), "{}", text(&o));
    assert!(!String::from_utf8_lossy(&o.stderr).contains("rows read"));
}

#[test]
fn exit_codes_are_0_1_and_2() {
    let w = workdir();
    let o = w.run(&["inspect", "data.csv"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    w.write("empty.csv", "");
    let o = w.run(&["inspect", "empty.csv"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    let o = w.run(&["inspect", "data.csv", "--no-such-option"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    let o = w.run(&["forecast", "--out", "o"]);
    assert_eq!(
        o.status.code(),
        Some(2),
        "no DATA and no config: {}",
        text(&o)
    );
    let o = w.run(&["no-such-command"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
}

#[test]
fn completions_and_man_pages_name_every_command() {
    let w = workdir();
    let commands = [
        "forecast", "backtest", "evaluate", "inspect", "clean", "review", "report", "plan",
    ];
    for shell in ["bash", "zsh", "fish", "powershell", "elvish"] {
        let o = w.run(&["completions", shell]);
        assert!(o.status.success(), "{}", text(&o));
        let s = String::from_utf8_lossy(&o.stdout);
        for c in commands {
            assert!(s.contains(c), "{shell} completions lack {c}");
        }
        assert!(s.contains("--config") || s.contains("config"), "{shell}");
    }
    // A script is not JSON: --json is refused (exit 2), nothing on stdout.
    let o = w.run(&["--json", "completions", "bash"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(o.stdout.is_empty());
    let o = w.run(&["man", "--out", "man"]);
    assert!(o.status.success(), "{}", text(&o));
    let main = std::fs::read_to_string(w.path("man/provisio.1")).unwrap();
    assert!(main.contains(".TH"), "{main}");
    for c in commands {
        assert!(main.contains(c), "provisio.1 lacks {c}");
        let page = std::fs::read_to_string(w.path(&format!("man/provisio-{c}.1"))).unwrap();
        assert!(
            page.contains(".TH") && page.contains("Example"),
            "provisio-{c}.1"
        );
    }
}

#[test]
fn no_colour_escape_codes_off_a_terminal() {
    let w = workdir();
    w.write("run.toml", "[products.\"Gamma\"]\nunits = \"vial\"\n");
    // A warning and an error are printed, neither coloured: standard error
    // is a pipe here (with and without NO_COLOR).
    for env in [&[][..], &[("NO_COLOR", "1")][..]] {
        let o = w.run_env(
            &[
                "backtest",
                "data.csv",
                "--config",
                "run.toml",
                "--origins",
                "3",
            ],
            env,
        );
        assert!(o.status.success());
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains("warning:"), "{err}");
        assert!(!err.contains('\u{1b}'), "{err:?}");
        let o = w.run_env(&["inspect", "missing.csv"], env);
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(
            err.starts_with("error:") && !err.contains('\u{1b}'),
            "{err:?}"
        );
    }
}

#[test]
fn every_help_has_examples() {
    let w = workdir();
    let o = w.run(&["--help"]);
    let top = String::from_utf8_lossy(&o.stdout).to_string();
    assert!(top.contains("Exit codes: 0 success; 1"), "{top}");
    for c in [
        "forecast",
        "backtest",
        "evaluate",
        "inspect",
        "clean",
        "report",
        "review",
        "generate",
        "models",
        "completions",
        "man",
        "plan",
    ] {
        let o = w.run(&[c, "--help"]);
        assert!(o.status.success());
        let h = String::from_utf8_lossy(&o.stdout);
        assert!(h.contains("Example"), "{c} --help has no example");
        assert!(h.contains(&format!("provisio {c}")), "{c}");
    }
}

#[test]
fn every_key_is_documented_in_its_section() {
    let doc = std::fs::read_to_string(repo("docs/configuration.md")).unwrap();
    let section_of = |heading: &str| -> String {
        let start = doc
            .find(&format!("### `[{heading}]`"))
            .unwrap_or_else(|| panic!("no section {heading}"));
        let rest = &doc[start + 4..];
        rest[..rest.find("\n### ").unwrap_or(rest.len())].to_string()
    };
    for k in provisio::config::KEYS {
        let sec = section_of(k.section);
        let row = sec
            .lines()
            .find(|l| l.starts_with(&format!("| `{}` |", k.key)))
            .unwrap_or_else(|| panic!("{}.{} is not documented", k.section, k.key));
        assert!(row.matches('|').count() >= 6, "{row}");
    }
    let sec = section_of("products.\"NAME\"");
    for k in provisio::config::PRODUCT_KEYS {
        assert!(sec.contains(&format!("| `{}` |", k.key)), "{}", k.key);
    }
}

#[test]
fn demo_configuration_is_valid_and_names_demo_products() {
    let text = std::fs::read_to_string(repo("datasets/demo/run.toml")).unwrap();
    let cfg = provisio::config::RunConfig::parse("run.toml", &text).unwrap();
    let data = std::fs::read_to_string(repo("datasets/demo/consumption.csv")).unwrap();
    for p in cfg.products.keys() {
        assert!(
            data.contains(&format!("\n{p},")),
            "{p} is not a demo product"
        );
    }
    // The example in docs/configuration.md is this file (comments aside).
    let doc = std::fs::read_to_string(repo("docs/configuration.md")).unwrap();
    let start = doc.find("```toml\n").unwrap() + 8;
    let example = &doc[start..start + doc[start..].find("```").unwrap()];
    let shown = provisio::config::RunConfig::parse("doc", example).unwrap();
    assert_eq!(shown, cfg);
}

#[test]
fn clean_and_inspect_take_the_cleaning_settings() {
    let w = workdir();
    w.write(
        "run.toml",
        "[cleaning]\nmax_stockout_days = 12\n[products.\"Beta\"]\nmax_stockout_days = 8\n",
    );
    let o = w.run(&["clean", "data.csv", "--config", "run.toml", "--out", "c"]);
    assert!(o.status.success(), "{}", text(&o));
    let m = w.manifest("c");
    assert_eq!(m["settings"]["max_stockout_days"], 12.0);
    assert_eq!(m["settings"]["stockout_days_by_product"]["Beta"], 8.0);
    assert_eq!(m["config_file"], "run.toml");
    let (_, adj) = w.read_csv_records("c/adjustments.csv");
    let missing = adj
        .iter()
        .filter(|r| r.iter().any(|c| c == "stockout-missing"))
        .count();
    assert_eq!(missing, 3, "Beta's 10-day stockouts exceed its 8-day limit");
    // The command line wins over the file; Beta keeps its own limit.
    let o = w.run(&[
        "clean",
        "data.csv",
        "--config",
        "run.toml",
        "--out",
        "c2",
        "--max-stockout-days",
        "9",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let m = w.manifest("c2");
    assert_eq!(m["settings"]["max_stockout_days"], 9.0);
    assert_eq!(m["settings"]["stockout_days_by_product"]["Beta"], 8.0);
    let o = w.run(&["inspect", "data.csv", "--config", "run.toml", "--json"]);
    assert!(o.status.success(), "{}", text(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let beta = &v["products"][1];
    assert_eq!(beta["product"], "Beta");
    assert_eq!(beta["months_with_stockouts"], 3, "{beta}");
}

/// A file that contradicts itself is the file's fault: exit 1 with its
/// line, not the usage error of a bad command line (exit 2, as a tester
/// saw). Exit codes as the README documents them.
#[test]
fn a_file_contradicting_itself_is_refused_with_its_line() {
    let w = workdir();
    w.write(
        "run.toml",
        "[output]\nchart_files = [\"all\"]\nno_report = true\n",
    );
    let o = w.run(&["forecast", "data.csv", "--out", "o", "--config", "run.toml"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(t.contains("run.toml line 3, column 1"), "{t}");
    assert!(!t.contains("Usage:"), "{t}");
    // Given on the command line against the file, it stays a usage error.
    w.write("chart.toml", "[output]\nchart_files = [\"all\"]\n");
    let o = w.run(&[
        "forecast",
        "data.csv",
        "--out",
        "o",
        "--config",
        "chart.toml",
        "--no-report",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
}

/// `inspect --json` carries the columns of `quality.csv` under the same
/// names and in the same units, as the README says (a tester found other
/// names, fractions instead of percentages and an internal verdict name).
#[test]
fn inspect_json_has_the_columns_of_quality_csv() {
    let w = workdir();
    let o = w.run(&["--json", "inspect", "data.csv", "--csv", "q.csv"]);
    assert!(o.status.success(), "{}", text(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let rows = w.read_csv_maps("q.csv");
    assert_eq!(rows.len(), 2);
    for row in &rows {
        let p = v["products"]
            .as_array()
            .unwrap()
            .iter()
            .find(|p| p["product"] == row["product"].as_str())
            .unwrap();
        for (column, value) in row {
            let j = &p[column.as_str()];
            assert!(!j.is_null() || value.is_empty(), "{column} missing: {p}");
            let shown = match j {
                serde_json::Value::String(s) => s.clone(),
                serde_json::Value::Array(a) => a
                    .iter()
                    .map(|x| x.as_str().unwrap().to_string())
                    .collect::<Vec<_>>()
                    .join(if column == "reasons" { "; " } else { " " }),
                serde_json::Value::Number(n) => {
                    let x = n.as_f64().unwrap();
                    let y: f64 = value.parse().unwrap();
                    assert!((x - y).abs() < 0.051, "{column}: {x} against {y}");
                    continue;
                }
                serde_json::Value::Null => String::new(),
                other => other.to_string(),
            };
            assert_eq!(&shown, value, "{column}");
        }
        assert!(p["verdict_text"].is_string());
    }
}
