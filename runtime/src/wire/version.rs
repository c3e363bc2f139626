//! The format versions this reader accepts and the rule that picks a blob's version
//! (`FORMAT.md` §2). Its own module so that both the header reader and the error messages use
//! it without depending on each other.

/// The newest format version this reader accepts (and writes when a blob needs it).
pub const FORMAT_VERSION: u16 = 7;

/// The oldest format version this reader accepts. Version 1 is version 2 without the
/// `Blocked4x4` weight layout, version 2 is version 3 without the `OneVsRest` output, version 3
/// is version 4 without pointwise activation records, and version 5 is version 4 with optional
/// sections that may be left out (empty), and version 6 is version 5 with the `Nibble4x4`
/// (int4) weight layout, and version 7 is version 6 with an int16 input tensor; a blob carries
/// exactly the lowest version that holds
/// it ([`version_for`]), which writers emit and the reader requires.
pub const OLDEST_VERSION: u16 = 1;

/// Whether this reader accepts format version `v` (every version from [`OLDEST_VERSION`] to
/// [`FORMAT_VERSION`]).
pub const fn accepts(v: u16) -> bool {
    v >= OLDEST_VERSION && v <= FORMAT_VERSION
}

/// The version a blob with this layer table carries: 7 if its input tensor is int16
/// ([`crate::wire::format::InputWidth::I16`]), else 6 if any layer has int4 weights
/// (`Nibble4x4`, [`has_int4`]), else 5 if it leaves out an optional section
/// (the integer input tables or a layer's weight scales, [`omits_a_section`]), else 4 if any
/// layer has a pointwise activation record, else 3 if the output is `OneVsRest`, else 2 if any
/// layer uses the `Blocked4x4` layout, else 1 (so older
/// readers still read every blob they can). Writers put it in the header and `Model::parse`
/// rejects any other (`FormatError::VersionMismatch`): the CRC does not cover the version
/// field, this rule protects it.
pub fn version_for(desc: &crate::wire::format::ModelDesc<'_>) -> u16 {
    if desc.input_width() == crate::wire::format::InputWidth::I16 {
        7
    } else if has_int4(&desc.layers) {
        6
    } else if omits_a_section(desc) {
        5
    } else {
        version_for_table(&desc.layers, desc.output)
    }
}

/// Whether any layer has int4 weights (the `Nibble4x4` layout, `FORMAT.md` §3.5).
pub fn has_int4(layers: &[crate::wire::format::LayerDesc<'_>]) -> bool {
    layers
        .iter()
        .any(|l| l.layout == crate::wire::format::WeightLayout::Nibble4x4)
}

/// Whether the table leaves out an optional section (`FORMAT.md` §3.4): an int8 table whose
/// integer input shifts are empty, or whose first layer's weight scales are empty. (A section
/// is left out whole or kept whole; `validate` rejects a partial one, whichever version this
/// gives it, so these two fields decide.)
pub fn omits_a_section(desc: &crate::wire::format::ModelDesc<'_>) -> bool {
    desc.input_quant
        .as_ref()
        .is_some_and(|q| q.int_shift.is_empty())
        || !keeps_weight_scales(&desc.layers)
}

/// Whether an int8 table keeps its weight scales: its first layer's are not empty (true for
/// an f32 table, which has none to leave out).
pub fn keeps_weight_scales(layers: &[crate::wire::format::LayerDesc<'_>]) -> bool {
    layers
        .first()
        .and_then(|l| l.quant.as_ref())
        .is_none_or(|q| !q.weight_scale.is_empty())
}

/// The version of a table with these layers and this output that leaves out no section (the
/// rule of versions 1 to 4).
pub fn version_for_table(
    layers: &[crate::wire::format::LayerDesc<'_>],
    output: crate::wire::format::OutputKind,
) -> u16 {
    use crate::wire::format::{Activation, OutputKind, WeightLayout};
    // One pass: each layer needs 4 for a pointwise record, 2 for `Blocked4x4`; the output 3
    // for `OneVsRest`; the blob the highest of these.
    let least = if output == OutputKind::OneVsRest {
        3
    } else {
        OLDEST_VERSION
    };
    layers.iter().fold(least, |v, l| {
        let need = if l.activation == Activation::Pointwise {
            4
        } else if l.layout == WeightLayout::Blocked4x4 {
            2
        } else {
            OLDEST_VERSION
        };
        v.max(need)
    })
}
