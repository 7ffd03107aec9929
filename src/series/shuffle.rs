//! Iterated integrals of inputs, `iint(u_i1, …, u_ik)`: the symbols of the
//! Chen–Fliess series, their products and their values for concrete inputs.
//!
//! `iint(a1, …, ak)(t) = ∫_{0≤τk≤…≤τ1≤t} u_a1(τ1) … u_ak(τk)` (the first
//! argument at the latest time, DESIGN §3.3); the letter `1` is the input
//! constantly 1. Products of iterated integrals are linear combinations of
//! iterated integrals by the shuffle identity (Ree 1958, after Chen 1957;
//! from memory): `iint(w1) · iint(w2) = Σ_{w ∈ w1 ш w2} iint(w)`, which holds
//! in either order convention because the shuffle of reversed words is the
//! reversed shuffle. [`reduce_products`] rewrites every product that way,
//! so that an expression's normal form is canonical in the iterated
//! integrals too (`check` stays an exact decision with inputs).
//! [`evaluate`] replaces each iterated integral by its exact value for
//! concrete inputs (functions of `t` and parameters).
//!
//! Pure: builds on `core` only.

use std::collections::{BTreeMap, HashMap};

use crate::core::expr::Key;
use crate::core::{CoreError, CoreResult, Expr, Sym, Q};

/// The symbol name of `iint(a1, …, ak)`.
pub fn iint_name(word: &[String]) -> String {
    format!("iint({})", word.join(", "))
}

/// The letters of an iterated-integral symbol name, if it is one.
pub fn iint_word(name: &str) -> Option<Vec<String>> {
    let inner = name.strip_prefix("iint(")?.strip_suffix(')')?;
    Some(inner.split(", ").map(str::to_string).collect())
}

/// The shuffles of two words with their multiplicities.
pub fn shuffle(a: &[String], b: &[String]) -> BTreeMap<Vec<String>, u64> {
    let mut out = BTreeMap::new();
    if a.is_empty() || b.is_empty() {
        let w = if a.is_empty() { b } else { a };
        out.insert(w.to_vec(), 1);
        return out;
    }
    // a ш b = a1 (a' ш b) + b1 (a ш b').
    for (first, rest) in [(&a[0], shuffle(&a[1..], b)), (&b[0], shuffle(a, &b[1..]))] {
        for (w, n) in rest {
            let mut word = Vec::with_capacity(w.len() + 1);
            word.push(first.clone());
            word.extend(w);
            *out.entry(word).or_insert(0) += n;
        }
    }
    out
}

/// Longest word a product may shuffle into (a product of words of total
/// length n has up to n!/(n1!…) shuffles).
const MAX_PRODUCT_LETTERS: usize = 12;

/// Rewrites every product of iterated integrals (positive powers) as a sum
/// of iterated integrals by the shuffle identity.
pub fn reduce_products(e: &Expr) -> CoreResult<Expr> {
    let iints: HashMap<Sym, Vec<String>> = e
        .symbols()
        .into_iter()
        .filter_map(|s| iint_word(&s.name()).map(|w| (s, w)))
        .collect();
    if iints.is_empty() {
        return Ok(e.clone());
    }
    let is_product = |k: &Key| {
        k.mono
            .powers()
            .iter()
            .filter(|(s, x)| *x > 0 && iints.contains_key(s))
            .map(|(_, x)| *x as i64)
            .sum::<i64>()
            > 1
    };
    if !e.terms().iter().any(|(k, _)| is_product(k)) {
        return Ok(e.clone());
    }
    let mut out: Vec<(Key, Q)> = Vec::with_capacity(e.len());
    for (k, c) in e.terms() {
        crate::core::limits::poll()?;
        if !is_product(k) {
            out.push((k.clone(), c.clone()));
            continue;
        }
        let mut rest = k.clone();
        let mut words: BTreeMap<Vec<String>, u64> = BTreeMap::new();
        words.insert(Vec::new(), 1);
        let mut letters = 0usize;
        for (s, x) in k.mono.powers() {
            let Some(w) = iints.get(s).filter(|_| *x > 0) else {
                continue;
            };
            for _ in 0..*x {
                letters += w.len();
                if letters > MAX_PRODUCT_LETTERS {
                    return Err(CoreError::Refused {
                        reason: format!(
                            "a product of iterated integrals with more than \
                             {MAX_PRODUCT_LETTERS} letters in all is not expanded by shuffles"
                        ),
                    });
                }
                let mut next = BTreeMap::new();
                for (u, n) in &words {
                    for (v, m) in shuffle(u, w) {
                        *next.entry(v).or_insert(0) += n * m;
                    }
                }
                words = next;
            }
        }
        rest.mono
            .retain(|(s, x)| !(*x > 0 && iints.contains_key(s)));
        let base = Expr::term(rest, c.clone());
        let mut sum = Expr::zero();
        for (w, n) in words {
            sum = sum.add_scaled(&Expr::sym(Sym::new(&iint_name(&w))), &Q::int(n as i64));
        }
        out.extend(base.mul(&sum)?.terms().iter().cloned());
    }
    Ok(Expr::from_terms(out))
}

