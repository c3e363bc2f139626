//! The validated model and the forward pass.
use crate::dense::{
    dense_f32, dense_f32_blocked_auto, dense_i8, dense_i8_blocked_auto, DenseF32, DenseI8,
};
use crate::error::{FormatError, RunError};
use crate::output::{argmax, one_vs_rest, sigmoid, softmax};
use crate::requant::activation_range;
use crate::scale::{integer_params, quantise_floats, quantise_integer, Scaler};
use crate::scratch::ScratchPlan;
use crate::stage::{Activations, Stage};
use crate::unstable::pointwise::TABLE_LEN;
use crate::wire::format::{
    Activation, InputWidth, LayerDesc, ModelDesc, OutputKind, Precision, WeightLayout,
};
use crate::wire::header::{Header, HEADER_LEN};
use crate::{le, validate};

/// Raw input values, in the units the model's scaler expects.
#[derive(Debug, Clone, Copy)]
pub enum Input<'a> {
    /// Float features (scaled by the saved scaler, then quantised for int8 models).
    F32(&'a [f32]),
    /// Signed 16-bit counts, such as accelerometer samples. On int8 models this path uses
    /// integer arithmetic only.
    I16(&'a [i16]),
    /// Unsigned bytes, such as pixels. On int8 models this path uses integer arithmetic only.
    U8(&'a [u8]),
}

impl Input<'_> {
    fn len(&self) -> usize {
        match self {
            Input::F32(v) => v.len(),
            Input::I16(v) => v.len(),
            Input::U8(v) => v.len(),
        }
    }
}

/// The result of one inference.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Prediction {
    /// Index of the predicted class (ties resolve to the lowest index).
    pub class: usize,
    /// The predicted class's score (its probability for softmax and sigmoid outputs).
    pub score: f32,
}

/// A read-only view of one layer, for reports.
#[derive(Debug, Clone, Copy)]
pub struct LayerView<'a> {
    /// The layer as stored.
    pub desc: &'a LayerDesc<'a>,
}

impl LayerView<'_> {
    /// Trainable parameters: `inputs · outputs + outputs`.
    pub fn parameters(&self) -> usize {
        let (i, o) = (self.desc.inputs as usize, self.desc.outputs as usize);
        i * o + o
    }

    /// Bytes this layer's tensors occupy in the blob.
    pub fn tensor_bytes(&self) -> usize {
        let q = self.desc.quant.map_or(0, |q| {
            q.weight_scale.len() + q.multiplier.len() + q.shift.len()
        });
        self.desc.weights.len() + self.desc.bias.len() + q
    }

    /// Multiply-accumulates per inference.
    pub fn macs(&self) -> usize {
        self.desc.inputs as usize * self.desc.outputs as usize
    }
}

/// A parsed and fully validated model, borrowing the blob.
#[derive(Debug, Clone)]
pub struct Model<'a> {
    desc: ModelDesc<'a>,
    plan: ScratchPlan,
    blob: &'a [u8],
}

impl<'a> Model<'a> {
    /// Parses and validates `blob` (exactly one blob, see [`crate::blob_len`]).
    ///
    /// Every rule of `FORMAT.md` §5 is checked here, once.
    ///
    /// # Errors
    ///
    /// A [`FormatError`] naming the first rule the blob breaks: a wrong magic, version, length
    /// or checksum, a malformed or inconsistent layer table, a quantisation parameter out of
    /// range, a possible int8 accumulator overflow, a scratch size that disagrees with the
    /// layers, or ([`FormatError::F32NotBuiltIn`]) an f32 blob on a build without the `f32`
    /// feature.
    ///
    /// ```
    /// use kinglet_runtime::{FormatError, Model};
    /// // Not a blob: rejected with a typed error, never a panic.
    /// let err = Model::parse(b"not a Kinglet model").err();
    /// assert_eq!(err, Some(FormatError::BadMagic));
    /// ```
    pub fn parse(blob: &'a [u8]) -> Result<Self, FormatError> {
        let header = Header::read(blob)?;
        let body = blob.get(HEADER_LEN..).unwrap_or(&[]);
        // Decoded into the model's own table (`wire::read`): no copy of the layer table to
        // move through the stack.
        let mut model = Model {
            desc: ModelDesc::empty(),
            plan: ScratchPlan::default(),
            blob,
        };
        let rest = crate::wire::read::read_into(body, &mut model.desc)
            .map_err(|_| FormatError::Malformed)?;
        if !rest.is_empty() {
            return Err(FormatError::TrailingBytes);
        }
        let desc = &model.desc;
        // The version field is outside the CRC; holding it to the one value the table allows
        // protects it all the same (`FORMAT.md` §2).
        let body_version = crate::wire::version::version_for(desc);
        if header.version != body_version {
            return Err(FormatError::VersionMismatch {
                header: header.version,
                body: body_version,
            });
        }
        let plan = validate::check(desc)?;
        let computed = u32::try_from(plan.total()).unwrap_or(u32::MAX);
        if computed != header.scratch_bytes {
            return Err(FormatError::ScratchMismatch {
                header: header.scratch_bytes,
                computed,
            });
        }
        model.plan = plan;
        Ok(model)
    }

