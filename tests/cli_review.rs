//! End-to-end tests of `provisio review`: the real binary in a temporary
//! directory reviews past `forecast` directories made from the demo data
//! (an invented scenario) against the months that followed, and refuses
//! incomplete or incompatible directories with a clear message.

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use common::{repo, text, Workdir};

fn demo() -> String {
    repo("datasets/demo/consumption.csv").display().to_string()
}

/// Two past forecasts of the demo data, made once for all tests: as if at
/// 2025-10 (the last 12 months of the file follow) and at 2026-04. A short
/// backtest keeps the tests fast; review does not depend on it.
fn vintages() -> &'static (Workdir, PathBuf, PathBuf) {
    static V: OnceLock<(Workdir, PathBuf, PathBuf)> = OnceLock::new();
    V.get_or_init(|| {
        let w = Workdir::new();
        for (until, out) in [("2025-10", "past-a"), ("2026-04", "past-b")] {
            let o = w.run(&[
                "forecast",
                &demo(),
                "--until",
                until,
                "--out",
                out,
                "--horizon",
                "18",
                "--origins",
                "3",
                "--backtest-horizon",
                "6",
            ]);
            assert!(o.status.success(), "{}", text(&o));
        }
        let (a, b) = (w.path("past-a"), w.path("past-b"));
        (w, a, b)
    })
}

fn num(s: &str) -> f64 {
    s.parse()
        .unwrap_or_else(|_| panic!("'{s}' is not a number"))
}

/// Copies a directory's files (not its subdirectories), leaving out `skip`.
fn copy_dir(from: &Path, to: &Path, skip: &[&str]) {
    std::fs::create_dir_all(to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        let name = e.file_name().to_string_lossy().to_string();
        if e.path().is_file() && !skip.contains(&name.as_str()) {
            std::fs::copy(e.path(), to.join(&name)).unwrap();
        }
    }
}

