//! The `validate` subcommand: check input files and report the problems found, without
//! running anything. A file is read as a campaign when it has `attacks`, as an attack file
//! when it has `operators` or `family`, and as a setup otherwise. Attack files report every
//! problem in one pass; campaigns and setups report their first problem.

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
        let errs = check_file(f);
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
    if table.contains_key("attacks") {
        Campaign::load(path).err().into_iter().collect()
    } else if table.contains_key("operators") || table.contains_key("family") {
        attack_file::validate(path)
    } else {
        Setup::load(path).err().into_iter().collect()
    }
}
