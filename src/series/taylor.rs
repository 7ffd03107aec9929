//! The chronological exponential computed forward: Picard iteration with
//! Taylor expansion of the field about the initial point.
//!
//! Scale the field by eps. The solution of `x' = eps·V(t, x)`, `x(0) = x`,
//! is `x(t) = x + δ(t)` with `δ = Σ_k eps^k δ_k`, and
//!
//! ```text
//! δ_k(t) = ∫_0^t [V(τ, x + δ(τ))]_{k−1} dτ,
//! [g(x + δ)]_m = Σ_{1 ≤ |α| ≤ m} (∂^α g / α!) · [δ^α]_m   (m ≥ 1),
//! ```
//!
//! where `[·]_m` is the eps^m coefficient. The order-`k` term of the
//! chronological expansion of an output `h` (DESIGN §2.4) is exactly
//! `[h(x + δ)]_k`. The powers `[δ^α]_m` are built from lower ones,
//! `δ^α = δ^{α − e_i} · δ_i` with `i` the last coordinate in `α`, and only
//! for the `α` whose derivative of the field or an output is not zero: a
//! polynomial field of degree `d` needs `|α| ≤ d`. Every intermediate is a
//! piece of the result (a power of the solution's deviation): nothing
//! carries a second time, as the backward recursion must. An output that
//! depends on time is read along the solution, `h(t, x(t))`.

use std::collections::HashMap;

use crate::core::sum::{Keep, SumBuilder, TimePart, TimeParts};
use crate::core::{limits, CoreError, CoreResult, Expr, Field, Sym, Q};

/// One multi-index `α` with a nonzero derivative of the field or of an
/// output: its canonical parent `α − e_var` (`None` when `|α| = 1`).
struct Node {
    parent: Option<usize>,
    var: usize,
    degree: usize,
}

/// The multi-indices, parents before children, with a lookup.
#[derive(Default)]
struct Nodes {
    list: Vec<Node>,
    index: HashMap<Vec<u32>, usize>,
}

impl Nodes {
    fn get_or_add(&mut self, alpha: &[u32], parent: Option<usize>, var: usize) -> usize {
        if let Some(&i) = self.index.get(alpha) {
            return i;
        }
        let degree = alpha.iter().map(|&a| a as usize).sum();
        self.list.push(Node {
            parent,
            var,
            degree,
        });
        self.index.insert(alpha.to_vec(), self.list.len() - 1);
        self.list.len() - 1
    }
}

/// Pairs of node index and the components `∂^α g / α!`.
type Derivatives = Vec<(usize, Vec<Expr>)>;

/// The most multi-indices the forward route takes. Each holds powers of
/// the deviation for every order; fields with transcendental factors in
/// many coordinates need far more (`exp(x1 + … + x6)`: 923 to order 7, 3002
/// to order 9). Forward is still faster there but holds more (order 11:
/// 5 s and 460 MB against 9 s and 177 MB backward), so past the cap
/// [`super::chrono::flow_outputs`] takes the backward recursion.
pub const MAX_NODES: usize = 1024;