#[test]
fn review_demo_last_twelve_months() {
    let (_, past, _) = vintages();
    let w = Workdir::new();
    let o = w.run(&[
        "review",
        past.to_str().unwrap(),
        "--actuals",
        &demo(),
        "--out",
        "rev",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(out.contains("Decision support only"), "{out}");
    for f in [
        "review.csv",
        "review_months.csv",
        "review.json",
        "review.html",
    ] {
        assert!(w.path("rev").join(f).exists(), "{f} missing");
    }
    let charts: Vec<String> = std::fs::read_dir(w.path("rev/charts"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    assert_eq!(
        charts.len(),
        2 * 12,
        "a PNG and an SVG per product: {charts:?}"
    );
    assert!(charts.iter().all(|c| c.starts_with("review-")));
    let page = std::fs::read_to_string(w.path("rev/review.html")).unwrap();
    assert!(page.contains("decision support, not decisions"));
    assert_eq!(
        page.matches("<svg").count(),
        12,
        "one inline chart per product"
    );
    assert!(page.contains("HIV rapid test kit (newly scaled up)"));
    assert!(page.contains("the errors add up to an under-forecast"));
    // Both cleaning shares are in the products table, and the flag says
    // which part was heavily cleaned (a tester saw the flag beside a
    // history share under the limit: it came from the reviewed months).
    assert!(page.contains("reviewed months changed by cleaning"));
    assert!(
        page.contains("reviewed months heavily cleaned"),
        "no product flagged for its reviewed months alone"
    );
    let rows = w.read_csv_maps("rev/review.csv");
    assert_eq!(rows.len(), 12, "one row per product");
    for r in &rows {
        assert_eq!(r["status"], "reviewed", "{r:?}");
        assert_eq!(r["forecast_start"], "2025-11");
        assert_eq!(r["origin"], "2025-10");
        // The demo file runs to 2026-10: 12 months overlap the forecast.
        assert_eq!(r["months_with_actuals"], "12", "{r:?}");
        let scored: usize = r["months_scored"].parse().unwrap();
        let left: usize = r["months_left_out"].parse().unwrap();
        assert_eq!(scored + left, 12);
        let ts = num(&r["tracking_signal"]);
        // Limit 1.96 × √(π/2) × √months (the 5% bound for unbiased
        // normal errors; derivation at metrics::tracking_signal_limit).
        let n: f64 = r["months_scored"].parse().unwrap();
        let limit = 1.96 * (std::f64::consts::PI / 2.0).sqrt() * n.sqrt();
        assert_eq!(r["tracking_flag"] == "yes", ts.abs() > limit, "{r:?}");
        // Tracking signal = cumulative error / MAD (Trigg 1964).
        let ratio = num(&r["cumulative_error"]) / num(&r["mad"]);
        assert!((ratio - ts).abs() < 1e-3, "{r:?}");
    }

    // Month rows agree with the past forecast, the past cleaned history and
    // the product's scores.
    let months = w.read_csv_maps("rev/review_months.csv");
    assert_eq!(months.len(), 12 * 12);
    let fc = {
        let mut r = csv::Reader::from_path(past.join("forecast.csv")).unwrap();
        r.records().map(|x| x.unwrap()).collect::<Vec<_>>()
    };
    let cleaned = {
        let mut r = csv::Reader::from_path(past.join("cleaned.csv")).unwrap();
        r.records().map(|x| x.unwrap()).collect::<Vec<_>>()
    };
    let history = |product: &str, month: &str| {
        cleaned
            .iter()
            .find(|r| &r[0] == product && &r[1] == month)
            .map(|r| num(&r[3]))
            .unwrap_or_else(|| panic!("{product} {month} not in cleaned.csv"))
    };
    for m in &months {
        let p = &m["product"];
        let f = fc
            .iter()
            .find(|r| &r[0] == p && r[1] == m["month"])
            .expect("forecast row");
        assert_eq!(m["forecast"], &f[3]);
        assert_eq!(m["lower_80"], &f[4]);
        assert_eq!(m["upper_95"], &f[7]);
        // Naive made at the origin: the last cleaned month, 2025-10.
        assert_eq!(num(&m["naive"]), history(p, "2025-10"));
        // Seasonal naive: the same month a year before (never after the origin).
        let year_before = format!("{}{}", num(&m["month"][..4]) as i32 - 1, &m["month"][4..]);
        assert_eq!(num(&m["seasonal_naive"]), history(p, &year_before), "{m:?}");
        let inside =
            num(&m["actual"]) >= num(&m["lower_80"]) && num(&m["actual"]) <= num(&m["upper_80"]);
        assert_eq!(m["inside_80"] == "yes", inside);
    }
    for r in &rows {
        let mine: Vec<_> = months
            .iter()
            .filter(|m| m["product"] == r["product"] && m["scored"] == "yes")
            .collect();
        let a: f64 = mine.iter().map(|m| num(&m["actual"])).sum();
        let e: f64 = mine.iter().map(|m| num(&m["error"])).sum();
        // Bias = Σ(forecast − actual) / Σ actual, positive = over-forecast.
        assert!((100.0 * e / a - num(&r["bias_pct"])).abs() < 1e-2, "{r:?}");
        let inside = mine.iter().filter(|m| m["inside_80"] == "yes").count();
        let cov = 100.0 * inside as f64 / mine.len() as f64;
        assert!((cov - num(&r["coverage_80_pct"])).abs() < 1e-3, "{r:?}");
    }

    // The scenario's newly scaled-up HIV test kit grows faster than any
    // model extrapolates from history: under-forecast month after month.
    let hiv = rows
        .iter()
        .find(|r| r["product"].starts_with("HIV rapid test kit"))
        .unwrap();
    assert!(num(&hiv["bias_pct"]) < 0.0, "{hiv:?}");
    assert_eq!(hiv["tracking_flag"], "yes", "{hiv:?}");
    assert!(
        hiv["findings"].contains("the errors add up to an under-forecast ("),
        "{hiv:?}"
    );

    // The audit: reporting adjustments run about 10% of volume in the
    // scenario; with a limit of 5% every product is flagged and the rule
    // named.
    let o = w.run(&[
        "review",
        past.to_str().unwrap(),
        "--actuals",
        &demo(),
        "--out",
        "rev5",
        "--adjustment-limit",
        "0.05",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let rows5 = w.read_csv_maps("rev5/review.csv");
    assert!(rows5.iter().all(|r| r["adjustment_flag"] == "yes"));
    assert!(rows5
        .iter()
        .all(|r| r["history_rules"].contains("reporting-scaled")));
    assert!(rows5
        .iter()
        .any(|r| r["findings"].contains("of the volume is not as reported (limit 5%)")));

    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("rev/review.json")).unwrap()).unwrap();
    assert_eq!(json["run"]["command"], "review");
    assert_eq!(json["products"].as_array().unwrap().len(), 12);
    assert_eq!(json["vintages"][0]["until"], "2025-10");
    assert_eq!(json["products"][0]["months"].as_array().unwrap().len(), 12);
    // The actuals hold the whole history: nothing to warn about it.
    let warned = json["run"]["warnings"].to_string();
    assert!(!warned.contains("without the history"), "{warned}");
}

/// Actuals holding only the months after the past forecast's end are
/// cleaned on less history than the past run saw: a site with no earlier
/// row is not expected in its first months, and a month is filled from
/// the site's own months around it (`src/clean`), so the cleaned actuals
/// differ from a cleaning of the whole file. Shown here on the demo's
/// implant (common practice: a gap is filled from the series' own
/// history, so a shorter history fills it differently), and the review
/// must say so rather than report other scores silently.
#[test]
fn actuals_without_the_earlier_history_are_warned() {
    let (_, past, _) = vintages();
    let w = Workdir::new();
    let full = std::fs::read_to_string(demo()).unwrap();
    let mut later = String::new();
    for (i, line) in full.lines().enumerate() {
        // Months are the third column, YYYY-MM: keep the header and 2025-11 on.
        if i == 0 || line.split(',').nth(2).is_some_and(|m| m >= "2025-11") {
            later.push_str(line);
            later.push('\n');
        }
    }
    w.write("later.csv", &later);
    let run = |actuals: &str, out: &str| {
        let o = w.run(&[
            "review",
            past.to_str().unwrap(),
            "--actuals",
            actuals,
            "--out",
            out,
        ]);
        assert!(o.status.success(), "{}", text(&o));
        text(&o)
    };
    let whole = run(&demo(), "whole");
    let short = run("later.csv", "short");
    let status = |out: &str| {
        w.read_csv_maps(&format!("{out}/review_months.csv"))
            .into_iter()
            .find(|m| m["product"] == "Contraceptive implant" && m["month"] == "2025-11")
            .map(|m| (m["status"].clone(), m["actual"].clone()))
            .expect("implant 2025-11")
    };
    // The premise: the same month is cleaned differently (the figures the
    // README's review section quotes).
    let (whole_status, whole_actual) = status("whole");
    let (short_status, short_actual) = status("short");
    assert_eq!(whole_status, "partly-filled");
    assert_eq!(short_status, "adjusted");
    assert_eq!(num(&whole_actual).round(), 1064.0);
    assert_eq!(num(&short_actual).round(), 893.0);
    let want = "the actuals were cleaned without the history before 2025-11";
    assert!(!whole.contains(want), "{whole}");
    assert!(short.contains(want), "{short}");
    assert!(
        short.contains("from 2021-11 on, for like-for-like cleaning"),
        "{short}"
    );
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("short/review.json")).unwrap())
            .unwrap();
    assert!(
        json["run"]["warnings"].to_string().contains(want),
        "{}",
        json["run"]
    );
    let page = std::fs::read_to_string(w.path("short/review.html")).unwrap();
    assert!(page.contains(want), "warning not on the review page");
}

#[test]
fn two_vintages_are_compared() {
    let (_, a, b) = vintages();
    let w = Workdir::new();
    // Given newest first: vintages are still ordered by forecast start.
    let o = w.run(&[
        "review",
        b.to_str().unwrap(),
        a.to_str().unwrap(),
        "--actuals",
        &demo(),
        "--out",
        "rev",
    ]);
    let out = text(&o);
    assert!(o.status.success(), "{out}");
    assert!(
        out.contains(&format!("vintage 1: {}", a.display())),
        "{out}"
    );
    let rows = w.read_csv_maps("rev/review.csv");
    assert_eq!(rows.len(), 24);
    let by_product: BTreeMap<&str, Vec<&BTreeMap<String, String>>> =
        rows.iter().fold(BTreeMap::new(), |mut m, r| {
            m.entry(r["product"].as_str()).or_default().push(r);
            m
        });
    assert_eq!(by_product.len(), 12);
    for (p, rs) in &by_product {
        assert_eq!(rs.len(), 2, "{p}");
        assert_eq!(rs[0]["vintage"], a.display().to_string());
        assert_eq!(rs[0]["months_with_actuals"], "12");
        assert_eq!(rs[1]["months_with_actuals"], "6", "2026-05..2026-10");
        // Exactly one vintage is the closest on the common months, and it
        // has the lower WAPE there.
        let closest: Vec<_> = rs
            .iter()
            .filter(|r| r["closest_vintage"] == "yes")
            .collect();
        assert_eq!(closest.len(), 1, "{p}");
        let other = rs.iter().find(|r| r["closest_vintage"] == "no").unwrap();
        assert!(num(&closest[0]["wape_common_pct"]) <= num(&other["wape_common_pct"]));
        assert_eq!(rs[0]["vintages_compared"], "2");
    }
    // Revisions: the later vintage's forecast minus the earlier one's, for
    // the same month.
    let months = w.read_csv_maps("rev/review_months.csv");
    let mut checked = 0;
    for m in months
        .iter()
        .filter(|m| m["vintage"] == b.display().to_string())
    {
        let old = months
            .iter()
            .find(|o| {
                o["vintage"] == a.display().to_string()
                    && o["product"] == m["product"]
                    && o["month"] == m["month"]
            })
            .unwrap();
        let rev = num(&m["revision_from_previous_vintage"]);
        assert!((rev - (num(&m["forecast"]) - num(&old["forecast"]))).abs() < 1e-3);
        assert!(old["revision_from_previous_vintage"].is_empty());
        let err = |r: &BTreeMap<String, String>| (num(&r["forecast"]) - num(&r["actual"])).abs();
        let winner = if err(m) < err(old) {
            &m["vintage"]
        } else {
            &old["vintage"]
        };
        if err(m) != err(old) {
            assert_eq!(&m["closest_vintage"], winner);
        }
        checked += 1;
    }
    assert_eq!(checked, 12 * 6);
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(w.path("rev/review.json")).unwrap()).unwrap();
    assert_eq!(json["vintage_comparisons"].as_array().unwrap().len(), 12);
    let charts = std::fs::read_dir(w.path("rev/charts")).unwrap().count();
    assert_eq!(charts, 2 * 24, "a chart per product and vintage");
    let page = std::fs::read_to_string(w.path("rev/review.html")).unwrap();
    assert!(page.contains("id=\"vintages\""));

    // The same directory twice is refused.
    let o = w.run(&[
        "review",
        a.to_str().unwrap(),
        a.to_str().unwrap(),
        "--actuals",
        &demo(),
        "--out",
        "twice",
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o).contains("given twice"), "{}", text(&o));
}

/// Runs a review of `past` against the demo and returns the refusal text.
fn refusal(w: &Workdir, past: &Path, actuals: &str) -> String {
    let o = w.run(&[
        "review",
        past.to_str().unwrap(),
        "--actuals",
        actuals,
        "--out",
        "rev",
    ]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "expected a refusal:\n{out}");
    assert!(!out.contains("panicked"), "{out}");
    assert!(
        !w.path("rev").join("review.csv").exists(),
        "nothing written"
    );
    out
}

#[test]
fn incomplete_past_directory_is_refused() {
    let (_, past, _) = vintages();
    let w = Workdir::new();
    let broken = w.path("broken");
    copy_dir(past, &broken, &["forecast.csv", "cleaned.csv"]);
    let out = refusal(&w, &broken, &demo());
    assert!(out.contains("broken/forecast.csv: missing"), "{out}");
    assert!(
        out.contains("missing (the directory lacks: forecast.csv, cleaned.csv)"),
        "{out}"
    );
    assert!(
        out.contains("as written by `provisio forecast DATA --out DIR`"),
        "{out}"
    );

    let out = refusal(&w, &w.path("nowhere"), &demo());
    assert!(out.contains("nowhere: not a directory"), "{out}");

    // A damaged forecast.csv: the line and column are named.
    let bad = w.path("bad");
    copy_dir(past, &bad, &[]);
    let fc = std::fs::read_to_string(bad.join("forecast.csv")).unwrap();
    let mut lines: Vec<String> = fc.lines().map(str::to_string).collect();
    let mut cells: Vec<String> = lines[3].split(',').map(str::to_string).collect();
    let n = cells.len();
    // Counted from the end (product names may hold commas): the
    // 'forecast' column, wherever later columns are added.
    let header: Vec<&str> = fc.lines().next().unwrap().split(',').collect();
    let from_end = header.len() - header.iter().position(|h| *h == "forecast").unwrap();
    cells[n - from_end] = "1,5".replace(',', ";");
    lines[3] = cells.join(",");
    std::fs::write(bad.join("forecast.csv"), lines.join("\n")).unwrap();
    let out = refusal(&w, &bad, &demo());
    assert!(
        out.contains("bad/forecast.csv:4: column 'forecast': '1;5' is not a number"),
        "{out}"
    );
}

#[test]
fn incompatible_manifest_is_refused() {
    let (_, past, _) = vintages();
    let w = Workdir::new();
    let manifest: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(past.join("manifest.json")).unwrap())
            .unwrap();
    let variant = |name: &str, edit: &dyn Fn(&mut serde_json::Value)| {
        let dir = w.path(name);
        copy_dir(past, &dir, &[]);
        let mut m = manifest.clone();
        edit(&mut m);
        std::fs::write(dir.join("manifest.json"), m.to_string()).unwrap();
        refusal(&w, &dir, &demo())
    };
    let out = variant("old", &|m| {
        m.as_object_mut().unwrap().remove("format_version");
    });
    assert!(
        out.contains("old/manifest.json: no 'format_version'"),
        "{out}"
    );
    assert!(
        out.contains("reads forecast directories of format version 1"),
        "{out}"
    );
    let out = variant("future", &|m| m["format_version"] = 99.into());
    assert!(
        out.contains(
            "format version 99 is not one this provisio reads (it reads format version 1)"
        ),
        "{out}"
    );
    let out = variant("nosettings", &|m| {
        m.as_object_mut().unwrap().remove("clean_settings");
    });
    assert!(out.contains("no 'clean_settings' in the manifest"), "{out}");
    let out = variant("partial", &|m| {
        m["clean_settings"]
            .as_object_mut()
            .unwrap()
            .remove("reporting_floor");
    });
    assert!(
        out.contains("'clean_settings' is incomplete or malformed"),
        "{out}"
    );
    assert!(out.contains("reporting_floor"), "{out}");
    let out = variant("cleanrun", &|m| m["command"] = "clean".into());
    assert!(
        out.contains("written by the 'clean' command, not 'forecast'"),
        "{out}"
    );
}

