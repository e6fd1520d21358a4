//! Writing the report folder so that an interrupted run leaves the old report or none, never
//! half of one: everything goes to a temporary folder beside the target, then renames put it
//! in place. A folder kickscan did not write is replaced only when forced.

use std::path::{Path, PathBuf};

use super::ReportError;

/// Marker file kickscan leaves in every report folder it writes.
pub const MARKER: &str = ".kickscan-report";
const MARKER_TEXT: &str = "This folder was written by kickscan; kickscan replaces it when asked to write a report here again.\n";

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> ReportError + '_ {
    move |error| ReportError::Io {
        path: path.to_path_buf(),
        error,
    }
}

/// Whether `dir` may be replaced: absent, empty, written by kickscan, or `force`.
fn check_replaceable(dir: &Path, force: bool) -> Result<(), ReportError> {
    let meta = match std::fs::symlink_metadata(dir) {
        Ok(m) => m,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(()),
        Err(e) => return Err(io(dir)(e)),
    };
    if force {
        return Ok(());
    }
    if !meta.is_dir() {
        return Err(ReportError::Refused(format!(
            "{}: exists and is not a folder; choose another --out or remove it",
            dir.display()
        )));
    }
    if dir.join(MARKER).is_file() {
        return Ok(());
    }
    let empty = std::fs::read_dir(dir).map_err(io(dir))?.next().is_none();
    if empty {
        return Ok(());
    }
    Err(ReportError::Refused(format!(
        "{}: the folder exists and was not written by kickscan (no {MARKER} file in it); \
         choose another --out, or give --force to replace it",
        dir.display()
    )))
}

/// A sibling of `dir` named `.NAME.kickscan-WHAT-PID`.
fn sibling(dir: &Path, what: &str) -> Result<PathBuf, ReportError> {
    let name = dir.file_name().ok_or_else(|| {
        ReportError::Refused(format!(
            "{}: not a folder name a report can be written to",
            dir.display()
        ))
    })?;
    let parent = match dir.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    Ok(parent.join(format!(
        ".{}.kickscan-{what}-{}",
        name.to_string_lossy(),
        std::process::id()
    )))
}

fn remove_any(path: &Path) -> std::io::Result<()> {
    match std::fs::symlink_metadata(path) {
        Ok(m) if m.is_dir() => std::fs::remove_dir_all(path),
        Ok(_) => std::fs::remove_file(path),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(e),
    }
}

/// Writes `files` (paths relative to `dir`, `/`-separated) as the folder `dir`, replacing
/// an earlier report there.
pub fn write_folder(
    dir: &Path,
    files: &[(String, Vec<u8>)],
    force: bool,
) -> Result<(), ReportError> {
    check_replaceable(dir, force)?;
    let tmp = sibling(dir, "tmp")?;
    remove_any(&tmp).map_err(io(&tmp))?;
    let result = fill(&tmp, files).and_then(|()| swap_in(&tmp, dir));
    if result.is_err() {
        // Best effort: the temporary folder is ours and holds nothing of value.
        let _ = remove_any(&tmp);
    }
    result
}

fn fill(tmp: &Path, files: &[(String, Vec<u8>)]) -> Result<(), ReportError> {
    if let Some(parent) = tmp.parent() {
        std::fs::create_dir_all(parent).map_err(io(parent))?;
    }
    std::fs::create_dir(tmp).map_err(io(tmp))?;
    let marker = tmp.join(MARKER);
    std::fs::write(&marker, MARKER_TEXT).map_err(io(&marker))?;
    for (rel, bytes) in files {
        if rel.split('/').any(|part| part.is_empty() || part == "..") {
            return Err(ReportError::Refused(format!(
                "{rel}: not a plain relative path"
            )));
        }
        let path = tmp.join(rel);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent).map_err(io(parent))?;
        }
        std::fs::write(&path, bytes).map_err(io(&path))?;
    }
    Ok(())
}

/// Moves the old folder aside, the new one in, then deletes the old one. Between the two
/// renames there is no report at `dir`, never a partial one.
fn swap_in(tmp: &Path, dir: &Path) -> Result<(), ReportError> {
    let exists = std::fs::symlink_metadata(dir).is_ok();
    if !exists {
        return std::fs::rename(tmp, dir).map_err(io(dir));
    }
    let old = sibling(dir, "old")?;
    remove_any(&old).map_err(io(&old))?;
    std::fs::rename(dir, &old).map_err(io(dir))?;
    if let Err(e) = std::fs::rename(tmp, dir) {
        // Put the old report back rather than leave nothing.
        let _ = std::fs::rename(&old, dir);
        return Err(io(dir)(e));
    }
    remove_any(&old).map_err(io(&old))
}
