//! Writing result files safely: never overwrite without being asked, never leave a
//! partial file behind (write to a temporary name in the same folder, then rename).

use crate::error::{Error, ErrorKind, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Refuses to proceed when `path` exists and `force` is false.
pub fn check_overwrite(path: &Path, force: bool) -> Result<()> {
    if path.exists() && !force {
        return Err(
            Error::new(ErrorKind::Input, "already exists; refusing to overwrite results (pass --force to replace it)").with_file(path)
        );
    }
    Ok(())
}

/// A temporary sibling name for `path`, unique to this process.
pub fn temp_sibling(path: &Path) -> PathBuf {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_else(|| "out".into());
    path.with_file_name(format!(".{name}.tmp-{}", std::process::id()))
}

/// Writes `bytes` to `path` atomically; refuses to replace an existing file unless
/// `force`.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<()> {
    check_overwrite(path, force)?;
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(|e| Error::from(e).with_file(dir))?;
    }
    let tmp = temp_sibling(path);
    let result = (|| -> std::io::Result<()> {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(Error::from(e).with_file(path));
    }
    Ok(())
}

/// Writes `files` (name, text) into the folder `dir` atomically: a temporary sibling
/// folder is filled and renamed into place; an existing folder is replaced only with
/// `force`.
pub fn write_folder_files(dir: &Path, files: &[(String, String)], force: bool) -> Result<()> {
    if dir.exists() && !force {
        return Err(Error::new(
            ErrorKind::Input,
            "output folder already exists; refusing to overwrite results (pass --force to replace it)",
        )
        .with_file(dir));
    }
    let parent = dir.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
    std::fs::create_dir_all(parent).map_err(|e| Error::from(e).with_file(parent))?;
    let tmp = temp_sibling(dir);
    let result = (|| -> Result<()> {
        std::fs::create_dir_all(&tmp).map_err(|e| Error::from(e).with_file(&tmp))?;
        for (name, text) in files {
            let p = tmp.join(name);
            std::fs::write(&p, text).map_err(|e| Error::from(e).with_file(&p))?;
        }
        if dir.exists() {
            let old = temp_sibling(&dir.with_extension("old"));
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn refuses_to_overwrite_without_force_and_leaves_no_temp_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        write_atomic(&p, b"one", false).unwrap();
        assert!(write_atomic(&p, b"two", false).is_err());
        assert_eq!(std::fs::read(&p).unwrap(), b"one");
        write_atomic(&p, b"two", true).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        let names: Vec<_> = std::fs::read_dir(dir.path()).unwrap().map(|e| e.unwrap().file_name()).collect();
        assert_eq!(names.len(), 1, "{names:?}");
    }
}
