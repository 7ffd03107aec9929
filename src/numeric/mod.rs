//! Floating point, at the edge of the exact core: compiled evaluation of
//! exact fields, adaptive Runge–Kutta integration, fits, eigenvalues and
//! SVG plots, and the numerical commands `simulate`, `compare`,
//! `stability`. The exact core never depends on this module.

pub mod compile;
pub(crate) mod eigen;
pub mod fit;
pub(crate) mod newton;
pub(crate) mod ode;
pub(crate) mod plot;
pub(crate) mod sweep;
pub(crate) mod validate;
