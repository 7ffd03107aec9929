use std::collections::HashMap;
use std::sync::Arc;

use super::*;
use crate::core::error::CoreError;
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;

fn sig(name: &str, params: &[&str]) -> Arc<Signature> {
    Arc::new(Signature {
        name: name.to_string(),
        params: params.iter().map(|p| p.to_string()).collect(),
    })
}

#[test]
fn atoms_print_in_the_input_syntax() {
    let (q, p) = (Sym::new("q"), Sym::new("p"));
    let st = [q, p];
    let v = sig("V", &["s"]);
    let j = sig("J", &["a", "b"]);
    let x = Expr::sym(q);
    let y = Expr::sym(p);
    let arg = x
        .scale(&Q::int(2))
        .sub(&y)
        .add(&Expr::sym(Sym::PI).scale(&Q::HALF))
        .add(&Expr::int(-1));
    let e = Expr::apply_function(&v, &[2], &[arg], &st).unwrap();
    assert_eq!(e.to_string(), "V''(2*q - p - 1 + 1/2*pi)");
    let e = Expr::apply_function(
        &j,
        &[1, 2],
        &[x.clone(), Expr::num(Q::from_small(1, 3))],
        &st,
    )
    .unwrap();
    assert_eq!(e.to_string(), "pd(J, a, b, b)(q, 1/3)");
    let e = Expr::apply_function(&j, &[0, 0], &[x.clone(), Expr::zero()], &st).unwrap();
    assert_eq!(e.to_string(), "J(q, 0)");
}

#[test]
fn the_chain_rule_is_exact() {
    let (q, p) = (Sym::new("q"), Sym::new("p"));
    let st = [q, p];
    let v = sig("V", &["s"]);
    let arg = Expr::sym(q).scale(&Q::int(2)).add(&Expr::sym(p));
    let a = Expr::apply_function(&v, &[0], &[arg.clone()], &st).unwrap();
    let a1 = Expr::apply_function(&v, &[1], &[arg.clone()], &st).unwrap();
    let a2 = Expr::apply_function(&v, &[2], &[arg], &st).unwrap();
    assert_eq!(a.pd(q), a1.scale(&Q::int(2)));
    // ∂_p (V^3) = 3 V^2 V'; ∂_q (V'/V) = 2 V''/V − 2 V'^2/V^2.
    assert_eq!(
        a.pow(3).unwrap().pd(p),
        a.pow(2).unwrap().mul(&a1).unwrap().scale(&Q::int(3))
    );
    let quotient = a1.mul(&a.pow(-1).unwrap()).unwrap();
    let expected = a2.mul(&a.pow(-1).unwrap()).unwrap().scale(&Q::int(2)).sub(
        &a1.pow(2)
            .unwrap()
            .mul(&a.pow(-2).unwrap())
            .unwrap()
            .scale(&Q::int(2)),
    );
    assert_eq!(quotient.pd(q), expected);
}

#[test]
fn definitions_and_arguments_substitute() {
    let (q, s) = (Sym::new("q"), Sym::new("fs"));
    let st = [q];
    let v = sig("V", &["s"]);
    let arg = Expr::sym(q).add(&Expr::sym(Sym::PI));
    let a2 = Expr::apply_function(&v, &[2], &[arg], &st).unwrap();
    // V(s) = s^3: V''(q + pi) = 6 q + 6 pi.
    let mut def = Definition::new(v.clone(), vec![s], Expr::sym(s).pow(3).unwrap());
    let got = a2.plug_definition(&mut def, &st).unwrap();
    let want = Expr::sym(q).add(&Expr::sym(Sym::PI)).scale(&Q::int(6));
    assert_eq!(got, want);
    // q = 1/2 - pi evaluates the argument: V''(1/2).
    let map: HashMap<Sym, Expr> = [(q, Expr::num(Q::HALF).sub(&Expr::sym(Sym::PI)))]
        .into_iter()
        .collect();
    assert_eq!(a2.subst(&map, &st).unwrap().to_string(), "V''(1/2)");
    // A nonlinear value is refused.
    let sq: HashMap<Sym, Expr> = [(q, Expr::sym(q).pow(2).unwrap())].into_iter().collect();
    assert!(matches!(
        a2.subst(&sq, &st),
        Err(CoreError::FunctionArgument { .. })
    ));
}
