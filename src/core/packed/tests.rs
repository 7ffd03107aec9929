use smallvec::SmallVec;

use super::keymap::*;
use super::part::*;
use super::terms::*;
use super::trig::*;
use super::word::*;
use crate::core::expr::{Expr, Key, LinearForm, Monomial, TimeFactor, TrigFactor};
use crate::core::expr::{Keep, SumBuilder};
use crate::core::num::Q;
use crate::core::symbol::Sym;

#[test]
fn products_of_parts_with_denominators_near_a_word_stay_exact() {
    // Denominators just under 2^63: the routes' common denominator (the
    // product of two of them times 2) sits near the top of i128, the
    // sums' denominators cannot take the lcm of two such routes, and
    // the scales of small products are near their limit; repeated
    // products, some negated, into the same sums.
    let (x, y) = (Expr::sym(Sym::new("qx")), Expr::sym(Sym::new("qy")));
    let cos_t = Expr::cos_of(&Expr::sym(Sym::T), &[]).expect("cos t");
    let sin_2t = Expr::sin_of(&Expr::sym(Sym::T).scale(&Q::int(2)), &[]).expect("sin 2t");
    let d1 = Q::Small(1, i64::MAX - 24);
    let d2 = Q::Small(3, i64::MAX - 26);
    let a = x.mul(&cos_t).expect("a").scale(&d1).add(&y.scale(&d2));
    let b = y
        .mul(&sin_2t)
        .expect("b")
        .scale(&d2)
        .add(&x.mul(&cos_t).expect("x cos t").scale(&d1))
        .add(&x.scale(&Q::Small(2, 5)));
    let (pa, pb) = (a.clone().into_by_frequency(), b.clone().into_by_frequency());
    assert!(pa.iter().chain(&pb).all(|p| p.is_packed()));
    let mut acc = SumBuilder::new();
    for negate in [false, false, true, false] {
        acc.add_product_harmonics(&pa, &pb, negate, Keep::All)
            .expect("product");
    }
    let expected = a.mul(&b).expect("ab").scale(&Q::int(2));
    assert_eq!(acc.finish(), expected);
}

#[test]
fn sums_beyond_machine_integers_stay_exact() {
    let (x, y) = (Expr::sym(Sym::new("px")), Expr::sym(Sym::new("py")));
    let cos_t = Expr::cos_of(&Expr::sym(Sym::T), &[]).expect("cos t");
    let big = Q::int(i64::MAX / 2);
    let a = x.mul(&cos_t).expect("product").scale(&big);
    let b = y
        .mul(&cos_t)
        .expect("product")
        .scale(&big)
        .add(&y.scale(&Q::Small(1, 3)));
    let c = x.scale(&Q::Small(1, 7));
    let (pa, pb, pc) = (
        a.clone().into_by_frequency(),
        b.clone().into_by_frequency(),
        c.clone().into_by_frequency(),
    );
    assert!(pa.iter().chain(&pb).chain(&pc).all(|p| p.is_packed()));
    // 40 products of about 2^124 each overflow an i128 sum; then a
    // denominator 7 asks to rescale the sums that hold them.
    let mut acc = SumBuilder::new();
    for _ in 0..40 {
        acc.add_product_harmonics(&pa, &pb, false, Keep::All)
            .expect("product");
    }
    acc.add_product_harmonics(&pc, &pb, true, Keep::All)
        .expect("product");
    let expected = a
        .mul(&b)
        .expect("ab")
        .scale(&Q::int(40))
        .sub(&c.mul(&b).expect("cb"));
    assert!(expected.max_coeff_bits() > 127);
    assert_eq!(acc.finish(), expected);
}

/// A linear form from `(symbol, coefficient)` pairs.
fn lin(pairs: &[(u32, i64)]) -> LinearForm {
    LinearForm(
        pairs
            .iter()
            .filter(|(_, c)| *c != 0)
            .map(|(s, c)| (Sym(*s), Q::int(*c)))
            .collect(),
    )
}

#[test]
fn packed_order_of_linear_forms_is_the_order_of_lin() {
    // Every form in slots 2, 3 and 15 with coefficients from -2 to 2,
    // as cosines and sines.
    let mut all = Vec::new();
    for code in 0..125i64 {
        let c = [code % 5 - 2, code / 5 % 5 - 2, code / 25 - 2];
        let l = lin(&[(2, c[0]), (3, c[1]), (15, c[2])]);
        all.push(TrigFactor::Cos(l.clone()));
        all.push(TrigFactor::Sin(l));
    }
    all.push(TrigFactor::One);
    for a in &all {
        let pa = PackedTrig::pack(a).expect("fits");
        assert_eq!(&pa.unpack(), a);
        for b in &all {
            let pb = PackedTrig::pack(b).expect("fits");
            assert_eq!(cmp_wave(pa, pb), a.cmp(b), "{a:?} vs {b:?}");
        }
    }
}

