//! Checks of the phase identity. Values are derived (short derivations
//! beside each) or computed independently (Smith normal form indices).

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::*;
use crate::core::lattice::Translate;
use crate::math::smith as normal;
use crate::math::zmat::ZMat;
use crate::model::Model;

/// A family of the given translates (each on wire 0), for unit tests.
pub(super) fn family(vs: &[Vec<i64>]) -> Family {
    Family {
        translates: vs
            .iter()
            .map(|v| Translate {
                anchor: 0,
                parts: vec![(0, v.clone())],
                l: v.clone(),
            })
            .collect(),
        representative: 0,
    }
}

/// The span is an invariant of its generators: random unimodular
/// recombinations (and an added redundant combination) span the same
/// lattice; doubling one generator of a full-rank set changes it (index
/// doubles), and the rank is the Smith rank of the generators.
#[test]
fn span_is_an_invariant_of_the_generators() {
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    for _ in 0..20 {
        let n = rng.gen_range(2..6);
        let k = rng.gen_range(1..=n);
        let gens: Vec<Vec<i64>> = (0..k)
            .map(|_| (0..n).map(|_| rng.gen_range(-4..5)).collect())
            .collect();
        let a = PinnedLattice::new(n, &[&family(&gens)]);
        let mut mixed = gens.clone();
        for _ in 0..10 {
            let (i, j) = (rng.gen_range(0..k), rng.gen_range(0..k));
            if i != j {
                let c = rng.gen_range(-3..4);
                let row = mixed[j].clone();
                for (x, y) in mixed[i].iter_mut().zip(&row) {
                    *x += c * y;
                }
            }
        }
        mixed.reverse();
        let extra: Vec<i64> = (mixed[0].iter().zip(&mixed[k - 1]))
            .map(|(x, y)| x * 2 - y)
            .collect();
        mixed.push(extra);
        let b = PinnedLattice::new(n, &[&family(&mixed)]);
        assert!(a.same(&b));
        let smith = normal::smith(&ZMat::from_i64(&gens, n));
        assert_eq!(a.rank(), smith.rank());
        for g in &gens {
            assert!(a.contains(g));
        }
        if a.rank() == k && gens[0].iter().any(|x| *x != 0) {
            let mut doubled = gens.clone();
            doubled[0].iter_mut().for_each(|x| *x *= 2);
            assert!(!a.same(&PinnedLattice::new(n, &[&family(&doubled)])));
        }
    }
}

/// Pinning 2l is not pinning l (docs/physics.md section 8).
#[test]
fn twice_a_vector_is_another_lattice_in_three_fields() {
    let l = vec![1, -2, 3];
    let two: Vec<i64> = l.iter().map(|x| x * 2).collect();
    let a = PinnedLattice::new(3, &[&family(std::slice::from_ref(&l))]);
    let c = PinnedLattice::new(3, &[&family(std::slice::from_ref(&two))]);
    assert!(!a.same(&c));
    assert!(a.contains(&two));
    assert!(!c.contains(&l));
    assert!(PinnedLattice::new(3, &[&family(&[l.clone(), two])]).same(&a));
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
    let counts = |sys: &System, names: &[&str]| {
        let p = name_phase(&sys.lattice, &listed(sys), &fams(sys, names), &targets(sys));
        (p.gapped_pairs, p.gapless_modes, p.fully_gapped, p.target)
    };
    let open = strip("boundary = \"open\"\n", "6", "");
    assert_eq!(counts(&open, &["t_up", "t_dn"]), (10, 4, false, false));
    let ring = strip("boundary = \"periodic\"\n", "6", "");
    assert_eq!(counts(&ring, &["t_up", "t_dn"]), (12, 0, true, false));
    let inf = strip("", "\"infinite\"", "");
    assert_eq!(counts(&inf, &["t_up", "t_dn"]), (2, 0, true, false));
    assert_eq!(counts(&inf, &["t_up"]), (1, 2, false, true));
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
            listed: false,
            family: &diff,
        });
        let span = |names: &[&str]| PinnedLattice::on(lat, &fams(&sys, names));
        assert!(span(&["t_up"]).same(&span(&["t_up", "t_up2"])));
        assert!(!span(&["t_up"]).same(&span(&["t_up2"])), "{wires}");
        let target = targets(&sys);
        let p = name_phase(lat, &cands, &fams(&sys, &["t_up", "t_up2"]), &target);
        assert_eq!(p.label, "{t_up}");
        assert!(p.target);
        let mixed = [fams(&sys, &["t_up"])[0], &diff];
        assert_eq!(name_phase(lat, &cands, &mixed, &[]).label, "{t_up, t_dn}");
        let p = name_phase(lat, &cands, &[&diff], &[]);
        assert_eq!(p.label, "{t_up - t_dn}");
        let p = name_phase(lat, &cands, &[], &[]);
        assert_eq!((p.label.as_str(), p.gapped_pairs), ("gapless", 0));
    }
}
