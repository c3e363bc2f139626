//! Atomic output files: write to a temporary file in the destination's directory, then rename
//! over the destination. On any error the temporary file is removed and the destination is
//! untouched, so a failed command never leaves a partial or stale-looking file behind.
//!
//! A process killed mid-write (SIGKILL, SIGXFSZ, a power cut) cannot remove its temporary file.
//! So the temporary's name says whose it is: `.<output name>.kinglet-<pid>-<random>.tmp`. Every
//! write first removes the temporaries of earlier writes to the same output whose process is
//! gone (on Linux, no `/proc/<pid>`; elsewhere, untouched for [`STALE_AFTER`]), so a crash leaves
//! at most one hidden file, until the next run to that output.
use anyhow::{bail, Context, Result};
use std::io::Write;
use std::path::Path;
use std::time::Duration;

/// Where `/proc` cannot say whether a process lives, a temporary this old is stale.
pub const STALE_AFTER: Duration = Duration::from_secs(3600);

/// Writes `bytes` to `path` atomically.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<()> {
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    if !dir.exists() {
        bail!(
            "cannot write {}: the directory {} does not exist",
            path.display(),
            dir.display()
        );
    }
    if !dir.is_dir() {
        bail!(
            "cannot write {}: {} is not a directory",
            path.display(),
            dir.display()
        );
    }
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .with_context(|| format!("cannot write {}: not a file name", path.display()))?;
    let prefix = temp_prefix(&name);
    remove_stale(dir, &prefix);
    let mut tmp = tempfile::Builder::new()
        .prefix(&format!("{prefix}{}-", std::process::id()))
        .suffix(".tmp")
        .tempfile_in(dir)
        // The temporary's own name would only confuse: say which file could not be written.
        .map_err(|e| std::io::Error::new(e.kind(), e.kind().to_string()))
        .with_context(|| format!("cannot write {} in {}", name, dir.display()))?;
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

/// The start of every temporary file name for the output `name`.
fn temp_prefix(name: &str) -> String {
    format!(".{name}.kinglet-")
}

/// The process id in a temporary's name, `<prefix><pid>-<random>.tmp`.
fn owner_pid(file_name: &str, prefix: &str) -> Option<u32> {
    let rest = file_name.strip_prefix(prefix)?.strip_suffix(".tmp")?;
    rest.split_once('-')?.0.parse().ok()
}

/// Removes the temporaries in `dir` left by dead writes to the output whose prefix is `prefix`.
/// Best effort: a file that cannot be removed is left, and nothing else is ever touched.
fn remove_stale(dir: &Path, prefix: &str) {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return;
    };
    let procfs = Path::new("/proc/self").exists();
    for e in entries.flatten() {
        let file_name = e.file_name().to_string_lossy().into_owned();
        let Some(pid) = owner_pid(&file_name, prefix) else {
            continue;
        };
        let stale = if procfs {
            pid != std::process::id() && !Path::new("/proc").join(pid.to_string()).exists()
        } else {
            e.metadata()
                .and_then(|m| m.modified())
                .ok()
                .and_then(|t| t.elapsed().ok())
                .is_some_and(|age| age > STALE_AFTER)
        };
        if stale && e.file_type().is_ok_and(|t| t.is_file()) {
            let _ = std::fs::remove_file(e.path());
        }
    }
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
        let text = format!("{e:#}");
        assert!(
            text.contains("missing-dir") && text.contains("does not exist"),
            "{e:#}"
        );
        assert!(!text.contains(".kinglet-"), "{e:#}");
    }

    #[test]
    fn temporaries_of_dead_writes_are_removed_and_others_kept() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("m.kgl");
        // A pid far above Linux's pid_max (4194304) belongs to no process.
        let dead = dir.path().join(".m.kgl.kinglet-99999999-AbCdEf.tmp");
        let mine = dir
            .path()
            .join(format!(".m.kgl.kinglet-{}-XyZ.tmp", std::process::id()));
        let other_output = dir.path().join(".n.kgl.kinglet-99999999-AbCdEf.tmp");
        let user_file = dir.path().join(".m.kgl.kinglet-notes.txt");
        for f in [&dead, &mine, &other_output, &user_file] {
            std::fs::write(f, b"partial").unwrap();
        }
        write_atomic(&p, b"x").unwrap();
        if Path::new("/proc/self").exists() {
            assert!(!dead.exists(), "the dead write's temporary is removed");
        }
        assert!(mine.exists(), "a live process's temporary is kept");
        assert!(
            other_output.exists(),
            "another output's temporary is not ours to judge"
        );
        assert!(user_file.exists());
    }

    #[test]
    fn owner_pid_reads_only_our_names() {
        let p = temp_prefix("m.kgl");
        assert_eq!(owner_pid(".m.kgl.kinglet-123-abc.tmp", &p), Some(123));
        assert_eq!(owner_pid(".m.kgl.kinglet-x-abc.tmp", &p), None);
        assert_eq!(owner_pid(".m.kgl.kinglet-123-abc.txt", &p), None);
        assert_eq!(owner_pid("m.kgl", &p), None);
    }
}
