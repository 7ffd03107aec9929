//! The Baker–Campbell–Hausdorff series `log(e^X e^Y)` in the Lyndon basis,
//! computed from the coefficients of Lyndon words only: no truncated tensor
//! algebra, no expanded standard bracketings.
//!
//! Two published facts make this possible.
//! - The coefficient of a word in `log(e^X e^Y)` has a closed form
//!   (Goldberg, Duke Math. J. 23 (1956) 13–21): for `w = X^{r1} Y^{r2} X^{r3} …`
//!   it is `Σ_k (−1)^(k+1)/k · Σ Π 1/(p! q!)` over the ways of cutting `w`
//!   into `k` nonempty blocks `X^p Y^q`, and it depends only on the multiset
//!   of run lengths `r_i` for words starting with `X` (from memory; the
//!   tests check it against the tensor route). It is computed once per
//!   partition of the degree, by a dynamic programme over the block ends.
//! - For Lyndon words `u`, `w` of the same multidegree the coefficient
//!   `⟨P_u, w⟩` of `w` in the standard bracketing `P_u` is 0 unless `u ≤ w`
//!   and 1 if `u = w` (Reutenauer, Free Lie Algebras, 1993, Thm 5.1, from
//!   memory). So the Lyndon coordinates `c` of a Lie element with word
//!   coefficients `h` solve the unitriangular system
//!   `c_w = h_w − Σ_{u < w} c_u ⟨P_u, w⟩` (Casas & Murua, J. Math. Phys. 50
//!   (2009) 033513, §3). The entries `⟨P_u, w⟩` are evaluated on the spot,
//!   recursively along `P_u = [P_{u1}, P_{u2}]` on factors of `w`, memoised
//!   per word, with factors whose letters or order rule them out cut at
//!   once. A Lyndon word `u = X^k v` has `P_u = ad_X^k P_v`, and on words
//!   ending in `Y` (every Lyndon word of length at least 2) only the term
//!   `X^k P_v` counts: `⟨P_u, w⟩ = ⟨P_v, w[k..]⟩` when `w` starts with `X^k`,
//!   0 otherwise.
//!
//! Arithmetic is integer: the degree-`n` coefficients are numerators over
//! `n! · lcm(1..n)`, in `i128`, and a degree whose numerators leave `i128`
//! is computed again with big integers. Results never depend on which
//! arithmetic ran.
//!
//! Owns: the word encoding (bits, first letter highest), the Goldberg
//! table, the triangular solve. Must not know anything of ordex beyond
//! the words and errors of [`super`].

use std::collections::HashMap;

use rustc_hash::FxHashMap;
use std::sync::atomic::{AtomicUsize, Ordering};

use num_bigint::BigInt;
use num_integer::Integer;
use num_rational::BigRational;
use num_traits::{CheckedAdd, CheckedMul, CheckedSub, One, Zero};

use super::error::FreeLieError;
use super::lyndon_basis::{chronological_log, LiePoly};
use super::tensor::Tensor;
use super::words::{Alphabet, Letter, Word};

/// The largest degree the word encoding holds (bits of a `u64`, with room).
pub const MAX_DEGREE: u32 = 60;

/// A word over {X = 0, Y = 1}: letter `i` of a word of length `len` is bit
/// `len − 1 − i`, so for words of one length numeric order is
/// lexicographic order.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
struct Bits {
    len: u8,
    bits: u64,
}

impl Bits {
    fn key(self) -> u64 {
        (u64::from(self.len) << 58) | self.bits
    }

    fn ones(self) -> u32 {
        self.bits.count_ones()
    }

    fn letters(self) -> Word {
        (0..self.len)
            .map(|i| ((self.bits >> (self.len - 1 - i)) & 1) as Letter)
            .collect()
    }

    /// The number of leading X's.
    fn leading_x(self) -> u8 {
        if self.bits == 0 {
            return self.len;
        }
        (self.len as u32 - (64 - self.bits.leading_zeros())) as u8
    }
}

