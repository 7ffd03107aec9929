//! Lie polynomials in the Lyndon basis evaluated on concrete vector fields:
//! `Σ c_w P_w` with the letters standing for given fields.
//!
//! The plan is fixed before any bracket is taken. Every standard bracketing
//! `P_w = [P_u, P_v]` that some term needs as a factor is computed once, by
//! increasing length, as a prepared field (its first partial derivatives
//! kept for the brackets it enters), and dropped after its last use. A term
//! whose bracketing is not needed elsewhere is never formed alone: the
//! terms of one length are grouped by their left factor `u`, and the whole
//! length is one sum `Σ_u [P_u, Σ_v c_uv P_v]` with one accumulator per
//! component (brackets are linear in the right argument). The sums of the
//! lengths are added pairwise, in a balanced tree.
//!
//! Owns: the evaluation plan (which bracketings are kept, when they are
//! dropped). Builds on [`crate::core::field`] for the brackets and on
//! [`super::freelie`] for the words.

use std::collections::{BTreeMap, HashMap};

use super::freelie::{standard_factorization, LiePoly, Word};
use crate::core::field::{bracket_sum, bracket_sum_onto_prepared, BracketStart, Prepared};
use crate::core::sum::{Keep, SumBuilder};
use crate::core::{limits, CoreError, CoreResult, Expr, Field, Sym, Q};

/// A standard bracketing the plan keeps: a letter or `[P_left, P_right]`.
#[derive(Clone, Copy, Debug)]
enum Node {
    Letter(usize),
    Pair(usize, usize),
}

/// What one term of the polynomial adds.
#[derive(Clone, Debug)]
enum Term {
    /// `c · P_w` for a kept bracketing `w`.
    Kept(usize, Expr),
    /// `c · [P_u, P_v]` for kept `u`, `v`.
    Pair(usize, usize, Expr),
}

/// The kept bracketings (children before parents), their lengths and
/// numbers of uses, and the terms by length.
struct Plan {
    nodes: Vec<Node>,
    lens: Vec<usize>,
    uses: Vec<usize>,
    terms: BTreeMap<usize, Vec<Term>>,
}

impl Plan {
    fn new(poly: &LiePoly<Expr>, n_letters: usize) -> CoreResult<Plan> {
        let mut plan = Plan {
            nodes: Vec::new(),
            lens: Vec::new(),
            uses: Vec::new(),
            terms: BTreeMap::new(),
        };
        let mut ids: HashMap<Word, usize> = HashMap::new();
        // The factors of every term first, so that a term which is itself a
        // factor elsewhere is known to be kept.
        for (word, _) in poly.terms() {
            if word.len() > 1 {
                let (u, v) = factors(word)?;
                plan.keep(&u, n_letters, &mut ids)?;
                plan.keep(&v, n_letters, &mut ids)?;
            } else {
                plan.keep(word, n_letters, &mut ids)?;
            }
        }
        for (word, coeff) in poly.terms() {
            let term = match ids.get(word) {
                Some(&id) => {
                    plan.uses[id] += 1;
                    Term::Kept(id, coeff.clone())
                }
                None => {
                    let (u, v) = factors(word)?;
                    let (u, v) = (ids[&u], ids[&v]);
                    plan.uses[u] += 1;
                    plan.uses[v] += 1;
                    Term::Pair(u, v, coeff.clone())
                }
            };
            plan.terms.entry(word.len()).or_default().push(term);
        }
        Ok(plan)
    }

    /// The node of `word`, added (with its factors) if new.
    fn keep(
        &mut self,
        word: &[u16],
        n_letters: usize,
        ids: &mut HashMap<Word, usize>,
    ) -> CoreResult<usize> {
        if let Some(&id) = ids.get(word) {
            return Ok(id);
        }
        let node = match word {
            [letter] if usize::from(*letter) < n_letters => Node::Letter(usize::from(*letter)),
            [letter] => {
                return Err(CoreError::Refused {
                    reason: format!("letter {letter} has no field"),
                })
            }
            _ => {
                let (u, v) = factors(word)?;
                let u = self.keep(&u, n_letters, ids)?;
                let v = self.keep(&v, n_letters, ids)?;
                self.uses[u] += 1;
                self.uses[v] += 1;
                Node::Pair(u, v)
            }
        };
        let id = self.nodes.len();
        self.nodes.push(node);
        self.lens.push(word.len());
        self.uses.push(0);
        ids.insert(word.to_vec(), id);
        Ok(id)
    }
}

fn factors(word: &[u16]) -> CoreResult<(Word, Word)> {
    standard_factorization(word).ok_or_else(|| CoreError::Refused {
        reason: format!("free Lie algebra: word {word:?} is not a Lyndon word"),
    })
}

/// The kept bracketings computed so far, each dropped after its last use.
struct Values<'a> {
    values: Vec<Option<Prepared>>,
    uses: Vec<usize>,
    states: &'a [Sym],
}

impl Values<'_> {
    fn get(&self, id: usize) -> CoreResult<&Prepared> {
        self.values[id].as_ref().ok_or_else(|| CoreError::Refused {
            reason: "free Lie algebra: a bracketing was dropped before its last use".to_string(),
        })
    }

    fn used(&mut self, id: usize) {
        self.uses[id] = self.uses[id].saturating_sub(1);
        if self.uses[id] == 0 {
            self.values[id] = None;
        }
    }

    /// The field `Σ q_i P_i` of kept bracketings.
    fn combination(&self, parts: &[(usize, Q)]) -> CoreResult<Field> {
        let n = self.states.len();
        let mut out = Vec::with_capacity(n);
        for i in 0..n {
            let mut acc = SumBuilder::new();
            for (id, q) in parts {
                acc.add_parts(&self.get(*id)?.parts()[i], q, Keep::All)?;
            }
            out.push(acc.finish());
        }
        Ok(Field(out))
    }
}