#[test]
fn linear_forms_pack_only_when_they_fit_signed_bytes() {
    assert!(PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 127), (15, -127)]))).is_some());
    assert!(PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 128)]))).is_none());
    assert!(PackedTrig::pack(&TrigFactor::Cos(lin(&[(3, 1), (4, -128)]))).is_none());
    assert!(PackedTrig::pack(&TrigFactor::Cos(lin(&[(16, 1)]))).is_none());
    let half = LinearForm(vec![(Sym(3), Q::Small(1, 2))].into());
    assert!(PackedTrig::pack(&TrigFactor::Cos(half)).is_none());
    // Products whose forms could leave the lanes (100 + 100 > 127)
    // decline; the general path takes them, exactly.
    let st = [Sym::new("lq")];
    let e = Expr::cos_of(&Expr::sym(st[0]).scale(&Q::int(100)), &st)
        .expect("cos")
        .mul(&Expr::sym(st[0]))
        .expect("product");
    let parts = e.clone().into_by_frequency();
    let packed = parts[0].packed().expect("packed");
    assert!(!Packed::lanes_fit(packed, packed));
    let mut acc = SumBuilder::new();
    acc.add_product_harmonics(&parts, &parts, false, Keep::All)
        .expect("product");
    assert_eq!(acc.finish(), e.mul(&e).expect("square"));
}

#[test]
fn lanes_add_and_negate_one_by_one() {
    let mut x = 0x2545_f491_4f6c_dd1du64;
    let mut next = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x
    };
    for _ in 0..2000 {
        // Coefficients from -63 to 63, some lanes zero.
        let mut lanes = [[0i8; 16]; 2];
        for l in lanes.iter_mut() {
            for c in l.iter_mut() {
                let r = next();
                *c = if r % 3 == 0 { 0 } else { (r % 127) as i8 - 63 };
            }
        }
        let pack = |l: &[i8; 16]| {
            l.iter()
                .enumerate()
                .fold(0u128, |acc, (i, c)| acc | u128::from(*c as u8) << (8 * i))
        };
        let (a, b) = (pack(&lanes[0]), pack(&lanes[1]));
        for negate in [false, true] {
            let sum = add_lanes(a, b, negate);
            for (i, (p, q)) in lanes[0].iter().zip(&lanes[1]).enumerate() {
                let want = if negate { p - q } else { p + q };
                assert_eq!(lane(sum, 8 * i as u32), want);
            }
        }
        let n = negate_lanes(a);
        for (i, c) in lanes[0].iter().enumerate() {
            assert_eq!(lane(n, 8 * i as u32), -c);
        }
    }
}

#[test]
fn products_of_waves_follow_product_to_sum() {
    // cos(q + r)·sin(2q − r) = (sin(3q) − sin(−q + 2r))/2
    //                       = (sin(3q) + sin(q − 2r))/2.
    let a = PackedTrig::pack(&TrigFactor::Cos(lin(&[(3, 1), (4, 1)]))).expect("a");
    let b = PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 2), (4, -1)]))).expect("b");
    let got: Vec<(TrigFactor, i64)> = wave_routes(a, b)
        .as_slice()
        .iter()
        .map(|(w, p)| (w.unpack(), *p))
        .collect();
    assert_eq!(
        got,
        vec![
            (TrigFactor::Sin(lin(&[(3, 3)])), 1),
            (TrigFactor::Sin(lin(&[(3, 1), (4, -2)])), 1),
        ]
    );
    // sin(q)·sin(q) = (1 − cos(2q))/2; sin(q)·cos(q) = sin(2q)/2.
    let s = PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 1)]))).expect("s");
    let c = PackedTrig::pack(&TrigFactor::Cos(lin(&[(3, 1)]))).expect("c");
    let ss: Vec<(PackedTrig, i64)> = wave_routes(s, s).as_slice().to_vec();
    assert_eq!(ss[0], (PackedTrig::ONE, 1));
    assert_eq!(ss[1].1, -1);
    assert_eq!(ss[1].0.unpack(), TrigFactor::Cos(lin(&[(3, 2)])));
    let sc: Vec<(PackedTrig, i64)> = wave_routes(s, c).as_slice().to_vec();
    assert_eq!(sc.len(), 1);
    assert_eq!(
        (sc[0].0.unpack(), sc[0].1),
        (TrigFactor::Sin(lin(&[(3, 2)])), 1)
    );
}

