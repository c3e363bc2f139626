//! The benchmark firmware's run: its `kb` lines (semihosting output) paired, in order, with
//! the counts the QEMU plugin wrote.

/// One counted section.
pub struct Case {
    /// Case name (`i8-784x100`, `digits`, `digits-L1`, ...).
    pub name: String,
    /// Variant (`naive`, `portable`, `kernel`, `model-kernel`, ...).
    pub variant: String,
    /// Multiply-accumulates in the section.
    pub macs: u64,
    /// Guest instructions executed strictly between its markers.
    pub count: u64,
}

/// The benchmark's results on one target.
pub struct Run {
    /// The kernel the runtime picked (`dsp`, `m0`).
    pub kernel: String,
    /// Self-check cases that passed.
    pub passed: u64,
    /// Self-check cases that failed.
    pub failed: u64,
    /// Every counted section, in order.
    pub cases: Vec<Case>,
}

/// Parses the firmware's output `log` and the plugin's `counts` (one number per section, then
/// `total N`). `what` names them in messages.
pub fn parse(what: &str, log: &str, counts: &str) -> Result<Run, String> {
    let mut numbers = Vec::new();
    for line in counts.lines() {
        if let Some(rest) = line.strip_prefix("total ") {
            if rest.contains("unbalanced") {
                return Err(format!("{what}: unbalanced markers"));
            }
        } else {
            numbers.push(
                line.trim()
                    .parse::<u64>()
                    .map_err(|e| format!("{what} counts: {line:?}: {e}"))?,
            );
        }
    }
    let mut run = Run {
        kernel: String::new(),
        passed: 0,
        failed: 0,
        cases: vec![],
    };
    let mut next = numbers.into_iter();
    let mut ended = false;
    let bad = |line: &str| format!("{what}: {line}");
    for line in log.lines() {
        let f: Vec<&str> = line.split_whitespace().collect();
        match f[..] {
            ["kb", "target", k] => run.kernel = k.into(),
            ["kb", "selfcheck", p, fl] => {
                run.passed = p.parse().map_err(|_| bad(line))?;
                run.failed = fl.parse().map_err(|_| bad(line))?;
            }
            ["kb", "case", name, variant, macs] => {
                let count = next
                    .next()
                    .ok_or(format!("{what}: more cases than counts"))?;
                run.cases.push(Case {
                    name: name.into(),
                    variant: variant.into(),
                    macs: macs.parse().map_err(|_| bad(line))?,
                    count,
                });
            }
            ["kb", "end"] => ended = true,
            ["kb", "panic", ..] => return Err(format!("{what}: firmware panicked: {line}")),
            _ => {}
        }
    }
    if !ended {
        return Err(format!("{what}: the firmware did not finish (no `kb end`)"));
    }
    if next.next().is_some() {
        return Err(format!("{what}: more counts than cases"));
    }
    if let Some(e) = run.cases.iter().find(|c| c.name == "empty") {
        if e.count != 0 {
            return Err(format!(
                "{what}: the empty section counted {} instructions",
                e.count
            ));
        }
    }
    Ok(run)
}

impl Run {
    /// The section `name`/`variant`.
    pub fn case(&self, name: &str, variant: &str) -> Option<&Case> {
        self.cases
            .iter()
            .find(|c| c.name == name && c.variant == variant)
    }

    /// Instructions per MAC of a section.
    pub fn per_mac(&self, name: &str, variant: &str) -> Option<f64> {
        self.case(name, variant)
            .map(|c| c.count as f64 / c.macs.max(1) as f64)
    }

    /// What variant `with` adds per element over variant `base` of section `name` (both counted
    /// over the same elements).
    pub fn added_per_element(&self, name: &str, base: &str, with: &str) -> Option<f64> {
        let (b, w) = (self.case(name, base)?, self.case(name, with)?);
        Some((w.count as f64 - b.count as f64) / w.macs.max(1) as f64)
    }

    /// Whole inference of `model` (kernel) and the sum of its layers alone (`MODEL-L1`, ...).
    pub fn whole_and_layers(&self, model: &str) -> Option<(u64, u64)> {
        let whole = self.case(model, "model-kernel")?.count;
        let prefix = format!("{model}-L");
        let layers: u64 = self
            .cases
            .iter()
            .filter(|c| c.name.starts_with(&prefix))
            .map(|c| c.count)
            .sum();
        Some((whole, layers))
    }

    /// Whole inference of `model` (kernel): (portable, whole, Σ layers, whole / Σ layers).
    pub fn model_ratio(&self, model: &str) -> Option<(u64, u64, u64, f64)> {
        let (whole, layers) = self.whole_and_layers(model)?;
        let portable = self.case(model, "model-portable")?.count;
        Some((portable, whole, layers, whole as f64 / layers.max(1) as f64))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const LOG: &str =
        "kb target dsp\nkb selfcheck 3 0\nkb case empty empty 0\nkb case a kernel 10\nkb end\n";

    #[test]
    fn pairs_cases_with_counts_in_order() {
        let run = parse("t", LOG, "0\n25\ntotal 99\n").unwrap();
        assert_eq!((run.kernel.as_str(), run.passed, run.failed), ("dsp", 3, 0));
        assert_eq!(run.per_mac("a", "kernel"), Some(2.5));
    }

    #[test]
    fn rejects_what_does_not_pair() {
        for (counts, why) in [
            ("0\n25\n7\ntotal 1\n", "more counts"),
            ("0\ntotal 1\n", "more cases"),
            ("3\n25\ntotal 1\n", "empty section"),
            ("0\n25\ntotal 1 unbalanced\n", "unbalanced"),
        ] {
            let e = parse("t", LOG, counts).err().unwrap();
            assert!(e.contains(why), "{e}");
        }
        let e = parse("t", "kb case a kernel 1\n", "5\n").err().unwrap();
        assert!(e.contains("did not finish"), "{e}");
    }
}
