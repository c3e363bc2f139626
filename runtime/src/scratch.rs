//! Scratch planning: two ping-pong buffers hold every activation tensor.
//!
//! Tensor 0 is the (scaled, quantised) input; tensor k is the output of layer k. Even tensors
//! live in the first buffer, odd ones in the second, so a layer always reads one buffer and
//! writes the other. The scratch buffer is the two buffers back to back: `ping + pong` bytes, where
//! `ping` is the widest even tensor and `pong` the widest odd one, times the element size
//! (1 byte for int8, 4 for f32; an int16 input tensor, format version 7, 2). There is no other
//! working memory.

/// Sizes of the two activation buffers, in bytes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct ScratchPlan {
    /// Bytes of the buffer holding tensors 0, 2, 4, ...
    pub ping: usize,
    /// Bytes of the buffer holding tensors 1, 3, 5, ...
    pub pong: usize,
}

impl ScratchPlan {
    /// Plans the buffers for an input of `input_len` elements followed by layers of the given
    /// output widths, with `element_bytes` per element.
    pub fn new(
        input_len: usize,
        outputs: impl Iterator<Item = usize>,
        element_bytes: usize,
    ) -> Self {
        let mut plan = ScratchPlan {
            ping: input_len.saturating_mul(element_bytes),
            pong: 0,
        };
        for (k, width) in outputs.enumerate() {
            let bytes = width.saturating_mul(element_bytes);
            if k.is_multiple_of(2) {
                plan.pong = plan.pong.max(bytes);
            } else {
                plan.ping = plan.ping.max(bytes);
            }
        }
        plan
    }

    /// The plan with tensor 0 (`input_len` elements) of type `width` when the input is int16
    /// (2 bytes each, `FORMAT.md` §4); an int8 or f32 input leaves the plan as it is.
    pub fn with_input_width(
        mut self,
        input_len: usize,
        width: crate::wire::format::InputWidth,
    ) -> Self {
        if width == crate::wire::format::InputWidth::I16 {
            self.ping = self.ping.max(input_len.saturating_mul(2));
        }
        self
    }

    /// Total scratch bytes.
    pub const fn total(&self) -> usize {
        self.ping.saturating_add(self.pong)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ping_pong_sizes_hand_worked() {
        // 784 inputs → 100 → 10, int8: even tensors {784, 10}, odd {100}: 884 bytes.
        let p = ScratchPlan::new(784, [100, 10].into_iter(), 1);
        assert_eq!(
            p,
            ScratchPlan {
                ping: 784,
                pong: 100
            }
        );
        assert_eq!(p.total(), 884);
        // Same shapes in f32: four bytes per element.
        assert_eq!(
            ScratchPlan::new(784, [100, 10].into_iter(), 4).total(),
            3536
        );
        // 64 → 64 → 32 → 10: even {64, 32}, odd {64, 10}.
        assert_eq!(
            ScratchPlan::new(64, [64, 32, 10].into_iter(), 1).total(),
            128
        );
        // The same with an int16 input: tensor 0 takes 128 bytes, the rest as before.
        use crate::wire::format::InputWidth;
        let wide =
            ScratchPlan::new(64, [64, 32, 10].into_iter(), 1).with_input_width(64, InputWidth::I16);
        assert_eq!(
            wide,
            ScratchPlan {
                ping: 128,
                pong: 64
            }
        );
        // 784 → 100 → 10: 1,568 + 100.
        let wide =
            ScratchPlan::new(784, [100, 10].into_iter(), 1).with_input_width(784, InputWidth::I16);
        assert_eq!(wide.total(), 1668);
        // An int8 width changes nothing.
        assert_eq!(
            ScratchPlan::new(64, [64, 32, 10].into_iter(), 1)
                .with_input_width(64, InputWidth::I8)
                .total(),
            128
        );
    }
}
