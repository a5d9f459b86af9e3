//! Checks of the phase identity. Values are derived (short derivations
//! beside each) or computed independently (the Smith normal form of
//! [`crate::math::smith`] for ranks and indices).

use num_bigint::BigInt;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::*;
use crate::core::system::System;
use crate::math::smith as normal;
use crate::math::zmat::ZMat;
use crate::model::Model;

fn b(v: &[i64]) -> Vec<BigInt> {
    v.iter().map(|&x| BigInt::from(x)).collect()
}

/// The HNF is an invariant of the span: random unimodular recombinations
/// (and added redundant combinations) of the generators give the same
/// form; its rank is the Smith rank and, for a full-rank lattice, the
/// product of the pivots is the index |det| (Smith: product of the
/// invariant factors).
#[test]
fn hnf_is_an_invariant_of_the_span() {
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for _ in 0..20 {
        let n = rng.gen_range(2..6);
        let k = rng.gen_range(1..=n);
        let gens: Vec<Vec<BigInt>> = (0..k)
            .map(|_| b(&(0..n).map(|_| rng.gen_range(-4..5)).collect::<Vec<_>>()))
            .collect();
        let h = Hnf::of(n, &gens);
        let mut mixed = gens.clone();
        for _ in 0..10 {
            let (i, j) = (rng.gen_range(0..k), rng.gen_range(0..k));
            if i != j {
                let c = BigInt::from(rng.gen_range(-3..4));
                let row = mixed[j].clone();
                for (x, y) in mixed[i].iter_mut().zip(&row) {
                    *x += &c * y;
                }
            }
        }
        mixed.reverse();
        let extra: Vec<BigInt> = mixed[0]
            .iter()
            .zip(&mixed[k - 1])
            .map(|(x, y)| x * 2 - y)
            .collect();
        mixed.push(extra);
        assert_eq!(Hnf::of(n, &mixed), h);
        let z = ZMat::from_rows(&gens, n);
        let smith = normal::smith(&z);
        assert_eq!(h.rank(), smith.rank());
        if h.rank() == n {
            let pivots: BigInt = (0..n).map(|i| h.rows[i][i].clone()).product();
            let index: BigInt = smith.diag.iter().product();
            assert_eq!(pivots, index);
        }
        for g in &gens {
            assert!(h.contains(g));
        }
    }
}

/// Pinning 2l is not pinning l (physics reference section 7).
#[test]
fn twice_a_vector_is_another_lattice() {
    let l = b(&[1, -2, 3]);
    let two: Vec<BigInt> = l.iter().map(|x| x * 2).collect();
    let a = Hnf::of(3, std::slice::from_ref(&l));
    let c = Hnf::of(3, std::slice::from_ref(&two));
    assert_ne!(a, c);
    assert!(a.contains(&two));
    assert!(!c.contains(&l));
    assert_eq!(Hnf::of(3, &[l.clone(), two]), a);
}

fn strip(boundary: &str, wires: &str, extra: &str) -> System {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/flows/halperin_331_strip.toml"
    ))
    .unwrap()
    .replace("wires = 6", &format!("wires = {wires}"))
    .replace("boundary = \"open\"\n", boundary);
    let text = format!("{text}\n{extra}");
    System::new(Model::parse(&text, "strip.toml").unwrap()).unwrap()
}

const T_UP2: &str = "[[term]]\nname = \"t_up2\"\nvector = { 0 = [4, 2, 0, 0], 1 = [2, 4, 2, 2] }\n";

fn fams<'a>(sys: &'a System, names: &[&str]) -> Vec<&'a Family> {
    names
        .iter()
        .map(|n| {
            let i = sys.model.terms.iter().position(|t| t.name == *n).unwrap();
            &sys.lattice.families[i]
        })
        .collect()
}

