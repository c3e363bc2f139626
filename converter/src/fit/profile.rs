//! Built-in part profiles: common Cortex-M memory sizes, named by core and size.
use super::{measured, Measured};
use serde::Serialize;

/// The core class, which decides whose measurements are used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Core {
    /// Cortex-M0 / M0+ (ARMv6-M, no FPU).
    M0,
    /// Cortex-M4F / M7 (ARMv7E-M with a single-precision FPU).
    M4f,
}

impl Core {
    /// Whether the core has a hardware FPU (single precision).
    pub fn has_fpu(self) -> bool {
        matches!(self, Core::M4f)
    }

    /// The runtime's measured footprint on this core.
    pub fn measured(self) -> Measured {
        match self {
            Core::M0 => measured::CORTEX_M0,
            Core::M4f => measured::CORTEX_M4F,
        }
    }

    /// Display name.
    pub fn name(self) -> &'static str {
        match self {
            Core::M0 => "Cortex-M0/M0+",
            Core::M4f => "Cortex-M4F",
        }
    }
}

/// A named part class.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Profile {
    /// Name used with `--board`.
    pub name: &'static str,
    /// Core class.
    pub core: Core,
    /// Flash in KiB.
    pub flash_kib: u64,
    /// RAM in KiB.
    pub ram_kib: u64,
    /// A note on which parts are of this size.
    pub note: &'static str,
}

/// The built-in profiles, smallest first.
pub const PROFILES: [Profile; 6] = [
    Profile {
        name: "m0-16k",
        core: Core::M0,
        flash_kib: 256,
        ram_kib: 16,
        note: "nRF51-class M0 (the micro:bit v1's nRF51822)",
    },
    Profile {
        name: "m0plus-32k",
        core: Core::M0,
        flash_kib: 256,
        ram_kib: 32,
        note: "mid-size M0+",
    },
    Profile {
        name: "m4f-64k",
        core: Core::M4f,
        flash_kib: 512,
        ram_kib: 64,
        note: "small M4F",
    },
    Profile {
        name: "m4f-128k",
        core: Core::M4f,
        flash_kib: 1024,
        ram_kib: 128,
        note: "mid-size M4F",
    },
    Profile {
        name: "m4f-256k",
        core: Core::M4f,
        flash_kib: 1024,
        ram_kib: 256,
        note: "large M4F (nRF52840-class)",
    },
    Profile {
        name: "m4f-320k",
        core: Core::M4f,
        flash_kib: 1024,
        ram_kib: 320,
        note: "large M4F/M7",
    },
];

/// Looks a profile up by name.
pub fn find(name: &str) -> Option<&'static Profile> {
    PROFILES.iter().find(|p| p.name.eq_ignore_ascii_case(name))
}

/// The names, for error messages.
pub fn names() -> String {
    PROFILES
        .iter()
        .map(|p| p.name)
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_and_found() {
        for p in &PROFILES {
            assert_eq!(find(p.name), Some(p));
            assert_eq!(PROFILES.iter().filter(|q| q.name == p.name).count(), 1);
        }
        assert_eq!(find("M4F-64K").map(|p| p.ram_kib), Some(64));
        assert!(find("m3-8k").is_none());
        assert!(names().contains("m0-16k"));
    }

    #[test]
    fn m0_measurements_belong_to_the_m0_target() {
        assert_eq!(Core::M0.measured().target, "thumbv6m-none-eabi");
        assert_eq!(Core::M4f.measured().target, "thumbv7em-none-eabihf");
    }
}
