//! `provisio models`: the candidate models, what each needs from a series,
//! and what it is.

use std::path::PathBuf;

use clap::Args;

#[derive(Args, Debug)]
pub struct ModelsArgs {
    /// Also write the list as CSV (name, needs, description) to this file.
    #[arg(long, value_name = "FILE")]
    csv: Option<PathBuf>,
}

/// One line of the list, in candidate order.
struct Row {
    name: String,
    needs: String,
    description: String,
}

fn rows() -> Vec<Row> {
    provisio::models::candidates()
        .iter()
        .map(|m| Row {
            name: m.name(),
            needs: m.needs().describe(),
            description: m.description(),
        })
        .collect()
}

pub fn run(a: ModelsArgs) -> anyhow::Result<()> {
    let rows = rows();
    let width = |f: fn(&Row) -> &str, header: &str| {
        rows.iter()
            .map(|r| f(r).chars().count())
            .chain([header.chars().count()])
            .max()
            .unwrap_or(0)
    };
    let name_w = width(|r| &r.name, "model");
    let needs_w = width(|r| &r.needs, "needs");
    super::say!("{:<name_w$}  {:<needs_w$}  what it is", "model", "needs");
    for r in &rows {
        super::say!(
            "{:<name_w$}  {:<needs_w$}  {}",
            r.name,
            r.needs,
            r.description
        );
    }
    super::note!("{} candidate models", rows.len());
    super::note!(
        "and three means of them, the defaults for smooth and erratic demand: combination (ets-auto, arima-auto and theta, fixed), best-five-mean (each product's five best by backtest) and weighted-mean (weights learned across a run of 30 products or more); `--default-model` says which, or the run chooses on its own backtest"
    );
    super::json_summary(|| {
        let models: Vec<serde_json::Value> = rows
            .iter()
            .map(|r| serde_json::json!({"name": r.name, "needs": r.needs, "description": r.description}))
            .collect();
        serde_json::json!({ "command": "models", "models": models })
    });
    if let Some(path) = &a.csv {
        provisio::output::write_atomic(path, |w| {
            let mut c = csv::Writer::from_writer(w);
            c.write_record(["name", "needs", "description"])
                .map_err(std::io::Error::other)?;
            for r in &rows {
                c.write_record([&r.name, &r.needs, &r.description])
                    .map_err(std::io::Error::other)?;
            }
            c.flush()
        })?;
        super::note!("wrote {}", path.display());
    }
    Ok(())
}