fn mask(len: u8) -> u64 {
    if len >= 64 {
        u64::MAX
    } else {
        (1u64 << len) - 1
    }
}

/// The Lyndon words on two letters up to a length, by length then
/// lexicographically, with their standard factorisations.
struct Lyndon {
    words: Vec<Bits>,
    /// Standard factorisation `w = uv`: indices of `u` and `v` (unused for
    /// letters).
    left: Vec<u32>,
    right: Vec<u32>,
    /// `first[n]..first[n + 1]` are the words of length `n`.
    first: Vec<usize>,
}

impl Lyndon {
    /// Generates the words in lexicographic order (Duval's algorithm:
    /// Duval, Theoret. Comput. Sci. 60 (1988) 255–283, from memory) and
    /// sorts them by length; `keep_going` is asked with the count so far.
    fn new(max_len: u8, keep_going: &mut dyn FnMut(usize) -> bool) -> Result<Self, FreeLieError> {
        let mut words = Vec::with_capacity(witt_total(max_len));
        let mut w: Vec<u8> = vec![0];
        loop {
            let mut bits = 0u64;
            for &l in &w {
                bits = (bits << 1) | u64::from(l);
            }
            words.push(Bits {
                len: w.len() as u8,
                bits,
            });
            if words.len() % 65536 == 0 && !keep_going(words.len()) {
                return Err(FreeLieError::Stopped {
                    n_terms: words.len(),
                });
            }
            let m = w.len();
            while w.len() < usize::from(max_len) {
                let l = w[w.len() - m];
                w.push(l);
            }
            while w.last() == Some(&1) {
                w.pop();
            }
            match w.last_mut() {
                Some(last) => *last = 1,
                None => break,
            }
        }
        words.sort_by_key(|b| b.len); // stable: lexicographic within a length
        let mut first = vec![0usize; usize::from(max_len) + 2];
        for (i, b) in words.iter().enumerate().rev() {
            first[usize::from(b.len)] = i;
        }
        first[usize::from(max_len) + 1] = words.len();
        for n in (1..=usize::from(max_len)).rev() {
            if first[n] == 0 && n > 1 {
                first[n] = first[n + 1];
            }
        }
        let index: HashMap<u64, u32> = words
            .iter()
            .enumerate()
            .map(|(i, b)| (b.key(), i as u32))
            .collect();
        let mut left = vec![0u32; words.len()];
        let mut right = vec![0u32; words.len()];
        for (i, b) in words.iter().enumerate() {
            if b.len < 2 {
                continue;
            }
            // The longest proper Lyndon suffix.
            for s in 1..b.len {
                let suffix = Bits {
                    len: b.len - s,
                    bits: b.bits & mask(b.len - s),
                };
                if let Some(&r) = index.get(&suffix.key()) {
                    let prefix = Bits {
                        len: s,
                        bits: b.bits >> (b.len - s),
                    };
                    left[i] = index.get(&prefix.key()).copied().unwrap_or(0);
                    right[i] = r;
                    break;
                }
            }
        }
        Ok(Lyndon {
            words,
            left,
            right,
            first,
        })
    }
}

/// The number of Lyndon words on two letters of length 1..=n (Witt's
/// formula, from memory: (1/m) Σ_{d | m} μ(d) 2^(m/d) of length m).
pub fn witt_total(n: u8) -> usize {
    (1..=u32::from(n))
        .map(|m| {
            let sum: i128 = (1..=m)
                .filter(|d| m % d == 0)
                .map(|d| i128::from(mobius(d)) << (m / d).min(120))
                .sum();
            usize::try_from(sum / i128::from(m)).unwrap_or(usize::MAX)
        })
        .fold(0usize, usize::saturating_add)
}

fn mobius(n: u32) -> i32 {
    let (mut n, mut res, mut p) = (n, 1, 2);
    while p * p <= n {
        if n % p == 0 {
            n /= p;
            if n % p == 0 {
                return 0;
            }
            res = -res;
        }
        p += 1;
    }
    if n > 1 {
        -res
    } else {
        res
    }
}

