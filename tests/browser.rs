//! The report in a real browser: headless Chromium opens `report.html`
//! (built from the committed fixture), must run its script with no console
//! message (errors, blocked loads), and must paint a page that is not blank.
//!
//! Needs Debian's `chromium` (`.ci/run` installs it). Without a browser the
//! test says so and passes, except under CI (`CI` set), where it fails.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn product_names(dir: &Path) -> Vec<String> {
    let mut r = csv::Reader::from_path(dir.join("selection.csv")).unwrap();
    r.records().map(|x| x.unwrap()[0].to_string()).collect()
}

fn browser() -> Option<PathBuf> {
    if let Some(p) = std::env::var_os("PROVISIO_CHROMIUM") {
        return Some(PathBuf::from(p));
    }
    let path = std::env::var_os("PATH")?;
    for name in ["chromium", "chromium-browser", "google-chrome"] {
        for dir in std::env::split_paths(&path) {
            let p = dir.join(name);
            if p.is_file() {
                return Some(p);
            }
        }
    }
    None
}

/// Runs the browser on `page` with `extra` flags; returns (stdout, stderr).
fn run(browser: &Path, page: &Path, extra: &[String]) -> (String, String) {
    let profile = tempfile::tempdir().unwrap();
    let out = tempfile::NamedTempFile::new().unwrap();
    let err = tempfile::NamedTempFile::new().unwrap();
    let mut child = Command::new(browser)
        .args([
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--enable-logging=stderr",
            "--v=0",
        ])
        .arg(format!("--user-data-dir={}", profile.path().display()))
        .args(extra)
        .arg(format!("file://{}", page.display()))
        .stdin(Stdio::null())
        .stdout(out.reopen().unwrap())
        .stderr(err.reopen().unwrap())
        .spawn()
        .unwrap();
    let start = Instant::now();
    loop {
        if child.try_wait().unwrap().is_some() {
            break;
        }
        if start.elapsed() > Duration::from_secs(120) {
            let _ = child.kill();
            let _ = child.wait();
            panic!("{} did not finish within 120 s", browser.display());
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    (
        std::fs::read_to_string(out.path()).unwrap_or_default(),
        std::fs::read_to_string(err.path()).unwrap_or_default(),
    )
}

/// Console messages in Chromium's log: `...:INFO:CONSOLE(12)] "Uncaught ..."`.
fn console_lines(stderr: &str) -> Vec<&str> {
    stderr
        .lines()
        .filter(|l| l.contains(":CONSOLE") || l.contains("Uncaught"))
        .collect()
}

/// Screenshots the page; returns (distinct colours, share of pixels that
/// differ from the top-left pixel).
fn screenshot(browser: &Path, page: &Path, shot: &Path) -> (Vec<String>, usize, f64) {
    let (_, stderr) = run(
        browser,
        page,
        &[
            format!("--screenshot={}", shot.display()),
            "--window-size=1280,2000".to_string(),
            "--hide-scrollbars".to_string(),
        ],
    );
    let console = console_lines(&stderr)
        .into_iter()
        .map(str::to_string)
        .collect();
    let dec = png::Decoder::new(
        std::fs::File::open(shot)
            .unwrap_or_else(|e| panic!("no screenshot {}: {e}\n{stderr}", shot.display())),
    );
    let mut reader = dec.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    let channels = info.color_type.samples();
    let px: Vec<&[u8]> = buf[..info.buffer_size()].chunks(channels).collect();
    let bg = px[0];
    let mut colours = std::collections::HashSet::new();
    let mut differ = 0usize;
    for p in &px {
        colours.insert(p.to_vec());
        if p[..3] != bg[..3] {
            differ += 1;
        }
    }
    (console, colours.len(), differ as f64 / px.len() as f64)
}

#[test]
fn report_renders_in_a_browser_without_errors() {
    let Some(browser) = browser() else {
        if std::env::var_os("CI").is_some() {
            panic!(
                "no chromium found under CI; .ci/run must install it (apt-get install chromium)"
            );
        }
        eprintln!("SKIPPED report_renders_in_a_browser_without_errors: no chromium on PATH (install Debian's `chromium`, or set PROVISIO_CHROMIUM)");
        return;
    };
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("out");
    std::fs::create_dir(&dir).unwrap();
    let fixture = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/report/forecast-output");
    for e in std::fs::read_dir(fixture).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), dir.join(e.file_name())).unwrap();
    }
    let o = Command::new(env!("CARGO_BIN_EXE_provisio"))
        .arg("report")
        .arg(&dir)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let page = dir.join("report.html");

    // The detector must be able to fail: a page with a script error, a
    // console error and a blocked load is caught.
    let bad = tmp.path().join("bad.html");
    std::fs::write(
        &bad,
        "<!DOCTYPE html><html><head><meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; script-src 'unsafe-inline'\"></head><body><p>x</p><script>console.error('boom'); notDefined();</script></body></html>",
    )
    .unwrap();
    let (_, stderr) = run(&browser, &bad, &["--dump-dom".to_string()]);
    let caught = console_lines(&stderr);
    assert!(
        caught.iter().any(|l| l.contains("Uncaught ReferenceError")),
        "the console check sees no error on a broken page; browser log:\n{stderr}"
    );

    // The script ran (it marks the root element) and product names stay text.
    let (dom, stderr) = run(&browser, &page, &["--dump-dom".to_string()]);
    assert!(
        dom.contains("data-script=\"ran\"") && dom.contains("data-report-script=\"ran\""),
        "the report's scripts did not run; browser log:\n{stderr}"
    );
    assert!(dom.contains("&lt;script&gt;alert(1)&lt;/script&gt;"));
    assert_eq!(dom.matches("<script>").count(), 2, "only our own scripts");
    // A run this small draws every product's detail with its chart.
    let names = product_names(&dir);
    for p in &names {
        let id = format!("id=\"p-{}\"", provisio::chart::file_stem(p));
        let at = dom
            .find(&id)
            .unwrap_or_else(|| panic!("no detail drawn for {p}"));
        let rest = &dom[at..];
        let end = rest.find("</section>").unwrap();
        assert!(rest[..end].contains("<svg"), "{p}: no chart");
        assert!(rest[..end].contains("Candidate models"), "{p}");
    }
    assert!(
        console_lines(&stderr).is_empty(),
        "console messages: {:?}",
        console_lines(&stderr)
    );

    // Sorting works: a copy of the report (its script allowed by dropping
    // the policy) clicks the MAPE heading twice and records the column.
    let html = std::fs::read_to_string(&page).unwrap();
    let csp_start = html
        .find("<meta http-equiv=\"Content-Security-Policy\"")
        .unwrap();
    let csp_end = csp_start + html[csp_start..].find('>').unwrap() + 1;
    let probe = "<script>var t=document.getElementById('index-body').parentNode;\
var b=t.tHead.rows[0].cells[3].querySelector('button');\
function col(){return Array.prototype.map.call(t.tBodies[0].rows,function(r){return parseFloat(r.cells[3].textContent)}).join(' ')}\
b.click();document.body.setAttribute('data-up',col());b.click();document.body.setAttribute('data-down',col());</script></body>";
    let sorted = format!("{}{}", &html[..csp_start], &html[csp_end..]).replace("</body>", probe);
    let sort_page = dir.join("sort-probe.html");
    std::fs::write(&sort_page, sorted).unwrap();
    let (dom, stderr) = run(&browser, &sort_page, &["--dump-dom".to_string()]);
    assert!(console_lines(&stderr).is_empty(), "{stderr}");
    let attr = |name: &str| -> Vec<f64> {
        let s = dom
            .find(&format!("{name}=\""))
            .unwrap_or_else(|| panic!("no {name}: {dom}"))
            + name.len()
            + 2;
        dom[s..s + dom[s..].find('"').unwrap()]
            .split(' ')
            .map(|v| v.parse().unwrap())
            .collect()
    };
    let (up, down) = (attr("data-up"), attr("data-down"));
    assert_eq!(up.len(), 4);
    assert!(up.windows(2).all(|w| w[0] <= w[1]), "{up:?}");
    assert!(down.windows(2).all(|w| w[0] >= w[1]), "{down:?}");
    assert_ne!(up, down);

    // A screenshot: no console message, and a painted page.
    let shot = std::env::var_os("PROVISIO_SCREENSHOT")
        .map(PathBuf::from)
        .unwrap_or_else(|| tmp.path().join("report.png"));
    let (console, colours, share) = screenshot(&browser, &page, &shot);
    assert!(console.is_empty(), "console messages: {console:?}");
    assert!(colours > 50, "only {colours} colours: a blank page?");
    assert!(share > 0.05, "only {:.1}% of pixels painted", share * 100.0);

    // And the blank check can fail: an empty page is caught.
    let empty = tmp.path().join("empty.html");
    std::fs::write(&empty, "<!DOCTYPE html><html><body></body></html>").unwrap();
    let (_, colours, share) = screenshot(&browser, &empty, &tmp.path().join("empty.png"));
    assert!(
        colours <= 50 && share <= 0.05,
        "an empty page looks painted: {colours} colours, {share}"
    );
}

