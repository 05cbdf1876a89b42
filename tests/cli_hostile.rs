//! End-to-end hardening tests of the real binary: odd product names through
//! the whole forecast, output folders provisio did not create, runs killed
//! mid-way, and results that do not depend on the number of threads.

mod common;

use std::collections::BTreeMap;
use std::path::Path;
use std::time::{Duration, Instant};

use common::{command, read_csv_file, run_in, text, Workdir};

/// Every file in a folder (not recursive), name → bytes.
fn files(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap())
        .filter(|e| e.file_type().unwrap().is_file())
        .map(|e| {
            (
                e.file_name().into_string().unwrap(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect()
}

#[test]
fn odd_product_names_flow_through_forecast_unchanged() {
    let dir = tempfile::tempdir().unwrap();
    let long = format!("Paracetamol {}", "x".repeat(10_000 - 12));
    let names: Vec<String> = [
        "a/b",
        "../../etc/passwd",
        "..",
        "<script>alert(1)</script>",
        "ORS 💊 sachet",
        "محلول الإماهة الفموية",
        "=1+2",
        "tab\there \"quoted\", comma",
    ]
    .iter()
    .map(|s| s.to_string())
    .chain([long])
    .collect();
    let mut input = String::from("product,month,consumed\n");
    for (i, n) in names.iter().enumerate() {
        let quoted = format!("\"{}\"", n.replace('"', "\"\""));
        for t in 0..30 {
            let month = format!("{}-{:02}", 2022 + t / 12, t % 12 + 1);
            let v = 100 + 10 * i + (t * 7 % 13);
            input.push_str(&format!("{quoted},{month},{v}\n"));
        }
    }
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--out",
            "out",
            "--chart-files",
            "all",
            "--origins",
            "2",
            "--horizon",
            "6",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    // Nothing was written outside the output folder, whatever the names say.
    let top: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    assert_eq!(top.len(), 2, "{top:?}");
    let out = dir.path().join("out");
    // Only files, and the one charts folder the report writes, which in
    // turn holds only files (chart names are sanitised).
    for e in std::fs::read_dir(&out).unwrap() {
        let e = e.unwrap();
        if e.file_type().unwrap().is_dir() {
            assert_eq!(e.file_name(), "charts");
            assert!(std::fs::read_dir(e.path()).unwrap().all(|c| c
                .unwrap()
                .file_type()
                .unwrap()
                .is_file()));
        }
    }
    let mut want = names.clone();
    want.sort();
    // Formula text is written with an apostrophe in front (OWASP "CSV
    // Injection"), which `csv_text_read` takes off again.
    let read_back = |r: &csv::StringRecord| provisio::output::csv_text_read(&r[0]).to_string();
    for file in ["selection.csv", "quality.csv"] {
        let rows = read_csv_file(&out.join(file)).1;
        assert!(rows.iter().any(|r| &r[0] == "'=1+2"), "{file}");
        let got: Vec<String> = rows.iter().map(read_back).collect();
        assert_eq!(got, want, "{file}: names come back exactly, in order");
    }
    let forecast = read_csv_file(&out.join("forecast.csv")).1;
    assert_eq!(forecast.len(), names.len() * 6);
    for r in &forecast {
        assert!(names.iter().any(|n| *n == read_back(r)));
        let v: Vec<f64> = (3..8).map(|i| r[i].parse().unwrap()).collect();
        assert!(v.iter().all(|x| x.is_finite() && *x >= 0.0), "{r:?}");
        // lower_95 <= lower_80 <= forecast <= upper_80 <= upper_95
        assert!(v[3] <= v[1] + 1e-9 && v[1] <= v[0] + 1e-9, "{r:?}");
        assert!(v[0] <= v[2] + 1e-9 && v[2] <= v[4] + 1e-9, "{r:?}");
    }
    // The terminal summary cuts long names and shows no control characters.
    let shown = String::from_utf8_lossy(&o.stdout);
    assert!(
        !shown.contains(&"x".repeat(100)),
        "long name is cut on screen"
    );
    assert!(!shown.contains('\t'));
}

#[test]
fn a_folder_provisio_did_not_create_is_refused_unless_overwrite() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    for t in 0..14 {
        input.push_str(&format!(
            "ORS,{}-{:02},{}\n",
            2023 + t / 12,
            t % 12 + 1,
            100 + t
        ));
    }
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let cases: [&[&str]; 3] = [
        &["clean", "in.csv", "--out"],
        &["forecast", "in.csv", "--origins", "1", "--out"],
        &["backtest", "in.csv", "--origins", "1", "--out"],
    ];
    for (i, case) in cases.iter().enumerate() {
        let target = format!("theirs{i}");
        let theirs = dir.path().join(&target);
        std::fs::create_dir(&theirs).unwrap();
        std::fs::write(theirs.join("budget.xlsx"), b"not ours").unwrap();
        let mut args = case.to_vec();
        args.push(&target);
        let o = run_in(dir.path(), &args);
        assert_eq!(o.status.code(), Some(1), "{args:?}: {}", text(&o));
        assert!(
            text(&o).contains(&format!(
                "{target}: cannot write output: the folder is not empty and provisio did not create it (it holds budget.xlsx); choose a new or empty folder, or add --overwrite"
            )),
            "{}",
            text(&o)
        );
        assert_eq!(files(&theirs).len(), 1, "nothing written on refusal");
        args.push("--overwrite");
        let o = run_in(dir.path(), &args);
        assert!(o.status.success(), "{args:?}: {}", text(&o));
        assert_eq!(
            std::fs::read(theirs.join("budget.xlsx")).unwrap(),
            b"not ours"
        );
        assert!(theirs.join(".provisio-output").exists());
        // Now marked as provisio's: a re-run needs no --overwrite.
        args.pop();
        let o = run_in(dir.path(), &args);
        assert!(o.status.success(), "{args:?} again: {}", text(&o));
    }
    // A fresh folder, and re-running into it, need nothing special.
    for _ in 0..2 {
        let o = run_in(dir.path(), &["clean", "in.csv", "--out", "mine"]);
        assert!(o.status.success(), "{}", text(&o));
    }
}

/// Names in `dir` that a run into `out` keeps beside it while it works:
/// its lock, its staging copy, the earlier folder while swapped out.
fn beside(dir: &Path, out: &str) -> Vec<String> {
    let prefix = format!(".{out}.provisio-");
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .filter_map(Result::ok)
        .map(|e| e.file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with(&prefix))
        .collect();
    v.sort();
    v
}

/// Starts `clean` into `out`, waits until it starts writing (its staging
/// copy appears beside the folder), waits `delay` more, and kills it.
/// Returns whether the process was still running when killed.
fn kill_while_writing(dir: &Path, out: &str, delay: Duration) -> bool {
    let mut child = command(dir)
        .args(["clean", "in.csv", "--out", out])
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let stage = format!(".{out}.provisio-new-");
    let t0 = Instant::now();
    loop {
        if child.try_wait().unwrap().is_some() {
            return false;
        }
        let writing = beside(dir, out).iter().any(|n| n.starts_with(&stage));
        if writing || t0.elapsed() > Duration::from_secs(60) {
            break;
        }
        std::thread::sleep(Duration::from_millis(1));
    }
    std::thread::sleep(delay);
    let running = child.try_wait().unwrap().is_none();
    let _ = child.kill();
    let _ = child.wait();
    running
}

fn copy_dir(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for (name, bytes) in files(from) {
        std::fs::write(to.join(name), bytes).unwrap();
    }
}

#[test]
fn a_killed_run_leaves_the_whole_earlier_folder_or_the_whole_new_one() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // About 10,000 rows: a 1 MB adjustment log, so writing takes a moment.
    let o = run_in(
        d,
        &[
            "generate",
            "--products",
            "15",
            "--sites",
            "20",
            "--months",
            "36",
            "--seed",
            "5",
            "--out",
            "in.csv",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let o = run_in(d, &["clean", "in.csv", "--out", "reference"]);
    assert!(o.status.success(), "{}", text(&o));
    let reference = files(&d.join("reference"));
    // A previous complete version with different contents.
    let o = run_in(
        d,
        &[
            "clean",
            "in.csv",
            "--out",
            "previous",
            "--max-stockout-days",
            "5",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let previous = files(&d.join("previous"));
    assert_ne!(reference["cleaned.csv"], previous["cleaned.csv"]);

    let mut interrupted = 0;
    let mut before_swap = 0;
    for (i, ms) in [0u64, 2, 8, 25, 60].iter().enumerate() {
        for with_previous in [true, false] {
            let out = format!("run{i}{}", if with_previous { "p" } else { "f" });
            if with_previous {
                copy_dir(&d.join("previous"), &d.join(&out));
            }
            if kill_while_writing(d, &out, Duration::from_millis(*ms)) {
                interrupted += 1;
            }
            let target = d.join(&out);
            let left = if target.exists() {
                files(&target)
            } else {
                BTreeMap::new()
            };
            let state = if left == reference {
                "new"
            } else if with_previous && left == previous {
                "previous"
            } else if left.is_empty() && !with_previous {
                "none"
            } else if left.is_empty()
                && beside(d, &out)
                    .iter()
                    .any(|n| n.starts_with(&format!(".{out}.provisio-old-")))
            {
                // Killed between the two renames: put back by the next run.
                "previous, moved aside"
            } else {
                panic!(
                    "{out} (killed {ms} ms into writing) holds a mix: {:?}",
                    left.keys().collect::<Vec<_>>()
                )
            };
            if state != "new" {
                before_swap += 1;
            }
            // The next run cleans up beside the folder and completes.
            let o = run_in(d, &["clean", "in.csv", "--out", &out]);
            assert!(o.status.success(), "{}", text(&o));
            assert_eq!(files(&target), reference, "{out} after a full run");
            assert_eq!(beside(d, &out), Vec::<String>::new(), "{out}: left beside");
        }
    }
    eprintln!("{interrupted} of 10 runs killed while running; {before_swap} before the swap");
    // The kills did land while files were being written.
    assert!(interrupted >= 4, "only {interrupted} runs were interrupted");
    assert!(before_swap >= 2, "only {before_swap} kills before the swap");
}

/// Every file under a folder, path → bytes (recursive).
fn tree(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(p) = todo.pop() {
        for e in std::fs::read_dir(&p).unwrap() {
            let e = e.unwrap();
            if e.file_type().unwrap().is_dir() {
                todo.push(e.path());
            } else {
                let rel = e.path().strip_prefix(dir).unwrap().display().to_string();
                out.insert(rel, std::fs::read(e.path()).unwrap());
            }
        }
    }
    out
}

/// Two small invented inputs with different products, to tell runs apart.
fn two_inputs(d: &Path) {
    let mut a = String::from("product,month,consumed\n");
    let mut b = a.clone();
    for m in 1..=30 {
        let (y, mm) = (2022 + (m - 1) / 12, (m - 1) % 12 + 1);
        a.push_str(&format!("ORS,{y}-{mm:02},{}\n", 100 + (m * 7) % 23));
        a.push_str(&format!("Zinc,{y}-{mm:02},{}\n", 50 + (m * 5) % 11));
        b.push_str(&format!("Amoxicillin,{y}-{mm:02},{}\n", 200 + (m * 3) % 17));
    }
    std::fs::write(d.join("a.csv"), a).unwrap();
    std::fs::write(d.join("b.csv"), b).unwrap();
}

#[test]
fn a_failure_half_way_leaves_the_earlier_folder_unchanged() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    two_inputs(d);
    let o = run_in(d, &["forecast", "a.csv", "--out", "o", "--origins", "2"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let o = run_in(
        d,
        &[
            "forecast",
            "a.csv",
            "--out",
            "past",
            "--origins",
            "2",
            "--until",
            "2023-12",
        ],
    );
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    // Invented stock and population for the two products.
    std::fs::write(
        d.join("stock.csv"),
        "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost\n\
         ORS,300,2024-06,2,3,6,2,50,0.5\nZinc,100,2024-06,2,3,6,2,10,0.2\n",
    )
    .unwrap();
    std::fs::write(
        d.join("pop.csv"),
        "product,group,method,population,group_share,rate,care_seeking,treated,quantity_per_course\n\
         ORS,all,morbidity,100000,1,0.3,0.6,0.9,2\n",
    )
    .unwrap();
    let before = tree(&d.join("o"));
    assert!(before.contains_key("report.html") && before.contains_key("forecast.xlsx"));
    let top = |d: &Path| {
        let mut v: Vec<_> = std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    };
    let listing_before = top(d);
    // A write that fails half-way (a full disk, simulated by the test hook)
    // in each command that writes the folder: nothing of the failed run
    // shows, and nothing is left beside the folder.
    for (args, fails) in [
        (
            vec!["forecast", "b.csv", "--out", "o", "--origins", "2"],
            "scores.csv",
        ),
        (
            vec!["forecast", "b.csv", "--out", "o", "--origins", "2"],
            "report.html",
        ),
        (vec!["clean", "b.csv", "--out", "o"], "manifest.json"),
        (vec!["report", "o"], "report.html"),
        (vec!["plan", "o", "--stock", "stock.csv"], "orders.csv"),
        (vec!["plan", "o", "--stock", "stock.csv"], "forecast.xlsx"),
        (
            vec!["crosscheck", "o", "--population", "pop.csv"],
            "crosscheck.json",
        ),
        (
            vec!["review", "past", "--actuals", "a.csv", "--out", "o"],
            "review.json",
        ),
    ] {
        let o = command(d)
            .args(&args)
            .env("PROVISIO_TEST_FAIL_WRITE", fails)
            .output()
            .unwrap();
        let out = text(&o);
        assert_eq!(o.status.code(), Some(1), "{args:?}: {out}");
        assert!(
            out.contains(&format!(
                "error: o/{fails}: cannot write: no space left on device"
            )),
            "{args:?}: the message names the output folder's file, not the staging copy: {out}"
        );
        assert!(tree(&d.join("o")) == before, "{args:?} changed the folder");
        assert_eq!(
            top(d),
            listing_before,
            "{args:?} left files beside the folder"
        );
    }
    // Without the failure, the same commands go through.
    for args in [
        vec!["plan", "o", "--stock", "stock.csv"],
        vec!["crosscheck", "o", "--population", "pop.csv"],
    ] {
        let o = run_in(d, &args);
        assert_eq!(o.status.code(), Some(0), "{args:?}: {}", text(&o));
    }
    assert!(d.join("o/orders.csv").exists() && d.join("o/crosscheck.json").exists());
    let listing_before = top(d);
    // `report` finds a damaged scores.csv after it rebuilt the workbook:
    // the folder keeps its workbook and report as they were.
    let scores = d.join("o/scores.csv");
    let mut damaged = std::fs::read_to_string(&scores).unwrap();
    damaged.push_str("ORS,\"unclosed\n");
    std::fs::write(&scores, &damaged).unwrap();
    let before = tree(&d.join("o"));
    let o = run_in(d, &["report", "o"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    assert!(text(&o).contains("o/scores.csv"), "{}", text(&o));
    assert!(tree(&d.join("o")) == before, "report changed the folder");
    assert_eq!(top(d), listing_before);
}

#[test]
fn a_second_run_into_a_folder_being_written_is_refused_naming_the_first() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    two_inputs(d);
    // A live provisio process holds the lock: one waiting for its input.
    let lock = d.join(".o.provisio-lock");
    let host = std::fs::read_to_string("/proc/sys/kernel/hostname").unwrap_or_default();
    let mut holder = command(d)
        .args(["inspect", "/dev/stdin"])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let me = holder.id();
    // The holder must be running as provisio before the lock names it (the
    // lock's check reads /proc/PID/comm); wait for that, at most 10 s.
    let comm = || std::fs::read_to_string(format!("/proc/{me}/comm")).unwrap_or_default();
    for _ in 0..400 {
        if comm().trim_end() == "provisio" {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(25));
    }
    std::fs::write(
        &lock,
        format!(
            "provisio run lock\npid {me}\nstarted 2026-12-04T10:00:00Z\nhost {}\n",
            host.trim()
        ),
    )
    .unwrap();
    for args in [
        vec!["forecast", "a.csv", "--out", "o"],
        vec!["clean", "a.csv", "--out", "o"],
        vec!["backtest", "a.csv", "--out", "o"],
    ] {
        let o = run_in(d, &args);
        let out = text(&o);
        assert_eq!(
            o.status.code(),
            Some(1),
            "{out}\nthe holder: {:?}, /proc/{me}/comm {:?}",
            holder.try_wait(),
            comm()
        );
        assert!(
            out.contains(&format!(
                "error: another provisio run is writing o (pid {me}, started 2026-12-04T10:00:00Z); wait for it to finish, or choose another folder"
            )),
            "{out}"
        );
        assert!(
            !d.join("o").exists(),
            "{args:?} wrote while another run held the folder"
        );
    }
    assert!(lock.exists(), "another run's lock is never removed");
    let _ = holder.kill();
    let _ = holder.wait();

    // A lock left by a run that was killed (its process is gone) is taken over.
    let mut gone = std::process::Command::new("true").spawn().unwrap();
    let pid = gone.id();
    gone.wait().unwrap();
    std::fs::write(
        &lock,
        format!(
            "provisio run lock\npid {pid}\nstarted 2026-12-04T10:00:00Z\nhost {}\n",
            host.trim()
        ),
    )
    .unwrap();
    let o = run_in(d, &["clean", "a.csv", "--out", "o"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    assert!(!lock.exists(), "the run removes its lock");

    // Two runs started together: each succeeds or is refused by name, and
    // the folder holds one run's files, all of them.
    for round in 0..3 {
        let spawn = |input: &str| {
            command(d)
                .args(["clean", input, "--out", "race"])
                .stdout(std::process::Stdio::piped())
                .stderr(std::process::Stdio::piped())
                .spawn()
                .unwrap()
        };
        let (a, b) = (spawn("a.csv"), spawn("b.csv"));
        let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
        for o in [&a, &b] {
            assert!(
                o.status.success()
                    || text(o).contains("another provisio run is writing race (pid "),
                "round {round}: {}",
                text(o)
            );
        }
        assert!(a.status.success() || b.status.success(), "round {round}");
        let manifest = std::fs::read_to_string(d.join("race/manifest.json")).unwrap();
        let cleaned = std::fs::read_to_string(d.join("race/cleaned.csv")).unwrap();
        let from_a = manifest.contains("a.csv");
        assert!(from_a || manifest.contains("b.csv"), "{manifest}");
        assert_eq!(
            cleaned.contains("ORS"),
            from_a,
            "round {round}: cleaned.csv and manifest.json come from different runs"
        );
        assert_eq!(cleaned.contains("Amoxicillin"), !from_a);
        assert_eq!(beside(d, "race"), Vec::<String>::new());
    }
}

/// Runs `forecast` with `threads` rayon threads; returns its output files,
/// with the time taken removed from the manifest.
fn forecast_with_threads(dir: &Path, threads: &str) -> BTreeMap<String, Vec<u8>> {
    let out = format!("out{threads}");
    let o = command(dir)
        .args([
            "forecast",
            "in.csv",
            "--out",
            &out,
            "--origins",
            "3",
            "--horizon",
            "12",
        ])
        .env("RAYON_NUM_THREADS", threads)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", text(&o));
    let mut got = files(&dir.join(&out));
    let mut manifest: serde_json::Value =
        serde_json::from_slice(&got["manifest.json"]).expect("manifest is JSON");
    let seconds = manifest
        .as_object_mut()
        .and_then(|m| m.remove("seconds"))
        .expect("manifest records the seconds");
    assert!(seconds.as_f64().is_some());
    let date = manifest
        .as_object_mut()
        .and_then(|m| m.remove("date"))
        .expect("manifest records the date");
    assert!(date.as_str().is_some());
    got.insert(
        "manifest.json".into(),
        serde_json::to_vec(&manifest).unwrap(),
    );
    // The workbook records the date and the seconds taken (cells, and the
    // file's properties): compare its cells, all but those two.
    use calamine::Reader;
    let bytes = got.remove("forecast.xlsx").expect("forecast.xlsx written");
    let mut book = calamine::Xlsx::new(std::io::Cursor::new(bytes)).unwrap();
    let mut cells = String::new();
    for name in book.sheet_names() {
        let range = book.worksheet_range(&name).unwrap();
        for row in range.rows() {
            let first = row.first().map(|d| d.to_string()).unwrap_or_default();
            if first != "date" && first != "seconds" {
                cells.push_str(&format!("{name}: {row:?}\n"));
            }
        }
    }
    got.insert("forecast.xlsx cells".into(), cells.into_bytes());
    got
}

#[test]
fn results_do_not_depend_on_the_number_of_threads() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let o = run_in(
        d,
        &[
            "generate",
            "--products",
            "6",
            "--sites",
            "3",
            "--months",
            "40",
            "--seed",
            "9",
            "--out",
            "in.csv",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let one = forecast_with_threads(d, "1");
    let four = forecast_with_threads(d, "4");
    assert!(one.len() >= 9, "{:?}", one.keys().collect::<Vec<_>>());
    assert_eq!(
        one.keys().collect::<Vec<_>>(),
        four.keys().collect::<Vec<_>>()
    );
    for (name, bytes) in &one {
        assert!(
            &four[name] == bytes,
            "{name} differs between 1 and 4 threads"
        );
    }
}

/// Runs `provisio inspect FILE` on a file of tests/data/bad/ with the
/// address space capped at 1 GB (`ulimit -v`), so a read that sizes memory
/// by a sheet's bounding box or unpacks a bomb fails the test instead of
/// the machine.
fn inspect_capped(file: &str, env: &[(&str, &str)]) -> (Option<i32>, String) {
    inspect_capped_path(&common::repo(&format!("tests/data/bad/{file}")), env)
}

/// [`inspect_capped`] of any file.
fn inspect_capped_path(src: &Path, env: &[(&str, &str)]) -> (Option<i32>, String) {
    let w = tempfile::tempdir().unwrap();
    let name = src.file_name().unwrap().to_str().unwrap();
    let file = name;
    std::fs::copy(src, w.path().join(file)).unwrap();
    let mut c = std::process::Command::new("sh");
    c.current_dir(w.path())
        .args(["-c", "ulimit -v 1000000; exec \"$0\" \"$@\""])
        .arg(env!("CARGO_BIN_EXE_provisio"))
        .args(["inspect", file])
        .env_remove("NO_COLOR");
    for (k, v) in env {
        c.env(k, v);
    }
    let o = c.output().unwrap();
    (o.status.code(), text(&o))
}

#[test]
fn hostile_workbooks_are_read_in_bounded_memory_or_refused_with_the_limit() {
    // One stray cell at XFD1048576, the last column and row of a sheet
    // (limits from the Office Open XML format, common practice): read as one
    // more row, which is rejected with its place; no grid is laid out.
    let (code, out) = inspect_capped("far_cell.xlsx", &[]);
    assert_eq!(code, Some(0), "{out}");
    assert!(out.contains("rows read: 4 = 3 used as reported"), "{out}");
    assert!(
        out.contains("sheet 'Data', row 1048576, column A (product)"),
        "{out}"
    );
    // The same with a formula far away and an empty consumed cell, which
    // makes the reader look at formulas.
    let (code, out) = inspect_capped("far_formula.xlsx", &[]);
    assert_eq!(code, Some(0), "{out}");
    assert!(out.contains("rows read: 3"), "{out}");
    // A binary workbook (.xlsb) saved under an .xlsx name, with the same
    // stray cell and a formula's saved value beside it: calamine opens it
    // by its content as .xlsb, whose range is the whole bounding box (it
    // aborted asking for the grid), and whose reader panics on damaged
    // files (found by fuzzing); refused by name with what would be valid.
    let (code, out) = inspect_capped("xlsb_named_xlsx.xlsx", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("xlsb_named_xlsx.xlsx: the file is a binary workbook (.xlsb), which provisio does not read"),
        "{out}"
    );
    assert!(
        out.contains("save it as an .xlsx workbook or as CSV"),
        "{out}"
    );
    assert!(!out.contains("panicked"), "{out}");
    // OpenDocument repeats: a million empty rows then a cell in column
    // 16384 would be laid out as 17 billion cells; refused before calamine
    // expands them, naming the file and how to raise the limit.
    let (code, out) = inspect_capped("far_cell.ods", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("far_cell.ods: the workbook's sheets span 17179869196 cells"),
        "{out}"
    );
    assert!(out.contains("PROVISIO_MAX_SHEET_CELLS=N"), "{out}");
    // The same OpenDocument archive after 600 bytes of text: the zip reader
    // finds it anyway, so the size checks must run too (found by the fuzz
    // target read_workbook; it ran out of memory before).
    let (code, out) = inspect_capped("zip_after_text.xlsx", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("zip_after_text.xlsx: the workbook's sheets span 17179869196 cells"),
        "{out}"
    );
    // The far cell again, after repeated rows written as an empty element
    // and a stray end tag: calamine reads past the stray tag, a count that
    // stopped there let it lay out the grid (found by fuzzing); refused as
    // damaged, naming the part.
    let (code, out) = inspect_capped("loose_tags.ods", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains(
            "loose_tags.ods: the workbook is damaged: its part content.xml cannot be read"
        ),
        "{out}"
    );
    // Unpacked size: read under the default limit, refused under a lower one.
    let (code, out) = inspect_capped("unpacks_large.xlsx", &[]);
    assert_eq!(code, Some(0), "{out}");
    assert!(out.contains("rows read: 2400 = 2400 used"), "{out}");
    let (code, out) = inspect_capped("unpacks_large.xlsx", &[("PROVISIO_MAX_UNPACKED_MIB", "4")]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("unpacks_large.xlsx: the workbook unpacks to more than 4 MiB (stopped in its part xl/worksheets/sheet1.xml)"),
        "{out}"
    );
    assert!(out.contains("PROVISIO_MAX_UNPACKED_MIB=MIB"), "{out}");
    // Cells kept: read under the default limit, refused under a lower one.
    let (code, out) = inspect_capped("many_cells.xlsx", &[]);
    assert_eq!(code, Some(0), "{out}");
    assert!(out.contains("rows read: 20004 = 20004 used"), "{out}");
    let (code, out) = inspect_capped("many_cells.xlsx", &[("PROVISIO_MAX_SHEET_CELLS", "1000")]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("many_cells.xlsx: sheet 'Data': the sheet holds more than 1000 cells"),
        "{out}"
    );
    // Old-style .xls (tests/reference/bad_xls.py): the cells' box, the
    // declared dimensions and the sectors are sized before the workbook
    // reader lays anything out. Without that each of these aborts the
    // process, asking for 137 GB, 344 GB and 1.1 TB (seen before the check).
    let (code, out) = inspect_capped("far_cell.xls", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("far_cell.xls: the cells of sheet 1 of the workbook span rows 1 to 65536 and columns A to CRXP (4294967296 cells once laid out"),
        "{out}"
    );
    assert!(out.contains("provisio stops at 2000000 cells"), "{out}");
    assert!(out.contains("PROVISIO_MAX_SHEET_CELLS=N"), "{out}");
    let (code, out) = inspect_capped("huge_dimensions.xls", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains(
            "huge_dimensions.xls: sheet 1 of the workbook declares dimensions of 8589934588 cells"
        ),
        "{out}"
    );
    // Cut inside its directory, after the Workbook entry's start and
    // length (MS-CFB §2.6: an entry is 128 bytes; its start sector and
    // stream size are its last fields but four): the short entry is read,
    // so the check reads it too (found by fuzzing: aborted asking for 344 GB).
    let (code, out) = inspect_capped("cut_directory.xls", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains(
            "cut_directory.xls: sheet 1 of the workbook declares dimensions of 8589934588 cells"
        ),
        "{out}"
    );
    // The sound workbook cut the same way still reads: the cut entries
    // after the workbook's are empty.
    let cut = std::fs::read(common::repo("tests/data/sheets/xlwt.xls")).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let cut_path = dir.path().join("cut.xls");
    std::fs::write(&cut_path, &cut[..5373]).unwrap();
    let (code, out) = inspect_capped_path(&cut_path, &[]);
    assert_eq!(code, Some(0), "{out}");
    let (code, out) = inspect_capped("bad_sector.xls", &[]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("bad_sector.xls: the .xls workbook is damaged (the directory runs to sector 2147483632, past the end of the file)"),
        "{out}"
    );
    // The sound workbook they were made from reads under the same cap, and
    // under a cell limit just above its box (4 columns × 7 rows).
    let sound = common::repo("tests/data/sheets/xlwt.xls");
    let (code, out) = inspect_capped_path(&sound, &[("PROVISIO_MAX_SHEET_CELLS", "28")]);
    assert_eq!(code, Some(0), "{out}");
    let (code, out) = inspect_capped_path(&sound, &[("PROVISIO_MAX_SHEET_CELLS", "27")]);
    assert_eq!(code, Some(1), "{out}");
    assert!(out.contains("xlwt.xls: sheet 1 of the workbook declares dimensions of 28 cells; provisio stops at 27 cells"), "{out}");
    // The same workbook cut short at 5,144 of its 5,632 bytes: calamine's
    // .xls reader panicked on it as cut (slice index out of range); padded
    // to whole sectors it finds no workbook in it. Either way the file is
    // refused as damaged, and no panic text or backtrace reaches the
    // terminal.
    let w = tempfile::tempdir().unwrap();
    let cut = w.path().join("cut_short.xls");
    let bytes = std::fs::read(&sound).unwrap();
    assert_eq!(bytes.len(), 5632);
    std::fs::write(&cut, &bytes[..5144]).unwrap();
    let (code, out) = inspect_capped_path(&cut, &[("RUST_BACKTRACE", "1")]);
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains("cut_short.xls: the workbook is damaged"),
        "{out}"
    );
    assert!(
        !out.contains("panicked") && !out.contains("backtrace"),
        "{out}"
    );
    // A value that is not a number is not silently taken as a limit.
    let (_, out) = inspect_capped("many_cells.xlsx", &[("PROVISIO_MAX_SHEET_CELLS", "lots")]);
    assert!(
        out.contains("PROVISIO_MAX_SHEET_CELLS=\"lots\" is not a whole number"),
        "{out}"
    );
}

#[test]
fn the_active_visible_sheet_is_read_and_named_not_a_hidden_first_one() {
    let (code, out) = inspect_capped("hidden_first_sheet.xlsx", &[]);
    assert_eq!(code, Some(0), "{out}");
    assert!(out.contains("ORS "), "{out}");
    assert!(!out.contains("OLD"), "the hidden sheet was read:\n{out}");
    assert!(
        out.contains("sheet 'Data' was read (the active sheet); the workbook's sheets are 'Old' (hidden), 'Data'; choose another with --sheet"),
        "{out}"
    );
}

#[test]
fn data_text_never_reaches_the_terminal_raw() {
    // ESC ] 0 ; X BEL sets a terminal's title; a NUL in a name; a
    // right-to-left override (U+202E) that reverses what follows on screen.
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from(
        "product,month,consumed\nORS,2024-01,5\nORS,2024-02,\u{1b}]0;X\u{7}\nOR\0S,2024-03,5\n",
    );
    for m in 1..=12 {
        input.push_str(&format!("\u{202e}LOOC,2024-{m:02},{}\n", 10 + m));
    }
    std::fs::write(dir.path().join("e.csv"), input).unwrap();
    let o = run_in(dir.path(), &["inspect", "e.csv"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(0), "{out}");
    for bad in ['\u{1b}', '\u{7}', '\0', '\u{202e}'] {
        assert!(!out.contains(bad), "{bad:?} printed raw:\n{out:?}");
    }
    // Shown visibly instead, so the user can find and fix them.
    assert!(out.contains("\"<U+001B>]0;X<U+0007>\""), "{out}");
    assert!(out.contains("<U+202E>LOOC"), "{out}");
    // The NUL is refused with its line and column, not made a product.
    assert!(
        out.contains(
            "e.csv:4: column 'product': product holds the control character U+0000 at character 3"
        ),
        "{out}"
    );
    assert!(
        out.contains("rows read: 15 = 13 used as reported + 0 corrected by cleaning + 2 rejected"),
        "{out}"
    );
}

/// Runs the binary and kills it if it has not finished within `secs`.
fn run_with_deadline(mut c: std::process::Command, secs: u64) -> Option<std::process::Output> {
    let mut child = c
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while start.elapsed() < Duration::from_secs(secs) {
        if child.try_wait().unwrap().is_some() {
            return Some(child.wait_with_output().unwrap());
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    child.kill().unwrap();
    child.wait().unwrap();
    None
}

const WITH_DUPLICATES: &str =
    "product,month,consumed\nORS,2024-01,5\nORS,2024-01,6\nORS,2024-02,7\n";

#[test]
fn a_named_pipe_or_standard_input_is_read_once() {
    let dir = tempfile::tempdir().unwrap();
    let fifo = dir.path().join("in.csv");
    let made = std::process::Command::new("mkfifo").arg(&fifo).status();
    if made.map_or(true, |s| !s.success()) {
        eprintln!("SKIPPED: mkfifo not available");
        return;
    }
    // The writer opens the pipe once and writes the file once; a reader
    // that opened it again to reread the duplicate rows would wait forever.
    let writer = {
        let fifo = fifo.clone();
        std::thread::spawn(move || std::fs::write(&fifo, WITH_DUPLICATES))
    };
    let mut c = command(dir.path());
    c.args(["clean", "in.csv", "--out", "o"]);
    let o = run_with_deadline(c, 60).expect("clean on a named pipe hung");
    writer.join().unwrap().unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let (_, rejected) = read_csv_file(&dir.path().join("o/rejected.csv"));
    assert_eq!(rejected.len(), 2, "both conflicting rows rejected");
    // Each rejected row keeps its text (the last field of rejected.csv).
    for r in &rejected {
        assert!(r.iter().any(|f| f.starts_with("ORS,2024-01,")), "{r:?}");
    }

    // Standard input: the same, and the rejected rows keep their text.
    let mut c = command(dir.path());
    c.args(["clean", "/dev/stdin", "--out", "s"])
        .stdin(std::process::Stdio::piped());
    let mut child = c
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    {
        use std::io::Write;
        let mut stdin = child.stdin.take().unwrap();
        stdin.write_all(WITH_DUPLICATES.as_bytes()).unwrap();
    }
    let o = child.wait_with_output().unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    let (_, rejected) = read_csv_file(&dir.path().join("s/rejected.csv"));
    assert_eq!(rejected.len(), 2);
    for r in &rejected {
        assert!(r.iter().any(|f| f.starts_with("ORS,2024-01,")), "{r:?}");
    }
}

#[test]
fn a_file_growing_while_it_is_read_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("in.csv");
    let mut body = String::from("product,month,consumed\n");
    for p in 0..20_000 {
        for m in 1..=12 {
            body.push_str(&format!("P{p},2024-{m:02},{}\n", m + p % 7));
        }
    }
    std::fs::write(&path, &body).unwrap();
    // Another program appends to the file all the time the run reads it.
    let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    let appender = {
        let (path, stop) = (path.clone(), stop.clone());
        std::thread::spawn(move || {
            use std::io::Write;
            let mut f = std::fs::OpenOptions::new()
                .append(true)
                .open(&path)
                .unwrap();
            let mut n = 0u64;
            while !stop.load(std::sync::atomic::Ordering::Relaxed) {
                writeln!(f, "Q{n},2024-01,1").unwrap();
                n += 1;
                std::thread::sleep(Duration::from_micros(200));
            }
        })
    };
    let o = run_in(dir.path(), &["inspect", "in.csv"]);
    stop.store(true, std::sync::atomic::Ordering::Relaxed);
    appender.join().unwrap();
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("in.csv: the file changed while it was read"),
        "{out}"
    );
}

#[test]
fn too_many_products_for_a_sheet_are_refused_before_the_work_naming_no_workbook() {
    // 210,000 products × 5 rows + 3 > 1,048,576 rows, the sheet limit of
    // Office Open XML (common practice).
    let dir = tempfile::tempdir().unwrap();
    let mut body = String::from("product,month,consumed\n");
    for p in 0..210_000 {
        body.push_str(&format!("P{p},2024-01,5\n"));
    }
    std::fs::write(dir.path().join("many.csv"), body).unwrap();
    let t = Instant::now();
    let o = run_in(
        dir.path(),
        &["forecast", "many.csv", "--out", "o", "--no-report"],
    );
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("the data has 210000 products: the Forecast sheet of forecast.xlsx would need 1050003 rows, more than the 1048576 a spreadsheet holds; give --no-workbook"),
        "{out}"
    );
    assert!(
        !dir.path().join("o/forecast.csv").exists(),
        "refused before writing"
    );
    eprintln!("refused after {:.1} s", t.elapsed().as_secs_f64());
}

#[test]
fn output_folder_leftovers_links_and_inputs_are_handled() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(
        d.join("in.csv"),
        "product,month,consumed\nORS,2024-01,5\nORS,2024-02,6\n",
    )
    .unwrap();
    let o = run_in(d, &["clean", "in.csv", "--out", "o"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));

    // A temporary file a killed run left in a subfolder is removed by the next run.
    std::fs::create_dir_all(d.join("o/charts")).unwrap();
    std::fs::write(d.join("o/charts/.provisio-4242-0.tmp"), "half a chart").unwrap();
    let o = run_in(d, &["clean", "in.csv", "--out", "o"]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
    assert!(!d.join("o/charts/.provisio-4242-0.tmp").exists());

    // A symbolic link to a folder elsewhere is refused, not followed.
    std::fs::remove_dir_all(d.join("o/charts")).unwrap();
    std::fs::create_dir(d.join("elsewhere")).unwrap();
    std::os::unix::fs::symlink(d.join("elsewhere"), d.join("o/charts")).unwrap();
    let o = run_in(d, &["clean", "in.csv", "--out", "o"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("'charts' in the output folder is a symbolic link to a folder"),
        "{out}"
    );
    assert_eq!(std::fs::read_dir(d.join("elsewhere")).unwrap().count(), 0);
    std::fs::remove_file(d.join("o/charts")).unwrap();

    // An input that sits in the output folder under an output's name is
    // never replaced, even with --overwrite.
    let before = std::fs::read(d.join("o/cleaned.csv")).unwrap();
    let o = run_in(d, &["clean", "o/cleaned.csv", "--out", "o", "--overwrite"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("the input file o/cleaned.csv is in the output folder"),
        "{out}"
    );
    assert_eq!(std::fs::read(d.join("o/cleaned.csv")).unwrap(), before);
}

#[test]
fn shared_strings_past_their_share_of_the_limit_are_refused() {
    // rust_xlsxwriter stores text cells as shared strings: 10,000 distinct
    // names make a shared-strings part of about 380 KB, past 1/16 of a 4 MiB
    // limit, while the whole workbook stays under 4 MiB.
    let dir = tempfile::tempdir().unwrap();
    let mut book = rust_xlsxwriter::Workbook::new();
    let ws = book.add_worksheet();
    for (c, h) in ["product", "month", "consumed"].iter().enumerate() {
        ws.write_string(0, c as u16, *h).unwrap();
    }
    for r in 1..=10_000u32 {
        ws.write_string(r, 0, format!("product number {r:08}"))
            .unwrap();
        ws.write_string(r, 1, "2024-01").unwrap();
        ws.write_number(r, 2, 5.0).unwrap();
    }
    book.save(dir.path().join("s.xlsx")).unwrap();
    let w = |env: &[(&str, &str)]| {
        let mut c = command(dir.path());
        c.args(["inspect", "s.xlsx"]);
        for (k, v) in env {
            c.env(k, v);
        }
        c.output().unwrap()
    };
    let o = w(&[("PROVISIO_MAX_UNPACKED_MIB", "4")]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("s.xlsx: the workbook's shared strings (its part xl/sharedStrings.xml) unpack to more than 256 KiB"),
        "{out}"
    );
    let o = w(&[]);
    assert_eq!(o.status.code(), Some(0), "{}", text(&o));
}

#[test]
fn a_cut_short_workbook_is_called_damaged_not_a_misnamed_csv() {
    let dir = tempfile::tempdir().unwrap();
    let whole = std::fs::read(common::repo("tests/data/bad/hidden_first_sheet.xlsx")).unwrap();
    std::fs::write(dir.path().join("cut.xlsx"), &whole[..whole.len() / 2]).unwrap();
    let o = run_in(dir.path(), &["inspect", "cut.xlsx"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("cut.xlsx: the workbook is damaged or cut short"),
        "{out}"
    );
    assert!(!out.contains("name it .csv"), "{out}");
}

#[test]
fn a_long_line_without_a_quote_is_not_blamed_on_a_quote() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mut data = b"product,month,consumed\nORS,2024-01,5\nORS,2024-02,".to_vec();
    data.extend(vec![b'7'; 1_200_000]);
    data.extend(b"\nORS,2024-03,6\n");
    std::fs::write(d.join("long.csv"), &data).unwrap();
    let o = run_in(d, &["inspect", "long.csv"]);
    let out = text(&o);
    assert_eq!(o.status.code(), Some(1), "{out}");
    assert!(
        out.contains("error: long.csv:3: the row starting here is longer than 1 MiB with no quote left open: a line this long is not a data row"),
        "{out}"
    );
    assert!(!out.contains("never closed"), "{out}");
    // With a quote opened on that line, the quote is named.
    data.splice(35..35, *b"\"");
    std::fs::write(d.join("long.csv"), &data).unwrap();
    let out = text(&run_in(d, &["inspect", "long.csv"]));
    assert!(out.contains("is probably never closed"), "{out}");
}

#[test]
fn a_changes_workbook_in_old_style_xls_is_sized_before_it_is_read() {
    // The changes file goes through its own workbook reading: the same
    // check of an .xls applies (without it this run aborted asking for
    // 137 GB; tests/reference/bad_xls.py).
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    two_inputs(d);
    // `forecast a.csv --changes FILE` (a copy of tests/data/bad/FILE) with
    // the address space capped at 1 GB.
    let forecast_with = |file: &str, out: &str| {
        std::fs::copy(
            common::repo(&format!("tests/data/bad/{file}")),
            d.join(file),
        )
        .unwrap();
        let o = std::process::Command::new("sh")
            .current_dir(d)
            .args(["-c", "ulimit -v 1000000; exec \"$0\" \"$@\""])
            .arg(env!("CARGO_BIN_EXE_provisio"))
            .args(["forecast", "a.csv", "--out", out, "--changes", file])
            .output()
            .unwrap();
        (o.status.code(), text(&o))
    };
    let (code, out) = forecast_with("far_cell.xls", "o");
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains(
            "error: far_cell.xls: the cells of sheet 1 of the workbook span rows 1 to 65536"
        ),
        "{out}"
    );
    // The same sheet with a stray cell at XFD1048576 (.xlsx) given as the
    // changes file: read cell by cell like a data sheet, so its columns are
    // checked and named (without it this run aborted asking for 512 GiB).
    let (code, out) = forecast_with("far_cell.xlsx", "o2");
    assert_eq!(code, Some(1), "{out}");
    assert!(
        out.contains(
            "error: far_cell.xlsx: sheet 'Data', row 1, column B (month): unknown column 'month'"
        ),
        "{out}"
    );
    assert!(!d.join("o").exists(), "{out}");
}

/// A single-file output naming the input (or another output) is refused
/// before any work, and the input is left byte for byte (common practice:
/// a tool never writes over the file it is reading).
#[test]
fn single_file_outputs_never_replace_the_input() {
    let dir = tempfile::tempdir().unwrap();
    let data = std::fs::read(common::repo("datasets/open/monthly.csv")).unwrap();
    std::fs::write(dir.path().join("in.csv"), &data).unwrap();
    std::fs::write(dir.path().join("pins.csv"), "product,model\n").unwrap();
    let cases: [&[&str]; 6] = [
        &["inspect", "in.csv", "--csv", "in.csv"],
        &["inspect", "in.csv", "--rejected", "./in.csv"],
        &["inspect", "in.csv", "--csv", "p.csv", "--rejected", "p.csv"],
        &["evaluate", "in.csv", "--holdout", "6", "--csv", "in.csv"],
        &[
            "evaluate",
            "in.csv",
            "--holdout",
            "6",
            "--per-product",
            "in.csv",
        ],
        &[
            "forecast",
            "in.csv",
            "--pin",
            "pins.csv",
            "--write-config",
            "pins.csv",
        ],
    ];
    for args in cases {
        let o = run_in(dir.path(), args);
        let t = text(&o);
        assert_eq!(o.status.code(), Some(1), "{args:?}: {t}");
        assert!(t.contains("is the same file as"), "{args:?}: {t}");
        assert!(!t.contains("panicked"), "{t}");
        assert_eq!(std::fs::read(dir.path().join("in.csv")).unwrap(), data);
        assert_eq!(
            std::fs::read_to_string(dir.path().join("pins.csv")).unwrap(),
            "product,model\n"
        );
        assert!(!dir.path().join("p.csv").exists(), "{args:?}");
    }
}

/// 36 months from 2022-01 of one product, `value(t)` a month.
fn months_of(product: &str, value: impl Fn(usize) -> f64) -> String {
    (0..36)
        .map(|t| {
            format!(
                "{product},{}-{:02},{}\n",
                2022 + t / 12,
                t % 12 + 1,
                value(t)
            )
        })
        .collect()
}

/// A totals row in the long layout is refused like one in the wide layout
/// (common practice: a pivot table's total is not a product, and counting
/// it would double the demand).
#[test]
fn a_totals_row_in_the_long_layout_is_rejected_with_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + t as f64));
    input.push_str("Grand Total,2024-12,5000\n");
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(dir.path(), &["inspect", "in.csv", "--rejected", "rej.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("in.csv:38: column 'product'"), "{t}");
    assert!(t.contains("a totals row"), "{t}");
    let (_, rows) = read_csv_file(&dir.path().join("rej.csv"));
    assert_eq!(rows.len(), 1);
    assert_eq!(&rows[0][1], "38");
}

/// A row cut short (no field at all for `consumed`) is rejected, not read
/// as a month not reported (common practice: a missing delimiter is a
/// damaged row; a blank field is a value left empty on purpose).
#[test]
fn a_row_with_too_few_fields_is_rejected_not_read_as_not_reported() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + t as f64));
    input.push_str("A,2025-01\nA,2025-02,\n");
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(dir.path(), &["inspect", "in.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("in.csv:38: the row has 2 field(s) but the header has 3"),
        "{t}"
    );
    assert!(t.contains("no field for 'consumed'"), "{t}");
    // The blank field on line 39 is a month not reported, accepted.
    assert!(
        t.contains("rows read: 38 = 36 used as reported + 1 corrected by cleaning + 1 rejected"),
        "{t}"
    );
}

/// Rows summed on request are logged: the entry names both lines and its
/// before and after add up (10 + 5 = 15, arithmetic).
#[test]
fn duplicates_summed_on_request_are_logged() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |_| 10.0));
    input.push_str("A,2022-01,5\n");
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &["clean", "in.csv", "--duplicates", "sum", "--out", "c"],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("duplicate-summed   1"), "{t}");
    let (h, rows) = read_csv_file(&dir.path().join("c/adjustments.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let summed: Vec<_> = rows
        .iter()
        .filter(|r| &r[col("rule")] == "duplicate-summed")
        .collect();
    assert_eq!(summed.len(), 1, "{rows:?}");
    let r = summed[0];
    assert_eq!((&r[col("month")], &r[col("line")]), ("2022-01", "38"));
    assert_eq!((&r[col("before")], &r[col("after")]), ("10", "15"));
    assert!(r[col("reason")].contains("line 2"), "{r:?}");
}

/// A stray row decades before the rest is warned about with its line and
/// the months around the gap (common practice: a mistyped year).
#[test]
fn a_month_decades_before_the_rest_is_warned_about() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\nA,1990-01,50\n");
    input.push_str(&months_of("A", |t| 100.0 + (t % 5) as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(dir.path(), &["clean", "in.csv", "--out", "c"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("nothing reported for 383 months between 1990-01 (line 2) and 2022-01"),
        "{t}"
    );
}

/// With a horizon under a year the 12-month totals are blank, not a
/// partial sum, and the AMC is the mean of the months projected
/// (arithmetic against forecast.csv).
#[test]
fn a_horizon_under_a_year_leaves_the_yearly_total_blank() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + 3.0 * t as f64 + (t % 4) as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--out",
            "f",
            "--horizon",
            "6",
            "--no-report",
        ],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(t.contains("--horizon 6 is under a year"), "{t}");
    let (h, rows) = read_csv_file(&dir.path().join("f/selection.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    assert_eq!(&rows[0][col("total_months_1_12")], "");
    let amc: f64 = rows[0][col("amc_next_12")].parse().unwrap();
    let (fh, frows) = read_csv_file(&dir.path().join("f/forecast.csv"));
    let fc = fh.iter().position(|x| x == "forecast").unwrap();
    let points: Vec<f64> = frows.iter().map(|r| r[fc].parse().unwrap()).collect();
    assert_eq!(points.len(), 6);
    let mean = points.iter().sum::<f64>() / 6.0;
    assert!((amc - mean).abs() < 1e-3 * mean.max(1.0), "{amc} vs {mean}");
}

/// Options that cannot take effect together are refused before any work
/// (common practice), and a product named for chart files must exist.
#[test]
fn chart_files_without_a_report_or_for_an_unknown_product_are_refused_at_once() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + t as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--out",
            "f",
            "--no-report",
            "--chart-files",
            "A",
        ],
    );
    assert_eq!(o.status.code(), Some(2), "{}", text(&o));
    assert!(
        text(&o).contains("--no-report skips the report"),
        "{}",
        text(&o)
    );
    let o = run_in(
        dir.path(),
        &["forecast", "in.csv", "--out", "f", "--chart-files", "B"],
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    assert!(
        text(&o).contains("no product 'B' for --chart-files in in.csv"),
        "{}",
        text(&o)
    );
    assert!(!dir.path().join("f/selection.csv").exists());
}

/// A pin file naming a product twice with different models is refused
/// with both lines (common practice: a silent last-row-wins is a lost pin).
#[test]
fn a_product_pinned_twice_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + t as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    std::fs::write(
        dir.path().join("pins.csv"),
        "product,model\nA,theta\nA,naive\n",
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--out",
            "f",
            "--pin",
            "pins.csv",
            "--no-report",
        ],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(t.contains("pins.csv:3: column 'product': 'A' is pinned again, to naive, after line 2 pinned it to theta"), "{t}");
}

/// `generate` writes nothing its own reader would refuse: no month after
/// the current one, no empty set.
#[test]
fn generate_refuses_sets_its_reader_would_refuse() {
    let dir = tempfile::tempdir().unwrap();
    let o = run_in(
        dir.path(),
        &["generate", "--months", "1200", "--out", "g.csv"],
    );
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(t.contains("refuses future months as data"), "{t}");
    assert!(t.contains("or an earlier --start"), "{t}");
    let o = run_in(
        dir.path(),
        &["generate", "--products", "0", "--out", "g.csv"],
    );
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    assert!(!dir.path().join("g.csv").exists());
    let o = run_in(
        dir.path(),
        &[
            "generate",
            "--months",
            "100",
            "--start",
            "2010-01",
            "--products",
            "2",
            "--out",
            "g.csv",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let o = run_in(dir.path(), &["inspect", "g.csv"]);
    assert!(text(&o).contains("+ 0 rejected"), "{}", text(&o));
}

/// A series that never changes is backtested, but MASE is undefined on it:
/// the reason says so rather than calling the history too short (MASE's
/// scale is the in-sample mean absolute change; Hyndman & Koehler, IJF 22,
/// 2006).
#[test]
fn a_constant_series_is_not_called_too_short() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    for t in 0..48 {
        input.push_str(&format!("A,{}-{:02},50\n", 2021 + t / 12, t % 12 + 1));
    }
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &["forecast", "in.csv", "--out", "f", "--no-report"],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    let (h, rows) = read_csv_file(&dir.path().join("f/selection.csv"));
    let reason = &rows[0][h.iter().position(|x| x == "reason").unwrap()];
    assert!(
        reason.contains("MASE is undefined on this history"),
        "{reason}"
    );
    assert!(!reason.contains("too short"), "{reason}");
}

/// Sites typed two ways (common practice: a site code keyed by hand) are
/// named, and a no-break space copied from a spreadsheet is shown as an
/// escape, so two names that print alike can be told apart.
#[test]
fn site_names_differing_only_in_case_and_invisible_spaces_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,site,month,consumed\n");
    for k in 0..24 {
        let (y, m) = (2023 + k / 12, k % 12 + 1);
        let site = if k < 20 { "North" } else { "north" };
        input.push_str(&format!("ORS,{site},{y}-{m:02},100\n"));
        input.push_str(&format!("Zinc tablet,South,{y}-{m:02},50\n"));
        input.push_str(&format!("Zinc\u{a0}tablet,South,{y}-{m:02},5\n"));
    }
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(dir.path(), &["inspect", "in.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("sites 'North' and 'north' differ only in letter case or spacing"),
        "{t}"
    );
    assert!(
        t.contains("products 'Zinc tablet' and 'Zinc\\u{00a0}tablet' differ only"),
        "{t}"
    );
}

/// rejected.csv's `row` is the row as the file held it: a field with the
/// delimiter inside keeps its quotes (RFC 4180 §2), so the row reads back
/// as the same fields.
#[test]
fn a_rejected_row_keeps_its_quotes() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("in.csv"),
        "product,site,month,consumed\n\"ORS sachet\",North,2024-04,\"1,234\"\n\"ORS sachet\",North,2024-05,12\n",
    )
    .unwrap();
    let o = run_in(dir.path(), &["clean", "in.csv", "--out", "c"]);
    assert!(o.status.success(), "{}", text(&o));
    let (h, rows) = read_csv_file(&dir.path().join("c/rejected.csv"));
    let row = &rows[0][h.iter().position(|x| x == "row").unwrap()];
    assert_eq!(row, "ORS sachet,North,2024-04,\"1,234\"");
    let back = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(row.as_bytes())
        .records()
        .next()
        .unwrap()
        .unwrap();
    assert_eq!(back.len(), 4);
    assert_eq!(&back[3], "1,234");
}

/// Without a reporting_rate column the rate shown is the share of sites
/// that reported (common practice: reports received ÷ reports expected),
/// and the reason says so: two sites, one silent in month 5, give 50%
/// there and a mean of (23 × 100% + 50%) / 24, by hand 97.9%.
#[test]
fn a_reporting_rate_from_sites_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,site,month,consumed\n");
    for k in 0..24 {
        let (y, m) = (2023 + k / 12, k % 12 + 1);
        input.push_str(&format!("ORS,North,{y}-{m:02},100\n"));
        if k != 4 {
            input.push_str(&format!("ORS,South,{y}-{m:02},100\n"));
        }
    }
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(dir.path(), &["clean", "in.csv", "--out", "c"]);
    assert!(o.status.success(), "{}", text(&o));
    let (h, rows) = read_csv_file(&dir.path().join("c/quality.csv"));
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let reason = &rows[0][col("reasons")];
    assert!(
        reason.contains("reporting rate (sites that reported, of those expected; the data give no reporting rate) as low as 50% (mean 98%)"),
        "{reason}"
    );
}

/// Names that differ only in case or spacing are warned about, not merged
/// (common practice: one product typed two ways).
#[test]
fn product_names_differing_only_in_case_are_warned_about() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("ORS sachet", |t| 100.0 + t as f64));
    input.push_str(&months_of("ors  SACHET", |t| 50.0 + t as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(dir.path(), &["inspect", "in.csv"]);
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("products 'ORS sachet' and 'ors  SACHET' differ only in letter case or spacing"),
        "{t}"
    );
    // A configuration key spelled with other spacing is named with the
    // data's spelling.
    std::fs::write(
        dir.path().join("run.toml"),
        "[products.\" ORS Sachet \"]\nmodel = \"theta\"\n",
    )
    .unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--config",
            "run.toml",
            "--out",
            "f",
            "--no-report",
        ],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("names a product that is not in the data (the data has 'ORS sachet': names must match exactly)"),
        "{t}"
    );
}

