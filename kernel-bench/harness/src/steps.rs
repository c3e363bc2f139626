//! The commands a run is made of: cargo builds, the plugin's compile, packing, QEMU.
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

/// Where things are.
pub struct Paths {
    /// The repository.
    pub root: PathBuf,
    /// `kernel-bench/target`: everything the benchmark builds and runs.
    pub out: PathBuf,
    /// The root workspace's target directory (`CARGO_TARGET_DIR` or `target`).
    pub root_target: PathBuf,
    /// The example firmware's (`FW_TARGET_DIR` or `firmware-example/target`, as
    /// `scripts/firmware.sh` has it, so that CI builds it once).
    pub fw_target: PathBuf,
}

impl Paths {
    /// The paths of the repository at `root`.
    pub fn new(root: &Path) -> Self {
        let env = |k: &str| std::env::var_os(k).map(PathBuf::from);
        Paths {
            root: root.into(),
            out: root.join("kernel-bench/target"),
            root_target: env("CARGO_TARGET_DIR").unwrap_or(root.join("target")),
            fw_target: env("FW_TARGET_DIR").unwrap_or(root.join("firmware-example/target")),
        }
    }
}

/// Runs `cmd`; on failure, its output goes into the error.
pub fn run(what: &str, cmd: &mut Command) -> Result<Vec<u8>, String> {
    let out = cmd
        .stdin(Stdio::null())
        .output()
        .map_err(|e| format!("{what}: {e}"))?;
    if !out.status.success() {
        return Err(format!(
            "{what} failed ({}):\n{}{}",
            out.status,
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        ));
    }
    Ok(out.stdout)
}

/// `cargo build -q --release ARGS` in `dir` with its own target directory.
pub fn cargo(
    dir: &Path,
    target_dir: &Path,
    args: &[&str],
    env: &[(&str, &Path)],
) -> Result<(), String> {
    let mut cmd = Command::new("cargo");
    cmd.current_dir(dir)
        .env("CARGO_TARGET_DIR", target_dir)
        .env("CARGO_TERM_COLOR", "never")
        .args(["build", "-q", "--release"])
        .args(args);
    for (k, v) in env {
        cmd.env(k, v);
    }
    run(
        &format!("cargo build {} (in {})", args.join(" "), dir.display()),
        &mut cmd,
    )
    .map(drop)
}

/// One QEMU machine.
#[derive(Clone, Copy)]
pub struct Machine {
    /// `m4` or `m0`.
    pub name: &'static str,
    /// Rust target triple.
    pub triple: &'static str,
    /// `-machine`.
    pub machine: &'static str,
    /// `-cpu`.
    pub cpu: &'static str,
}

/// The two machines, Cortex-M4F first.
pub const MACHINES: [Machine; 2] = [
    Machine {
        name: "m4",
        triple: "thumbv7em-none-eabihf",
        machine: "mps2-an386",
        cpu: "cortex-m4",
    },
    Machine {
        name: "m0",
        triple: "thumbv6m-none-eabi",
        machine: "microbit",
        cpu: "cortex-m0",
    },
];

/// `qemu-system-arm` for `m`, semihosting on stdout, with `extra` arguments, running `elf`.
pub fn qemu(m: &Machine, elf: &Path, extra: &[&str]) -> Command {
    let mut cmd = Command::new("timeout");
    cmd.arg("600")
        .arg("qemu-system-arm")
        .args(["-machine", m.machine, "-cpu", m.cpu])
        .args(["-nographic", "-monitor", "none", "-serial", "none"])
        .args(["-semihosting-config", "enable=on,target=native"])
        .args(extra)
        .arg("-kernel")
        .arg(elf);
    cmd
}

/// The QEMU version line (`7.2.22 (Debian ...)`).
pub fn qemu_version() -> Result<String, String> {
    let out = run(
        "qemu-system-arm --version",
        Command::new("qemu-system-arm").arg("--version"),
    )?;
    let text = String::from_utf8_lossy(&out);
    let first = text.lines().next().unwrap_or("");
    Ok(first.rsplit("version ").next().unwrap_or(first).to_string())
}

/// `rustc --version` without the commit (`rustc 1.95.0`).
pub fn rustc_version() -> Result<String, String> {
    let out = run("rustc --version", Command::new("rustc").arg("--version"))?;
    let text = String::from_utf8_lossy(&out);
    Ok(text
        .split_whitespace()
        .take(2)
        .collect::<Vec<_>>()
        .join(" "))
}