/// The number in `name="..."` of the browser's DOM dump.
fn attr_ms(dom: &str, name: &str) -> f64 {
    let s = dom
        .find(&format!("{name}=\""))
        .unwrap_or_else(|| panic!("no {name} in the page"))
        + name.len()
        + 2;
    dom[s..s + dom[s..].find('"').unwrap()].parse().unwrap()
}

/// The report of 1,000 products (the fixture's four, 250 times each):
/// the first view is ready (the page parsed, its script run, the index
/// drawn) in under 2 s of the page's own clock, and a product found by
/// its name opens its detail, chart drawn and laid out, in under 1 s.
#[test]
fn report_of_1000_products_opens_fast() {
    let Some(browser) = browser() else {
        if std::env::var_os("CI").is_some() {
            panic!("no chromium found under CI; .ci/run must install it");
        }
        eprintln!("SKIPPED report_of_1000_products_opens_fast: no chromium on PATH");
        return;
    };
    let tmp = tempfile::tempdir().unwrap();
    let dir = tmp.path().join("out");
    let names = common::large_folder(&dir, 250);
    assert_eq!(names.len(), 1000);
    let o = Command::new(env!("CARGO_BIN_EXE_provisio"))
        .arg("report")
        .arg(&dir)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let page = dir.join("report.html");
    let size = std::fs::metadata(&page).unwrap().len();

    // The first view: the page marks the time its first view was ready.
    let start = Instant::now();
    let (dom, stderr) = run(&browser, &page, &["--dump-dom".to_string()]);
    let wall = start.elapsed().as_secs_f64();
    assert!(console_lines(&stderr).is_empty(), "{stderr}");
    let first = attr_ms(&dom, "data-first-view");
    let loaded = attr_ms(&dom, "data-loaded");
    eprintln!(
        "1,000 products: report.html {:.1} MB; first view in the page at {first:.0} ms, whole page parsed at {loaded:.0} ms (browser process {wall:.1} s with its start)",
        size as f64 / 1e6
    );
    assert!(first < 2000.0, "first view after {first} ms");
    // The index lists the first 100 and counts them all; no detail is
    // drawn before a product is opened.
    assert!(dom.contains("1000 of 1000 products"), "index count");
    assert!(!dom.contains("<section class=\"product"));

    // Find a product by name and open it: type the name, take the first
    // match, follow its link (the hash changes at once; the script's
    // handler is called directly so the time is measured here).
    let wanted = &names[617];
    let html = std::fs::read_to_string(&page).unwrap();
    let csp_start = html
        .find("<meta http-equiv=\"Content-Security-Policy\"")
        .unwrap();
    let csp_end = csp_start + html[csp_start..].find('>').unwrap() + 1;
    let probe = format!(
        "<script>var t0=performance.now();var q=document.getElementById('find');q.value={};\
q.dispatchEvent(new Event('input'));\
var a=document.querySelector('#index-body a');a.click();\
window.dispatchEvent(new HashChangeEvent('hashchange'));\
var s=document.querySelector('section.product');s.getBoundingClientRect();\
document.body.setAttribute('data-open-ms',String(performance.now()-t0));\
document.body.setAttribute('data-opened',s.getAttribute('data-product')===q.value?'same':'other');\
document.body.setAttribute('data-charted',String(!!s.querySelector('svg path')));</script></body>",
        serde_json::to_string(wanted).unwrap()
    );
    let opened =
        format!("{}{}", &html[..csp_start], &html[csp_end..]).replacen("</body>", &probe, 1);
    let probe_page = dir.join("find-probe.html");
    std::fs::write(&probe_page, opened).unwrap();
    let (dom, stderr) = run(&browser, &probe_page, &["--dump-dom".to_string()]);
    assert!(console_lines(&stderr).is_empty(), "{stderr}");
    let open_ms = attr_ms(&dom, "data-open-ms");
    eprintln!("found and opened '{wanted}' in {open_ms:.0} ms");
    assert!(
        dom.contains("data-opened=\"same\""),
        "the product opened is not the one searched for"
    );
    assert!(dom.contains("data-charted=\"true\""), "no chart drawn");
    assert!(open_ms < 1000.0, "opening took {open_ms} ms");
}

