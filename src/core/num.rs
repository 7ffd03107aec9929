//! Exact rational numbers with a cheap path for small values.
//!
//! `Q` keeps numerator and denominator in machine words while they fit and
//! promotes to arbitrary precision (`num-rational` over `num-bigint`) on
//! overflow. Results are always reduced and demoted back to the small form
//! when they fit again, so equal numbers have one representation and derive
//! `Eq`/`Hash` safely. This module knows nothing about expressions.

use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};
use std::borrow::Cow;
use std::cmp::Ordering;
use std::fmt;

use super::limits;

/// An exact rational number. Its representation is private: every value
/// is built reduced by this module, so equal numbers are equal as data.
#[derive(Clone, PartialEq, Eq, Hash)]
pub struct Q(Repr);

/// The representation of [`Q`].
///
/// Invariant: `Small(n, d)` has `d > 0` and `gcd(n, d) == 1`; `Big` is used only
/// when the value does not fit `Small`.
#[derive(Clone, PartialEq, Eq, Hash)]
enum Repr {
    /// Numerator and (positive) denominator in machine words.
    Small(i64, i64),
    /// Arbitrary precision, only for values that do not fit `Small`.
    Big(Box<BigRational>),
}

/// Binary gcd on machine words.
fn gcd_u64(mut a: u64, mut b: u64) -> u64 {
    if a == 0 {
        return b;
    }
    if b == 0 {
        return a;
    }
    let shift = (a | b).trailing_zeros();
    a >>= a.trailing_zeros();
    loop {
        b >>= b.trailing_zeros();
        if a > b {
            std::mem::swap(&mut a, &mut b);
        }
        b -= a;
        if b == 0 {
            return a << shift;
        }
    }
}

/// Greatest common divisor of the magnitudes, by Lehmer's algorithm: the
/// quotients of Euclid's algorithm are found from the leading 64 bits in
/// machine words, and the big numbers are combined once per run of
/// quotients. The binary algorithm
/// of `num-integer` takes a step per bit (even for gcd(x, 1)), which made
/// sums of rationals with long denominators take seconds.
fn gcd_big(x: &BigInt, y: &BigInt) -> BigInt {
    // The work (see `limits::note_work`): measured at about 5 µs for two
    // 128-bit numbers and 22 µs for two 1024-bit ones (a unit is about a
    // term product, 0.3 µs); it follows the smaller operand.
    limits::note_work(1 + x.bits().min(y.bits()) / 12);
    let (mut a, mut b) = (x.magnitude().clone(), y.magnitude().clone());
    if a < b {
        std::mem::swap(&mut a, &mut b);
    }
    loop {
        // Here a >= b.
        if let Some(small) = b.to_u64() {
            if small == 0 {
                return BigInt::from(a);
            }
            let rest = (&a % small).to_u64().unwrap_or(0);
            return BigInt::from(gcd_u128(u128::from(small), u128::from(rest)));
        }
        let shift = a.bits().saturating_sub(63);
        let top = |n: &num_bigint::BigUint| (n >> shift).to_i128().unwrap_or(0);
        let (mut ah, mut bh) = (top(&a), top(&b));
        let (mut ca, mut cb, mut cc, mut cd) = (1i128, 0i128, 0i128, 1i128);
        while bh + cc != 0 && bh + cd != 0 {
            let q = (ah + ca) / (bh + cc);
            if q != (ah + cb) / (bh + cd) {
                break;
            }
            (ca, cc) = (cc, ca - q * cc);
            (cb, cd) = (cd, cb - q * cd);
            (ah, bh) = (bh, ah - q * bh);
        }
        if cb == 0 {
            // No quotient was certain: one step on the big numbers.
            let rest = &a % &b;
            a = b;
            b = rest;
        } else {
            let (ba, bb) = (BigInt::from(a), BigInt::from(b));
            let next_a = &ba * ca + &bb * cb;
            let next_b = &ba * cc + &bb * cd;
            a = next_a.magnitude().clone();
            b = next_b.magnitude().clone();
            if a < b {
                std::mem::swap(&mut a, &mut b);
            }
        }
    }
}