#[test]
fn derivatives_of_trigonometric_parts_agree_with_the_normal_form() {
    let st = [Sym::new("wq"), Sym::new("wp")];
    let (q, p) = (Expr::sym(st[0]), Expr::sym(st[1]));
    let arg = q.scale(&Q::int(2)).sub(&p);
    let cos_t = Expr::cos_of(&Expr::sym(Sym::T), &st).expect("cos t");
    let e = Expr::sin_of(&arg, &st)
        .expect("sin")
        .mul(&p.mul(&p).expect("p^2"))
        .expect("product")
        .add(&Expr::cos_of(&q, &st).expect("cos").scale(&Q::Small(3, 7)))
        .add(&q.mul(&p).expect("qp").mul(&cos_t).expect("qp cos t"))
        .add(
            &Expr::cos_of(&arg, &st)
                .expect("cos")
                .mul(&q)
                .expect("q cos")
                .mul(&cos_t)
                .expect("with cos t"),
        );
    let parts = e.clone().into_by_frequency();
    assert!(parts.iter().all(|p| p.is_packed()));
    for s in [st[0], st[1], Sym::new("wz")] {
        let want = e.pd(s);
        let mut got = Expr::zero();
        for part in &parts {
            if let Some(d) = part.derivative(s) {
                assert!(d.is_packed());
                got = got.add(d.expr());
            }
        }
        assert_eq!(got, want, "d/d{}", s.name());
    }
}

/// `∫_0^t` of packed parts with powers of `t`, several frequencies,
/// sines and cosines, trigonometric factors in the state and fractions,
/// built packed, equals the normal form's integral (integration by
/// parts on `t^p cos(h t)` and `t^p sin(h t)`, minus the value at 0).
#[test]
fn packed_time_integrals_agree_with_the_normal_form() {
    let st = [Sym::new("iq"), Sym::new("ip")];
    let (q, p, t) = (Expr::sym(st[0]), Expr::sym(st[1]), Expr::sym(Sym::T));
    let time = |k: i64, sin: bool| {
        let arg = t.scale(&Q::int(k));
        if sin {
            Expr::sin_of(&arg, &st).expect("sin")
        } else {
            Expr::cos_of(&arg, &st).expect("cos")
        }
    };
    let wave = Expr::cos_of(&q.sub(&p.scale(&Q::int(2))), &st).expect("cos");
    let mut checked = 0;
    for k in 0..4i64 {
        for sin in [false, true] {
            let factor = if k == 0 { Expr::int(1) } else { time(k, sin) };
            let e = q
                .mul(&t.pow(3).expect("t^3"))
                .expect("q t^3")
                .scale(&Q::Small(5, 3))
                .add(&p.mul(&p).expect("p^2").mul(&t).expect("p^2 t"))
                .add(&wave.mul(&t.pow(2).expect("t^2")).expect("wave t^2"))
                .add(&wave.mul(&q).expect("q wave").scale(&Q::Small(-2, 7)))
                .add(&Expr::int(4))
                .mul(&factor)
                .expect("with time factor");
            let want = e.integral_from_zero().expect("normal form");
            let mut acc = SumBuilder::new();
            for part in e.clone().into_by_frequency() {
                assert!(part.is_packed(), "{e}");
                acc.add_integral_from_zero(&part).expect("packed");
            }
            assert_eq!(acc.finish(), want, "integral of {e}");
            checked += 1;
        }
    }
    assert_eq!(checked, 8);
}

#[test]
fn sorting_by_packed_keys_gives_the_order_of_keys() {
    // Terms with monomials, trigonometric factors and time factors
    // drawn from small sets (with repeats), in a scrambled order.
    let monos: Vec<Monomial> = [
        vec![],
        vec![(0, 1)],
        vec![(2, 1)],
        vec![(0, 2), (3, 1)],
        vec![(3, 2), (15, 1)],
    ]
    .into_iter()
    .map(|p| Monomial(p.into_iter().map(|(s, e)| (Sym(s), e)).collect()))
    .collect();
    let waves = [
        TrigFactor::One,
        TrigFactor::Cos(lin(&[(2, 1)])),
        TrigFactor::Sin(lin(&[(2, 1), (3, -2)])),
        TrigFactor::Cos(lin(&[(3, 1)])),
    ];
    let beats = [
        TimeFactor::One,
        TimeFactor::Cos(Q::int(1)),
        TimeFactor::Sin(Q::int(1)),
        TimeFactor::Cos(Q::int(3)),
    ];
    let mut terms = Vec::new();
    let mut x = 7u64;
    for i in 0..200u64 {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        let pick = |n: usize, shift: u32| (x >> shift) as usize % n;
        let key = Key {
            mono: monos[pick(monos.len(), 20)].clone(),
            exp: LinearForm::default(),
            wave: waves[pick(waves.len(), 30)].clone(),
            beat: beats[pick(beats.len(), 40)].clone(),
        };
        terms.push((key, Q::int(i as i64 + 1)));
    }
    let mut want = terms.clone();
    want.sort_by(|a, b| a.0.cmp(&b.0));
    let mut got = terms.clone();
    sort_terms(&mut got);
    let keys = |v: &[(Key, Q)]| v.iter().map(|(k, _)| k.clone()).collect::<Vec<_>>();
    assert_eq!(keys(&got), keys(&want));
    assert_eq!(got.len(), terms.len());
    // A key that does not pack (a rational frequency): the direct sort.
    let mut mixed = terms;
    mixed[17].0.beat = TimeFactor::Sin(Q::Small(1, 2));
    let mut want = mixed.clone();
    want.sort_by(|a, b| a.0.cmp(&b.0));
    sort_terms(&mut mixed);
    assert_eq!(keys(&mixed), keys(&want));
}