/// Integers the solve runs on: `i128` first, big integers when it
/// overflows.
trait Int: Clone + Zero + One + CheckedAdd + CheckedSub + CheckedMul + From<i64> + From<i128> {}
impl Int for i128 {}
impl Int for BigInt {}

fn binomial(n: u64, k: u64) -> u128 {
    let k = k.min(n - k);
    (0..k).fold(1u128, |acc, i| acc * u128::from(n - i) / u128::from(i + 1))
}

fn lcm_upto(n: u64) -> BigInt {
    (1..=n).fold(BigInt::one(), |acc, k| acc.lcm(&BigInt::from(k)))
}

fn factorial(n: u64) -> BigInt {
    (1..=n).fold(BigInt::one(), |acc, k| acc * BigInt::from(k))
}

/// `D · coeff(w, log(e^X e^Y))` with `D = n! · lcm(1..n)`, for the word
/// with the given runs (alternating letters, the first run of X's).
/// `None` on overflow.
fn goldberg<T: Int>(runs: &[u8], lcm: &T, div: &dyn Fn(&T, usize) -> T) -> Option<T> {
    let n: usize = runs.iter().map(|r| usize::from(*r)).sum();
    // letter[i] of the word, and for each position the end of the X-run
    // it is in (or the position itself for Y) and the end of the Y-run
    // that follows.
    let mut is_x = Vec::with_capacity(n);
    for (r, &len) in runs.iter().enumerate() {
        for _ in 0..len {
            is_x.push(r % 2 == 0);
        }
    }
    // run_end[i]: first position after the run containing i.
    let mut run_end = vec![n; n];
    for i in (0..n).rev() {
        run_end[i] = if i + 1 < n && is_x[i + 1] == is_x[i] {
            run_end[i + 1]
        } else {
            i + 1
        };
    }
    // f[k][i] = (n − i)! Σ over cuts of w[i..] into k blocks of Π 1/(p! q!).
    let mut f: Vec<Vec<T>> = vec![vec![T::zero(); n + 1]; n + 1];
    f[0][n] = T::one();
    for i in (0..n).rev() {
        // The block ends j: within the run of i; if i is an X, also within
        // the following Y run.
        let e1 = run_end[i];
        let e2 = if is_x[i] && e1 < n { run_end[e1] } else { e1 };
        for j in i + 1..=e2 {
            let (p, q) = if is_x[i] {
                ((j.min(e1) - i) as u64, j.saturating_sub(e1) as u64)
            } else {
                (0, (j - i) as u64)
            };
            let rest = (n - j) as u64;
            let total = p + q + rest;
            let multi = binomial(total, p) * binomial(total - p, q);
            let multi = T::from(i128::try_from(multi).ok()?);
            for k in 1..=n - i {
                let prev = &f[k - 1][j];
                if prev.is_zero() {
                    continue;
                }
                let add = multi.checked_mul(prev)?;
                f[k][i] = f[k][i].checked_add(&add)?;
            }
        }
    }
    let mut sum = T::zero();
    for (k, row) in f.iter().enumerate().skip(1) {
        if row[0].is_zero() {
            continue;
        }
        let part = div(lcm, k).checked_mul(&row[0])?;
        sum = if k % 2 == 1 {
            sum.checked_add(&part)?
        } else {
            sum.checked_sub(&part)?
        };
    }
    Some(sum)
}

/// The data of one degree's solve that does not depend on the arithmetic.
struct Degree<'a> {
    lyn: &'a Lyndon,
    n: u8,
    threads: usize,
    stop: &'a (dyn Fn() -> bool + Sync),
}

/// The entries `⟨P_v, w[l..l+|v|]⟩` one class needs, as a straight-line
/// programme over nodes (v, l): nodes `a·n + l` are the letters, every
/// other node `[P_a, P_b]` at `l` reads four earlier nodes,
/// `(a, l)·(b, l+|a|) − (b, l)·(a, l+|b|)`. Evaluated for one word at a
/// time in one forward sweep.
struct Programme {
    n: u8,
    ids: FxHashMap<u64, u32>,
    steps: Vec<[u32; 4]>,
}

