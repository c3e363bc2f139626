//! The runtime build a firmware links, which decides how much code the runtime adds.
//!
//! The runtime's code depends on its cargo features and on the calls the firmware makes (the
//! linker drops what is not called): the default build parses f32 and int8 blobs and infers from
//! every input path; without the `f32` feature only int8 blobs parse; a firmware that only calls
//! `classify` links no dequantisation or softmax. On the Cortex-M0 the three differ by more than
//! 5 KiB ([`super::measured`]).
use super::{Code, Measured};
use serde::Serialize;

/// Which runtime build the firmware links.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum RuntimeBuild {
    /// Default features (`f32` on): f32 and int8 blobs, `infer` from every input path.
    #[default]
    Default,
    /// `default-features = false`: int8 blobs only, `Model::parse` and `infer`.
    Int8Only,
    /// `default-features = false`, and the firmware calls only `Model::parse` and `classify`
    /// (integer arithmetic only, no probabilities).
    ClassifyOnly,
}

impl RuntimeBuild {
    /// The option value, as the user writes it.
    pub fn name(self) -> &'static str {
        match self {
            RuntimeBuild::Default => "default",
            RuntimeBuild::Int8Only => "int8-only",
            RuntimeBuild::ClassifyOnly => "classify-only",
        }
    }

    /// The code this build adds to a firmware on the measured core.
    pub fn code(self, m: &Measured) -> Code {
        match self {
            RuntimeBuild::Default => m.default_build,
            RuntimeBuild::Int8Only => m.int8_only,
            RuntimeBuild::ClassifyOnly => m.classify_only,
        }
    }

    /// The deepest inference call this build makes: `classify` for the classify-only build, else
    /// `infer` or `classify`, whichever goes deeper.
    pub fn stack_inference(self, m: &Measured) -> u32 {
        match self {
            RuntimeBuild::ClassifyOnly => m.stack_classify,
            _ => m.stack_infer,
        }
    }

    /// Whether this build can run a blob of `precision`.
    pub fn runs(self, precision: kinglet_runtime::Precision) -> bool {
        self == RuntimeBuild::Default || precision == kinglet_runtime::Precision::Int8
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::Core;
    use kinglet_runtime::Precision;

    #[test]
    fn builds_shrink_in_order_on_both_cores() {
        // Each build drops code from the one before (the linker keeps only what is called), as
        // measured by kernel-bench; if a build grew past the one above, the table would be wrong.
        for core in [Core::M0, Core::M4f] {
            let m = core.measured();
            let text: Vec<u32> = [
                RuntimeBuild::Default,
                RuntimeBuild::Int8Only,
                RuntimeBuild::ClassifyOnly,
            ]
            .iter()
            .map(|b| b.code(&m).text)
            .collect();
            assert!(text[0] > text[1] && text[1] > text[2], "{core:?}: {text:?}");
            assert!(m.stack_classify > 0 && m.stack_classify <= m.stack_infer);
        }
    }

    #[test]
    fn only_the_default_build_runs_f32_blobs() {
        assert!(RuntimeBuild::Default.runs(Precision::F32));
        assert!(!RuntimeBuild::Int8Only.runs(Precision::F32));
        assert!(!RuntimeBuild::ClassifyOnly.runs(Precision::F32));
        assert!(RuntimeBuild::ClassifyOnly.runs(Precision::Int8));
        assert_eq!(RuntimeBuild::default().name(), "default");
    }
}
