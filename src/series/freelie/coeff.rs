//! The coefficient ring of tensor series and Lie polynomials.

use std::fmt;
use std::num::NonZeroU64;

use num_bigint::BigInt;
use num_rational::BigRational;

/// The denominator 1 for [`Coeff::scale`].
pub(super) const ONE: NonZeroU64 = NonZeroU64::MIN;

/// The coefficient ring of tensor series and Lie polynomials.
///
/// Implementations must be exact: `is_zero` must recognise every value that
/// equals zero (the projection onto the Lyndon basis relies on it to decide
/// whether an element is a Lie element), and `==` must be equality of
/// values. Coefficients may be large, so the algorithms of this module keep
/// the number of calls to [`Coeff::mul`] low and use [`Coeff::scale`] for
/// integer and rational factors.
pub trait Coeff: Clone + PartialEq + fmt::Debug {
    /// The additive identity.
    fn zero() -> Self;
    /// The multiplicative identity.
    fn one() -> Self;
    /// Returns true if and only if the value is zero.
    fn is_zero(&self) -> bool;
    /// The sum `self + other`.
    fn add(&self, other: &Self) -> Self;
    /// The difference `self − other`.
    fn sub(&self, other: &Self) -> Self;
    /// The product `self · other`.
    fn mul(&self, other: &Self) -> Self;
    /// The negation `−self`.
    fn neg(&self) -> Self;
    /// The product of `self` with the rational number `num / den`.
    fn scale(&self, num: i64, den: NonZeroU64) -> Self;

    /// Asked by the long loops of this module with the number of terms of
    /// the series being built; `false` stops the computation with
    /// [`FreeLieError::Stopped`]. This is how a caller imposes a size
    /// budget or cancellation (the number of words grows exponentially
    /// with the weight). The default never stops.
    fn keep_going(_n_terms: usize) -> bool {
        true
    }
}

impl Coeff for BigRational {
    fn zero() -> Self {
        <BigRational as num_traits::Zero>::zero()
    }

    fn one() -> Self {
        <BigRational as num_traits::One>::one()
    }

    fn is_zero(&self) -> bool {
        num_traits::Zero::is_zero(self)
    }

    fn add(&self, other: &Self) -> Self {
        self + other
    }

    fn sub(&self, other: &Self) -> Self {
        self - other
    }

    fn mul(&self, other: &Self) -> Self {
        self * other
    }

    fn neg(&self) -> Self {
        -self
    }

    fn scale(&self, num: i64, den: NonZeroU64) -> Self {
        let factor = BigRational::new(BigInt::from(num), BigInt::from(den.get()));
        self * factor
    }
}
