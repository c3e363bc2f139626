//! The class alone, without scores: argmax of the last layer's outputs, in integers on int8
//! models.
use crate::error::RunError;
use crate::model::{Input, Model};
use crate::output::argmax_i8;
use crate::wire::format::OutputKind;

impl Model<'_> {
    /// Runs one inference and returns only the predicted class index: the argmax of the last
    /// layer's outputs (ties resolve to the lowest index), or for a sigmoid output 1 when the
    /// output is above 0. `scratch` needs [`Model::scratch_bytes`] bytes, as for [`Model::infer`].
    ///
    /// On an int8 model with [`Input::I16`] or [`Input::U8`] features this is integer
    /// arithmetic from end to end ([`Model::parse`] is too), so a firmware for a core without
    /// an FPU that only calls these links no software float routine. It skips dequantisation,
    /// softmax and sigmoid, which keep the order of the outputs; so the class is the one
    /// [`Model::infer`] returns, unless rounding in `infer`'s float softmax or sigmoid makes two
    /// top scores equal, which needs outputs closer than about 2^-20 (an int8 output scale that
    /// small, or f32 outputs that close).
    ///
    /// # Errors
    ///
    /// The [`RunError`]s of [`Model::infer`] (without the score slice, there is no
    /// [`RunError::ScoresTooSmall`]).
    ///
    /// ```
    /// # fn demo(blob: &[u8], raw: &[i16]) -> Result<(), kinglet_runtime::Error> {
    /// use kinglet_runtime::{Input, Model};
    /// let model = Model::parse(blob)?;
    /// let mut scratch = [0u8; 256];
    /// let class = model.classify(Input::I16(raw), &mut scratch)?;
    /// # let _ = class;
    /// # Ok(())
    /// # }
    /// ```
    pub fn classify(&self, input: Input<'_>, scratch: &mut [u8]) -> Result<usize, RunError> {
        self.check_input_len(&input)?;
        let (quant, last) = self.forward(input, scratch, &mut |_| {})?;
        let n = self.output_len();
        let sigmoid = self.desc().output == OutputKind::Sigmoid;
        match quant {
            Some((_, zero_point)) => {
                let q = last.get(..n).unwrap_or(&[]);
                Ok(if sigmoid {
                    usize::from(q.first().is_some_and(|&v| v as i8 > zero_point))
                } else {
                    argmax_i8(q)
                })
            }
            // Without the `f32` feature, `parse` has refused f32 models.
            None if cfg!(feature = "f32") => {
                let mut best = (0, f32::NEG_INFINITY);
                for (i, v) in crate::le::f32s(last).take(n).enumerate() {
                    if !v.is_finite() {
                        return Err(RunError::NonFiniteOutput);
                    }
                    if v > best.1 || i == 0 {
                        best = (i, v);
                    }
                }
                Ok(if sigmoid {
                    usize::from(best.1 > 0.0)
                } else {
                    best.0
                })
            }
            None => Ok(0),
        }
    }
}

#[cfg(test)]
mod tests {
    use crate::{Input, Model};
    use kinglet_builder::sample::tiny_int8;
    use kinglet_builder::OwnedModel;

    /// `tiny_int8` with a one-output sigmoid head (the first row of its last layer).
    fn tiny_int8_sigmoid() -> OwnedModel {
        let mut m = tiny_int8();
        let last = &mut m.layers[1];
        last.outputs = 1;
        last.weights.truncate(4);
        last.bias.truncate(4);
        let q = last.quant.as_mut().unwrap();
        q.weight_scale.truncate(4);
        q.multiplier.truncate(4);
        q.shift.truncate(1);
        m.output = kinglet_builder::OutputKind::Sigmoid;
        m
    }

    /// classify's class is infer's on every input of a grid, through each input path.
    fn agrees(m: &Model<'_>, inputs: &[Input<'_>]) -> usize {
        let mut scratch = vec![0u8; m.scratch_bytes()];
        let mut scores = vec![0f32; m.output_len()];
        let mut ones = 0;
        for &input in inputs {
            let want = m.infer(input, &mut scratch, &mut scores).unwrap().class;
            assert_eq!(m.classify(input, &mut scratch).unwrap(), want, "{input:?}");
            ones += want;
        }
        ones
    }

    #[test]
    fn int8_classify_gives_infers_class() {
        // Every third point under Miri (scripts/miri.sh), where each inference is interpreted.
        let step = if cfg!(miri) { 3 } else { 1 };
        let grid: Vec<[i16; 3]> = (0..343)
            .step_by(step)
            .map(|k| [k % 7 - 3, k / 7 % 7 - 3, k / 49 - 3])
            .collect();
        let floats: Vec<[f32; 3]> = grid.iter().map(|g| g.map(|v| f32::from(v) * 0.7)).collect();
        let bytes: Vec<[u8; 3]> = grid.iter().map(|g| g.map(|v| (v + 3) as u8)).collect();
        for owned in [tiny_int8(), tiny_int8_sigmoid()] {
            let blob = owned.encode_to_vec().unwrap();
            let m = Model::parse(&blob).unwrap();
            let mut inputs: Vec<Input<'_>> = grid.iter().map(|g| Input::I16(g)).collect();
            inputs.extend(floats.iter().map(|f| Input::F32(f)));
            inputs.extend(bytes.iter().map(|b| Input::U8(b)));
            let ones = agrees(&m, &inputs);
            // Both classes occur, so the test sees both sides of the decision.
            assert!(
                ones > 0 && ones < inputs.len(),
                "{ones} of {}",
                inputs.len()
            );
        }
    }

    #[test]
    #[cfg(feature = "f32")]
    fn f32_sigmoid_classify_gives_infers_class() {
        let blob = kinglet_builder::sample::tiny_f32().encode_to_vec().unwrap();
        let m = Model::parse(&blob).unwrap();
        let grid: Vec<[f32; 2]> = (0..400)
            .map(|k| [(k % 20) as f32 * 0.3 - 3.0, (k / 20) as f32 * 0.3 - 3.0])
            .collect();
        let inputs: Vec<Input<'_>> = grid.iter().map(|g| Input::F32(g)).collect();
        let ones = agrees(&m, &inputs);
        assert!(ones > 0 && ones < inputs.len());
    }
}
