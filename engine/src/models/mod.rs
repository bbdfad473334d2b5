//! Computations. Each model file opens with its method, assumptions, degenerate cases and
//! references; models take plain numbers and never look up names.

pub mod assumptions;
pub mod compare;
pub mod deal;
pub mod describe;
pub mod factorial;
pub mod linear;
pub mod oneway;
pub mod permutation;
pub mod power;
pub mod repeated;
pub mod sums;
pub mod welch;
