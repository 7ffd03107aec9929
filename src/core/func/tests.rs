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

/// `cos`, `sin` of `L + k t` split into state and time factors by the
/// angle-addition formulas (Abramowitz & Stegun, Handbook of Mathematical
/// Functions, 1964, 4.3.16–17): sin(a + b) = sin a cos b + cos a sin b,
/// cos(a + b) = cos a cos b − sin a sin b.
#[test]
fn trig_of_linear_arguments_splits_by_angle_addition() {
    let (qs, ps) = (Sym::new("q"), Sym::new("p"));
    let st = [qs, ps];
    let (q, p, t) = (Expr::sym(qs), Expr::sym(ps), Expr::sym(Sym::T));
    let l = q.scale(&Q::int(2)).sub(&p);
    let kt = t.scale(&Q::int(3));
    let cos = |e: &Expr| Expr::cos_of(e, &st).expect("linear argument");
    let sin = |e: &Expr| Expr::sin_of(e, &st).expect("linear argument");
    let arg = l.add(&kt);
    let cos_sum = cos(&l)
        .mul(&cos(&kt))
        .unwrap()
        .sub(&sin(&l).mul(&sin(&kt)).unwrap());
    let sin_sum = sin(&l)
        .mul(&cos(&kt))
        .unwrap()
        .add(&cos(&l).mul(&sin(&kt)).unwrap());
    assert_eq!(cos(&arg), cos_sum);
    assert_eq!(sin(&arg), sin_sum);
    insta::assert_snapshot!(cos(&arg).to_string(), @"cos(2*q - p)*cos(3*t) - sin(2*q - p)*sin(3*t)");
    insta::assert_snapshot!(sin(&arg).to_string(), @"cos(2*q - p)*sin(3*t) + sin(2*q - p)*cos(3*t)");
    // Shifts by multiples of pi/2 (A&S 4.3.16–17 with cos(pi/2) = 0,
    // sin(pi/2) = 1): sin(x + pi/2) = cos x, cos(x + pi) = −cos x.
    let pi = Expr::sym(Sym::PI);
    assert_eq!(sin(&arg.add(&pi.scale(&Q::HALF))), cos(&arg));
    assert_eq!(cos(&arg.add(&pi)), cos(&arg).neg());
    // Parity (from memory): cos(−x) = cos x, sin(−x) = −sin x.
    assert_eq!(cos(&arg.neg()), cos(&arg));
    assert_eq!(sin(&arg.neg()), sin(&arg).neg());
    // Rational values at rational multiples of pi (Niven's theorem, from
    // memory): cos(pi/3) = 1/2, sin(−pi/6) = −1/2, sin(pi) = 0.
    let values: Vec<String> = [(false, 1, 3), (true, -1, 6), (true, 1, 1), (false, 1, 1)]
        .iter()
        .map(|&(is_sin, n, d)| {
            let a = pi.scale(&Q::from_small(n, d));
            if is_sin { sin(&a) } else { cos(&a) }.to_string()
        })
        .collect();
    assert_eq!(values, ["1/2", "-1/2", "0", "-1"]);
}

/// `exp` of a linear form: exp(a + b) = exp(a)·exp(b) (the exponent
/// rule, from memory); refused arguments give typed errors.
#[test]
fn exp_of_linear_arguments_and_refusals() {
    let (qs, ps, a) = (Sym::new("q"), Sym::new("p"), Sym::new("a"));
    let st = [qs, ps];
    let (q, p, t) = (Expr::sym(qs), Expr::sym(ps), Expr::sym(Sym::T));
    let exp = |e: &Expr| Expr::exp_of(e, &st);
    let two_p = p.scale(&Q::int(2));
    assert_eq!(
        exp(&q.add(&two_p)).unwrap(),
        exp(&q)
            .unwrap()
            .mul(&exp(&p).unwrap().pow(2).unwrap())
            .unwrap()
    );
    insta::assert_snapshot!(exp(&q.sub(&two_p)).unwrap().to_string(), @"exp(q - 2*p)");
    assert!(matches!(exp(&t), Err(CoreError::TimeInExp { .. })));
    assert!(matches!(
        exp(&q.add(&Expr::int(1))),
        Err(CoreError::Irrational { .. })
    ));
    let cos = |e: &Expr| Expr::cos_of(e, &st);
    assert!(matches!(
        cos(&q.add(&Expr::int(1))),
        Err(CoreError::ConstantInArgument { .. })
    ));
    assert!(matches!(
        cos(&q.mul(&q).unwrap()),
        Err(CoreError::NonlinearArgument { .. })
    ));
    assert!(matches!(
        cos(&Expr::sym(a).mul(&q).unwrap()),
        Err(CoreError::ParameterInArgument { .. })
    ));
    assert!(matches!(
        cos(&Expr::sym(a).mul(&t).unwrap()),
        Err(CoreError::SymbolicFrequency { .. })
    ));
    assert!(matches!(
        cos(&Expr::sym(Sym::PI).scale(&Q::from_small(1, 5))),
        Err(CoreError::Irrational { .. })
    ));
}

/// Differentiating then substituting a definition equals substituting
/// then differentiating (the chain rule for f(L(x)), from memory):
/// V(s) = s^3 + s, L = 2q − p: ∂_q V(L) = 2·V'(L) = 6 L^2 + 2.
#[test]
fn chain_rule_commutes_with_definitions() {
    let (qs, ps, s) = (Sym::new("q"), Sym::new("p"), Sym::new("fs"));
    let st = [qs, ps];
    let v = sig("V", &["s"]);
    let l = Expr::sym(qs).scale(&Q::int(2)).sub(&Expr::sym(ps));
    let a = Expr::apply_function(&v, &[0], &[l.clone()], &st).unwrap();
    let body = Expr::sym(s).pow(3).unwrap().add(&Expr::sym(s));
    let mut def = Definition::new(v.clone(), vec![s], body);
    let then_plug = a.pd(qs).plug_definition(&mut def, &st).unwrap();
    let plug_then = a.plug_definition(&mut def, &st).unwrap().pd(qs);
    assert_eq!(then_plug, plug_then);
    let want = l.pow(2).unwrap().scale(&Q::int(6)).add(&Expr::int(2));
    assert_eq!(then_plug, want);
    // A symbol the argument does not mention differentiates to zero.
    let other = Sym::new("r");
    assert!(a.pd(other).is_zero());
}
