//! Campaign reports: one writer per output format, each documenting its schema.
//! - [`table`]: `attack_vs_bound.csv`, the main output;
//! - [`summary`]: `summary.md`, per attack and overall verdicts in words;
//! - [`manifest`]: `manifest.json`, how the results were made and the system under test;
//! - [`evidence`]: the folder read back from the table and the manifest (verdict, matrix,
//!   leaks), from which the page and the figures are computed;
//! - [`plots`]: the SVG figures (drawn with [`svg`]);
//! - [`html`]: `report.html`, the self-contained evidence report;
//! - [`compare`]: two folders side by side.
//!
//! [`write_folder`] renders every file and hands them to the folder's
//! [`crate::output::FolderGuard`], taken before the campaign ran, which puts them in place
//! atomically. The figures and `report.html` are made from the rendered table and manifest
//! text by [`rebuild`], the same function `qkd-audit report` calls on a folder, so a rebuild
//! gives the same bytes.

pub mod manifest;
pub mod summary;
pub mod table;
pub mod evidence;
pub mod svg;
pub mod plots;
pub mod html;
pub mod compare;

use crate::audit::{Campaign, PointResult};
use crate::error::Result;
use crate::output::FolderGuard;

/// The report page's file name in a results folder.
pub const REPORT_FILE: &str = "report.html";

/// The figures and the page of a folder, from its table and manifest text; the origins
/// name the two files in errors.
pub fn rebuild(csv: &str, manifest: &str, csv_origin: &str, manifest_origin: &str) -> Result<(Vec<plots::Figure>, String)> {
    let ev = evidence::Evidence::parse(csv, manifest, csv_origin, manifest_origin)?;
    let figures = plots::render(&ev)?;
    let page = html::render(&ev, &figures, &manifest::sha256_hex(csv));
    Ok((figures, page))
}

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
    let csv = table::render(campaign, results)?;
    let manifest_json = manifest.to_json_with(campaign);
    let (figures, page) = rebuild(&csv, &manifest_json, evidence::CSV_FILE, evidence::MANIFEST_FILE)?;
    let mut files = vec![(evidence::CSV_FILE.to_string(), csv), ("summary.md".to_string(), summary::render(campaign, results))];
    files.extend(figures.into_iter().map(|f| (f.file, f.svg)));
    files.extend(logs.iter().map(|l| (l.file_name(), l.render())));
    files.push((evidence::MANIFEST_FILE.to_string(), manifest_json));
    files.push((REPORT_FILE.to_string(), page));
    folder.commit(&files)
}

/// `name=value;…` of a point's parameters.
pub fn params_string(params: &[(String, crate::attack::Value)]) -> String {
    // Numbers as the CSV writes them (12 significant digits: no float noise such as
    // 0.42500000000000004 from a sweep's grid).
    params
        .iter()
        .map(|(k, v)| match v {
            crate::attack::Value::Num(x) => format!("{k}={}", crate::exact::sweep::fmt_num(*x)),
            crate::attack::Value::Text(t) => format!("{k}={t}"),
        })
        .collect::<Vec<_>>()
        .join(";")
}
