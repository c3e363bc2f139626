//! The budget as an aligned table, or as JSON.
use super::{Budget, Region};
use comfy_table::{presets::UTF8_BORDERS_ONLY, Cell, CellAlignment, Table};
use serde_json::json;

fn kib(bytes: u64) -> String {
    format!("{:.1} KiB", bytes as f64 / 1024.0)
}

fn right<T: ToString>(v: T) -> Cell {
    Cell::new(v).set_alignment(CellAlignment::Right)
}

fn region_rows(t: &mut Table, r: &Region) {
    for (i, item) in r.items.iter().enumerate() {
        let name = if i == 0 { r.name.as_str() } else { "" };
        t.add_row(vec![
            Cell::new(name),
            Cell::new(&item.what),
            right(item.bytes),
            Cell::new(&item.source),
        ]);
    }
    let verdict = if r.fits() {
        format!(
            "{:.1}% of {}, {} bytes left",
            r.percent(),
            kib(r.capacity),
            r.headroom()
        )
    } else {
        format!(
            "{:.1}% of {}: {} bytes OVER",
            r.percent(),
            kib(r.capacity),
            -r.headroom()
        )
    };
    t.add_row(vec![
        Cell::new(""),
        Cell::new("total"),
        right(r.used),
        Cell::new(verdict),
    ]);
}

/// Renders the budget for people.
pub fn table(b: &Budget) -> String {
    let mut t = Table::new();
    t.load_preset(UTF8_BORDERS_ONLY);
    t.set_header(["memory", "item", "bytes", "source / verdict"]);
    region_rows(&mut t, &b.flash);
    region_rows(&mut t, &b.ram);
    let mut out = format!(
        "{} on {} ({})\nruntime numbers: the {} build, measured on {} (kinglet's example firmware and size probes)\n",
        b.model,
        b.profile,
        b.part,
        b.build.name(),
        b.core.measured().target
    );
    out += &t.to_string();
    out.push('\n');
    out += &format!(
        "model alone (what the firmware build's budget counts): flash {} bytes (blob), RAM {} bytes (scratch buffer)\n",
        b.model_flash,
        b.model_ram
    );
    if b.fits() {
        out += &format!(
            "fits: {} bytes of flash and {} bytes of RAM remain for the application\n",
            b.flash.headroom(),
            b.ram.headroom()
        );
    } else {
        out += &format!("does not fit: {}\n", b.reasons().join("; "));
    }
    for w in &b.warnings {
        out += &format!("warning: {w}\n");
    }
    out
}

/// Renders the budget as JSON (`fits`, `reasons`, and per region the items, used, capacity).
pub fn json(b: &Budget) -> serde_json::Value {
    let region = |r: &Region| {
        json!({
            "items": r.items,
            "used": r.used,
            "capacity": r.capacity,
            "headroom": r.headroom(),
            "fits": r.fits(),
        })
    };
    json!({
        "model": b.model,
        "profile": b.profile,
        "part": b.part,
        "core": b.core,
        "build": b.build,
        "model_flash": b.model_flash,
        "model_ram": b.model_ram,
        "fits": b.fits(),
        "reasons": b.reasons(),
        "warnings": b.warnings,
        "flash": region(&b.flash),
        "ram": region(&b.ram),
    })
}
