//! The activations and output functions between and after the dense layers: `Relu` (a
//! layer's activation), `Softmax` and `Sigmoid` (the model's output function).

use crate::graph::{Activation, OutputKind};

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::{Stage, Walk};

/// The graph walk's handlers of these ops.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn relu(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        match (self.stage, self.layers.last_mut()) {
            (Stage::Open, Some(l)) => {
                l.activation = Activation::Relu;
                self.stage = Stage::Closed;
                Ok(())
            }
            _ => Err(n.err(format!(
                "Relu {}; supported: Relu right after a dense layer (its activation)",
                self.stage_text()
            ))),
        }
    }

    pub(in super::super) fn softmax(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        if !matches!(self.stage, Stage::Open | Stage::Closed) {
            return Err(n.err(format!(
                "Softmax {}; supported: Softmax after the last dense layer",
                self.stage_text()
            )));
        }
        // The default axis is 1 before opset 13 and -1 from 13 on; on 2-D data both are the
        // class axis.
        let axis = attr::int_or(n.proto, "axis", -1).map_err(|e| n.err(e))?;
        if axis != 1 && axis != -1 {
            return Err(n.err(format!(
                "Softmax over axis {axis}; supported: axis 1 or -1 on [N, classes]"
            )));
        }
        self.output = OutputKind::Softmax;
        self.stage = Stage::Output;
        Ok(())
    }

    pub(in super::super) fn sigmoid(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let outputs = match (self.stage, self.layers.last()) {
            (Stage::Open | Stage::Closed, Some(l)) => l.outputs,
            _ => {
                return Err(n.err(format!(
                    "Sigmoid {}; supported: Sigmoid on the single output of the last dense layer",
                    self.stage_text()
                )))
            }
        };
        if outputs != 1 {
            return Err(n.err(format!(
                "Sigmoid on {outputs} outputs; supported: Sigmoid on a single output (a binary classifier)"
            )));
        }
        self.output = OutputKind::Sigmoid;
        self.stage = Stage::Output;
        Ok(())
    }
}