impl Programme {
    fn new(n: u8) -> Self {
        Programme {
            n,
            ids: FxHashMap::default(),
            steps: Vec::new(),
        }
    }

    fn first_step(&self) -> usize {
        2 * usize::from(self.n)
    }

    /// The node of `P_v` at offset `at`, added with what it reads.
    fn node(&mut self, lyn: &Lyndon, v: u32, at: u8) -> u32 {
        let vb = lyn.words[v as usize];
        if vb.len == 1 {
            return (vb.bits as u32) * u32::from(self.n) + u32::from(at);
        }
        let key = (u64::from(v) << 8) | u64::from(at);
        if let Some(&id) = self.ids.get(&key) {
            return id;
        }
        let (a, b) = (lyn.left[v as usize], lyn.right[v as usize]);
        let (la, lb) = (lyn.words[a as usize].len, lyn.words[b as usize].len);
        let a1 = self.node(lyn, a, at);
        let b2 = self.node(lyn, b, at + la);
        let b1 = self.node(lyn, b, at);
        let a2 = self.node(lyn, a, at + lb);
        let id = (self.first_step() + self.steps.len()) as u32;
        self.steps.push([a1, b2, b1, a2]);
        self.ids.insert(key, id);
        id
    }

    /// Evaluates the nodes below `stop` for the word `w`.
    fn run(&self, w: Bits, stop: usize, values: &mut Vec<i64>) {
        let n = usize::from(self.n);
        values.clear();
        values.resize(self.first_step(), 0);
        for l in 0..n {
            let bit = ((w.bits >> (n - 1 - l)) & 1) as usize;
            values[bit * n + l] = 1;
        }
        let count = stop.saturating_sub(self.first_step()).min(self.steps.len());
        for step in &self.steps[..count] {
            // Entries are bounded by 2^(n-1) (P_v is a sum of 2^(|v|-1)
            // words with signs), so these products cannot overflow. A step
            // reads only nodes before it.
            let v = values[step[0] as usize] * values[step[1] as usize]
                - values[step[2] as usize] * values[step[3] as usize];
            values.push(v);
        }
    }
}