    /// The decoded layer table.
    pub fn desc(&self) -> &ModelDesc<'a> {
        &self.desc
    }

    /// Scratch bytes [`Model::infer`] needs (the same number as [`crate::scratch_bytes`]).
    pub fn scratch_bytes(&self) -> usize {
        self.plan.total()
    }

    /// How the scratch buffer is split.
    pub fn scratch_plan(&self) -> ScratchPlan {
        self.plan
    }

    /// Bytes of the blob (its flash footprint).
    pub fn blob_bytes(&self) -> usize {
        self.blob.len()
    }

    /// Whether every `Blocked4x4` and `Nibble4x4` weight field's data is 4-byte aligned in memory, where the
    /// blob is now: what the Cortex-M4 kernels need for `LDM`/`VLDM` (other layouts and other
    /// cores do not care). The packer aligns the data within the blob, so this holds when the
    /// blob starts at a multiple of 4, which [`crate::embed_blob!`] makes sure of. When it does
    /// not hold, inference gives the same results on a slower path.
    pub fn weights_aligned(&self) -> bool {
        self.weights_aligned_at(self.blob.as_ptr() as usize)
    }

    /// [`Model::weights_aligned`] for the blob loaded with its first byte at `load_address`
    /// (e.g. where a linker script or a bootloader places it in flash).
    pub fn weights_aligned_at(&self, load_address: usize) -> bool {
        let elem = self.precision().activation_bytes();
        let start = self.blob.as_ptr() as usize;
        self.desc
            .layers
            .iter()
            .filter_map(|l| crate::wire::layout::aligned_data(l, elem))
            .all(|data| {
                let offset = (data.as_ptr() as usize).wrapping_sub(start);
                load_address.wrapping_add(offset).is_multiple_of(4)
            })
    }

    /// Input width.
    pub fn input_len(&self) -> usize {
        self.desc.input_len as usize
    }

    /// Number of scores [`Model::infer`] writes: the last layer's width.
    pub fn output_len(&self) -> usize {
        self.desc.layers.last().map_or(0, |l| l.outputs as usize)
    }

    /// Number of classes (2 for a sigmoid output).
    pub fn classes(&self) -> usize {
        match self.desc.output {
            OutputKind::Sigmoid => 2,
            _ => self.output_len(),
        }
    }

    /// Whether [`Input::I16`] and [`Input::U8`] are accepted: always on an f32 model (the
    /// integers go through the float scaler), and on an int8 model when the blob carries the
    /// integer input path (`kinglet pack --integer-input`; `FORMAT.md` §3.4). Otherwise
    /// [`Model::infer`] and [`Model::classify`] refuse them with [`RunError::NoIntegerInput`].
    pub fn takes_integer_input(&self) -> bool {
        self.desc
            .input_quant
            .as_ref()
            .is_none_or(|q| !q.int_shift.is_empty())
    }

    /// Whether the blob carries the per-channel f32 weight scales, which inference does not use
    /// (format version 5 may leave them out; `kinglet pack --weight-scales` keeps them). False
    /// for an f32 model, which has none.
    pub fn has_weight_scales(&self) -> bool {
        self.desc.precision == Precision::Int8
            && crate::wire::version::keeps_weight_scales(&self.desc.layers)
    }

    /// Precision of the model.
    pub fn precision(&self) -> Precision {
        self.desc.precision
    }

    /// The layers, in order.
    pub fn layers(&self) -> impl Iterator<Item = LayerView<'_>> {
        self.desc.layers.iter().map(|desc| LayerView { desc })
    }

    /// Class labels, in class order (empty if the blob has none).
    pub fn labels(&self) -> impl Iterator<Item = &'a str> {
        split_labels(self.desc.labels)
    }

    /// The label of class `i`, if the blob has labels.
    pub fn label(&self, i: usize) -> Option<&'a str> {
        self.labels().nth(i)
    }

    /// Runs one inference. `scratch` needs [`Model::scratch_bytes`] bytes, `scores` at least
    /// [`Model::output_len`] elements; on error the contents of both are unspecified.
    ///
    /// Float inputs must be finite. Integer inputs of any value are accepted when the blob takes
    /// them ([`Model::takes_integer_input`]).
    ///
    /// # Errors
    ///
    /// A [`RunError`]: the input is not [`Model::input_len`] long
    /// ([`RunError::InputLength`]), `scratch` or `scores` is too small
    /// ([`RunError::ScratchTooSmall`], [`RunError::ScoresTooSmall`]), a float input is NaN or
    /// infinite ([`RunError::NonFiniteInput`]), an f32 model's output is not finite
    /// ([`RunError::NonFiniteOutput`]), or integer features are given to an int8 blob without
    /// the integer input path ([`RunError::NoIntegerInput`], see
    /// [`Model::takes_integer_input`]).
    ///
    /// ```
    /// # fn demo(blob: &[u8]) -> Result<(), kinglet_runtime::Error> {
    /// use kinglet_runtime::{Input, Model};
    /// let model = Model::parse(blob)?;
    /// let mut scratch = [0u8; 256];
    /// let mut scores = [0f32; 10];
    /// let p = model.infer(Input::F32(&[0.5; 4]), &mut scratch, &mut scores)?;
    /// let name = model.label(p.class).unwrap_or("?");
    /// # let _ = name;
    /// # Ok(())
    /// # }
    /// ```
    pub fn infer(
        &self,
        input: Input<'_>,
        scratch: &mut [u8],
        scores: &mut [f32],
    ) -> Result<Prediction, RunError> {
        self.infer_traced(input, scratch, scores, &mut |_| {})
    }

    /// [`Model::infer`], calling `trace` with the input tensor and each layer's output.
    pub fn infer_traced<F: FnMut(&Stage<'_>)>(
        &self,
        input: Input<'_>,
        scratch: &mut [u8],
        scores: &mut [f32],
        trace: &mut F,
    ) -> Result<Prediction, RunError> {
        self.check_input_len(&input)?;
        let out_len = self.output_len();
        let got = scores.len() as u32;
        let Some(scores) = scores.get_mut(..out_len) else {
            return Err(RunError::ScoresTooSmall {
                needed: out_len as u32,
                got,
            });
        };
        let (quant, last) = self.forward(input, scratch, trace)?;
        // Dequantise (or copy) the last tensor into the scores.
        match quant {
            Some((scale, zero_point)) => {
                // `Activations::real`, without its per-element variant match.
                let zp = f32::from(zero_point);
                for (s, &q) in scores.iter_mut().zip(last) {
                    *s = (f32::from(q as i8) - zp) * scale;
                }
            }
            None if cfg!(feature = "f32") => {
                for (s, v) in scores.iter_mut().zip(le::f32s(last)) {
                    *s = v;
                }
                if !scores.iter().all(|s| s.is_finite()) {
                    return Err(RunError::NonFiniteOutput);
                }
            }
            None => {}
        }
        // One call site of `softmax`: one-vs-rest falls back to it far below zero (`output.rs`).
        let soft = match self.desc.output {
            OutputKind::Softmax => true,
            OutputKind::Sigmoid => {
                for s in scores.iter_mut() {
                    *s = sigmoid(*s);
                }
                false
            }
            OutputKind::OneVsRest => !one_vs_rest(scores),
            OutputKind::Logits => false,
        };
        if soft {
            softmax(scores);
        }
        if self.desc.output == OutputKind::Sigmoid {
            let p = scores.first().copied().unwrap_or(0.0);
            return Ok(if p > 0.5 {
                Prediction { class: 1, score: p }
            } else {
                Prediction {
                    class: 0,
                    score: 1.0 - p,
                }
            });
        }
        let (class, score) = argmax(scores).unwrap_or((0, 0.0));
        Ok(Prediction { class, score })
    }

    /// `InputLength` unless `input` has the model's input width; then `NoIntegerInput` for
    /// integer features on a blob without the integer input path (version 5 may leave it out,
    /// `FORMAT.md` §3.4).
    pub(crate) fn check_input_len(&self, input: &Input<'_>) -> Result<(), RunError> {
        let n = self.input_len();
        if input.len() == n {
            if !matches!(input, Input::F32(_)) && !self.takes_integer_input() {
                return Err(RunError::NoIntegerInput);
            }
            Ok(())
        } else {
            Err(RunError::InputLength {
                expected: n as u32,
                got: input.len() as u32,
            })
        }
    }

    /// The input stage and every layer, in `scratch`: returns the last layer's quantisation and
    /// the scratch buffer half that starts with its output tensor. The caller has checked the input
    /// width.
    pub(crate) fn forward<'x, F: FnMut(&Stage<'_>)>(
        &self,
        input: Input<'_>,
        scratch: &'x mut [u8],
        trace: &mut F,
    ) -> Result<(Quant, &'x [u8]), RunError> {
        let too_small = RunError::ScratchTooSmall {
            needed: self.plan.total() as u32,
            got: u32::try_from(scratch.len()).unwrap_or(u32::MAX),
        };
        if scratch.len() < self.plan.total() {
            return Err(too_small);
        }
        let (ping, pong) = scratch
            .split_at_mut_checked(self.plan.ping)
            .ok_or(too_small)?;
        let elem = self.desc.precision.accepted_bytes();
        let wide = self.desc.input_width_built() == InputWidth::I16;
        // Tensor 0 is two bytes per element when it is int16 (`FORMAT.md` §4).
        let first_elem = if wide { 2 } else { elem };
        let first = ping
            .get_mut(..self.input_len() * first_elem)
            .ok_or(too_small)?;
        // The int16 input stage apart, so that the int8 one compiles as it did without it.
        let mut quant = match (wide, &self.desc.input_quant) {
            #[cfg(feature = "int16-input")]
            (true, Some(q)) => {
                self.load_input_i16(q, input, first)?;
                Some((q.scale, 0))
            }
            _ => self.load_input(input, first)?,
        };
        trace(&Stage {
            index: 0,
            values: if wide {
                Activations::Int16 {
                    data: first,
                    scale: quant.map_or(1.0, |q| q.0),
                }
            } else {
                view(quant, first)
            },
        });

        for (k, layer) in self.desc.layers.iter().enumerate() {
            let (src, dst): (&[u8], &mut [u8]) = if k.is_multiple_of(2) {
                (&*ping, &mut *pong)
            } else {
                (&*pong, &mut *ping)
            };
            let src_elem = if k == 0 { first_elem } else { elem };
            let src = src
                .get(..layer.inputs as usize * src_elem)
                .ok_or(too_small)?;
            let dst = dst
                .get_mut(..layer.outputs as usize * elem)
                .ok_or(too_small)?;
            // The first layer of an int16-input model apart, so that `run_layer` compiles as
            // it did without it.
            quant = match (k == 0 && wide, &layer.quant) {
                #[cfg(feature = "int16-input")]
                (true, Some(q)) => run_wide_layer(layer, q, src, dst),
                _ => run_layer(layer, src, dst),
            };
            trace(&Stage {
                index: k + 1,
                values: view(quant, dst),
            });
        }
        let last: &'x [u8] = if self.desc.layers.len().is_multiple_of(2) {
            ping
        } else {
            pong
        };
        Ok((quant, last))
    }

    /// Scales (and for int8, quantises) the raw input into `dst`. Always inlined into its one
    /// caller: with the int16 input stage beside it the compiler kept it out of line, about 120
    /// instructions more per inference on the Cortex-M4.
    #[inline(always)]
    fn load_input(&self, input: Input<'_>, dst: &mut [u8]) -> Result<Quant, RunError> {
        match (&self.desc.input_quant, self.desc.precision) {
            (Some(q), Precision::Int8) => {
                let integer = |i: usize, x: i32| {
                    let (m, a, s) = integer_params(q, i);
                    quantise_integer(x, m, a, s) as u8
                };
                match input {
                    Input::F32(v) => quantise_floats(self.desc.scaler, q, v, dst)?,
                    Input::I16(v) => {
                        for (i, (d, &x)) in dst.iter_mut().zip(v).enumerate() {
                            *d = integer(i, i32::from(x));
                        }
                    }
                    Input::U8(v) => {
                        for (i, (d, &x)) in dst.iter_mut().zip(v).enumerate() {
                            *d = integer(i, i32::from(x));
                        }
                    }
                }
                Ok(Some((q.scale, q.zero_point)))
            }
            // Without the `f32` feature, `parse` has refused f32 models.
            _ if cfg!(feature = "f32") => {
                if let Input::F32(v) = input {
                    if let Some(i) = v.iter().position(|x| !x.is_finite()) {
                        return Err(RunError::NonFiniteInput { index: i as u32 });
                    }
                }
                let scaler = Scaler::new(self.desc.scaler);
                for i in 0..input.len() {
                    let x = match input {
                        Input::F32(v) => v.get(i).copied().unwrap_or(0.0),
                        Input::I16(v) => v.get(i).map_or(0.0, |&x| f32::from(x)),
                        Input::U8(v) => v.get(i).map_or(0.0, |&x| f32::from(x)),
                    };
                    le::put_f32(dst, i, scaler.apply(i, x));
                }
                Ok(None)
            }
            _ => Ok(None),
        }
    }
}

