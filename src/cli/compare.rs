//! The `compare` subcommand: two results folders side by side.

use super::common::{note, print, Outcome};
use crate::audit::report::compare::Comparison;
use crate::audit::report::evidence::Evidence;
use crate::error::Result;
use std::path::PathBuf;

/// Options of `compare`.
#[derive(clap::Args, Debug)]
pub struct CompareArgs {
    /// The reference results folder (e.g. before a configuration change).
    #[arg(value_name = "A")]
    pub a: PathBuf,
    /// The folder compared with it (e.g. after the change).
    #[arg(value_name = "B")]
    pub b: PathBuf,
    /// Print CSV instead of text: one row per setup value that differs (change
    /// `setup-changed`), then one row per point and rule.
    #[arg(long, conflicts_with = "json")]
    pub csv: bool,
    /// Print one JSON object instead of text.
    #[arg(long)]
    pub json: bool,
    /// Also write the comparison as a self-contained HTML page.
    #[arg(long, value_name = "FILE")]
    pub html: Option<PathBuf>,
    /// Replace the --html file if it exists.
    #[arg(long)]
    pub force: bool,
    /// Exit with status 1 also when B leaks where A showed no leak under the same rule, for
    /// any rule (by default: when B's system rule leaks at a point where A's system rule did
    /// not).
    #[arg(long)]
    pub fail_on_any_rule: bool,
}

/// Runs `qkd-audit compare`: exit 1 when B's system rule leaks at a point where A's system
/// rule did not (or A lacks the point), 2 when a folder is missing or the two share no
/// attack point.
pub fn cmd_compare(a: CompareArgs) -> Result<Outcome> {
    if let Some(h) = &a.html {
        crate::output::check_overwrite(h, a.force)?;
    }
    let ea = Evidence::load(&a.a)?;
    let eb = Evidence::load(&a.b)?;
    let c = Comparison::new(&ea, &eb)?;
    if let Some(h) = &a.html {
        crate::output::write_atomic(h, c.html_page().as_bytes(), a.force)?;
        note(&format!("wrote {}", h.display()));
    }
    if a.csv {
        print(&c.csv()?)?;
    } else if a.json {
        print(&c.json())?;
    } else {
        print(&c.text())?;
    }
    Ok(if c.gained(a.fail_on_any_rule) { Outcome::Findings } else { Outcome::Clean })
}