/// The work of one sum or product of rationals, in units of about the time
/// of a term product: word products cost one unit per 256 products of
/// 64-bit words (the gcds of fractions count their own work, in `gcd_big`).
fn big_work(a: &Q, b: &Q) -> u64 {
    1 + (a.bits() / 64).saturating_mul(b.bits() / 64) / 256
}

fn gcd_u128(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        let r = a % b;
        a = b;
        b = r;
    }
    a
}

impl Q {
    /// Zero.
    pub const ZERO: Q = Q(Repr::Small(0, 1));
    /// One.
    pub const ONE: Q = Q(Repr::Small(1, 1));
    /// One half.
    pub const HALF: Q = Q(Repr::Small(1, 2));

    /// `n / d` from a numerator and a positive denominator that are already
    /// coprime (the small form as it is stored; see [`Q::ratio`] for any
    /// pair).
    pub fn from_small(n: i64, d: i64) -> Q {
        debug_assert!(d > 0 && gcd_u64(n.unsigned_abs(), d.unsigned_abs()) == 1);
        Q(Repr::Small(n, d))
    }

    /// Numerator and positive denominator when they fit machine words (the
    /// fast paths' view; `None` for the big form).
    #[inline]
    pub fn as_small(&self) -> Option<(i64, i64)> {
        match &self.0 {
            Repr::Small(n, d) => Some((*n, *d)),
            Repr::Big(_) => None,
        }
    }

    /// True when numerator and denominator fit machine words.
    #[inline]
    pub fn is_small(&self) -> bool {
        matches!(self.0, Repr::Small(..))
    }

    /// The integer `n`.
    pub fn int(n: i64) -> Q {
        Q(Repr::Small(n, 1))
    }

    /// `n / d`; returns `None` when `d == 0`.
    pub fn ratio(n: i64, d: i64) -> Option<Q> {
        if d == 0 {
            return None;
        }
        Some(Q::from_i128(n as i128, d as i128))
    }

    /// `n/d` reduced (`d` nonzero).
    pub fn from_i128(n: i128, d: i128) -> Q {
        debug_assert!(d != 0);
        let (mut n, mut d) = if d < 0 { (-n, -d) } else { (n, d) };
        if let (Ok(a), Ok(b)) = (u64::try_from(n.unsigned_abs()), u64::try_from(d)) {
            // Both fit a word: the binary gcd of words.
            let g = gcd_u64(a, b) as i128;
            if g > 1 {
                n /= g;
                d /= g;
            }
            if let (Ok(n), Ok(d)) = (i64::try_from(n), i64::try_from(d)) {
                return Q(Repr::Small(n, d));
            }
        }
        let g = gcd_u128(n.unsigned_abs(), d.unsigned_abs());
        if g > 1 {
            n /= g as i128;
            d /= g as i128;
        }
        match (i64::try_from(n), i64::try_from(d)) {
            (Ok(n), Ok(d)) => Q(Repr::Small(n, d)),
            _ => Q(Repr::Big(Box::new(BigRational::new_raw(
                BigInt::from(n),
                BigInt::from(d),
            )))),
        }
    }

    /// Builds from a big rational, demoting to the small form when it fits.
    pub fn from_big(r: BigRational) -> Q {
        // An integer needs no gcd (which costs time quadratic in its size).
        let r = if r.denom().is_one() {
            r
        } else if r.denom().is_negative() || !r.numer().gcd(r.denom()).is_one() {
            r.reduced()
        } else {
            r
        };
        match (r.numer().to_i64(), r.denom().to_i64()) {
            (Some(n), Some(d)) => Q(Repr::Small(n, d)),
            _ => Q(Repr::Big(Box::new(r))),
        }
    }

