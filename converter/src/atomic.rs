//! Atomic output files: write to a temporary file in the destination's directory, then rename
//! over the destination. On any error the temporary file is removed and the destination is
//! untouched, so a failed command never leaves a partial or stale-looking file behind.
use anyhow::{Context, Result};
use std::io::Write;
use std::path::Path;

/// Writes `bytes` to `path` atomically.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut tmp = tempfile::Builder::new()
        .prefix(".kinglet-")
        .suffix(".tmp")
        .tempfile_in(dir)
        .with_context(|| format!("cannot write to directory {}", dir.display()))?;
    // Temporary files are created owner-only; give the result ordinary file permissions.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file()
            .set_permissions(std::fs::Permissions::from_mode(0o644))
            .with_context(|| format!("cannot write {}", path.display()))?;
    }
    tmp.write_all(bytes)
        .and_then(|()| tmp.as_file().sync_all())
        .with_context(|| format!("cannot write {}", path.display()))?;
    tmp.persist(path)
        .map_err(|e| e.error)
        .with_context(|| format!("cannot replace {}", path.display()))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn replaces_the_file_and_leaves_no_temporary() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("m.kgl");
        write_atomic(&p, b"one").unwrap();
        write_atomic(&p, b"two").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn unwritable_destination_is_an_error_with_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("missing-dir").join("m.kgl");
        let e = write_atomic(&p, b"x").unwrap_err();
        assert!(format!("{e:#}").contains("missing-dir"), "{e:#}");
    }
}