/// Derived counts on the (331) strip of `flows/` (4 fields per wire): on
/// an open strip of 6 wires each tunnelling family has 5 independent
/// translates, so {t_up, t_dn} has rank 10 and leaves 24 - 20 = 4 gapless
/// (the two edges); on a ring of 6 wires 6 each, rank 12 = N/2, fully
/// gapped; infinite: rank 2 per wire of 4 fields, fully gapped; t_up alone
/// 1 per wire, 2 gapless. t_up is the model's target.
#[test]
fn invariants_of_the_bilayer() {
    let open = strip("boundary = \"open\"\n", "6", "");
    let both = PhaseLattice::new(&open.lattice, &fams(&open, &["t_up", "t_dn"]));
    assert_eq!(
        (both.gapped_pairs, both.gapless_modes, both.fully_gapped()),
        (10, 4, false)
    );
    let ring = strip("boundary = \"periodic\"\n", "6", "");
    let both = PhaseLattice::new(&ring.lattice, &fams(&ring, &["t_up", "t_dn"]));
    assert_eq!(
        (both.gapped_pairs, both.gapless_modes, both.fully_gapped()),
        (12, 0, true)
    );
    let inf = strip("", "\"infinite\"", "");
    let both = PhaseLattice::new(&inf.lattice, &fams(&inf, &["t_up", "t_dn"]));
    assert_eq!(
        (both.gapped_pairs, both.gapless_modes, both.fully_gapped()),
        (2, 0, true)
    );
    let up = PhaseLattice::new(&inf.lattice, &fams(&inf, &["t_up"]));
    assert_eq!((up.gapped_pairs, up.gapless_modes), (1, 2));
    let target = target_lattice(&inf).unwrap();
    assert!(target.same(&up) && !target.same(&both));
}

/// Labels: the fewest terms, listed before generated. {t_up, t_up2} is the
/// phase {t_up} (2 t_up lies in it); {t_up2} alone is another phase; a
/// lattice spanned by t_up and the generated combination t_up - t_dn is
/// named by the listed {t_up, t_dn} (the same lattice: t_dn = t_up -
/// (t_up - t_dn)); the combination alone is named by itself.
#[test]
fn labels_prefer_few_listed_terms() {
    for (boundary, wires) in [
        ("boundary = \"open\"\n", "6"),
        ("boundary = \"periodic\"\n", "5"),
        ("", "\"infinite\""),
    ] {
        let sys = strip(boundary, wires, T_UP2);
        let lat = &sys.lattice;
        let diff = lat.family(&[(0, vec![1, 0, -2, -1]), (1, vec![1, 2, 0, -1])]);
        let mut cands = listed(&sys);
        cands.push(Candidate {
            name: "t_up - t_dn",
            generated: true,
            family: &diff,
        });
        let up_up2 = PhaseLattice::new(lat, &fams(&sys, &["t_up", "t_up2"]));
        let up = PhaseLattice::new(lat, &fams(&sys, &["t_up"]));
        let up2 = PhaseLattice::new(lat, &fams(&sys, &["t_up2"]));
        assert!(up.same(&up_up2));
        assert!(!up.same(&up2), "{wires}");
        let names = vec!["t_up".to_string(), "t_up2".to_string()];
        let p = name(lat, &up_up2, &names, &cands, target_lattice(&sys).as_ref());
        assert_eq!(p.label, "{t_up}");
        assert!(p.target);
        let mixed = PhaseLattice::new(lat, &[fams(&sys, &["t_up"])[0], &diff]);
        let p = name(lat, &mixed, &[], &cands, None);
        assert_eq!(p.label, "{t_up, t_dn}");
        let alone = PhaseLattice::new(lat, &[&diff]);
        assert_eq!(name(lat, &alone, &[], &cands, None).label, "{t_up - t_dn}");
        let none = PhaseLattice::new(lat, &[]);
        let p = name(lat, &none, &[], &cands, None);
        assert_eq!((p.label.as_str(), p.gapped_pairs), ("gapless", 0));
    }
}