    /// The value as a big integer when it is an integer (borrowed when it
    /// is already big): integer arithmetic skips the gcd of rationals.
    fn as_big_integer(&self) -> Option<Cow<'_, BigInt>> {
        match &self.0 {
            Repr::Small(n, 1) => Some(Cow::Owned(BigInt::from(*n))),
            Repr::Big(b) if b.denom().is_one() => Some(Cow::Borrowed(b.numer())),
            _ => None,
        }
    }

    /// The integer `n`, small when it fits.
    fn from_integer(n: BigInt) -> Q {
        match n.to_i64() {
            Some(v) => Q(Repr::Small(v, 1)),
            None => Q(Repr::Big(Box::new(BigRational::from_integer(n)))),
        }
    }

    /// Converts to a big rational (allocates).
    pub fn to_big(&self) -> BigRational {
        match &self.0 {
            Repr::Small(n, d) => BigRational::new_raw(BigInt::from(*n), BigInt::from(*d)),
            Repr::Big(b) => (**b).clone(),
        }
    }

    /// True if and only if the value is zero.
    pub fn is_zero(&self) -> bool {
        matches!(self.0, Repr::Small(0, _))
    }

    /// True if and only if the value is one.
    pub fn is_one(&self) -> bool {
        matches!(self.0, Repr::Small(1, 1))
    }

    /// True if and only if the value is an integer.
    pub fn is_integer(&self) -> bool {
        match &self.0 {
            Repr::Small(_, d) => *d == 1,
            Repr::Big(b) => b.is_integer(),
        }
    }

    /// True if and only if the value is negative.
    pub fn is_negative(&self) -> bool {
        match &self.0 {
            Repr::Small(n, _) => *n < 0,
            Repr::Big(b) => b.is_negative(),
        }
    }

    /// The value as an `i64` when it is an integer that fits.
    pub fn to_i64(&self) -> Option<i64> {
        match &self.0 {
            Repr::Small(n, 1) => Some(*n),
            _ => None,
        }
    }

    /// Nearest double (may be infinite for huge values).
    pub fn to_f64(&self) -> f64 {
        match &self.0 {
            Repr::Small(n, d) => *n as f64 / *d as f64,
            Repr::Big(b) => {
                // Scale to keep precision for ratios of huge integers.
                let n = b.numer();
                let d = b.denom();
                let shift = n.bits().max(d.bits()).saturating_sub(1000) as usize;
                let n = (n >> shift).to_f64().unwrap_or(f64::NAN);
                let d = (d >> shift).to_f64().unwrap_or(f64::NAN);
                n / d
            }
        }
    }

    /// Numerator as a big integer.
    pub fn numer(&self) -> BigInt {
        match &self.0 {
            Repr::Small(n, _) => BigInt::from(*n),
            Repr::Big(b) => b.numer().clone(),
        }
    }

    /// Denominator as a big integer (positive).
    pub fn denom(&self) -> BigInt {
        match &self.0 {
            Repr::Small(_, d) => BigInt::from(*d),
            Repr::Big(b) => b.denom().clone(),
        }
    }

    /// Number of bits of the larger of numerator and denominator: the size
    /// that the integer-size limit counts.
    pub fn bits(&self) -> u64 {
        match &self.0 {
            Repr::Small(n, d) => {
                (64 - n.unsigned_abs().leading_zeros()).max(64 - d.leading_zeros()) as u64
            }
            Repr::Big(b) => b.numer().bits().max(b.denom().bits()),
        }
    }

    /// Sum.
    pub fn add(&self, other: &Q) -> Q {
        match (&self.0, &other.0) {
            (Repr::Small(a, b), Repr::Small(c, d)) => {
                if *b == 1 && *d == 1 {
                    if let Some(s) = a.checked_add(*c) {
                        return Q(Repr::Small(s, 1));
                    }
                }
                if b == d {
                    if let Some(s) = a.checked_add(*c) {
                        let g = gcd_u64(s.unsigned_abs(), b.unsigned_abs()) as i64;
                        return if s == 0 {
                            Q::ZERO
                        } else {
                            Q(Repr::Small(s / g, b / g))
                        };
                    }
                }
                // a/b + c/d with g = gcd(b, d): (a*(d/g) + c*(b/g)) / (b*(d/g)),
                // then only gcd(numerator, g) can still cancel.
                let g = gcd_u64(b.unsigned_abs(), d.unsigned_abs()) as i64;
                let (bg, dg) = (b / g, d / g);
                if let (Some(x), Some(y), Some(den)) =
                    (a.checked_mul(dg), c.checked_mul(bg), b.checked_mul(dg))
                {
                    if let Some(num) = x.checked_add(y) {
                        if num == 0 {
                            return Q::ZERO;
                        }
                        let g2 = gcd_u64(num.unsigned_abs(), g.unsigned_abs()) as i64;
                        return Q(Repr::Small(num / g2, den / g2));
                    }
                }
                let (a, b, c, d) = (*a as i128, *b as i128, *c as i128, *d as i128);
                match (a * d).checked_add(c * b) {
                    Some(n) => Q::from_i128(n, b * d),
                    None => self.add_big(other),
                }
            }
            _ => self.add_big(other),
        }
    }

    /// The sum when a value is big: integers directly; else, with
    /// g = gcd(b, d), `(a*(d/g) + c*(b/g)) / (b*(d/g))` where only
    /// gcd(numerator, g) can cancel. Denominators are usually small, so this
    /// avoids the gcd of the full numerator and denominator, which costs
    /// time quadratic in their size.
    fn add_big(&self, other: &Q) -> Q {
        limits::note_work(big_work(self, other));
        if let (Some(x), Some(y)) = (self.as_big_integer(), other.as_big_integer()) {
            return Q::from_integer(&*x + &*y);
        }
        let (a, b) = (self.numer(), self.denom());
        let (c, d) = (other.numer(), other.denom());
        let g = gcd_big(&b, &d);
        if g.is_one() {
            return Q::from_reduced(&a * &d + &c * &b, &b * &d);
        }
        let (bg, dg) = (&b / &g, &d / &g);
        let num = &a * &dg + &c * &bg;
        let g2 = gcd_big(&num, &g);
        if g2.is_one() {
            Q::from_reduced(num, &b * &dg)
        } else {
            Q::from_reduced(&num / &g2, &b * &dg / &g2)
        }
    }

    /// The product when a value is big: integers directly; else cross
    /// cancellation `(a/gcd(a,d))·(c/gcd(c,b)) / ((b/gcd(c,b))·(d/gcd(a,d)))`,
    /// already in lowest terms (cheap when one factor is small).
    fn mul_big(&self, other: &Q) -> Q {
        if other.is_one() {
            return self.clone();
        }
        if self.is_one() {
            return other.clone();
        }
        limits::note_work(big_work(self, other));
        if let (Some(x), Some(y)) = (self.as_big_integer(), other.as_big_integer()) {
            return Q::from_integer(&*x * &*y);
        }
        let (a, b) = (self.numer(), self.denom());
        let (c, d) = (other.numer(), other.denom());
        let g1 = gcd_big(&a, &d);
        let g2 = gcd_big(&c, &b);
        let divide = |x: BigInt, g: &BigInt| if g.is_one() { x } else { x / g };
        let num = divide(a, &g1) * divide(c, &g2);
        let den = divide(b, &g2) * divide(d, &g1);
        Q::from_reduced(num, den)
    }

    /// `n / d` already in lowest terms with `d > 0`; small when it fits.
    fn from_reduced(n: BigInt, d: BigInt) -> Q {
        if n.is_zero() {
            return Q::ZERO;
        }
        match (n.to_i64(), d.to_i64()) {
            (Some(n), Some(d)) => Q(Repr::Small(n, d)),
            _ => Q(Repr::Big(Box::new(BigRational::new_raw(n, d)))),
        }
    }

    /// Difference.
    pub fn sub(&self, other: &Q) -> Q {
        self.add(&other.neg())
    }

    /// Half of the value (the factor of every product-to-sum identity),
    /// without a gcd in machine words.
    pub fn half(&self) -> Q {
        match &self.0 {
            // gcd(n, d) = 1: an even n means an odd d, an odd n stays prime to 2d.
            Repr::Small(n, d) if n % 2 == 0 => Q(Repr::Small(n / 2, *d)),
            Repr::Small(n, d) => match d.checked_mul(2) {
                Some(d2) => Q(Repr::Small(*n, d2)),
                None => self.mul(&Q::HALF),
            },
            Repr::Big(_) => self.mul(&Q::HALF),
        }
    }

    /// Negation.
    pub fn neg(&self) -> Q {
        match &self.0 {
            Repr::Small(n, d) => match n.checked_neg() {
                Some(n) => Q(Repr::Small(n, *d)),
                None => Q::from_big(-self.to_big()),
            },
            Repr::Big(b) => Q::from_big(-(**b).clone()),
        }
    }

    /// Product.
    pub fn mul(&self, other: &Q) -> Q {
        match (&self.0, &other.0) {
            (Repr::Small(a, b), Repr::Small(c, d)) => {
                if *b == 1 && *d == 1 {
                    if let Some(p) = a.checked_mul(*c) {
                        return Q(Repr::Small(p, 1));
                    }
                }
                // Cross-cancel first: the result is then already reduced.
                let g1 = if *d == 1 {
                    1
                } else {
                    gcd_u64(a.unsigned_abs(), d.unsigned_abs()) as i64
                };
                let g2 = if *b == 1 {
                    1
                } else {
                    gcd_u64(c.unsigned_abs(), b.unsigned_abs()) as i64
                };
                if g1 > 0 && g2 > 0 {
                    if let (Some(n), Some(m)) =
                        ((a / g1).checked_mul(c / g2), (b / g2).checked_mul(d / g1))
                    {
                        return if n == 0 {
                            Q::ZERO
                        } else {
                            Q(Repr::Small(n, m))
                        };
                    }
                }
                Q::from_i128(*a as i128 * *c as i128, *b as i128 * *d as i128)
            }
            _ => self.mul_big(other),
        }
    }

    /// Quotient; `None` when dividing by zero.
    pub fn div(&self, other: &Q) -> Option<Q> {
        if other.is_zero() {
            return None;
        }
        Some(self.mul(&other.recip()?))
    }

    /// Reciprocal; `None` for zero.
    pub fn recip(&self) -> Option<Q> {
        match &self.0 {
            Repr::Small(0, _) => None,
            Repr::Small(n, d) => Some(Q::from_i128(*d as i128, *n as i128)),
            Repr::Big(b) => Some(Q::from_big(b.recip())),
        }
    }

    /// Integer power (negative exponents invert); `None` for 0^negative.
    pub fn pow(&self, e: i64) -> Option<Q> {
        let base = if e < 0 { self.recip()? } else { self.clone() };
        let mut e = e.unsigned_abs();
        if matches!(base.0, Repr::Big(_)) || e > 32 {
            // Numerator and denominator separately: powers of coprime
            // numbers stay coprime, so no gcd is needed.
            let e = usize::try_from(e).ok()?;
            let num = num_traits::pow(base.numer(), e);
            let den = num_traits::pow(base.denom(), e);
            return Some(Q::from_reduced(num, den));
        }
        let mut acc = Q::ONE;
        let mut sq = base;
        while e > 0 {
            if e & 1 == 1 {
                acc = acc.mul(&sq);
            }
            e >>= 1;
            if e > 0 {
                sq = sq.mul(&sq);
            }
        }
        Some(acc)
    }

    /// Absolute value.
    pub fn abs(&self) -> Q {
        if self.is_negative() {
            self.neg()
        } else {
            self.clone()
        }
    }

    /// Greatest common divisor of two rationals (gcd of numerators over lcm
    /// of denominators); both must be nonzero for a meaningful result.
    pub fn gcd(&self, other: &Q) -> Q {
        let n = self.numer().gcd(&other.numer());
        let d = self.denom().lcm(&other.denom());
        Q::from_big(BigRational::new(n, d))
    }

    /// Floor as a rational integer.
    pub fn floor(&self) -> Q {
        match &self.0 {
            Repr::Small(n, d) => Q(Repr::Small(n.div_euclid(*d), 1)),
            Repr::Big(b) => Q::from_big(b.floor()),
        }
    }

    /// Parses decimal or scientific notation exactly: `3`, `0.25`, `.5`,
    /// `1e-4`, `2.5E+3`. Returns `None` on malformed text or an exponent
    /// whose magnitude exceeds `max_exp`.
    pub fn parse_decimal(text: &str, max_exp: u64) -> Option<Q> {
        let (mant, exp) = match text.find(['e', 'E']) {
            Some(i) => (&text[..i], text[i + 1..].parse::<i64>().ok()?),
            None => (text, 0),
        };
        if exp.unsigned_abs() > max_exp {
            return None;
        }
        let (int_part, frac_part) = match mant.find('.') {
            Some(i) => (&mant[..i], &mant[i + 1..]),
            None => (mant, ""),
        };
        if int_part.is_empty() && frac_part.is_empty() {
            return None;
        }
        if !int_part
            .bytes()
            .chain(frac_part.bytes())
            .all(|b| b.is_ascii_digit())
        {
            return None;
        }
        let digits = format!("{int_part}{frac_part}");
        let n: BigInt = digits.parse().ok()?;
        let scale = exp - frac_part.len() as i64;
        let ten = BigInt::from(10);
        let r = if scale >= 0 {
            BigRational::from_integer(n * num_traits::pow(ten, scale as usize))
        } else {
            BigRational::new(n, num_traits::pow(ten, scale.unsigned_abs() as usize))
        };
        Some(Q::from_big(r))
    }
}

