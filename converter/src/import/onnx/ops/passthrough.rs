//! Ops that inference removes: `Dropout` (an identity outside training) and `Cast` to float.
//! `Identity` needs no handler.

use super::super::attr;
use super::super::error::OnnxImportError;
use super::super::node::Node;
use super::super::normalise::Walk;
use super::super::proto::data_type;
use super::optional_constant;

/// The graph walk's handlers of these ops.
impl<'g> Walk<'g, '_> {
    pub(in super::super) fn dropout(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        if let Some(t) = optional_constant(self.g, &n, 2, "training_mode")? {
            if t.ints().is_ok_and(|v| v.iter().any(|&x| x != 0)) {
                return Err(n.err(
                    "training_mode is true; supported: inference (training_mode false or omitted)",
                ));
            }
        }
        Ok(())
    }

    /// `Cast` to float on the data path is a no-op; any other cast is refused.
    pub(in super::super) fn cast(&mut self, n: Node<'g>) -> Result<(), OnnxImportError> {
        let to = attr::int(n.proto, "to").map_err(|e| n.err(e))?;
        if to != Some(i64::from(data_type::FLOAT)) {
            let to = to.map_or("nothing".to_string(), |t| {
                data_type::name(t as i32).to_string()
            });
            return Err(n.err(format!(
                "Cast to {to} on the data path; supported: Cast to FLOAT (removed as a no-op)"
            )));
        }
        Ok(())
    }
}