/// `∂^α g / α!` for every `α` with `1 ≤ |α| ≤ max` where some component is
/// not zero, each generated once from its canonical parent, registered in
/// `nodes` (returned as pairs of node index and components).
fn derivatives(
    g: &[Expr],
    max: usize,
    states: &[Sym],
    nodes: &mut Nodes,
) -> CoreResult<Option<Derivatives>> {
    let dim = states.len();
    let mut out: Vec<(usize, Vec<Expr>)> = Vec::new();
    let mut held = 0usize;
    // Frontier of one degree: (multi-index, node, its entry in `out`; the
    // root, `g` itself, has neither).
    let mut frontier: Vec<(Vec<u32>, Option<usize>, Option<usize>)> =
        vec![(vec![0; dim], None, None)];
    for _ in 1..=max {
        limits::poll()?;
        let mut next = Vec::new();
        for (alpha, node, entry) in &frontier {
            let last = alpha.iter().rposition(|&a| a > 0).unwrap_or(0);
            for (i, s) in states.iter().enumerate().skip(last) {
                let mut beta = alpha.clone();
                beta[i] += 1;
                let inv = Q::ratio(1, i64::from(beta[i])).unwrap_or(Q::ONE);
                let comps = entry.map_or(g, |e| &out[e].1[..]);
                let d: Vec<Expr> = comps.iter().map(|c| c.pd(*s).scale(&inv)).collect();
                if d.iter().all(Expr::is_zero) {
                    continue;
                }
                // Many coordinates with transcendental factors give many
                // multi-indices: past the cap this route is not taken.
                held = held.saturating_add(d.iter().map(Expr::len).sum::<usize>());
                if nodes.list.len() >= MAX_NODES || held > limits::limits().max_terms {
                    return Ok(None);
                }
                let id = nodes.get_or_add(&beta, *node, i);
                next.push((beta, Some(id), Some(out.len())));
                out.push((id, d));
            }
        }
        if next.is_empty() {
            break;
        }
        frontier = next;
    }
    Ok(Some(out))
}

