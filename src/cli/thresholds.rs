//! The `thresholds` subcommand: the threshold table, each value computed and sourced.

use super::common::{write_stdout, Outcome};
use crate::error::{Error, Result};

/// Options of `thresholds`.
#[derive(clap::Args, Debug)]
pub struct ThresholdArgs {
    /// Error-correction efficiency f ≥ 1 (leak = f·h(Q) per bit); 1 is the Shannon limit.
    #[arg(long, default_value_t = 1.0, value_name = "F")]
    pub f_ec: f64,
    /// Print JSON instead of a table.
    #[arg(long)]
    pub json: bool,
}

/// Runs `qkd-audit thresholds`.
pub fn cmd_thresholds(a: ThresholdArgs) -> Result<Outcome> {
    crate::error::check_range("--f-ec", a.f_ec, 1.0, 3.0)?;
    let table = crate::exact::thresholds::threshold_table(a.f_ec)?;
    let text = if a.json {
        serde_json::to_string_pretty(&table).map_err(|e| Error::input(e.to_string()))? + "\n"
    } else {
        let mut s = format!("thresholds (QBER as a fraction; error-correction efficiency f = {})\n", a.f_ec);
        for t in &table {
            s.push_str(&format!("  {:<34} {:.10}  {}\n  {:<34} {:>12}  source: {}\n", t.name, t.qber, t.method, "", "", t.source));
        }
        s
    };
    write_stdout(&mut std::io::stdout().lock(), &text)?;
    Ok(Outcome::Clean)
}