/// The page's own measurements, taken by a probe in a frame `width` CSS
/// pixels wide holding the report (its policy removed so the probe may
/// read it): the JSON the probe writes into `data-probe`.
fn layout_probe(browser: &Path, page: &Path, width: u32) -> serde_json::Value {
    let html = std::fs::read_to_string(page).unwrap();
    let csp_start = html
        .find("<meta http-equiv=\"Content-Security-Policy\"")
        .unwrap();
    let csp_end = csp_start + html[csp_start..].find('>').unwrap() + 1;
    let report = format!("{}{}", &html[..csp_start], &html[csp_end..]);
    // The report as a JavaScript string that cannot close the probe's
    // own script element.
    let doc = serde_json::to_string(&report)
        .unwrap()
        .replace("</", "<\\/");
    // For every link of the menu: follow it as the browser does (the
    // fragment of the frame's address), then compare where its target
    // stands with the bottom of the sticky menu.
    let probe = format!(
        r##"<!DOCTYPE html><html><body style="margin:0"><iframe id="f" style="width:{width}px;height:900px;border:0"></iframe><script>
var f=document.getElementById('f');
f.onload=function(){{var d=f.contentDocument,w=f.contentWindow,r={{vw:w.innerWidth,jumps:[]}};
var plan=d.getElementById('plan'),t=null,n=plan;
while(n&&!t){{n=n.nextElementSibling;if(n&&n.querySelector){{t=n.querySelector('table');}}}}
if(t){{var wrap=t.parentNode,cells=t.tHead.rows[0].cells,last=cells[cells.length-1];
r.planLastRight=last.getBoundingClientRect().right;r.planWrapRight=wrap.getBoundingClientRect().right;
r.planWrapScroll=wrap.scrollWidth;r.planWrapClient=wrap.clientWidth;r.planWrapOverflow=w.getComputedStyle(wrap).overflowX;}}
r.pageScroll=d.documentElement.scrollWidth;
var svg=d.querySelector('section.product figure.chart svg');r.chartWidth=svg?svg.getBoundingClientRect().width:-1;
var drawn=Array.prototype.filter.call(d.querySelectorAll('figure.chart>svg'),function(e){{return !e.closest('section.product');}})[0];
if(drawn){{var fig=drawn.parentNode;r.drawnWidth=drawn.getBoundingClientRect().width;r.drawnFigScroll=fig.scrollWidth;r.drawnFigClient=fig.clientWidth;r.drawnFigOverflow=w.getComputedStyle(fig).overflowX;}}
var nav=d.querySelector('nav.jump');
Array.prototype.forEach.call(nav.querySelectorAll('a[href^="#"]'),function(a){{
var id=a.getAttribute('href').slice(1),target=d.getElementById(id);
w.location.hash=id;
r.jumps.push({{id:id,top:target?target.getBoundingClientRect().top:null,menu:nav.getBoundingClientRect().bottom,scrolled:w.scrollY}});}});
document.body.setAttribute('data-probe',JSON.stringify(r));}};
f.srcdoc={doc};
</script></body></html>"##
    );
    let probe_page = page.with_file_name(format!("layout-{width}.html"));
    std::fs::write(&probe_page, probe).unwrap();
    let (dom, stderr) = run(
        browser,
        &probe_page,
        &[
            "--dump-dom".to_string(),
            "--window-size=1400,1000".to_string(),
        ],
    );
    assert!(console_lines(&stderr).is_empty(), "{stderr}");
    let at = dom
        .find("data-probe=\"")
        .unwrap_or_else(|| panic!("the layout probe wrote nothing at {width} px:\n{stderr}"))
        + "data-probe=\"".len();
    let raw = &dom[at..at + dom[at..].find('"').unwrap()];
    let json = raw
        .replace("&quot;", "\"")
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&");
    serde_json::from_str(&json).unwrap_or_else(|e| panic!("{e}: {json}"))
}