/// Terms `k = 1..=n` of the chronological expansion of each output `h(x(t))`
/// for `x' = V(t, x)`, `x(0) = x` (DESIGN §2.4), as functions of `t` and `x`:
/// `result[j][k − 1]` is the order-`k` term of `outputs[j]`. `None` when the
/// expansion would need more than [`MAX_NODES`] multi-indices.
pub fn forward_flow(
    v: &Field,
    outputs: &[Expr],
    n: usize,
    states: &[Sym],
) -> CoreResult<Option<Vec<Vec<Expr>>>> {
    limits::check_order(n as u64)?;
    v.check_states(states)?;
    let dim = states.len();
    let mut nodes = Nodes::default();
    let Some(dv) = derivatives(&v.0, n.saturating_sub(1), states, &mut nodes)? else {
        return Ok(None);
    };
    let mut dh = Vec::with_capacity(outputs.len());
    for h in outputs {
        match derivatives(std::slice::from_ref(h), n, states, &mut nodes)? {
            Some(d) => dh.push(d),
            None => return Ok(None),
        }
    }
    // Parents come before children within each tree, but the union may
    // interleave trees: order the nodes by degree for the power recursion.
    let mut order: Vec<usize> = (0..nodes.list.len()).collect();
    order.sort_by_key(|&i| nodes.list[i].degree);

    // Everything below is kept split by time factor (packed parts stay
    // packed from one order to the next).
    let split = |ds: Derivatives| -> Vec<(usize, Vec<TimeParts>)> {
        ds.into_iter()
            .map(|(id, d)| (id, d.into_iter().map(Expr::into_by_frequency).collect()))
            .collect()
    };
    let dv = split(dv);
    let dh: Vec<Vec<(usize, Vec<TimeParts>)>> = dh.into_iter().map(split).collect();
    // delta[i][m] = [δ_i]_m (index 0 unused); powers[node][m] = [δ^α]_m
    // for nodes of degree 2 and more (read both through `power`).
    let mut delta: Vec<Vec<TimeParts>> = vec![vec![Vec::new()]; dim];
    let mut powers: Vec<Vec<TimeParts>> = nodes.list.iter().map(|_| vec![Vec::new()]).collect();
    // The last order feeds only the outputs: the nodes of their
    // derivatives and those nodes' parents.
    let mut for_outputs = vec![false; nodes.list.len()];
    for &(id, _) in dh.iter().flatten() {
        let mut at = Some(id);
        while let Some(i) = at {
            if std::mem::replace(&mut for_outputs[i], true) {
                break;
            }
            at = nodes.list[i].parent;
        }
    }
    // Fills [δ^α]_m for every node (zero above the node's degree), or only
    // for those the outputs need.
    let fill_powers = |m: usize,
                       only_outputs: bool,
                       delta: &[Vec<TimeParts>],
                       powers: &mut Vec<Vec<TimeParts>>|
     -> CoreResult<()> {
        for &id in &order {
            let node = &nodes.list[id];
            let value = match node.parent {
                _ if only_outputs && !for_outputs[id] => Vec::new(),
                // Degree 1: `δ` itself, read from `delta` (see `power`).
                None => Vec::new(),
                Some(_) if node.degree > m => Vec::new(),
                Some(p) => {
                    let mut acc = SumBuilder::new();
                    // [δ^α]_m = Σ_j [δ^{α − e_i}]_{m − j} [δ_i]_j, the
                    // lower power being of order at least |α| − 1.
                    let d = &delta[node.var][..=m + 1 - node.degree];
                    for (j, dj) in d.iter().enumerate().skip(1) {
                        let lower = power(&nodes, delta, powers, p, m - j);
                        if lower.is_empty() || dj.is_empty() {
                            continue;
                        }
                        acc.add_product_harmonics(lower, dj, false, Keep::All)?;
                    }
                    acc.finish_parts()
                }
            };
            powers[id].push(value);
        }
        Ok(())
    };
    // Σ_α D[α]_c · [δ^α]_m for one set of derivatives.
    let expand = |ds: &[(usize, Vec<TimeParts>)],
                  c: usize,
                  m: usize,
                  delta: &[Vec<TimeParts>],
                  powers: &[Vec<TimeParts>]| {
        let mut acc = SumBuilder::new();
        for (id, d) in ds {
            let p = power(&nodes, delta, powers, *id, m);
            if d[c].is_empty() || p.is_empty() {
                continue;
            }
            match number(&d[c]) {
                Some(q) => acc.add_parts(p, &q, Keep::All)?,
                None => acc.add_product_harmonics(&d[c], p, false, Keep::All)?,
            }
        }
        Ok::<SumBuilder, CoreError>(acc)
    };

    let v_parts: Vec<TimeParts> = v.0.iter().cloned().map(Expr::into_by_frequency).collect();
    for k in 1..=n {
        limits::poll()?;
        limits::progress("chronological exponential", k - 1, n);
        let m = k - 1;
        if m >= 1 {
            fill_powers(m, false, &delta, &mut powers)?;
        }
        for c in 0..dim {
            let d = if m == 0 {
                integral_from_zero(&v_parts[c])?
            } else {
                integral_from_zero(&expand(&dv, c, m, &delta, &powers)?.finish_parts())?
            };
            limits::check_terms(d.iter().map(TimePart::len).sum())?;
            delta[c].push(d);
        }
    }
    if n >= 1 {
        fill_powers(n, true, &delta, &mut powers)?;
    }
    let mut out = Vec::with_capacity(outputs.len());
    for ds in &dh {
        let mut terms = Vec::with_capacity(n);
        for k in 1..=n {
            limits::poll()?;
            let y = expand(ds, 0, k, &delta, &powers)?.finish();
            limits::check_terms(y.len())?;
            terms.push(y);
        }
        out.push(terms);
    }
    Ok(Some(out))
}

/// `[δ^α]_m` for node `id`: `[δ_i]_m` itself for a node of degree 1
/// (kept only in `delta`), the stored power otherwise.
fn power<'a>(
    nodes: &Nodes,
    delta: &'a [Vec<TimeParts>],
    powers: &'a [Vec<TimeParts>],
    id: usize,
    m: usize,
) -> &'a TimeParts {
    let node = &nodes.list[id];
    match node.parent {
        None => &delta[node.var][m],
        Some(_) => &powers[id][m],
    }
}

/// The number a split expression equals, if it is one.
fn number(parts: &[TimePart]) -> Option<Q> {
    match parts {
        [p] if p.freq.is_zero() && p.len() == 1 => p.expr().as_number(),
        _ => None,
    }
}

/// `∫_0^t` of an expression split by time factor, split the same way:
/// part by part (packed parts stay packed).
fn integral_from_zero(parts: &[TimePart]) -> CoreResult<TimeParts> {
    let mut acc = SumBuilder::new();
    for p in parts {
        acc.add_integral_from_zero(p)?;
    }
    Ok(acc.finish_parts())
}
