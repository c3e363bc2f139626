//! The weight precision of each layer chosen for you (`kinglet pack --weights auto`): the
//! smallest blob whose int8/int4 weights stay within an accuracy bound on held-out rows.
//!
//! Every candidate is a full pack ([`crate::pack::pack_int8_with`] with one
//! [`WeightBits`] per layer) judged by the full `vet` statistics on the held-out rows
//! ([`crate::vet::vet`]: the accuracy drop with its 95% interval, agreement), against the same
//! criteria `vet --max-drop/--gate/--min-agreement` applies. The candidates, in order:
//!
//! 1. all int8 and all int4 (the two ends, always in the table);
//! 2. each layer alone in int4 (its *sensitivity*: what that layer's int4 weights cost in
//!    agreement and accuracy, and the bytes they save);
//! 3. [`Method::Exhaustive`] for a model of at most [`EXHAUSTIVE_LAYERS`] layers: every
//!    other assignment (at most 16 candidates in all, so the pick is the best one there is);
//!    else [`Method::Greedy`]: layers taken into int4 one at a time, the least sensitive per
//!    byte saved first, each step kept only if the bound still holds.
//!
//! The pick is the smallest evaluated candidate that meets the bound (and fits the flash
//! budget, when one is given). The runtime runs one precision of activations per model, so a
//! float layer inside an int8 model is not a candidate.
pub mod candidate;
pub mod overlap;
pub mod render;
pub mod request;
pub mod strategy;

pub use candidate::{Candidate, Role};
pub use strategy::{search, Method, Search, SearchInput, EXHAUSTIVE_LAYERS};

use crate::quantise::weight_bits::WeightBits;
