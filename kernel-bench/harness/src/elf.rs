//! What the harness reads from the probes' ELF files: section sizes, the software float and
//! divide routines they link, and where the section markers are.
use object::{Object, ObjectSection, ObjectSymbol};
use std::collections::HashSet;
use std::path::Path;

/// A parsed ELF file, kept with its path for messages.
pub struct Elf {
    path: String,
    data: Vec<u8>,
}

/// The start and stop markers of `kernel-bench/fw/src/marker.rs` (Thumb halfwords).
pub const MARK_START: u16 = 0x46DB;
/// See [`MARK_START`].
pub const MARK_STOP: u16 = 0x46D2;

impl Elf {
    /// Reads `path`.
    pub fn read(path: &Path) -> Result<Elf, String> {
        let data = std::fs::read(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let elf = Elf {
            path: path.display().to_string(),
            data,
        };
        elf.file()?;
        Ok(elf)
    }

    fn file(&self) -> Result<object::File<'_>, String> {
        object::File::parse(&*self.data).map_err(|e| format!("{}: {e}", self.path))
    }

    /// Size of section `name` (0 if the file has none).
    pub fn section(&self, name: &str) -> Result<u64, String> {
        Ok(self.file()?.section_by_name(name).map_or(0, |s| s.size()))
    }

    /// Size of `.text`, which every probe has.
    pub fn text(&self) -> Result<u64, String> {
        let file = self.file()?;
        let text = file
            .section_by_name(".text")
            .ok_or(format!("{}: no .text section", self.path))?;
        Ok(text.size())
    }

    /// Software float and integer-division routines (compiler-builtins, libm) the ELF links:
    /// what an integer-only path on a core without FPU or divider must not pull in.
    pub fn soft_routines(&self) -> Result<Vec<String>, String> {
        // The `__aeabi_*` entry points and compiler-builtins' own (v0-mangled) names.
        let soft = |full: &str| {
            // Without the legacy mangling's hash (`17h` + 16 hex digits + `E`), which can spell
            // any of the patterns below ("h23e4df22356c659f" holds "df2").
            let n = without_hash(full);
            let aeabi = n.strip_prefix("__aeabi_").unwrap_or("");
            aeabi.starts_with('f')
                || aeabi.starts_with('d')
                || aeabi.ends_with("2f")
                || aeabi.contains("div")
                || [
                    "sf3", "df3", "sf2", "df2", "divsi3", "divdi3", "modsi3", "moddi3",
                ]
                .iter()
                .any(|e| n.contains(e))
                || n.contains("specialized_div_rem")
                || n.contains("4libm4math")
        };
        // Code symbols only: the file symbols carry codegen-unit hashes ("...-cgu.0") that can
        // contain any of the patterns (a hash with "df3" in it was one).
        let file = self.file()?;
        let mut found: Vec<String> = file
            .symbols()
            .filter(|sym| sym.kind() == object::SymbolKind::Text)
            .filter_map(|sym| sym.name().ok().map(str::to_owned))
            .filter(|n| soft(n))
            .collect();
        found.sort();
        found.dedup();
        Ok(found)
    }

    /// Addresses in `.text` whose halfword is `marker`. A trace only ever stops at the start
    /// of an instruction, and an instruction starting with 0x46xx is a 16-bit `mov`, so a PC
    /// in this set is the marker itself.
    pub fn marker_addresses(&self, marker: u16) -> Result<HashSet<u64>, String> {
        let file = self.file()?;
        let text = file
            .section_by_name(".text")
            .ok_or(format!("{}: no .text section", self.path))?;
        let bytes = text.data().map_err(|e| format!("{}: {e}", self.path))?;
        let base = text.address();
        Ok(bytes
            .chunks_exact(2)
            .enumerate()
            .filter(|(_, h)| u16::from_le_bytes([h[0], h[1]]) == marker)
            .map(|(i, _)| base + 2 * i as u64)
            .collect())
    }
}

/// `name` without a trailing legacy Rust mangling hash, `17h` + 16 hex digits + `E`
/// (rustc's `legacy` symbol mangling); other names as they are.
fn without_hash(name: &str) -> &str {
    let b = name.as_bytes();
    let n = b.len();
    if n >= 20 && b[n - 1] == b'E' && &b[n - 20..n - 17] == b"17h" {
        let hex = &b[n - 17..n - 1];
        if hex.iter().all(u8::is_ascii_hexdigit) {
            return &name[..n - 20];
        }
    }
    name
}

#[cfg(test)]
mod tests {
    use super::without_hash;

    #[test]
    fn the_hash_is_not_matched_as_a_routine_name() {
        let s = "_ZN10serde_core2de9SeqAccess12next_element17h23e4df22356c659fE";
        assert_eq!(
            without_hash(s),
            "_ZN10serde_core2de9SeqAccess12next_element"
        );
        assert!(!without_hash(s).contains("df2"));
        assert_eq!(without_hash("__aeabi_fmul"), "__aeabi_fmul");
        assert_eq!(without_hash("__divsi3"), "__divsi3");
    }
}