/// The iterated integrals of `inputs` (letter → function of `t`), memoised
/// by suffix: `J(ak) = ∫_0^t u_ak`, `J(aj … ak) = ∫_0^t u_aj · J(aj+1 … ak)`.
pub struct Values<'a> {
    inputs: &'a HashMap<String, Expr>,
    memo: HashMap<Vec<String>, Expr>,
}

impl<'a> Values<'a> {
    /// Values for the given inputs (the letter `1` is always known).
    pub fn new(inputs: &'a HashMap<String, Expr>) -> Values<'a> {
        Values {
            inputs,
            memo: HashMap::new(),
        }
    }

    /// Whether every letter of `word` has a value.
    pub fn knows(&self, word: &[String]) -> bool {
        word.iter().all(|a| a == "1" || self.inputs.contains_key(a))
    }

    /// `iint(word)(t)` exactly.
    pub fn value(&mut self, word: &[String]) -> CoreResult<Expr> {
        if word.is_empty() {
            return Ok(Expr::int(1));
        }
        if let Some(v) = self.memo.get(word) {
            return Ok(v.clone());
        }
        let inner = self.value(&word[1..])?;
        let u = match word[0].as_str() {
            "1" => Expr::int(1),
            a => self
                .inputs
                .get(a)
                .cloned()
                .ok_or_else(|| CoreError::Refused {
                    reason: format!("no value for the input `{a}`"),
                })?,
        };
        crate::core::limits::poll()?;
        let v = u.mul(&inner)?.integral_from_zero()?;
        self.memo.insert(word.to_vec(), v.clone());
        Ok(v)
    }
}

/// Replaces every iterated integral of the given inputs in `e` (and every
/// bare input symbol) by its value; other substitutions in `map` are made
/// at the same time. An iterated integral mixing given and other inputs is
/// refused, naming it.
pub fn evaluate(
    e: &Expr,
    inputs: &HashMap<String, Expr>,
    map: &HashMap<Sym, Expr>,
    states: &[Sym],
) -> CoreResult<Expr> {
    let mut values = Values::new(inputs);
    let mut full = map.clone();
    for s in e.symbols() {
        let name = s.name();
        if let Some(v) = inputs.get(&name) {
            full.insert(s, v.clone());
            continue;
        }
        let Some(word) = iint_word(&name) else {
            continue;
        };
        // Words of given inputs, and words of the constant input alone
        // (`iint(1, 1) = t^2/2`), take their values.
        let plugged = word.iter().any(|a| inputs.contains_key(a));
        if !plugged && !word.iter().all(|a| a == "1") {
            continue;
        }
        if !values.knows(&word) {
            let missing: Vec<&str> = word
                .iter()
                .filter(|a| *a != "1" && !inputs.contains_key(*a))
                .map(String::as_str)
                .collect();
            return Err(CoreError::Refused {
                reason: format!(
                    "`{name}` needs a value for {} too (plug every input of an iterated integral at once)",
                    missing.join(", ")
                ),
            });
        }
        let mut v = values.value(&word)?;
        // `t = …` in the same plug evaluates the integral at that time.
        if let Some(tv) = map.get(&Sym::T) {
            let at: HashMap<Sym, Expr> = [(Sym::T, tv.clone())].into_iter().collect();
            v = v.subst(&at, states)?;
        }
        full.insert(s, v);
    }
    e.subst(&full, states)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn w(s: &str) -> Vec<String> {
        s.split(' ').map(str::to_string).collect()
    }

    #[test]
    fn shuffles_of_short_words() {
        let ab = shuffle(&w("a"), &w("b"));
        assert_eq!(ab.len(), 2);
        assert_eq!(ab[&w("a b")], 1);
        assert_eq!(ab[&w("b a")], 1);
        let aa = shuffle(&w("a"), &w("a"));
        assert_eq!(aa[&w("a a")], 2);
        // |a b ш c d| = 4!/(2! 2!) = 6 words.
        let s = shuffle(&w("a b"), &w("c d"));
        assert_eq!(s.values().sum::<u64>(), 6);
        assert_eq!(s[&w("c a d b")], 1);
    }

    #[test]
    fn products_of_iterated_integrals_reduce_to_sums() {
        let a = Expr::sym(Sym::new("iint(u1)"));
        let b = Expr::sym(Sym::new("iint(u2)"));
        let r = reduce_products(&a.mul(&b).unwrap()).unwrap();
        let expect = Expr::sym(Sym::new("iint(u1, u2)")).add(&Expr::sym(Sym::new("iint(u2, u1)")));
        assert_eq!(r, expect);
        let sq = reduce_products(&a.pow(2).unwrap()).unwrap();
        assert_eq!(sq, Expr::sym(Sym::new("iint(u1, u1)")).scale(&Q::int(2)));
    }

    #[test]
    fn values_of_iterated_integrals_of_constants() {
        // iint(1, 1)(t) = t^2/2, iint(u, 1) with u = 1 also t^2/2.
        let inputs: HashMap<String, Expr> = [("u".to_string(), Expr::int(1))].into_iter().collect();
        let mut v = Values::new(&inputs);
        let t2 = Expr::sym(Sym::T)
            .pow(2)
            .unwrap()
            .scale(&Q::ratio(1, 2).unwrap());
        assert_eq!(v.value(&w("1 1")).unwrap(), t2);
        assert_eq!(v.value(&w("u 1")).unwrap(), t2);
    }
}
