//! Sums of products: [`SumBuilder`] collects products of expressions in one
//! map (packed when they fit, see [`crate::core::packed`]) and builds the normal
//! form once; [`TimePart`] is the part of an expression with one time
//! factor; `Expr::mul`, `pow`, `recip` and `div` are built on them.
//!
//! Rooms: [`builder`], [`part`], [`product`].

mod builder;
mod part;
mod product;
#[cfg(test)]
mod tests;

pub use builder::{Keep, SumBuilder};
pub use part::{TimePart, TimeParts};