impl Ord for Q {
    fn cmp(&self, other: &Q) -> Ordering {
        match (&self.0, &other.0) {
            (Repr::Small(a, b), Repr::Small(c, d)) => {
                (*a as i128 * *d as i128).cmp(&(*c as i128 * *b as i128))
            }
            _ => self.to_big().cmp(&other.to_big()),
        }
    }
}

impl PartialOrd for Q {
    fn partial_cmp(&self, other: &Q) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl Default for Q {
    fn default() -> Q {
        Q::ZERO
    }
}

impl From<i64> for Q {
    fn from(n: i64) -> Q {
        Q::int(n)
    }
}

impl fmt::Display for Q {
    /// `n` or `n/d`, in the input syntax.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.0 {
            Repr::Small(n, 1) => write!(f, "{n}"),
            Repr::Small(n, d) => write!(f, "{n}/{d}"),
            Repr::Big(b) if b.is_integer() => write!(f, "{}", b.numer()),
            Repr::Big(b) => write!(f, "{}/{}", b.numer(), b.denom()),
        }
    }
}

impl fmt::Debug for Q {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{self}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn q(n: i64, d: i64) -> Q {
        Q::ratio(n, d).unwrap()
    }

    #[test]
    fn reduces_and_normalises_sign() {
        assert_eq!(q(2, -4), q(-1, 2));
        assert_eq!(q(0, -7), Q::ZERO);
        assert_eq!(format!("{}", q(6, 4)), "3/2");
    }

