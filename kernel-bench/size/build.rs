//! The QEMU machine's memory map for the probes (`../memory/link.rs`, shared with `fw`).
include!("../memory/link.rs");

fn main() {
    link_memory_map();
}