impl Model<'_> {
    /// [`Model::load_input`] for an int16 input tensor: two little-endian bytes per feature.
    #[cfg(feature = "int16-input")]
    fn load_input_i16(
        &self,
        q: &crate::wire::format::InputQuantDesc<'_>,
        input: Input<'_>,
        dst: &mut [u8],
    ) -> Result<(), RunError> {
        let integer = |i: usize, x: i32| {
            let (m, a, s) = integer_params(q, i);
            crate::scale::quantise_integer_i16(x, m, a, s).to_le_bytes()
        };
        let out = dst.as_chunks_mut::<2>().0.iter_mut();
        match input {
            Input::F32(v) => crate::scale::quantise_floats_i16(self.desc.scaler, q, v, dst)?,
            Input::I16(v) => {
                for (i, (d, &x)) in out.zip(v).enumerate() {
                    *d = integer(i, i32::from(x));
                }
            }
            Input::U8(v) => {
                for (i, (d, &x)) in out.zip(v).enumerate() {
                    *d = integer(i, i32::from(x));
                }
            }
        }
        Ok(())
    }
}

/// The `'\n'`-separated labels of `all` (none when `all` is empty). Splits on bytes rather than
/// with `str::split`, whose searcher keeps a slice-index panic path in optimised Cortex-M0
/// builds (`scripts/no-panic-check.sh`); `'\n'` is ASCII, so every cut is a char boundary.
fn split_labels(all: &str) -> impl Iterator<Item = &str> {
    let mut rest = (!all.is_empty()).then_some(all);
    core::iter::from_fn(move || {
        let s = rest?;
        match s.bytes().position(|b| b == b'\n') {
            Some(i) => {
                let (head, tail) = s.split_at_checked(i)?;
                rest = tail.get(1..);
                Some(head)
            }
            None => {
                rest = None;
                Some(s)
            }
        }
    })
}