    #[test]
    fn overflow_promotes_and_demotes() {
        let big = Q::int(i64::MAX).add(&Q::ONE);
        assert!(matches!(big.0, Repr::Big(_)));
        assert_eq!(big.sub(&Q::ONE), Q::int(i64::MAX));
        assert!(matches!(big.sub(&Q::ONE).0, Repr::Small(..)));
        let m = Q::int(i64::MIN);
        assert_eq!(m.neg().neg(), m);
        assert_eq!(
            format!("{}", Q::int(2).pow(100).unwrap()),
            "1267650600228229401496703205376"
        );
    }

    #[test]
    fn decimals_are_exact() {
        assert_eq!(Q::parse_decimal("0.1", 100), Some(q(1, 10)));
        assert_eq!(Q::parse_decimal("1e-4", 100), Some(q(1, 10000)));
        assert_eq!(Q::parse_decimal("2.5E+3", 100), Some(Q::int(2500)));
        assert_eq!(Q::parse_decimal(".5", 100), Some(q(1, 2)));
        assert_eq!(Q::parse_decimal("1e999999", 1000), None);
        assert_eq!(Q::parse_decimal("1.2.3", 100), None);
    }

    fn arb_q() -> impl Strategy<Value = Q> {
        prop_oneof![
            (-50i64..50, 1i64..20).prop_map(|(n, d)| q(n, d)),
            (any::<i64>(), 1i64..i64::MAX).prop_map(|(n, d)| q(n, d)),
        ]
    }