/// Small mistakes get a message that says what would work: an --until
/// after the data, a holdout longer than any product allows, an empty
/// workbook (common practice).
#[test]
fn small_mistakes_say_what_would_work() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + (t % 7) as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--out",
            "f",
            "--until",
            "2030-01",
            "--no-report",
        ],
    );
    let t = text(&o);
    assert!(o.status.success(), "{t}");
    assert!(
        t.contains("--until 2030-01 is after the data's last month 2024-12"),
        "{t}"
    );
    let manifest = std::fs::read_to_string(dir.path().join("f/manifest.json")).unwrap();
    assert!(manifest.contains("--until 2030-01 is after"), "{manifest}");
    let o = run_in(dir.path(), &["evaluate", "in.csv", "--holdout", "20"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("the longest has 36 months: use --holdout 11 or less"),
        "{t}"
    );
    // The advice works: a product needs more than holdout + 24 months.
    let o = run_in(dir.path(), &["evaluate", "in.csv", "--holdout", "11"]);
    assert!(o.status.success(), "{}", text(&o));
    let o = run_in(dir.path(), &["evaluate", "in.csv", "--holdout", "12"]);
    assert_eq!(o.status.code(), Some(1), "{}", text(&o));
    std::fs::write(dir.path().join("empty.xlsx"), b"").unwrap();
    let o = run_in(dir.path(), &["inspect", "empty.xlsx"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(t.contains("empty.xlsx: the file is empty (0 bytes)"), "{t}");
}

/// A forecast.csv cut short by hand after the run is said in the report,
/// not drawn as the whole projection (common practice: outputs edited
/// outside the tool are flagged when read back).
#[test]
fn the_report_says_when_forecast_csv_was_cut_short() {
    let dir = tempfile::tempdir().unwrap();
    let mut input = String::from("product,month,consumed\n");
    input.push_str(&months_of("A", |t| 100.0 + t as f64 + (t % 3) as f64));
    std::fs::write(dir.path().join("in.csv"), input).unwrap();
    let o = run_in(
        dir.path(),
        &[
            "forecast",
            "in.csv",
            "--out",
            "f",
            "--no-report",
            "--origins",
            "3",
        ],
    );
    assert!(o.status.success(), "{}", text(&o));
    let path = dir.path().join("f/forecast.csv");
    let full = std::fs::read_to_string(&path).unwrap();
    let cut: Vec<&str> = full.lines().take(11).collect();
    std::fs::write(&path, cut.join("\n") + "\n").unwrap();
    let o = run_in(dir.path(), &["report", "f"]);
    assert!(o.status.success(), "{}", text(&o));
    let html = std::fs::read_to_string(dir.path().join("f/report.html")).unwrap();
    assert!(
        html.contains(
            "forecast.csv holds 10 projected month(s), fewer than the run&#39;s horizon of 24"
        ) || html.contains(
            "forecast.csv holds 10 projected month(s), fewer than the run's horizon of 24"
        ),
        "no warning in the report"
    );
}

/// A side table of `rows` lines after `header`, the second data row (line
/// 3) opening a quote in its first value that is never closed, so that
/// under RFC 4180 §2 (a quoted field runs to its closing quote, line breaks
/// included) the rest of the file is one value.
fn unclosed_quote_table(header: &str, row: impl Fn(usize) -> String, rows: usize) -> String {
    let mut s = format!("{header}\n");
    for i in 0..rows {
        let r = row(i);
        s.push_str(&if i == 1 { format!("\"{r}") } else { r });
        s.push('\n');
    }
    s
}

#[test]
fn a_quote_never_closed_in_a_side_table_is_refused_at_its_line_not_echoed() {
    // RFC 4180 §2 rules 6-7: a field that opens with a quote holds line
    // breaks until the closing quote. One never closed swallows every row
    // after it; the error must name the file and the line the quote opens
    // on, and must not print the rest of the file back.
    let w = Workdir::new();
    let products: Vec<String> = (0..300).map(|i| format!("Product {i:03}")).collect();
    let mut fc = String::from("product,month,model,forecast,lower_80,upper_80,lower_95,upper_95\n");
    for p in &products {
        for m in 1..=12 {
            fc.push_str(&format!("{p},2027-{m:02},naive,100,80,120,70,140\n"));
        }
    }
    w.write("fc/forecast.csv", fc);
    w.write("fc/.provisio-output", "marker\n");
    w.write(
        "fc/manifest.json",
        r#"{"tool":"provisio test","forecast_settings":{"backtest":{"origins":3,"horizon":6,"exclude_imputed":true},"select":{"score":"mape","tie_margin":0.1},"horizon":12}}"#,
    );
    w.write(
        "stock.csv",
        unclosed_quote_table(
            "product,stock_on_hand,stock_date,lead_time_months,min_months,max_months,review_period_months,pack_size,unit_cost",
            |i| format!("{},500,2026-12,2,3,6,3,10,1.5", products[i]),
            300,
        ),
    );
    w.write(
        "population.csv",
        unclosed_quote_table(
            "product,method,population,rate,quantity_per_course",
            |i| format!("{},morbidity,100000,0.1,1", products[i]),
            300,
        ),
    );
    w.write(
        "changes.csv",
        unclosed_quote_table(
            "product,kind,first_month,last_month,value,note",
            |i| format!("{},scale,2027-01,2027-06,1.1,note {i}", products[i]),
            300,
        ),
    );
    w.write(
        "data.csv",
        (0..36).fold(String::from("product,month,consumed\n"), |s, t| {
            s + &format!(
                "Product 000,{}-{:02},{}\n",
                2024 + t / 12,
                t % 12 + 1,
                100 + t
            )
        }),
    );
    let cases: [(&str, Vec<&str>); 3] = [
        ("stock.csv", vec!["plan", "fc", "--stock", "stock.csv"]),
        (
            "population.csv",
            vec![
                "crosscheck",
                "fc",
                "--population",
                "population.csv",
                "--no-report",
            ],
        ),
        (
            "changes.csv",
            vec![
                "forecast",
                "data.csv",
                "--changes",
                "changes.csv",
                "--out",
                "out",
            ],
        ),
    ];
    for (file, args) in cases {
        let o = w.run(&args);
        let t = text(&o);
        assert_eq!(o.status.code(), Some(1), "{file}: {t}");
        assert!(t.contains(&format!("{file}:3:")), "{file}: {t}");
        assert!(
            t.contains("column 1 of the row starting on line 3"),
            "{file}: {t}"
        );
        assert!(t.contains("never closed"), "{file}: {t}");
        // Product 100 is on a line the open quote swallowed.
        assert!(
            !t.contains("Product 100"),
            "{file}: the swallowed rows were echoed: {t}"
        );
    }
    // A header name with a line break (a quote opened in the header).
    w.write(
        "stock2.csv",
        "product,\"stock_on_hand,stock_date\nZinc,5,2026-12,2,3,6,3,10,1.5\n",
    );
    let o = w.run(&["plan", "fc", "--stock", "stock2.csv"]);
    let t = text(&o);
    assert_eq!(o.status.code(), Some(1), "{t}");
    assert!(
        t.contains("stock2.csv:1:") && t.contains("column 2 of the header"),
        "{t}"
    );
}