/// Scale and zero point of an int8 tensor; `None` for f32.
pub(crate) type Quant = Option<(f32, i8)>;

/// A view of `data` with the quantisation `q`.
fn view(q: Quant, data: &[u8]) -> Activations<'_> {
    match q {
        Some((scale, zero_point)) => Activations::Int8 {
            data,
            scale,
            zero_point,
        },
        None => Activations::F32 { data },
    }
}

/// Runs one layer from `src` into `dst`; returns the output's quantisation.
/// The kernel parameters of an int8 layer: a pointwise layer requantises to the table's input
/// zero point, and the kernel's store looks each value up.
#[inline(always)]
fn int8_params<'a>(
    layer: &LayerDesc<'a>,
    q: &crate::wire::format::LayerQuantDesc<'a>,
) -> DenseI8<'a> {
    let (act_min, act_max) = activation_range(layer.activation, q.output_zero_point);
    let (zero_point, table) = match layer.pointwise() {
        Some(p) => (
            p.input_zero_point,
            <&[u8; TABLE_LEN]>::try_from(p.data).ok(),
        ),
        None => (q.output_zero_point, None),
    };
    DenseI8 {
        inputs: layer.inputs as usize,
        weights: layer.weights,
        bias: layer.bias,
        multiplier: q.multiplier,
        shift: q.shift,
        zero_point,
        act_min,
        act_max,
        table,
    }
}

