//! `provisio completions SHELL` and `provisio man --out DIR`: shell
//! completion scripts and manual pages, generated from the clap definitions.

use std::path::PathBuf;

use clap::{Args, CommandFactory};
use clap_complete::Shell;

#[derive(Args, Debug)]
pub struct CompletionsArgs {
    /// Shell to complete for.
    #[arg(value_enum)]
    shell: Shell,
}

#[derive(Args, Debug)]
pub struct ManArgs {
    /// Folder for the pages (created if needed): provisio.1 and provisio-COMMAND.1.
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
}

pub fn completions(a: CompletionsArgs) -> anyhow::Result<()> {
    // A shell script is not JSON: refused rather than printed under --json
    // (README: with --json each command prints one JSON object).
    if super::json_wanted() {
        return Err(super::usage_error(
            "completions",
            "--json does not apply: completions prints a shell script; leave --json out",
        ));
    }
    let mut cmd = super::Cli::command();
    clap_complete::generate(a.shell, &mut cmd, "provisio", &mut std::io::stdout());
    Ok(())
}

pub fn man(a: ManArgs) -> anyhow::Result<()> {
    std::fs::create_dir_all(&a.out)
        .map_err(|e| anyhow::anyhow!("{}: cannot create the folder: {e}", a.out.display()))?;
    let mut cmd = super::Cli::command();
    cmd.build();
    let mut pages = vec![("provisio".to_string(), cmd.clone())];
    for sub in cmd.get_subcommands() {
        if sub.get_name() == "help" {
            continue;
        }
        let name = format!("provisio-{}", sub.get_name());
        // A short-lived process: leaking the few page names is harmless.
        let leaked: &'static str = name.clone().leak();
        pages.push((name, sub.clone().name(leaked)));
    }
    let mut written = Vec::new();
    for (name, page) in pages {
        let path = a.out.join(format!("{name}.1"));
        provisio::output::write_atomic(&path, |w| clap_mangen::Man::new(page).render(w))?;
        written.push(path.display().to_string());
    }
    super::note!(
        "wrote {} manual pages in {}",
        written.len(),
        a.out.display()
    );
    super::json_summary(|| serde_json::json!({ "command": "man", "files": written }));
    Ok(())
}