    proptest! {
        #[test]
        fn agrees_with_big_rationals(a in arb_q(), b in arb_q()) {
            prop_assert_eq!(a.add(&b).to_big(), a.to_big() + b.to_big());
            prop_assert_eq!(a.mul(&b).to_big(), a.to_big() * b.to_big());
            prop_assert_eq!(a.sub(&b).to_big(), a.to_big() - b.to_big());
            prop_assert_eq!(a.cmp(&b), a.to_big().cmp(&b.to_big()));
            if !b.is_zero() {
                prop_assert_eq!(a.div(&b).unwrap().to_big(), a.to_big() / b.to_big());
            }
            // Canonical: a value that fits is always small.
            let s = a.add(&b);
            prop_assert_eq!(Q::from_big(s.to_big()), s);
        }

        /// The big paths (Lehmer's gcd, cross cancellation, powers without
        /// gcd) against `num-rational`, on numbers of many words.
        #[test]
        fn big_paths_agree_with_big_rationals(
            n1 in prop::collection::vec(any::<u64>(), 1..6),
            d1 in prop::collection::vec(any::<u64>(), 1..6),
            n2 in prop::collection::vec(any::<u64>(), 1..6),
            d2 in prop::collection::vec(any::<u64>(), 1..6),
            common in prop::collection::vec(1u64..u64::MAX, 0..3),
            e in 0i64..40,
            negative in any::<bool>(),
        ) {
            let big = |words: &[u64], extra: &[u64]| {
                let mut n = BigInt::from(1u8);
                for w in words.iter().chain(extra) {
                    n = n * BigInt::from(*w) + BigInt::from(1u8);
                }
                n
            };
            let q1 = BigRational::new(big(&n1, &common), big(&d1, &common));
            let q1 = if negative { -q1 } else { q1 };
            let q2 = BigRational::new(big(&n2, &common), big(&d2, &[]));
            let (a, b) = (Q::from_big(q1.clone()), Q::from_big(q2.clone()));
            prop_assert_eq!(a.add(&b).to_big(), &q1 + &q2);
            prop_assert_eq!(a.sub(&b).to_big(), &q1 - &q2);
            prop_assert_eq!(a.mul(&b).to_big(), &q1 * &q2);
            prop_assert_eq!(a.div(&b).map(|r| r.to_big()), Some(&q1 / &q2));
            prop_assert_eq!(a.pow(e).map(|r| r.to_big()), Some(num_traits::pow(q1.clone(), e as usize)));
            let (x, y) = (big(&n1, &common), big(&n2, &common));
            prop_assert_eq!(gcd_big(&x, &y), x.gcd(&y));
            prop_assert_eq!(gcd_big(&x, &(&x * &y)), x.gcd(&(&x * &y)));
        }
    }

    #[test]
    fn gcd_of_hard_cases() {
        // Consecutive Fibonacci numbers (the most Euclid steps), powers of
        // two, equal numbers, one and zero.
        let (mut f0, mut f1) = (BigInt::from(0u8), BigInt::from(1u8));
        for _ in 0..2000 {
            let f2 = &f0 + &f1;
            f0 = f1;
            f1 = f2;
        }
        assert_eq!(gcd_big(&f1, &f0), BigInt::from(1u8));
        let two = |k: u32| num_traits::pow(BigInt::from(2u8), k as usize);
        assert_eq!(gcd_big(&two(300), &two(200)), two(200));
        assert_eq!(
            gcd_big(&(two(300) * 3u8), &(two(250) * 9u8)),
            two(250) * 3u8
        );
        assert_eq!(gcd_big(&f1, &f1), f1.clone());
        assert_eq!(gcd_big(&f1, &BigInt::from(1u8)), BigInt::from(1u8));
        assert_eq!(gcd_big(&f1, &BigInt::from(0u8)), f1.clone());
        assert_eq!(
            gcd_big(&-f1.clone(), &(f0.clone() * -7)),
            f1.gcd(&(&f0 * 7))
        );
    }
}
