//! The `validate` subcommand: check input files and report the problems found, without
//! running anything. A file is read as a campaign when it has a campaign key (`attacks`,
//! `setup`, `trials`, `seed`, …), as an attack file
//! when it has `operators` or `family`, as a rule file when it has `key_length` or
//! `command`, and as a setup otherwise. Every problem of a file
//! (and of the setup and attack files a campaign names) is reported in one pass.

use super::common::{note, print, Outcome};
use crate::attack::file as attack_file;
use crate::audit::setup::Setup;
use crate::audit::Campaign;
use crate::error::{Error, Result};
use std::path::{Path, PathBuf};

/// Options of `validate`.
#[derive(clap::Args, Debug)]
pub struct ValidateArgs {
    /// Files to check: campaigns, setups, catalogue entries or kraus files (the kind is
    /// read from the keys).
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<PathBuf>,
}

/// Runs `qkd-audit validate`.
pub fn cmd_validate(a: ValidateArgs) -> Result<Outcome> {
    let mut problems = 0;
    for f in &a.files {
        let mut errs = check_file(f);
        // In reading order: file by file, then line by line (problems without a line last).
        errs.sort_by_key(|e| (e.file().map(Path::to_path_buf), e.location().is_none(), e.location()));
        if errs.is_empty() {
            print(&format!("ok {}\n", f.display()))?;
        } else {
            for e in &errs {
                note(&format!("error: {e}"));
            }
            problems += errs.len();
        }
    }
    if problems > 0 {
        return Err(Error::input(format!("{problems} problem(s) found in {} file(s)", a.files.len())));
    }
    Ok(Outcome::Clean)
}

/// What kind of input a file is, from its top-level keys.
fn check_file(path: &Path) -> Vec<Error> {
    let text = match crate::input::read_text(path) {
        Ok(t) => t,
        Err(e) => return vec![e],
    };
    let table = match crate::input::parse_toml(&text) {
        Ok(t) => t,
        Err(e) => return vec![e.with_file(path)],
    };
    // A campaign-only key marks a campaign, so that a misspelt `[[attacks]]` is reported as
    // such rather than the file being read as a setup.
    const CAMPAIGN_KEYS: &[&str] = &["attacks", "attack", "setup", "trials", "seed", "sampler", "rules", "setup_sweeps"];
    if CAMPAIGN_KEYS.iter().any(|k| table.contains_key(*k)) {
        Campaign::load_all(path).err().unwrap_or_default()
    } else if table.contains_key("operators") || table.contains_key("family") {
        attack_file::validate(path)
    } else if table.contains_key("key_length") || table.contains_key("command") {
        crate::audit::rules::load_rule_file(path).err().unwrap_or_default()
    } else {
        Setup::load_all(path).err().unwrap_or_default()
    }
}
