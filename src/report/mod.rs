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
use crate::error::{Error, ErrorKind, Result};
use std::path::Path;

/// Writes the campaign's output folder `dir` (e.g. `results/<name>`).
pub fn write_folder(dir: &Path, campaign: &Campaign, results: &[PointResult], manifest: &manifest::Manifest, force: bool) -> Result<()> {
    if dir.exists() && !force {
        return Err(Error::new(ErrorKind::Input, "output folder already exists; refusing to overwrite results (pass --force to replace it)").with_file(dir));
    }
    let parent = dir.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    std::fs::create_dir_all(parent).map_err(|e| Error::from(e).with_file(parent))?;
    let tmp = crate::output::temp_sibling(dir);
    let result = (|| -> Result<()> {
        std::fs::create_dir_all(&tmp).map_err(|e| Error::from(e).with_file(&tmp))?;
        let put = |name: &str, text: &str| -> Result<()> {
            let p = tmp.join(name);
            std::fs::write(&p, text).map_err(|e| Error::from(e).with_file(&p))
        };
        put("attack_vs_bound.csv", &table::render(campaign, results)?)?;
        put("summary.md", &summary::render(campaign, results))?;
        for (name, svg) in plots::render(campaign, results)? {
            put(&name, &svg)?;
        }
        put("manifest.json", &manifest.to_json())?;
        if dir.exists() {
            let old = crate::output::temp_sibling(&dir.with_extension("old"));
            std::fs::rename(dir, &old).map_err(|e| Error::from(e).with_file(dir))?;
            std::fs::rename(&tmp, dir).map_err(|e| Error::from(e).with_file(dir))?;
            std::fs::remove_dir_all(&old).map_err(|e| Error::from(e).with_file(&old))?;
        } else {
            std::fs::rename(&tmp, dir).map_err(|e| Error::from(e).with_file(dir))?;
        }
        Ok(())
    })();
    if result.is_err() {
        let _ = std::fs::remove_dir_all(&tmp);
    }
    result
}

/// `name=value;…` of a point's parameters.
pub fn params_string(params: &[(String, crate::attack::Value)]) -> String {
    params.iter().map(|(k, v)| format!("{k}={v}")).collect::<Vec<_>>().join(";")
}
