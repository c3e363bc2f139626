//! Blobs of any table, valid or not: the body postcard-encoded as it is, behind a header with
//! the right magic, version, length and CRC, so that the reader judges the table itself and a
//! test reaches exactly the rule it is about.
use kinglet_runtime::unstable::scratch::ScratchPlan;
use kinglet_runtime::unstable::wire::format::{
    InputQuantDesc, LayerDesc, ModelDesc, OutputKind, Precision, ScalerDesc,
};
use kinglet_runtime::unstable::wire::header::HEADER_LEN;
use kinglet_runtime::unstable::wire::version::{version_for, version_for_table};

/// The scratch bytes the runtime's planner gives the (possibly invalid) table `desc`: the scratch buffer
/// field of a valid blob of it.
pub fn planned_scratch(desc: &ModelDesc<'_>) -> u32 {
    let plan = ScratchPlan::new(
        desc.input_len as usize,
        desc.layers.iter().map(|l| l.outputs as usize),
        desc.precision.activation_bytes(),
    )
    .with_input_width(desc.input_len as usize, desc.input_width());
    u32::try_from(plan.total()).unwrap_or(u32::MAX)
}

/// `desc` as a blob with scratch field `scratch`, without validation. The header's version is the
/// one a writer gives this table (`kinglet_runtime::unstable::wire::version::version_for`).
pub fn raw_blob(desc: &ModelDesc<'_>, scratch: u32) -> Vec<u8> {
    write(desc, version_for(desc), scratch)
}

/// `desc` with its layer list replaced by `layers`, as many as there are: the one way to write
/// a table with more layers than a `ModelDesc` (and so a blob) holds. Otherwise as [`raw_blob`].
pub fn raw_blob_with_layers(
    desc: &ModelDesc<'_>,
    layers: &[LayerDesc<'_>],
    scratch: u32,
) -> Vec<u8> {
    // A mirror of `ModelDesc` with an unbounded layer list: the same wire layout (postcard
    // writes a `heapless::Vec` and a slice alike, a length then the elements). Destructured
    // field by field, so a new `ModelDesc` field does not compile until it is added here.
    #[derive(serde::Serialize)]
    struct Wide<'a> {
        input_len: u32,
        precision: Precision,
        scaler: Option<ScalerDesc<'a>>,
        input_quant: Option<InputQuantDesc<'a>>,
        layers: &'a [LayerDesc<'a>],
        output: OutputKind,
        labels: &'a str,
    }
    let ModelDesc {
        input_len,
        precision,
        scaler,
        input_quant,
        layers: _,
        output,
        labels,
    } = desc.clone();
    let wide = Wide {
        input_len,
        precision,
        scaler,
        input_quant,
        layers,
        output,
        labels,
    };
    write(&wide, version_for_table(layers, output), scratch)
}

fn write<T: serde::Serialize>(body: &T, version: u16, scratch: u32) -> Vec<u8> {
    let mut blob = vec![0u8; HEADER_LEN];
    blob.extend(postcard::to_allocvec(body).expect("postcard writes any layer table to a Vec"));
    kinglet_runtime::unstable::encode::seal(&mut blob, version, scratch)
        .expect("a blob in memory is longer than its header and shorter than 4 GiB");
    blob
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sample::tiny_int8;
    use kinglet_runtime::{FormatError, Model};

    #[test]
    fn wide_writer_matches_the_table_writer() {
        let m = tiny_int8();
        let d = m.as_desc();
        let scratch = m.planned_scratch();
        assert_eq!(
            raw_blob_with_layers(&d, &d.layers, scratch),
            raw_blob(&d, scratch)
        );
        let nine = vec![d.layers[1]; 9];
        assert_eq!(
            Model::parse(&raw_blob_with_layers(&d, &nine, scratch)).map(|_| ()),
            Err(FormatError::Malformed)
        );
    }
}