#[test]
fn no_overlapping_month_is_refused() {
    let (_, past, _) = vintages();
    let w = Workdir::new();
    // Actuals that stop where the past forecast starts.
    let full = std::fs::read_to_string(demo()).unwrap();
    let mut lines = full.lines();
    let header = lines.next().unwrap();
    let month_col = header.split(',').position(|h| h == "month").unwrap();
    let mut kept = vec![header.to_string()];
    kept.extend(
        lines
            .filter(|l| l.split(',').nth(month_col).unwrap() <= "2025-10")
            .map(str::to_string),
    );
    std::fs::write(w.path("old.csv"), kept.join("\n") + "\n").unwrap();
    let out = refusal(&w, past, "old.csv");
    assert!(
        out.contains("old.csv: no actual month overlaps the forecast period of"),
        "{out}"
    );
    assert!(out.contains("(2025-11 to 2027-04)"), "{out}");
    assert!(
        out.contains("the actuals run from 2021-11 to 2025-10"),
        "{out}"
    );
    assert!(out.contains("reported for months from 2025-11 on"), "{out}");

    // Other products entirely.
    std::fs::write(w.path("other.csv"), "product,month,consumed\nX,2026-01,5\n").unwrap();
    let out = refusal(&w, past, "other.csv");
    assert!(
        out.contains("none of its products is in the actuals"),
        "{out}"
    );
}