/// The report's layout at a laptop's width (1366 px) and a phone's
/// (390 px), on the demo with its supply plan: the plan table shows its
/// last column (cost) without sideways scrolling at 1366, a heading
/// reached from the menu is not under the sticky menu, the page never
/// scrolls sideways, and on the phone a product chart takes at least 90%
/// of the width (not a thumbnail). The thresholds are our own.
#[test]
fn report_layout_at_laptop_and_phone_widths() {
    let Some(browser) = browser() else {
        if std::env::var_os("CI").is_some() {
            panic!("no chromium found under CI; .ci/run must install it");
        }
        eprintln!("SKIPPED report_layout_at_laptop_and_phone_widths: no chromium on PATH");
        return;
    };
    let w = common::Workdir::new();
    let demo = |f: &str| common::repo(&format!("datasets/demo/{f}"));
    // The inputs under a long folder name with no break opportunity (no
    // hyphen or space): the report shows their paths (the run summary, the
    // plan's warnings), which must wrap rather than widen the page (a clone
    // at /tmp/tmp.XXXXXXXXXX once made the phone view 11 px too wide).
    let deep = w.path("district_warehouse_monthly_consumption_export_2026_final_checked");
    std::fs::create_dir_all(&deep).unwrap();
    for f in ["consumption.csv", "stock.csv", "on_order.csv"] {
        std::fs::copy(demo(f), deep.join(f)).unwrap();
    }
    let input = deep.join("consumption.csv");
    let o = common::run_in(
        &w.path(""),
        &[
            "forecast",
            input.to_str().unwrap(),
            "--out",
            "out",
            "--quiet",
        ],
    );
    assert!(o.status.success(), "{}", common::text(&o));
    let o = common::run_in(
        &w.path(""),
        &[
            "plan",
            "out",
            "--stock",
            deep.join("stock.csv").to_str().unwrap(),
            "--on-order",
            deep.join("on_order.csv").to_str().unwrap(),
            "--quiet",
        ],
    );
    assert!(o.status.success(), "{}", common::text(&o));
    let page = w.path("out/report.html");
    for width in [1366u32, 390] {
        let r = layout_probe(&browser, &page, width);
        let f = |k: &str| r[k].as_f64().unwrap_or_else(|| panic!("{k} in {r}"));
        assert_eq!(f("vw"), width as f64, "{r}");
        assert!(
            f("pageScroll") <= width as f64 + 1.0,
            "{width} px: the page scrolls sideways ({} px wide): {r}",
            f("pageScroll")
        );
        let jumps = r["jumps"].as_array().unwrap();
        assert!(jumps.len() >= 4, "{r}");
        for j in jumps {
            let top = j["top"]
                .as_f64()
                .unwrap_or_else(|| panic!("no target: {j}"));
            let menu = j["menu"].as_f64().unwrap();
            assert!(
                top >= menu - 0.5,
                "{width} px: the heading reached by #{} is under the menu (top {top}, menu ends at {menu})",
                j["id"]
            );
        }
        // The menu's jump to the plan really scrolled (the check above
        // would pass on a page that never moves).
        let plan = jumps
            .iter()
            .find(|j| j["id"] == "plan")
            .expect("a menu link to the plan");
        assert!(plan["scrolled"].as_f64().unwrap() > 500.0, "{plan}");
        if width == 1366 {
            // On a laptop a drawn chart fits its frame.
            assert!(
                f("drawnFigScroll") <= f("drawnFigClient") + 1.0,
                "1366 px: a drawn chart overflows its frame: {r}"
            );
            assert!(
                f("planLastRight") <= f("planWrapRight") + 0.5,
                "1366 px: the plan table's last column is cut off (its right edge at {}, the table's box ends at {}): {r}",
                f("planLastRight"),
                f("planWrapRight")
            );
        } else {
            // On a phone the plan table may scroll inside its box, never
            // the page.
            assert!(
                f("planLastRight") <= f("planWrapRight") + 0.5
                    || (r["planWrapOverflow"] == "auto"
                        && f("planWrapScroll") > f("planWrapClient")),
                "{r}"
            );
            assert!(
                f("chartWidth") >= 0.9 * width as f64,
                "390 px: a product chart is {} px wide, under 90% of the screen: {r}",
                f("chartWidth")
            );
            // Charts drawn 1200 wide (the stock chart, the overview) keep a
            // readable size and scroll inside their frame, not shrink to a
            // third of the screen.
            assert!(
                f("drawnWidth") >= 800.0
                    && r["drawnFigOverflow"] == "auto"
                    && f("drawnFigScroll") > f("drawnFigClient"),
                "390 px: a drawn chart is shrunk to {} px: {r}",
                f("drawnWidth")
            );
        }
    }
}
