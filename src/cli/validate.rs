//! The `validate` subcommand: check attack files and report every problem found.

use super::common::{note, print, Outcome};
use crate::attack::file as attack_file;
use crate::error::{Error, Result};
use std::path::PathBuf;

/// Options of `validate`.
#[derive(clap::Args, Debug)]
pub struct ValidateArgs {
    /// Attack files to check.
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<PathBuf>,
}

/// Runs `qkd-audit validate`.
pub fn cmd_validate(a: ValidateArgs) -> Result<Outcome> {
    let mut problems = 0;
    for f in &a.files {
        let errs = attack_file::validate(f);
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