impl Degree<'_> {
    /// The numerators `D · c_w` of the words of length `n`, in the order of
    /// [`Lyndon::words`]; `None` if `T` overflows. The classes (words with
    /// the same letters) are independent: up to `threads` workers take
    /// them, largest first; the result does not depend on who took which.
    fn solve<T: Int + Send + Sync>(&self, h: &[T]) -> Result<Option<Vec<T>>, FreeLieError> {
        let lo = self.lyn.first[usize::from(self.n)];
        let hi = self.lyn.first[usize::from(self.n) + 1];
        // Classes by the number of Y's; within one, lexicographic order.
        let mut classes: Vec<Vec<usize>> = vec![Vec::new(); usize::from(self.n) + 1];
        for i in lo..hi {
            classes[self.lyn.words[i].ones() as usize].push(i);
        }
        classes.retain(|class| !class.is_empty());
        classes.sort_by_key(|class| std::cmp::Reverse(class.len()));
        let next = AtomicUsize::new(0);
        let work = || -> Result<Vec<(usize, Option<Vec<T>>)>, FreeLieError> {
            let mut out = Vec::new();
            loop {
                let k = next.fetch_add(1, Ordering::Relaxed);
                let Some(class) = classes.get(k) else {
                    return Ok(out);
                };
                out.push((k, self.solve_class(class, &h[class[0] - lo..])?));
            }
        };
        // Small degrees are not worth a thread.
        let threads = if hi - lo < 2000 {
            1
        } else {
            self.threads.max(1)
        };
        let parts: Vec<Result<Vec<(usize, Option<Vec<T>>)>, FreeLieError>> = if threads == 1 {
            vec![work()]
        } else {
            std::thread::scope(|scope| {
                let handles: Vec<_> = (0..threads).map(|_| scope.spawn(&work)).collect();
                handles
                    .into_iter()
                    .map(|handle| {
                        handle
                            .join()
                            .unwrap_or(Err(FreeLieError::Stopped { n_terms: 0 }))
                    })
                    .collect()
            })
        };
        let mut c: Vec<T> = vec![T::zero(); hi - lo];
        for part in parts {
            for (k, solved) in part? {
                let Some(solved) = solved else {
                    return Ok(None);
                };
                for (&i, value) in classes[k].iter().zip(solved) {
                    c[i - lo] = value;
                }
            }
        }
        Ok(Some(c))
    }

    /// The numerators of one class (its words in lexicographic order; `h`
    /// starts at its first word, the others following in the order of
    /// [`Lyndon::words`]).
    fn solve_class<T: Int>(
        &self,
        class: &[usize],
        h: &[T],
    ) -> Result<Option<Vec<T>>, FreeLieError> {
        let first = class[0];
        let mut c: Vec<T> = Vec::with_capacity(class.len());
        let mut prog = Programme::new(self.n);
        let mut values = Vec::new();
        // (root node, leading X's k, position in the class) of the solved
        // words with a nonzero coefficient.
        let mut done: Vec<(u32, u8, usize)> = Vec::new();
        let mut stop = 0usize;
        for (pos, &i) in class.iter().enumerate() {
            if pos % 256 == 255 && (self.stop)() {
                return Err(FreeLieError::Stopped { n_terms: pos });
            }
            let w = self.lyn.words[i];
            let lead = w.leading_x();
            let mut acc = h[i - first].clone();
            if !done.is_empty() {
                prog.run(w, stop, &mut values);
                for &(root, k, j) in &done {
                    if k > lead {
                        continue;
                    }
                    let t = values[root as usize];
                    if t == 0 {
                        continue;
                    }
                    let Some(prod) = c[j].checked_mul(&T::from(t)) else {
                        return Ok(None);
                    };
                    let Some(next) = acc.checked_sub(&prod) else {
                        return Ok(None);
                    };
                    acc = next;
                }
            }
            if !acc.is_zero() {
                let (mut v, mut k) = (i as u32, 0u8);
                while self.lyn.words[v as usize].len > 1
                    && self.lyn.words[self.lyn.left[v as usize] as usize]
                        == (Bits { len: 1, bits: 0 })
                {
                    v = self.lyn.right[v as usize];
                    k += 1;
                }
                let root = prog.node(self.lyn, v, k);
                stop = stop.max(root as usize + 1);
                done.push((root, k, pos));
            }
            c.push(acc);
        }
        Ok(Some(c))
    }
}

