//! The `report` subcommand: rebuilds `report.html` of a results folder from what the folder
//! holds (`attack_vs_bound.csv` and `manifest.json` of a campaign, `hunt.csv` or `game.csv` of a
//! hunt).

use super::common::{note, print, Outcome};
use crate::audit::report::{evidence, html, rebuild, REPORT_FILE};
use crate::error::{Error, Result};
use std::path::PathBuf;

/// Options of `report`.
#[derive(clap::Args, Debug)]
pub struct ReportArgs {
    /// Results folder written by `run` (or by `hunt`).
    #[arg(value_name = "FOLDER")]
    pub folder: PathBuf,
    /// Write the page here instead of FOLDER/report.html.
    #[arg(short, long, value_name = "FILE")]
    pub output: Option<PathBuf>,
    /// Replace the file given with --output if it exists (FOLDER/report.html is derived from
    /// the folder and is always rebuilt in place).
    #[arg(long)]
    pub force: bool,
}

/// Runs `qkd-audit report`.
pub fn cmd_report(a: ReportArgs) -> Result<Outcome> {
    let dir = &a.folder;
    if !dir.is_dir() {
        return Err(Error::input(format!("{}: no such results folder", dir.display())));
    }
    // FOLDER/report.html is a rendering of the folder's table and manifest: rebuilding it
    // loses nothing, so it needs no --force. Any other target is a user's file.
    let (target, force) = match &a.output {
        Some(o) => (o.clone(), a.force),
        None => (dir.join(REPORT_FILE), true),
    };
    if a.output.is_some() {
        crate::output::check_overwrite(&target, force)?;
    }
    let read = |name: &str| evidence::read_folder_file(dir, name);
    let page = if dir.join(evidence::CSV_FILE).is_file() {
        let csv = read(evidence::CSV_FILE)?;
        let manifest = read(evidence::MANIFEST_FILE)?;
        let origin = |n: &str| dir.join(n).display().to_string();
        rebuild(&csv, &manifest, &origin(evidence::CSV_FILE), &origin(evidence::MANIFEST_FILE))?.1
    } else if dir.join("hunt.csv").is_file() {
        let csv = read("hunt.csv")?;
        html::hunt_page(&csv, &dir.join("hunt.csv").display().to_string(), crate::exact::eval::BOUND_SLACK)?.1
    } else if dir.join("game.csv").is_file() {
        let csv = read("game.csv")?;
        html::game_page(&csv, &dir.join("game.csv").display().to_string(), crate::exact::eval::BOUND_SLACK)?
    } else {
        return Err(Error::input(format!(
            "{}: not a results folder: it holds none of {} (a campaign run), hunt.csv or game.csv (a hunt)",
            dir.display(),
            evidence::CSV_FILE
        )));
    };
    crate::output::write_atomic(&target, page.as_bytes(), force)?;
    note(&format!("wrote {}", target.display()));
    print(&format!("{}\n", target.display()))?;
    Ok(Outcome::Clean)
}
