//! Campaign reports: one writer per output format, each documenting its schema.
//! - [`table`]: `attack_vs_bound.csv`, the main output;
//! - [`summary`]: `summary.md`, per attack and overall verdicts in words;
//! - [`plots`]: SVG plots;
//! - [`manifest`]: `manifest.json`, how the results were made.
//!
//! [`write_folder`] writes everything into a temporary sibling folder and renames it into
//! place, refusing to replace an existing folder unless asked.

pub mod manifest;
pub mod plots;
pub mod summary;
pub mod table;

use crate::audit::{Campaign, PointResult};
use crate::error::Result;
use std::path::Path;

/// Writes the campaign's output folder `dir` (e.g. `results/<name>`).
pub fn write_folder(dir: &Path, campaign: &Campaign, results: &[PointResult], manifest: &manifest::Manifest, force: bool) -> Result<()> {
    let mut files = vec![
        ("attack_vs_bound.csv".to_string(), table::render(campaign, results)?),
        ("summary.md".to_string(), summary::render(campaign, results)),
    ];
    files.extend(plots::render(campaign, results)?);
    files.push(("manifest.json".to_string(), manifest.to_json()));
    crate::output::write_folder_files(dir, &files, force)
}

/// `name=value;…` of a point's parameters.
pub fn params_string(params: &[(String, crate::attack::Value)]) -> String {
    params.iter().map(|(k, v)| format!("{k}={v}")).collect::<Vec<_>>().join(";")
}
