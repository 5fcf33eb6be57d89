//! The `qkd-audit` binary: parse arguments, run, map the outcome to an exit status
//! (0 clean, 1 findings, 2 error).

use clap::Parser;
use qkd_audit::cli::{run, Cli, Outcome};
use std::io::Write;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli) {
        Ok(Outcome::Clean) => ExitCode::SUCCESS,
        Ok(Outcome::Findings) => ExitCode::from(1),
        Err(e) => {
            // stderr may be closed too; the exit status still says what happened.
            let _ = writeln!(std::io::stderr().lock(), "error: {}", qkd_audit::cli::common::printable(&e.to_string()));
            ExitCode::from(2)
        }
    }
}
