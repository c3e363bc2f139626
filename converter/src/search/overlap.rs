//! Calibration rows and held-out rows must be different rows: the same file is refused, and
//! rows that appear in both are counted (a bound judged on rows the ranges were fitted to is
//! optimistic).
use anyhow::{bail, Result};
use std::collections::HashSet;
use std::path::Path;

use crate::dataset::Dataset;

/// Fails when `calibration` and `heldout` are the same file (by identity, not by name:
/// a link or another spelling of the path counts).
pub fn refuse_same_file(calibration: &Path, heldout: &Path) -> Result<()> {
    if same_file::is_same_file(calibration, heldout).unwrap_or(false) {
        bail!(
            "--holdout {} is the calibration file: the bound must be judged on rows calibration did not see; give held-out rows of their own",
            heldout.display()
        );
    }
    Ok(())
}

/// Held-out rows whose features equal a calibration row's exactly (bit for bit).
pub fn repeated_rows(calibration: &Dataset, heldout: &Dataset) -> usize {
    if calibration.width != heldout.width || calibration.width == 0 {
        return 0;
    }
    let key = |r: &[f32]| r.iter().map(|v| v.to_bits()).collect::<Vec<u32>>();
    let seen: HashSet<Vec<u32>> = calibration
        .features
        .chunks_exact(calibration.width)
        .map(key)
        .collect();
    heldout
        .features
        .chunks_exact(heldout.width)
        .filter(|r| seen.contains(&key(r)))
        .count()
}

/// The warning for [`repeated_rows`], if any.
pub fn repeated_warning(repeated: usize, heldout: &Dataset) -> Option<String> {
    (repeated > 0).then(|| {
        format!(
            "{repeated} of the {} held-out rows of {} also appear in the calibration rows; the bound is judged on them too, which flatters every candidate",
            heldout.rows, heldout.source
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ds(rows: &[[f32; 2]], source: &str) -> Dataset {
        Dataset {
            rows: rows.len(),
            width: 2,
            features: rows.iter().flatten().copied().collect(),
            labels: None,
            source: source.into(),
        }
    }

    #[test]
    fn counts_heldout_rows_seen_in_calibration() {
        let cal = ds(&[[1.0, 2.0], [3.0, 4.0]], "cal");
        let held = ds(&[[3.0, 4.0], [5.0, 6.0], [1.0, 2.0], [1.0, 2.0]], "held");
        assert_eq!(repeated_rows(&cal, &held), 3);
        // -0.0 and 0.0 are different rows here (bit for bit), as the file has them.
        let z = ds(&[[0.0, 1.0]], "z");
        let nz = ds(&[[-0.0, 1.0]], "nz");
        assert_eq!(repeated_rows(&z, &nz), 0);
        let w = repeated_warning(3, &held).unwrap();
        assert!(w.starts_with("3 of the 4 held-out rows of held"), "{w}");
        assert_eq!(repeated_warning(0, &held), None);
    }

    #[test]
    fn the_same_file_is_refused_by_identity() {
        let dir = tempfile::tempdir().unwrap();
        let a = dir.path().join("rows.csv");
        std::fs::write(&a, "1,2\n").unwrap();
        let b = dir.path().join("other.csv");
        std::fs::write(&b, "1,2\n").unwrap();
        let again = dir.path().join(".").join("rows.csv");
        let e = refuse_same_file(&a, &again).unwrap_err().to_string();
        assert!(e.contains("is the calibration file"), "{e}");
        // Same bytes, another file: allowed (the repeated-row count warns instead).
        assert!(refuse_same_file(&a, &b).is_ok());
    }
}
