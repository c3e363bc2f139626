//! Output paths must never name an input: `pack m.onnx -o m.onnx` would replace the model with
//! its own blob. Files are compared by identity (device and inode on Unix, volume and file index
//! on Windows, through the `same-file` crate), so `./m.onnx` vs `m.onnx`, a symlink to an input
//! and a hard link are all caught, not only the same spelling.
use anyhow::{bail, Result};
use same_file::Handle;
use std::path::Path;

/// One file a command reads or writes, with the option (or argument) that named it.
#[derive(Debug, Clone, Copy)]
pub struct Named<'a> {
    /// How the user named it: "the output (-o)", "--html", "the model", "--calibration", …
    pub what: &'a str,
    /// The path as given.
    pub path: &'a Path,
}

impl<'a> Named<'a> {
    /// `path`, named by `what`.
    pub fn new(what: &'a str, path: &'a Path) -> Self {
        Named { what, path }
    }
}

/// Fails when any output is the same file as any input, or two outputs are the same file.
///
/// An output that does not exist yet cannot be an input; two outputs that do not exist yet
/// are compared by their spelled path after lexical clean-up of `.` components, which is what
/// a write would make of them.
pub fn check_distinct(outputs: &[Named<'_>], inputs: &[Named<'_>]) -> Result<()> {
    for (i, out) in outputs.iter().enumerate() {
        let Ok(out_handle) = Handle::from_path(out.path) else {
            // Not there (or unreadable): it is not one of the inputs, which exist.
            for other in outputs.iter().skip(i + 1) {
                if cleaned(other.path) == cleaned(out.path) {
                    bail!(
                        "{} and {} name the same file {}; give them different paths",
                        out.what,
                        other.what,
                        out.path.display()
                    );
                }
            }
            continue;
        };
        for inp in inputs {
            if Handle::from_path(inp.path).is_ok_and(|h| h == out_handle) {
                bail!(
                    "{} {} is the same file as {} {}; writing it would destroy that input: give another output path",
                    out.what,
                    out.path.display(),
                    inp.what,
                    inp.path.display()
                );
            }
        }
        for other in outputs.iter().skip(i + 1) {
            if Handle::from_path(other.path).is_ok_and(|h| h == out_handle) {
                bail!(
                    "{} and {} name the same file {}; give them different paths",
                    out.what,
                    other.what,
                    out.path.display()
                );
            }
        }
    }
    Ok(())
}

/// `path` without `.` components (`./a/./b` and `a/b` are one path).
fn cleaned(path: &Path) -> std::path::PathBuf {
    path.components()
        .filter(|c| !matches!(c, std::path::Component::CurDir))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dir_with(names: &[&str]) -> tempfile::TempDir {
        let d = tempfile::tempdir().unwrap();
        for n in names {
            std::fs::write(d.path().join(n), n.as_bytes()).unwrap();
        }
        d
    }

    #[test]
    fn same_spelling_dot_prefix_and_symlink_are_caught() {
        let d = dir_with(&["m.onnx"]);
        let m = d.path().join("m.onnx");
        let dotted = d.path().join(".").join("m.onnx");
        let e = check_distinct(&[Named::new("-o", &dotted)], &[Named::new("the model", &m)])
            .unwrap_err();
        assert!(e.to_string().contains("same file as the model"), "{e}");
        #[cfg(unix)]
        {
            let link = d.path().join("link.kgl");
            std::os::unix::fs::symlink(&m, &link).unwrap();
            assert!(
                check_distinct(&[Named::new("-o", &link)], &[Named::new("the model", &m)]).is_err()
            );
            let hard = d.path().join("hard.kgl");
            std::fs::hard_link(&m, &hard).unwrap();
            assert!(
                check_distinct(&[Named::new("-o", &hard)], &[Named::new("the model", &m)]).is_err()
            );
        }
    }

    #[test]
    fn distinct_and_new_files_pass() {
        let d = dir_with(&["m.onnx", "old.kgl"]);
        let m = d.path().join("m.onnx");
        let old = d.path().join("old.kgl");
        let new = d.path().join("new.kgl");
        check_distinct(&[Named::new("-o", &old)], &[Named::new("the model", &m)]).unwrap();
        check_distinct(&[Named::new("-o", &new)], &[Named::new("the model", &m)]).unwrap();
    }

    #[test]
    fn two_outputs_on_one_path_are_refused() {
        let d = dir_with(&[]);
        let a = d.path().join("r.html");
        let b = d.path().join(".").join("r.html");
        assert!(check_distinct(&[Named::new("-o", &a), Named::new("--html", &b)], &[]).is_err());
    }
}