#[test]
fn product_names_are_escaped_on_the_review_page() {
    let w = Workdir::new();
    let name = "<script>alert(1)</script> & co";
    let mut csv = String::from("product,month,consumed\n");
    for t in 0..36 {
        csv.push_str(&format!(
            "\"{name}\",{}-{:02},{}\n",
            2022 + t / 12,
            t % 12 + 1,
            100 + t
        ));
    }
    std::fs::write(w.path("d.csv"), csv).unwrap();
    let o = w.run(&[
        "forecast",
        "d.csv",
        "--until",
        "2024-06",
        "--out",
        "past",
        "--origins",
        "2",
        "--backtest-horizon",
        "3",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&["review", "past", "--actuals", "d.csv", "--out", "rev"]);
    assert!(o.status.success(), "{}", text(&o));
    let page = std::fs::read_to_string(w.path("rev/review.html")).unwrap();
    assert!(!page.contains(name), "raw name on the page");
    assert!(page.contains("&lt;script&gt;alert(1)&lt;/script&gt; &amp; co"));
    assert_eq!(
        page.matches("<script>").count(),
        1,
        "only the page's own script"
    );
    let rows = w.read_csv_maps("rev/review.csv");
    assert_eq!(rows[0]["product"], name, "CSV keeps the name as it is");
    assert_eq!(rows[0]["months_with_actuals"], "6");
}

#[test]
fn actuals_are_read_with_the_past_runs_number_format() {
    // A file written with a decimal comma (one invented product, 48 months):
    // forecast from the first 36 with `--numbers decimal-comma`, then
    // review against all 48 — the review must read the actuals the same way.
    let w = Workdir::new();
    let mut csv = String::from("product;month;consumed\n");
    for t in 0..48 {
        let v = 1000.0 + 150.0 * ((t % 12) as f64 / 2.0).sin() + 3.0 * t as f64;
        csv.push_str(&format!(
            "Test;{}-{:02};{}\n",
            2022 + t / 12,
            t % 12 + 1,
            format!("{v:.1}").replace('.', ",")
        ));
    }
    std::fs::write(w.path("comma.csv"), csv).unwrap();
    let o = w.run(&[
        "forecast",
        "comma.csv",
        "--out",
        "past",
        "--until",
        "2024-12",
        "--numbers",
        "decimal-comma",
        "--no-report",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&["review", "past", "--actuals", "comma.csv", "--out", "rev"]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("rev/review.csv");
    assert_eq!(rows.len(), 1);
    let months: usize = rows[0]["months_with_actuals"].parse().unwrap();
    assert_eq!(months, 12, "{:?}", rows[0]);
}

#[test]
fn actuals_in_another_number_format_name_the_row_and_are_read_with_numbers() {
    // The past run read plain numbers; the actuals come with a decimal
    // comma (one invented product). Without --numbers the refusal names the
    // first rejected row and the option; with it the months are reviewed.
    let w = Workdir::new();
    let value = |t: usize| 1000.0 + 150.0 * ((t % 12) as f64 / 2.0).sin() + 3.0 * t as f64;
    let month = |t: usize| format!("{}-{:02}", 2022 + t / 12, t % 12 + 1);
    let mut plain = String::from("product,month,consumed\n");
    let mut comma = String::from("product;month;consumed\n");
    for t in 0..48 {
        if t < 36 {
            plain.push_str(&format!("Test,{},{:.1}\n", month(t), value(t)));
        } else {
            let v = format!("{:.1}", value(t)).replace('.', ",");
            comma.push_str(&format!("Test;{};{v}\n", month(t)));
        }
    }
    std::fs::write(w.path("plain.csv"), plain).unwrap();
    std::fs::write(w.path("comma.csv"), comma).unwrap();
    let o = w.run(&["forecast", "plain.csv", "--out", "past", "--no-report"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = w.run(&["review", "past", "--actuals", "comma.csv", "--out", "rev"]);
    let e = text(&o);
    assert!(!o.status.success(), "{e}");
    assert!(e.contains("comma.csv"), "{e}");
    assert!(e.contains("line 2"), "{e}");
    assert!(e.contains("--numbers decimal-comma"), "{e}");
    let o = w.run(&[
        "review",
        "past",
        "--actuals",
        "comma.csv",
        "--out",
        "rev",
        "--numbers",
        "decimal-comma",
    ]);
    assert!(o.status.success(), "{}", text(&o));
    let rows = w.read_csv_maps("rev/review.csv");
    assert_eq!(rows[0]["months_with_actuals"], "12", "{:?}", rows[0]);
}