#[test]
fn packed_order_is_the_order_of_monomials() {
    // Every monomial in slots 0, 1, 2 and 15 with exponents up to 2.
    let mut all = Vec::new();
    for code in 0..81u32 {
        let e = [code % 3, code / 3 % 3, code / 9 % 3, code / 27 % 3];
        let mut pairs = Vec::new();
        for (slot, e) in [0u32, 1, 2, 15].into_iter().zip(e) {
            if e > 0 {
                pairs.push((Sym(slot), e as i32));
            }
        }
        all.push(Monomial(SmallVec::from_vec(pairs)));
    }
    for a in &all {
        for b in &all {
            let (pa, pb) = (pack_mono(a).expect("fits"), pack_mono(b).expect("fits"));
            assert_eq!(cmp_mono(pa, pb), a.cmp(b), "{a:?} vs {b:?}");
        }
    }
}

#[test]
fn monomials_round_trip_and_multiply_by_addition() {
    let m = Monomial(SmallVec::from_vec(vec![
        (Sym(0), 3),
        (Sym(5), 127),
        (Sym(15), 1),
    ]));
    let p = pack_mono(&m).expect("fits");
    assert_eq!(unpack_mono(p), m);
    let sq = unpack_mono(p + p);
    assert_eq!(sq.0.as_slice(), &[(Sym(0), 6), (Sym(5), 254), (Sym(15), 2)]);
    assert!(pack_mono(&Monomial(SmallVec::from_vec(vec![(Sym(16), 1)]))).is_none());
    assert!(pack_mono(&Monomial(SmallVec::from_vec(vec![(Sym(2), 128)]))).is_none());
    assert!(pack_mono(&Monomial(SmallVec::from_vec(vec![(Sym(2), -1)]))).is_none());
}

#[test]
fn the_monomial_table_sums_like_an_ordered_map() {
    // Keys that share low lanes (collisions after masking), the
    // constant monomial 0 and keys in the high word; sums that cancel.
    let mut table = MonoMap::default();
    let mut reference = std::collections::BTreeMap::new();
    let mut x = 0x9e37_79b9_7f4a_7c15u64;
    for i in 0..5000u64 {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        let lane = |v: u64| u128::from(v % 128);
        let m = lane(x) | lane(x >> 8) << 16 | lane(x >> 16) << 120;
        let m = if i % 97 == 0 { 0 } else { m };
        let n = (x % 19) as i128 - 9;
        *table.slot(m) += n;
        *reference.entry(m).or_insert(0i128) += n;
    }
    assert_eq!(table.len(), reference.len());
    let mut got: Vec<(u128, i128)> = table.iter().collect();
    got.sort_unstable();
    let want: Vec<(u128, i128)> = reference.into_iter().collect();
    assert_eq!(got, want);
    let taken = table.take();
    assert_eq!(taken.len(), want.len());
    assert_eq!(table.len(), 0);
    assert_eq!(table.iter().count(), 0);
}

#[test]
fn monomials_spread_over_the_table_whichever_lanes_they_use() {
    // Every monomial of degree up to 5 in three symbols, placed in low,
    // middle and high lanes: a hash that sees only some lanes piles
    // them up (long probe runs); a good one keeps runs short.
    for first in [0u32, 5, 10, 13] {
        let mut table = MonoMap::default();
        for e in 0..216u32 {
            let (a, b, c) = (e % 6, e / 6 % 6, e / 36);
            if a + b + c > 5 {
                continue;
            }
            let m = u128::from(a) << (8 * first)
                | u128::from(b) << (8 * (first + 1))
                | u128::from(c) << (8 * (first + 2));
            *table.slot(m) += 1;
        }
        assert_eq!(table.len(), 56);
        assert!(
            table.mean_probe() < 2.0,
            "lanes from {first}: mean probe {}",
            table.mean_probe()
        );
    }
}
