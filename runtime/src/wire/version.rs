//! The format versions this reader accepts and the rule that picks a blob's version
//! (`FORMAT.md` §2). Its own module so that both the header reader and the error messages use
//! it without depending on each other.

/// The newest format version this reader accepts (and writes when a blob needs it).
pub const FORMAT_VERSION: u16 = 4;

/// The oldest format version this reader accepts. Version 1 is version 2 without the
/// `Blocked4x4` weight layout, version 2 is version 3 without the `OneVsRest` output, and
/// version 3 is version 4 without pointwise activation records; a
/// blob carries exactly the lowest version that holds it ([`version_for`]), which writers emit
/// and the reader requires.
pub const OLDEST_VERSION: u16 = 1;

/// The version a blob with this layer table carries: 4 if any layer has a pointwise activation
/// record, else 3 if the output is `OneVsRest`, else 2 if
/// any layer uses the `Blocked4x4` layout, else 1 (so older readers still read every blob they
/// can). Writers put it in the header and `Model::parse` rejects any other
/// (`FormatError::VersionMismatch`): the CRC does not cover the version field, this rule
/// protects it.
pub fn version_for(desc: &crate::wire::format::ModelDesc<'_>) -> u16 {
    version_for_table(&desc.layers, desc.output)
}

/// [`version_for`] of a table with these layers and this output.
pub fn version_for_table(
    layers: &[crate::wire::format::LayerDesc<'_>],
    output: crate::wire::format::OutputKind,
) -> u16 {
    let blocked = layers
        .iter()
        .any(|l| l.layout == crate::wire::format::WeightLayout::Blocked4x4);
    let pointwise = layers
        .iter()
        .any(|l| l.activation == crate::wire::format::Activation::Pointwise);
    if pointwise {
        4
    } else if output == crate::wire::format::OutputKind::OneVsRest {
        3
    } else if blocked {
        2
    } else {
        OLDEST_VERSION
    }
}
