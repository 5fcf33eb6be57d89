//! Campaign reports: one writer per output format, each documenting its schema.
//! - [`table`]: `attack_vs_bound.csv`, the main output;
//! - [`summary`]: `summary.md`, per attack and overall verdicts in words;
//! - [`plots`]: SVG plots;
//! - [`manifest`]: `manifest.json`, how the results were made.
//!
//! [`write_folder`] renders every file and hands them to the folder's
//! [`crate::output::FolderGuard`], taken before the campaign ran, which puts them in place
//! atomically.

pub mod manifest;
pub mod plots;
pub mod summary;
pub mod table;

use crate::audit::{Campaign, PointResult};
use crate::error::Result;
use crate::output::FolderGuard;

/// Writes the campaign's output folder (e.g. `results/<name>`), prepared as `folder`.
pub fn write_folder(folder: FolderGuard, campaign: &Campaign, results: &[PointResult], manifest: &manifest::Manifest) -> Result<()> {
    write_folder_with(folder, campaign, results, manifest, &[])
}

/// As [`write_folder`], with the logs of the campaign's rule programs
/// (`rule-program-<name>.log`: the program's stderr and the notes of its answers).
pub fn write_folder_with(
    folder: FolderGuard,
    campaign: &Campaign,
    results: &[PointResult],
    manifest: &manifest::Manifest,
    logs: &[crate::audit::rules::program::ProgramLog],
) -> Result<()> {
    let mut files = vec![
        ("attack_vs_bound.csv".to_string(), table::render(campaign, results)?),
        ("summary.md".to_string(), summary::render(campaign, results)),
    ];
    files.extend(plots::render(campaign, results)?);
    files.extend(logs.iter().map(|l| (l.file_name(), l.render())));
    files.push(("manifest.json".to_string(), manifest.to_json()));
    folder.commit(&files)
}

/// `name=value;…` of a point's parameters.
pub fn params_string(params: &[(String, crate::attack::Value)]) -> String {
    params.iter().map(|(k, v)| format!("{k}={v}")).collect::<Vec<_>>().join(";")
}
