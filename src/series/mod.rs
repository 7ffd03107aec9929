//! Series on fields: time integrals, the chronological exponential and
//! logarithm, the free Lie algebra and Carleman sections.
//!
//! Pure: builds on `core` only.

pub mod chrono;
pub mod freelie;
pub mod lie_fields;
pub mod shuffle;
pub mod taylor;