/// The Baker–Campbell–Hausdorff series `log(e^X e^Y)` up to degree
/// `max_degree` in the Lyndon basis (X = letter 0 < Y = letter 1, standard
/// bracketing): the nonzero coefficients, by degree and then
/// lexicographically.
///
/// `keep_going` is asked with the dimension of the free Lie algebra up to
/// that degree before anything is allocated, then once per degree with
/// that degree's dimension; `false` stops the computation
/// ([`FreeLieError::Stopped`]). `stop` is polled by the workers (up to
/// `threads` of them; the output never depends on the number).
pub fn bch(
    max_degree: u32,
    threads: usize,
    keep_going: &mut dyn FnMut(usize) -> bool,
    stop: &(dyn Fn() -> bool + Sync),
) -> Result<Vec<(Word, BigRational)>, FreeLieError> {
    let max_len = max_degree.min(MAX_DEGREE) as u8;
    if max_len == 0 {
        return Ok(Vec::new());
    }
    let dim = witt_total(max_len);
    if !keep_going(dim) {
        return Err(FreeLieError::Stopped { n_terms: dim });
    }
    let lyn = Lyndon::new(max_len, keep_going)?;
    let mut out = Vec::new();
    out.push((vec![0], BigRational::one()));
    out.push((vec![1], BigRational::one()));
    let mut table: HashMap<Vec<u8>, Option<i128>> = HashMap::new();
    let mut big_table: HashMap<Vec<u8>, BigInt> = HashMap::new();
    for n in 2..=max_len {
        let lo = lyn.first[usize::from(n)];
        let hi = lyn.first[usize::from(n) + 1];
        let denom = factorial(u64::from(n)) * lcm_upto(u64::from(n));
        let lcm_big = lcm_upto(u64::from(n));
        if !keep_going(hi - lo) {
            return Err(FreeLieError::Stopped { n_terms: hi - lo });
        }
        let degree = Degree {
            lyn: &lyn,
            n,
            threads,
            stop,
        };
        let parts: Vec<Vec<u8>> = (lo..hi).map(|i| partition(lyn.words[i])).collect();
        let small: Option<Vec<i128>> = i128::try_from(&lcm_big).ok().and_then(|lcm| {
            parts
                .iter()
                .map(|p| {
                    *table
                        .entry(p.clone())
                        .or_insert_with(|| goldberg_small(p, lcm))
                })
                .collect()
        });
        let solved = match &small {
            Some(h) => degree.solve::<i128>(h)?,
            None => None,
        };
        let numerators: Vec<BigInt> = match solved {
            Some(c) => c.into_iter().map(BigInt::from).collect(),
            None => {
                let h: Vec<BigInt> = parts
                    .iter()
                    .map(|p| {
                        big_table
                            .entry(p.clone())
                            .or_insert_with(|| goldberg_big(p, &lcm_big))
                            .clone()
                    })
                    .collect();
                degree.solve::<BigInt>(&h)?.unwrap_or_default()
            }
        };
        for (i, num) in (lo..hi).zip(numerators) {
            if !num.is_zero() {
                out.push((lyn.words[i].letters(), BigRational::new(num, denom.clone())));
            }
        }
    }
    Ok(out)
}

/// The run lengths of a word starting with X, sorted decreasingly: the
/// representative word of its Goldberg coefficient.
fn partition(w: Bits) -> Vec<u8> {
    let letters = w.letters();
    let mut runs: Vec<u8> = Vec::new();
    let mut prev = None;
    for l in letters {
        if Some(l) == prev {
            if let Some(last) = runs.last_mut() {
                *last += 1;
            }
        } else {
            runs.push(1);
        }
        prev = Some(l);
    }
    runs.sort_unstable_by(|a, b| b.cmp(a));
    runs
}

fn goldberg_small(runs: &[u8], lcm: i128) -> Option<i128> {
    goldberg(runs, &lcm, &|lcm, k| lcm / k as i128)
}

fn goldberg_big(runs: &[u8], lcm: &BigInt) -> BigInt {
    goldberg(runs, lcm, &|lcm, k| lcm / BigInt::from(k)).unwrap_or_default()
}

/// The Baker–Campbell–Hausdorff series `log(e^X e^Y)` up to degree
/// `max_degree`, on the letters X = 0 and Y = 1, in the Lyndon basis, by
/// the logarithm in the truncated tensor algebra and the projection
/// (cost about 4^N): kept as the tests' independent route;
/// [`bch`] is the fast one.
///
/// Fails only on an internal inconsistency of the coefficient type (a
/// [`super::Coeff`] whose `is_zero` misses zeros).
pub fn bch_by_tensor<C: super::Coeff>(max_degree: u32) -> Result<LiePoly<C>, FreeLieError> {
    let alphabet = Alphabet::uniform(2);
    let exp_x = Tensor::<C>::letter(0).exp_truncated(&alphabet, max_degree)?;
    let exp_y = Tensor::<C>::letter(1).exp_truncated(&alphabet, max_degree)?;
    let product = exp_x.mul_truncated(&exp_y, &alphabet, max_degree)?;
    chronological_log(&product, &alphabet, max_degree)
}

#[cfg(test)]
#[path = "bch_tests.rs"]
mod tests;
