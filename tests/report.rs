//! The charts and the HTML report, rebuilt by `provisio report DIR` from a
//! committed forecast output directory (`tests/data/report/`, invented demo
//! data with awkward product names).
//!
//! Golden files hold the structure (tags, classes, headings, chart labels),
//! not pixels; `PROVISIO_UPDATE_GOLDEN=1 cargo test --test report` rewrites
//! them.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use provisio::chart::file_stem;

fn fixture() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/report")
}

/// Copies the fixture output directory into a fresh temporary directory.
fn fresh_copy() -> (tempfile::TempDir, PathBuf) {
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("out");
    std::fs::create_dir(&dir).unwrap();
    for e in std::fs::read_dir(fixture().join("forecast-output")).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dir.join(e.file_name())).unwrap();
    }
    (tmp, dir)
}

fn report(dir: &Path) -> std::process::Output {
    report_with(dir, &[])
}

fn report_with(dir: &Path, args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_provisio"))
        .arg("report")
        .arg(dir)
        .args(args)
        .output()
        .unwrap()
}

/// The fixture's report, built with every chart file.
fn built() -> (tempfile::TempDir, PathBuf, String) {
    let (tmp, dir) = fresh_copy();
    let o = report_with(&dir, &["--chart-files", "all"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    (tmp, dir, html)
}

fn products(dir: &Path) -> Vec<String> {
    let mut r = csv::Reader::from_path(dir.join("selection.csv")).unwrap();
    r.records().map(|x| x.unwrap()[0].to_string()).collect()
}

/// The detail record of one product, as the page's script reads it.
fn detail(html: &str, product: &str) -> serde_json::Value {
    let open = format!(
        "<script type=\"application/json\" id=\"d-{}\">",
        file_stem(product)
    );
    let start = html
        .find(&open)
        .unwrap_or_else(|| panic!("no detail record for {product}"))
        + open.len();
    let end = start + html[start..].find("</script>").unwrap();
    serde_json::from_str(&html[start..end]).unwrap()
}

#[test]
fn every_product_has_its_detail_and_chart_data() {
    let (_tmp, dir, html) = built();
    let names = products(&dir);
    assert_eq!(names.len(), 4);
    for p in &names {
        let d = detail(&html, p);
        assert_eq!(d["name"], p.as_str());
        // The chart data: one value per cleaned month, as cleaned.csv has.
        let mut r = csv::Reader::from_path(dir.join("cleaned.csv")).unwrap();
        let months = r.records().filter(|x| x.as_ref().unwrap()[0] == *p).count();
        assert_eq!(d["chart"]["cl"].as_array().unwrap().len(), months, "{p}");
        assert_eq!(d["chart"]["st"].as_str().unwrap().len(), months, "{p}");
        assert!(!d["chart"]["p"].as_array().unwrap().is_empty(), "{p}");
        assert!(!d["scores"].as_array().unwrap().is_empty(), "{p}");
        let stem = file_stem(p);
        for ext in ["png", "svg"] {
            let f = dir.join("charts").join(format!("{stem}.{ext}"));
            assert!(f.exists(), "{}", f.display());
        }
        // The PNG decodes, at the size the chart says.
        let dec = png::Decoder::new(
            std::fs::File::open(dir.join("charts").join(format!("{stem}.png"))).unwrap(),
        );
        let reader = dec.read_info().unwrap();
        assert_eq!((reader.info().width, reader.info().height), (1200, 770));
    }
    // A run this small shows every product's detail when the page opens.
    assert!(html.contains("<div id=\"every-detail\" data-all=\"yes\">"));
    assert!(dir.join("charts/overview.png").exists());
    assert!(dir.join("charts/overview.svg").exists());
    // Two names that read alike as file names still get two files each.
    let files = std::fs::read_dir(dir.join("charts")).unwrap().count();
    assert_eq!(files, 2 * names.len() + 2);
}

/// Chart files are written only when asked for: none by default, those of
/// the products named, and a name that is not a product is refused.
#[test]
fn chart_files_only_on_request() {
    let (_tmp, dir) = fresh_copy();
    let o = report(&dir);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(dir.join("report.html").is_file());
    assert!(!dir.join("charts").exists(), "no chart files by default");
    let names = products(&dir);
    let o = report_with(&dir, &["--chart-files", &names[1]]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let mut files: Vec<String> = std::fs::read_dir(dir.join("charts"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    files.sort();
    let stem = file_stem(&names[1]);
    assert_eq!(files, [format!("{stem}.png"), format!("{stem}.svg")]);
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert_eq!(detail(&html, &names[1])["files"], true);
    assert_eq!(detail(&html, &names[0])["files"], false);
    let o = report_with(&dir, &["--chart-files", "no such product"]);
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("no product 'no such product'"), "{err}");
}

#[test]
fn product_names_from_the_data_are_escaped() {
    let (_tmp, dir, html) = built();
    assert!(!html.contains("<script>alert(1)</script>"));
    // In the first view's lists, as HTML text.
    assert!(html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    // Our own two scripts are the only ones that run; the rest are data
    // (the index and one record per product), where no name can close
    // the element: `<` is written as an escape.
    assert_eq!(html.matches("<script>").count(), 2);
    let names = products(&dir);
    assert_eq!(
        html.matches("<script type=\"application/json\"").count(),
        names.len() + 1
    );
    assert!(html.contains("\\u003cscript\\u003ealert(1)\\u003c/script\\u003e"));
    assert!(html.contains(r#"Snake antivenom/vial \"cold chain\" \u0026 co"#));
    // The product's warning is in its detail record, as text.
    let d = detail(&html, "<script>alert(1)</script>");
    assert!(d["warnings"][0]
        .as_str()
        .unwrap()
        .starts_with("product '<script>alert(1)</script>': a warning"));
    // Inside the charts too (plotters escapes SVG text).
    let svg = std::fs::read_to_string(
        dir.join("charts")
            .join(format!("{}.svg", file_stem("<script>alert(1)</script>"))),
    )
    .unwrap();
    assert!(!svg.contains("<script"));
    assert!(svg.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
}

#[test]
fn report_needs_nothing_from_the_network() {
    let (_tmp, _dir, html) = built();
    for bad in [
        "<link",
        "@import",
        "url(",
        "src=\"http",
        "src='http",
        "<iframe",
    ] {
        assert!(!html.contains(bad), "{bad}");
    }
    // Links are to anchors, to the chart files beside the report and to
    // the folder's own data files only.
    for part in html.split("href=\"").skip(1) {
        let target = &part[..part.find('"').unwrap()];
        assert!(
            target.starts_with('#')
                || target.starts_with("charts/")
                || provisio::report::LINKED_FILES.contains(&target),
            "{target}"
        );
    }
    assert!(html.contains("Content-Security-Policy"));
    assert!(html.contains("decision support"));
    assert!(html.contains("national treatment guidelines and local regulations take precedence"));
}

#[test]
fn summary_comes_from_the_manifest() {
    let (_tmp, dir, html) = built();
    let m: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("manifest.json")).unwrap()).unwrap();
    assert!(html.contains(m["input_sha256"].as_str().unwrap()));
    assert!(html.contains(m["tool"].as_str().unwrap()));
    assert!(html.contains("Nov 2021 to Oct 2026 (60 months)"));
    assert!(html.contains("Nov 2026 to Oct 2028 (24 months)"));
    // The range rule states the calibration cap (src/calibrate.rs MAX_FACTOR).
    assert!(
        html.contains("at most ×5 the model"),
        "range rule lacks the cap"
    );
}

/// The summary links the folder's data files that are there (`report`
/// writes the workbook first), and no file that is not.
#[test]
fn summary_links_the_files_present() {
    let (_tmp, dir, html) = built();
    for f in [
        "forecast.xlsx",
        "forecast.csv",
        "selection.csv",
        "adjustments.csv",
    ] {
        assert!(dir.join(f).is_file(), "{f}");
        assert!(html.contains(&format!("href=\"{f}\"")), "{f} not linked");
    }
    // The fixture folder has no forecast_wide.csv nor a plan.
    for f in ["forecast_wide.csv", "plan.csv"] {
        assert!(!dir.join(f).exists());
        assert!(!html.contains(&format!("href=\"{f}\"")), "{f} linked");
    }
}

#[test]
fn same_files_same_report() {
    let (_tmp, dir, first) = built();
    let o = report_with(&dir, &["--chart-files", "all"]);
    assert!(o.status.success());
    let second = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert_eq!(first, second);
}

#[test]
fn missing_or_broken_outputs_are_named() {
    let tmp = tempfile::tempdir().unwrap();
    let o = report(tmp.path());
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("manifest.json") && err.contains("provisio forecast"),
        "{err}"
    );

    let (_t, dir) = fresh_copy();
    let text = std::fs::read_to_string(dir.join("selection.csv")).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // Break the MAPE of the second product (line 3).
    let header: Vec<&str> = lines[0].split(',').collect();
    let col = header.iter().position(|h| *h == "mape_pct").unwrap();
    let mut rec = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(lines[2].as_bytes());
    let mut fields: Vec<String> = rec
        .records()
        .next()
        .unwrap()
        .unwrap()
        .iter()
        .map(str::to_string)
        .collect();
    fields[col] = "4,8".into();
    let mut w = csv::Writer::from_writer(vec![]);
    w.write_record(&fields).unwrap();
    lines[2] = String::from_utf8(w.into_inner().unwrap())
        .unwrap()
        .trim_end()
        .to_string();
    std::fs::write(dir.join("selection.csv"), lines.join("\n") + "\n").unwrap();
    let o = report(&dir);
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("selection.csv:3: column 'mape_pct': '4,8' is not a number"),
        "{err}"
    );
}

// ---- golden structure -------------------------------------------------

/// The element structure of an HTML page: one line per element with its id
/// and class, headings with their text, inline SVG and table rows reduced
/// to one line, runs of identical lines collapsed.
fn html_skeleton(html: &str) -> String {
    let mut lines: Vec<String> = Vec::new();
    let mut depth = 0usize;
    let mut rest = html;
    const VOID: [&str; 6] = ["meta", "br", "img", "input", "hr", "link"];
    const WITH_TEXT: [&str; 7] = ["title", "h1", "h2", "h3", "dt", "th", "summary"];
    while let Some(i) = rest.find('<') {
        rest = &rest[i..];
        if rest.starts_with("<!") {
            rest = &rest[rest.find('>').map(|e| e + 1).unwrap_or(rest.len())..];
            continue;
        }
        let end = rest.find('>').unwrap();
        let tag = &rest[1..end];
        if let Some(name) = tag.strip_prefix('/') {
            depth = depth.saturating_sub(1);
            let _ = name;
            rest = &rest[end + 1..];
            continue;
        }
        let name: String = tag
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric())
            .collect();
        let attr = |a: &str| {
            tag.find(&format!(" {a}=\"")).map(|s| {
                let v = &tag[s + a.len() + 3..];
                v[..v.find('"').unwrap()].to_string()
            })
        };
        let mut line = format!("{}{name}", "  ".repeat(depth));
        if let Some(id) = attr("id") {
            line.push_str(&format!("#{id}"));
        }
        if let Some(c) = attr("class") {
            line.push_str(&format!(".{}", c.replace(' ', ".")));
        }
        let close = format!("</{name}>");
        if ["svg", "script", "style", "tr"].contains(&name.as_str()) {
            let stop = rest.find(&close).unwrap() + close.len();
            if name == "tr" {
                let cells =
                    rest[..stop].matches("<td").count() + rest[..stop].matches("<th").count();
                line.push_str(&format!(" (cells: {cells})"));
            }
            lines.push(line);
            rest = &rest[stop..];
            continue;
        }
        if WITH_TEXT.contains(&name.as_str()) {
            let text = &rest[end + 1..];
            let text = &text[..text.find('<').unwrap_or(text.len())];
            if !text.trim().is_empty() {
                line.push_str(&format!(": {}", text.trim()));
            }
        }
        lines.push(line);
        if !VOID.contains(&name.as_str()) && !tag.ends_with('/') {
            depth += 1;
        }
        rest = &rest[end + 1..];
    }
    collapse(lines)
}

fn collapse(lines: Vec<String>) -> String {
    let mut out: Vec<(String, usize)> = Vec::new();
    for l in lines {
        match out.last_mut() {
            Some((last, n)) if *last == l => *n += 1,
            _ => out.push((l, 1)),
        }
    }
    out.into_iter()
        .map(|(l, n)| {
            if n > 1 {
                format!("{l}  ×{n}\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect()
}

/// The structure of an SVG chart: its size, the count of each element and
/// every text label in drawing order.
fn svg_skeleton(svg: &str) -> String {
    let mut counts: BTreeMap<String, usize> = BTreeMap::new();
    let mut texts = Vec::new();
    let mut rest = svg;
    while let Some(i) = rest.find('<') {
        rest = &rest[i + 1..];
        if rest.starts_with('/') || rest.starts_with('?') {
            continue;
        }
        let name: String = rest
            .chars()
            .take_while(|c| c.is_ascii_alphanumeric())
            .collect();
        if name == "text" {
            let s = rest.find('>').unwrap() + 1;
            let e = rest.find("</text>").unwrap();
            texts.push(rest[s..e].trim().to_string());
        }
        *counts.entry(name).or_default() += 1;
    }
    let head = &svg[svg.find("<svg").unwrap()..];
    let head = &head[..head.find('>').unwrap()];
    let size: Vec<&str> = ["width", "height"]
        .iter()
        .map(|a| {
            let s = head.find(&format!("{a}=\"")).unwrap() + a.len() + 2;
            &head[s..s + head[s..].find('"').unwrap()]
        })
        .collect();
    let mut out = format!("size {}x{}\n", size[0], size[1]);
    for (k, v) in counts {
        out.push_str(&format!("{k}: {v}\n"));
    }
    out.push_str("texts:\n");
    out.push_str(&collapse(texts));
    out
}

fn golden(name: &str, actual: &str) {
    let path = fixture().join("golden").join(name);
    if std::env::var_os("PROVISIO_UPDATE_GOLDEN").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read_to_string(&path).unwrap_or_else(|e| {
        panic!(
            "{}: {e}; run with PROVISIO_UPDATE_GOLDEN=1 to create it",
            path.display()
        )
    });
    if expected != actual {
        let diff = expected
            .lines()
            .zip(actual.lines())
            .enumerate()
            .find(|(_, (a, b))| a != b)
            .map(|(i, (a, b))| format!("line {}: expected {a:?}, got {b:?}", i + 1))
            .unwrap_or_else(|| {
                format!(
                    "{} lines expected, {} got",
                    expected.lines().count(),
                    actual.lines().count()
                )
            });
        panic!(
            "{} differs ({diff}); if the change is intended, rerun with PROVISIO_UPDATE_GOLDEN=1 and review the diff",
            path.display()
        );
    }
}

#[test]
fn golden_structure_of_report_and_charts() {
    let (_tmp, dir, html) = built();
    golden("report.txt", &html_skeleton(&html));
    let zinc = file_stem("Zinc 20 mg dispersible tablet x10");
    let svg = std::fs::read_to_string(dir.join("charts").join(format!("{zinc}.svg"))).unwrap();
    golden("chart.txt", &svg_skeleton(&svg));
    let svg = std::fs::read_to_string(dir.join("charts/overview.svg")).unwrap();
    golden("overview.txt", &svg_skeleton(&svg));
}

#[test]
fn skeleton_sees_structure_changes() {
    // The golden check must be able to fail: a changed class or an extra
    // element changes the skeleton.
    let a = html_skeleton("<main><section class=\"product\"><h2>A</h2></section></main>");
    let b = html_skeleton("<main><section class=\"product care\"><h2>A</h2></section></main>");
    let c = html_skeleton("<main><section class=\"product\"><h2>A</h2><p>x</p></section></main>");
    assert_ne!(a, b);
    assert_ne!(a, c);
    assert_eq!(a, "main\n  section.product\n    h2: A\n");
}

/// The data-quality attention list says missing months and months
/// stocked out too long apart, as each product's own data-quality line
/// does (a tester read "16 month(s) missing" there against "0 missing; 27
/// with stockouts" in the product's detail). Fixture: quality.csv, where
/// the cold-chain antivenom has 0 months missing and 16 stocked out too
/// long.
#[test]
fn the_attention_list_does_not_call_stocked_out_months_missing() {
    let (_tmp, _dir, html) = built();
    assert!(
        html.contains("fit with care, 16 month(s) stocked out too long to use"),
        "attention list wording changed"
    );
    assert!(!html.contains("16 month(s) missing"));
}

/// A product's configured unit names its quantities in the report and the
/// chart files; a product without one keeps "base units". (The demo's
/// units — course, test, sachet... — were in `forecast.csv` but every
/// chart and caption said "base units".)
#[test]
fn configured_units_name_the_charts_and_captions() {
    let (_tmp, dir) = fresh_copy();
    // The fixture's forecast.csv with a units column, as a run configured
    // with `units = "vial"` for the antivenom writes it.
    let path = dir.join("forecast.csv");
    let csv = std::fs::read_to_string(&path).unwrap();
    let mut out = String::new();
    for (i, line) in csv.lines().enumerate() {
        let unit = if i == 0 {
            "units"
        } else if line.starts_with("Snake antivenom vial,") {
            "vial"
        } else {
            ""
        };
        out.push_str(&format!("{line},{unit}\n"));
    }
    std::fs::write(&path, out).unwrap();
    let o = report_with(&dir, &["--chart-files", "all"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    let snake = "Snake antivenom vial";
    let zinc = "Zinc 20 mg dispersible tablet x10";
    assert_eq!(detail(&html, snake)["units"], "vials");
    assert_eq!(detail(&html, zinc)["units"], "base units");
    let svg = |p: &str| {
        std::fs::read_to_string(dir.join("charts").join(format!("{}.svg", file_stem(p)))).unwrap()
    };
    let s = svg(snake);
    assert!(s.contains("consumption (vials per month)"), "{s}");
    // The backtest panel's axis too.
    assert_eq!(s.matches("vials per month").count(), 2, "{s}");
    assert!(!s.contains("base units"), "{s}");
    assert!(svg(zinc).contains("consumption (base units per month)"));
}