/// `Σ c_w P_w` with letter `a` standing for `letters[a]`: the field of a
/// Lie polynomial (zero for the zero polynomial). Coefficients are
/// numbers or expressions in time and parameters (not in the states).
///
/// Fails on fields that are not on `states`, on a word that is not a
/// Lyndon word or a letter without a field, and on the limits of the
/// statement (term budget, interrupt).
pub fn evaluate_on_fields(
    poly: &LiePoly<Expr>,
    letters: &[Field],
    states: &[Sym],
) -> CoreResult<Field> {
    let plan = Plan::new(poly, letters.len())?;
    let mut values = Values {
        values: vec![None; plan.nodes.len()],
        uses: plan.uses.clone(),
        states,
    };
    let mut order: Vec<usize> = (0..plan.nodes.len()).collect();
    order.sort_by_key(|&id| plan.lens[id]);
    let mut next = 0;
    let mut sums = BalancedSum::default();
    for (&len, terms) in &plan.terms {
        // The kept bracketings up to this length.
        while next < order.len() && plan.lens[order[next]] <= len {
            let id = order[next];
            next += 1;
            let value = match plan.nodes[id] {
                Node::Letter(a) => letters[a].clone().prepare(states)?,
                Node::Pair(u, v) => {
                    let value = bracket_sum_onto_prepared(
                        &[],
                        &[(values.get(u)?, values.get(v)?)],
                        false,
                        states,
                        Keep::All,
                    )?;
                    values.used(u);
                    values.used(v);
                    value
                }
            };
            limits::poll()?;
            values.values[id] = Some(value);
        }
        sums.push(length_sum(terms, &mut values)?)?;
    }
    Ok(sums.finish()?.unwrap_or_else(|| Field::zero(states.len())))
}

/// The terms of one length: the kept ones as a combination, the others as
/// one sum of brackets grouped by left factor; coefficients that are not
/// numbers multiply their own term.
fn length_sum(terms: &[Term], values: &mut Values) -> CoreResult<Field> {
    let states = values.states;
    let mut kept: Vec<(usize, Q)> = Vec::new();
    let mut by_left: BTreeMap<usize, Vec<(usize, Q)>> = BTreeMap::new();
    let mut others = BalancedSum::default();
    for term in terms {
        match term {
            Term::Kept(id, c) => match c.as_number() {
                Some(q) => kept.push((*id, q)),
                None => {
                    let field = values.combination(&[(*id, Q::ONE)])?;
                    others.push(field.mul_expr(c)?)?;
                }
            },
            Term::Pair(u, v, c) => match c.as_number() {
                Some(q) => by_left.entry(*u).or_default().push((*v, q)),
                None => {
                    let field =
                        bracket_sum(&[(values.get(*u)?, values.get(*v)?)], states, Keep::All)?;
                    others.push(field.mul_expr(c)?)?;
                }
            },
        }
    }
    others.push(values.combination(&kept)?)?;
    let mut rights: Vec<(usize, Prepared)> = Vec::with_capacity(by_left.len());
    for (u, vs) in &by_left {
        let init: Vec<(BracketStart, Q)> = vs
            .iter()
            .map(|(v, q)| Ok((BracketStart::Parts(values.get(*v)?.parts()), q.clone())))
            .collect::<CoreResult<_>>()?;
        let right = bracket_sum_onto_prepared(&init, &[], false, states, Keep::All)?;
        rights.push((*u, right));
        limits::poll()?;
    }
    let pairs: Vec<(&Prepared, &Prepared)> = rights
        .iter()
        .map(|(u, right)| Ok((values.get(*u)?, right)))
        .collect::<CoreResult<_>>()?;
    if !pairs.is_empty() {
        others.push(bracket_sum(&pairs, states, Keep::All)?)?;
    }
    drop(pairs);
    drop(rights);
    for term in terms {
        match term {
            Term::Kept(id, _) => values.used(*id),
            Term::Pair(u, v, _) => {
                values.used(*u);
                values.used(*v);
            }
        }
    }
    Ok(others
        .finish()?
        .unwrap_or_else(|| Field::zero(states.len())))
}

/// Fields added pairwise as they come, sums of equally many fields first
/// (a binary counter), so that no long sum is copied once per field.
#[derive(Default)]
struct BalancedSum {
    stack: Vec<(u32, Field)>,
}

impl BalancedSum {
    fn push(&mut self, field: Field) -> CoreResult<()> {
        let mut item = (0u32, field);
        while let Some((rank, _)) = self.stack.last() {
            if *rank != item.0 {
                break;
            }
            let Some((rank, top)) = self.stack.pop() else {
                break;
            };
            item = (rank + 1, top.add(&item.1)?);
        }
        self.stack.push(item);
        Ok(())
    }

    fn finish(self) -> CoreResult<Option<Field>> {
        let mut acc: Option<Field> = None;
        for (_, field) in self.stack.into_iter().rev() {
            acc = Some(match acc {
                None => field,
                Some(a) => field.add(&a)?,
            });
        }
        Ok(acc)
    }
}

#[cfg(test)]
#[path = "lie_fields_tests.rs"]
mod tests;