/// Runs the first layer of an int16-input model (int8 weights, `FORMAT.md` §3.6) from the
/// int16 tensor `src`; returns the output's quantisation.
#[cfg(feature = "int16-input")]
fn run_wide_layer(
    layer: &LayerDesc<'_>,
    q: &crate::wire::format::LayerQuantDesc<'_>,
    src: &[u8],
    dst: &mut [u8],
) -> Quant {
    let p = int8_params(layer, q);
    // `parse` refused int4 weights on this layer.
    match layer.layout {
        WeightLayout::Blocked4x4 => crate::dense::wide::dense_i16_blocked(&p, src, dst),
        _ => crate::dense::wide::dense_i16(&p, src, dst),
    }
    Some((q.output_scale, q.output_zero_point))
}

fn run_layer(layer: &LayerDesc<'_>, src: &[u8], dst: &mut [u8]) -> Quant {
    match &layer.quant {
        Some(q) => {
            let p = int8_params(layer, q);
            match layer.layout {
                WeightLayout::OutputMajor => dense_i8(&p, src, dst),
                WeightLayout::Blocked4x4 => dense_i8_blocked_auto(&p, src, dst),
                // Without the `int4` feature `parse` has refused int4 layers.
                WeightLayout::Nibble4x4 => {
                    #[cfg(feature = "int4")]
                    crate::dense::dense_i4_auto(&p, src, dst);
                }
            }
            Some((q.output_scale, q.output_zero_point))
        }
        // Without the `f32` feature, `parse` has refused f32 models.
        None if !cfg!(feature = "f32") => None,
        None => {
            let p = DenseF32 {
                inputs: layer.inputs as usize,
                weights: layer.weights,
                bias: layer.bias,
                relu: layer.activation == Activation::Relu,
            };
            match layer.layout {
                WeightLayout::OutputMajor => dense_f32(&p, src, dst),
                WeightLayout::Blocked4x4 => dense_f32_blocked_auto(&p, src, dst),
                // Rejected by `parse` on an f32 model.
                WeightLayout::Nibble4x4 => {}
            }
            #[cfg(feature = "f32")]
            if let Some(pd) = layer.pointwise() {
                use crate::unstable::pointwise::{apply_f32, Kind, Pointwise};
                // Validated by `parse`: a known kind with its parameters.
                if let Some(pw) =
                    Kind::from_byte(pd.kind).and_then(|k| Pointwise::from_params(k, pd.data))
                {
                    apply_f32(dst, &pw);
                }
            }
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use kinglet_builder::sample::{tiny_f32, tiny_int8};

    fn trace_int8(model: &Model<'_>, input: Input<'_>) -> (Prediction, Vec<Vec<i8>>) {
        let mut scratch = vec![0u8; model.scratch_bytes()];
        let mut scores = vec![0f32; model.output_len()];
        let mut stages = Vec::new();
        let p = model
            .infer_traced(input, &mut scratch, &mut scores, &mut |s: &Stage<'_>| {
                stages.push(
                    (0..s.values.len())
                        .filter_map(|i| s.values.int8(i))
                        .collect(),
                );
            })
            .unwrap();
        (p, stages)
    }

    #[test]
    fn int8_forward_pass_hand_worked() {
        let owned = tiny_int8();
        let blob = owned.encode_to_vec().unwrap();
        let m = Model::parse(&blob).unwrap();
        assert_eq!(m.scratch_bytes(), 7); // ping: max(3, 2), pong: 4
        assert_eq!(crate::scratch_bytes(&blob), 7);
        assert_eq!(m.labels().collect::<Vec<_>>(), ["off", "on"]);
        assert_eq!(m.label(1), Some("on"));
        assert_eq!(m.classes(), 2);
        // See FORMAT.md §6 for this worked example, step by step.
        let (p, stages) = trace_int8(&m, Input::F32(&[1.0, 2.0, 3.0]));
        assert_eq!(
            stages,
            vec![vec![-10, 0, 10], vec![3, -5, -5, 100], vec![-30, 33]]
        );
        assert_eq!(p.class, 1);
        // softmax([-3.2, 3.1])[1] = 1 / (1 + e^-6.3)
        assert!((p.score - 1.0 / (1.0 + (-6.3f32).exp())).abs() < 1e-6);
        // The integer-only paths give the same tensors for the same raw values.
        assert_eq!(trace_int8(&m, Input::I16(&[1, 2, 3])).1, stages);
        assert_eq!(trace_int8(&m, Input::U8(&[1, 2, 3])).1, stages);
    }

    /// The int16-input twin of the worked example (`kinglet_builder::sample::tiny_int16_input`):
    /// input `[0, 2560, 5120]`, layer 1's accumulators 256 times the int8 model's
    /// (`[7680, −10240, −33280, 107520]`), and from there the same tensors and class.
    #[test]
    #[cfg(feature = "int16-input")]
    fn int16_input_forward_pass_hand_worked() {
        let blob = kinglet_builder::sample::tiny_int16_input()
            .encode_to_vec()
            .unwrap();
        assert_eq!(u16::from_le_bytes([blob[4], blob[5]]), 7);
        let m = Model::parse(&blob).unwrap();
        // ping: max(2 · 3, 2), pong: 4.
        assert_eq!(m.scratch_bytes(), 10);
        assert_eq!(crate::scratch_bytes(&blob), 10);
        for input in [
            Input::F32(&[1.0, 2.0, 3.0]),
            Input::I16(&[1, 2, 3]),
            Input::U8(&[1, 2, 3]),
        ] {
            let mut scratch = vec![0u8; m.scratch_bytes()];
            let mut scores = [0f32; 2];
            let mut first = Vec::new();
            let mut rest = Vec::new();
            let p = m
                .infer_traced(input, &mut scratch, &mut scores, &mut |s: &Stage<'_>| {
                    if s.index == 0 {
                        first = (0..s.values.len())
                            .filter_map(|i| s.values.int16(i))
                            .collect();
                        assert_eq!(s.values.real(2), Some(1.0));
                    } else {
                        rest.push(
                            (0..s.values.len())
                                .filter_map(|i| s.values.int8(i))
                                .collect::<Vec<_>>(),
                        );
                    }
                })
                .unwrap();
            assert_eq!(first, [0, 2560, 5120]);
            assert_eq!(rest, vec![vec![3, -5, -5, 100], vec![-30, 33]]);
            assert_eq!(p.class, 1);
            assert!((p.score - 1.0 / (1.0 + (-6.3f32).exp())).abs() < 1e-6);
        }
        // Saturation at the int16 ends: raw 13 is 30,720, raw 20 would be 48,640 → 32,767;
        // raw −20 → −53,760 → −32,768 (float and integer paths alike).
        for input in [Input::F32(&[20.0, -20.0, 13.0]), Input::I16(&[20, -20, 13])] {
            let mut scratch = vec![0u8; m.scratch_bytes()];
            let mut first = Vec::new();
            m.infer_traced(input, &mut scratch, &mut [0f32; 2], &mut |s: &Stage<'_>| {
                if s.index == 0 {
                    first = (0..3).filter_map(|i| s.values.int16(i)).collect();
                }
            })
            .unwrap();
            assert_eq!(first, [32_767, -32_768, 30_720]);
        }
    }

    #[test]
    #[cfg(feature = "f32")]
    fn f32_sigmoid_forward_pass_hand_worked() {
        let blob = tiny_f32().encode_to_vec().unwrap();
        let m = Model::parse(&blob).unwrap();
        assert_eq!(m.scratch_bytes(), 2 * 4 + 3 * 4);
        let mut scratch = vec![0u8; m.scratch_bytes()];
        let mut scores = [0f32; 1];
        // hidden = relu([-1, 1.6, 0.2]) = [0, 1.6, 0.2]; out = 3.2 - 0.2 - 0.5 = 2.5
        let p = m
            .infer(Input::F32(&[1.0, 2.0]), &mut scratch, &mut scores)
            .unwrap();
        assert_eq!(p.class, 1);
        assert!((scores[0] - 0.924_141_8).abs() < 1e-6);
        // hidden = relu([2, -0.9, -1.8]) = [2, 0, 0]; out = 1.5 → class 1, p = sigmoid(1.5)
        let p = m
            .infer(Input::I16(&[0, -2]), &mut scratch, &mut scores)
            .unwrap();
        assert!((p.score - 0.817_574_5).abs() < 1e-6);
        // out = -0.5 - 0.2·... : x = [0, 0] → hidden [0, 0.1, 0.2], out = 0.2 - 0.2 - 0.5 = -0.5
        let p = m
            .infer(Input::U8(&[0, 0]), &mut scratch, &mut scores)
            .unwrap();
        assert_eq!(p.class, 0);
        assert!((p.score - (1.0 - 0.377_540_7)).abs() < 1e-6);
        assert_eq!(m.labels().count(), 0);
    }

    #[test]
    fn run_errors_are_typed() {
        let blob = tiny_int8().encode_to_vec().unwrap();
        let m = Model::parse(&blob).unwrap();
        let mut scratch = [0u8; 7];
        let mut scores = [0f32; 2];
        assert_eq!(
            m.infer(Input::F32(&[1.0]), &mut scratch, &mut scores),
            Err(RunError::InputLength {
                expected: 3,
                got: 1
            })
        );
        assert_eq!(
            m.infer(Input::F32(&[1.0; 3]), &mut scratch[..6], &mut scores),
            Err(RunError::ScratchTooSmall { needed: 7, got: 6 })
        );
        assert_eq!(
            m.infer(Input::F32(&[1.0; 3]), &mut scratch, &mut scores[..1]),
            Err(RunError::ScoresTooSmall { needed: 2, got: 1 })
        );
        assert_eq!(
            m.infer(Input::F32(&[1.0, f32::NAN, 0.0]), &mut scratch, &mut scores),
            Err(RunError::NonFiniteInput { index: 1 })
        );
        assert_eq!(
            m.infer(
                Input::F32(&[f32::NEG_INFINITY, 0.0, 0.0]),
                &mut scratch,
                &mut scores
            ),
            Err(RunError::NonFiniteInput { index: 0 })
        );
        // A bigger scratch buffer than needed is fine; extreme integer inputs saturate.
        let mut big = [0u8; 64];
        assert!(m
            .infer(Input::I16(&[i16::MIN, i16::MAX, 0]), &mut big, &mut scores)
            .is_ok());
        if !cfg!(feature = "f32") {
            return;
        }
        let f = tiny_f32().encode_to_vec().unwrap();
        let mf = Model::parse(&f).unwrap();
        let mut a = vec![0u8; mf.scratch_bytes()];
        assert_eq!(
            mf.infer(Input::F32(&[3e38, 3e38]), &mut a, &mut scores),
            Err(RunError::NonFiniteOutput)
        );
    }

    #[test]
    fn every_single_byte_corruption_is_rejected() {
        let models = if cfg!(feature = "f32") {
            vec![tiny_int8(), tiny_f32()]
        } else {
            vec![tiny_int8()]
        };
        for owned in models {
            let blob = owned.encode_to_vec().unwrap();
            for i in 0..blob.len() {
                for mask in [0x01u8, 0x10, 0x80, 0xFF] {
                    let mut bad = blob.clone();
                    bad[i] ^= mask;
                    assert!(
                        Model::parse(&bad).is_err(),
                        "flip {mask:#04x} at byte {i} accepted"
                    );
                }
            }
            for n in 0..blob.len() {
                assert!(
                    Model::parse(&blob[..n]).is_err(),
                    "truncation to {n} accepted"
                );
            }
            let mut longer = blob.clone();
            longer.push(0);
            assert!(matches!(
                Model::parse(&longer),
                Err(FormatError::LengthMismatch { .. })
            ));
        }
    }

    #[test]
    fn layer_views_count_parameters() {
        let blob = tiny_int8().encode_to_vec().unwrap();
        let m = Model::parse(&blob).unwrap();
        let v: Vec<_> = m
            .layers()
            .map(|l| (l.parameters(), l.macs(), l.tensor_bytes()))
            .collect();
        // 3·4 + 4 = 16 and 4·2 + 2 = 10 (in·out + out)
        assert_eq!(
            v,
            vec![(16, 12, 12 + 16 + 16 + 16 + 4), (10, 8, 8 + 8 + 8 + 8 + 2)]
        );
        assert_eq!(m.blob_bytes(), blob.len());
    }
}
