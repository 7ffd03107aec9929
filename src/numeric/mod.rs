//! Floating point, at the edge of the exact core: compiled evaluation of
//! exact fields, adaptive Runge–Kutta integration, fits, eigenvalues and
//! SVG plots, and the numerical commands `simulate`, `compare`,
//! `stability`. The exact core never depends on this module.

pub mod compile;
pub mod eigen;
pub mod fit;
pub mod newton;
pub mod ode;
pub mod plot;
pub mod sweep;
pub mod validate;
