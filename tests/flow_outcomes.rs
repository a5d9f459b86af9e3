//! Outcomes of one flow [docs/physics.md section 3]: gapless, undecided,
//! strong (with the winner and ell*), spinful, unphysical, and the momentum
//! cut-off of a mismatched term.
//!
//! Dimensions in a single wire with K = diag(1, -1), V = [[1, lam], [lam, 1]]
//! [Giamarchi, "Quantum Physics in One Dimension" (2004), ch. 2; checks.md]:
//! K_L = sqrt((1 - lam)/(1 + lam)); backscattering m = (1, -1): Delta = K_L;
//! umklapp m = (2, -2): Delta = 4 K_L; pairing m = (1, 1): Delta = 1/K_L;
//! single electron m = (1, 0): Delta = (K_L + 1/K_L)/4, spin 1/2.

#[path = "flowcommon/mod.rs"]
mod common;

use common::*;
use pinflow::flow::{Closure, FlowOptions, Outcome};

fn defaults(ell_max: f64) -> FlowOptions {
    FlowOptions {
        ell_max,
        ..FlowOptions::default()
    }
}

#[test]
fn all_irrelevant_terms_decay() {
    // K_L = 2.4: backscattering Delta = 2.4, umklapp 9.6; both irrelevant,
    // and so is every term they generate.
    let text = wire(
        lam_for(2.4),
        &(term_toml("backscatter", "[1, -1]", 0.05, "")
            + &term_toml("umklapp", "[2, -2]", 0.1, "")),
    );
    let r = run(&system(&text), defaults(400.0));
    assert_eq!(r.outcome, Outcome::Gapless, "{:?}", r.message);
    assert_eq!(r.winner, None);
    assert_eq!(r.ell_star, None);
    assert!(r.ell_end < 400.0);
    for t in &r.terms {
        assert!(t.coupling < 1e-6, "{}: y = {}", t.name, t.coupling);
        assert!(t.dimension > 2.0, "{}: Delta = {}", t.name, t.dimension);
    }
}

#[test]
fn a_marginal_flow_is_undecided_by_ell_max() {
    // Backscattering at K_L = 2 is exactly marginal; with y0 = 0.01 the
    // Kosterlitz-Thouless flow (derived, see flow_kt.rs: near Delta = 2,
    // x = Delta - 2 obeys dx/dl ~ -y^2 and dy/dl = -x y, so y^2 - x^2 is
    // conserved and y reaches O(1) only after ell ~ (pi/2)/y0 ~ 150) has not
    // decided by ell = 40. A second, irrelevant cosine (umklapp, Delta = 8)
    // keeps the flow out of the single-cosine regime where the KT
    // invariant would decide it (see the next test).
    let text = wire(
        lam_for(2.0),
        &(term_toml("backscatter", "[1, -1]", 0.01, "")
            + &term_toml("umklapp", "[2, -2]", 0.01, "")),
    );
    let r = run(&system(&text), defaults(40.0));
    assert_eq!(r.outcome, Outcome::Undecided);
    assert_eq!(r.ell_end, 40.0);
    assert_eq!(r.winner, None);
    assert!(r.kt.is_none());
}

#[test]
fn a_marginal_single_cosine_is_decided_by_the_kt_invariant() {
    // The same backscattering term alone: I = y0^2/2 + I_sep > I_sep, so it
    // is marginally relevant and ell_max = 40 is extended until it reaches
    // strong coupling. With Delta^2/4 ~ 1 near Delta = 2 the solution
    // through x = 0 is x = -y0 tan(y0 l), y = y0 / cos(y0 l), which reaches
    // y = 1 at ell* = arccos(y0)/y0 ~ pi/(2 y0) - 1 = 156.1; the neglected
    // Delta^2/4 - 1 = x + x^2/4 matters only in the last few units of ell.
    let text = wire(lam_for(2.0), &term_toml("backscatter", "[1, -1]", 0.01, ""));
    for ell_max in [40.0, 1000.0] {
        let r = run(&system(&text), defaults(ell_max));
        assert_eq!(r.outcome, Outcome::Strong);
        let estimate = 0.01f64.acos() / 0.01;
        let ell_star = r.ell_star.unwrap();
        assert!(
            (ell_star - estimate).abs() < 0.02 * estimate,
            "ell* = {ell_star}, estimate {estimate}"
        );
        // Only the short ell_max needed the invariant.
        let kt = r.kt.as_ref().map(|k| (k.side.as_str(), k.ell_max_extended));
        if ell_max == 40.0 {
            assert_eq!(kt, Some(("above", Some(160.0))));
        } else {
            assert_eq!(kt, None);
        }
    }
}

#[test]
fn one_relevant_term_wins_near_the_tree_level_scale() {
    // Tree level: y(l) = y0 e^{(2 - Delta) l} reaches y_strong = 1 at
    // ell* = ln(1/y0) / (2 - Delta). The second-order corrections act only
    // where y = O(1), in the last unit of ell: a shift of order 1e-2 out of
    // ell* ~ 7-9, so within 2 %.
    let lam = 0.3;
    let delta = luttinger(lam);
    for y0 in [1e-4, 1e-3] {
        for closure in [Closure::None, Closure::Pairs] {
            let text = wire(lam, &term_toml("backscatter", "[1, -1]", y0, ""));
            let r = run(
                &system(&text),
                FlowOptions {
                    closure,
                    ..defaults(40.0)
                },
            );
            assert_eq!(r.outcome, Outcome::Strong);
            assert_eq!(r.winner.as_deref(), Some("backscatter"));
            let tree = (1.0 / y0).ln() / (2.0 - delta);
            let ell_star = r.ell_star.unwrap();
            assert!(
                (ell_star - tree).abs() < 0.02 * tree,
                "ell* = {ell_star}, tree level {tree}"
            );
            // The winner is at y_strong at ell*, and the gap is e^{-ell*}.
            assert!(r.terms[0].coupling >= 1.0);
            assert!((r.gap.unwrap() - (-ell_star).exp()).abs() < 1e-15);
        }
    }
}

#[test]
fn the_smaller_dimension_wins_between_dual_terms() {
    // Backscattering and pairing do not commute (m_b^T K m_p = 2).
    let model = |lam: f64, yb: f64, yp: f64| {
        wire(
            lam,
            &(term_toml("backscatter", "[1, -1]", yb, "")
                + &term_toml("pairing", "[1, 1]", yp, "allowed_charge = 2")),
        )
    };
    let cases = [
        // (lam, y_b, y_p, winner): lam > 0 gives K_L < 1, so backscattering
        // (Delta = K_L) is the more relevant one; lam < 0 the pairing.
        (0.3, 0.01, 0.01, "backscatter", "pairing"),
        (-0.3, 0.01, 0.01, "pairing", "backscatter"),
        // A large enough bare coupling lets the less relevant term win:
        // tree level, pairing at y0 = 0.3 needs ln(1/0.3)/(2 - 1/K_L) = 1.9
        // against ln(1e4)/(2 - K_L) = 7.3 for backscattering at 1e-4.
        (0.3, 1e-4, 0.3, "pairing", "backscatter"),
        (-0.3, 0.3, 1e-4, "backscatter", "pairing"),
    ];
    for (lam, yb, yp, winner, loser) in cases {
        let r = run(&system(&model(lam, yb, yp)), defaults(40.0));
        assert_eq!(r.outcome, Outcome::Strong);
        assert_eq!(
            r.winner.as_deref(),
            Some(winner),
            "lam = {lam}, y_b = {yb}, y_p = {yp}"
        );
        assert!(
            r.suppressed.iter().any(|s| s == loser),
            "{:?}",
            r.suppressed
        );
        assert!(!r.commuting_with_winner.iter().any(|s| s == loser));
    }
}

#[test]
fn a_spinful_term_at_strong_coupling_is_not_a_gap() {
    // The single electron m = (1, 0) at K_L = 1: Delta = 1/2, spin 1/2. It is
    // relevant, reaches strong coupling, but cannot pin: "spinful". Terms
    // with s != 0 do not feed back on D, so its dimension does not flow.
    let text = wire(
        0.0,
        &term_toml("electron", "[1, 0]", 0.01, "allowed_charge = 1"),
    );
    let r = run(&system(&text), defaults(40.0));
    assert_eq!(r.outcome, Outcome::Spinful);
    assert_eq!(r.winner.as_deref(), Some("electron"));
    let t = &r.terms[0];
    assert_eq!(t.spin, "1/2");
    assert!((t.dimension0 - 0.5).abs() < 1e-12);
    assert_eq!(t.dimension, t.dimension0);
    // Tree level as for a null term: ell* close to ln(100)/1.5.
    let tree = 100f64.ln() / 1.5;
    assert!((r.ell_star.unwrap() - tree).abs() < 1e-6 * tree);

    // The same through an extra spin (a sector the bosons do not describe)
    // on an otherwise null backscattering term.
    let text = wire(
        0.3,
        &term_toml("dressed", "[1, -1]", 0.01, "extra_spin = \"1/2\""),
    );
    let r = run(&system(&text), defaults(40.0));
    assert_eq!(r.outcome, Outcome::Spinful);
    assert_eq!(r.winner.as_deref(), Some("dressed"));
    assert_eq!(r.terms[0].spin, "1/2");
    assert_eq!(r.terms[0].dimension, r.terms[0].dimension0);
}

#[test]
fn a_null_winner_beats_a_slower_spinful_term() {
    // Outcome follows the first term to reach y_strong: here the null
    // backscattering (Delta = K_L = 0.73) against the electron
    // (Delta = (K_L + 1/K_L)/4 = 0.52, spin 1/2) started 100 times weaker:
    // tree level 4.6/1.27 = 3.6 against 9.2/1.48 = 6.2.
    let text = wire(
        0.3,
        &(term_toml("backscatter", "[1, -1]", 0.01, "")
            + &term_toml("electron", "[1, 0]", 1e-4, "allowed_charge = 1")),
    );
    let r = run(&system(&text), defaults(40.0));
    assert_eq!(r.outcome, Outcome::Strong);
    assert_eq!(r.winner.as_deref(), Some("backscatter"));
}

#[test]
fn a_v_that_is_not_positive_definite_is_unphysical() {
    for lam in [1.2, -1.5, 1.0] {
        let text = wire(lam, &term_toml("backscatter", "[1, -1]", 0.1, ""));
        let r = run(&system(&text), defaults(40.0));
        assert_eq!(r.outcome, Outcome::Unphysical, "lam = {lam}");
        let msg = r.message.unwrap_or_default();
        assert!(msg.contains("not positive definite"), "{msg}");
        assert!(r.terms.is_empty() && r.winner.is_none());
    }
}

/// A single wire with momenta k_R = delta, k_L = -delta (measured from
/// half filling), so backscattering m = (1, -1) carries k = 2 delta and
/// pairing m = (1, 1) carries none.
fn detuned(delta: f64, yb: f64, yp: f64) -> String {
    let mut text = wire(
        0.3,
        &(term_toml("backscatter", "[1, -1]", yb, "")
            + &term_toml("pairing", "[1, 1]", yp, "allowed_charge = 2")),
    );
    text = text.replace(
        "charge = [1, 1]\n",
        &format!(
            "charge = [1, 1]\nmomentum = [{}, {}]\n",
            num(delta),
            num(-delta)
        ),
    );
    assert!(text.contains("momentum"));
    text
}

#[test]
fn a_mismatched_term_stops_flowing_at_ell_k() {
    // k = 0.01 for backscattering: ell_k = ln(1/|k|) = ln 100 [Giamarchi
    // (2004) ch. 2]. Without the mismatch backscattering (Delta = 0.73) wins
    // long before pairing (Delta = 1.36, started 10 times weaker); with it,
    // backscattering is frozen at ell_k before reaching strong coupling
    // (tree level: 1e-3 e^{1.27 * 4.6} = 0.34) and pairing wins.
    let (yb, yp) = (1e-3, 1e-4);
    let r = run(&system(&detuned(0.0, yb, yp)), defaults(40.0));
    assert_eq!(r.winner.as_deref(), Some("backscatter"));

    let r = run(&system(&detuned(0.005, yb, yp)), defaults(40.0));
    assert_eq!(r.outcome, Outcome::Strong);
    assert_eq!(r.winner.as_deref(), Some("pairing"));
    let b = term(&r, "backscatter");
    let t = &r.terms[b];
    let ell_k = 100f64.ln();
    assert!((t.momentum.unwrap() - 0.01).abs() < 1e-15);
    assert!((t.ell_k.unwrap() - ell_k).abs() < 1e-12);
    assert_eq!(r.terms[term(&r, "pairing")].ell_k, None);
    assert!(r.ell_star.unwrap() > ell_k + 1.0);
    // Frozen after ell_k: every later sample has the final coupling.
    let after: Vec<f64> = r
        .samples
        .iter()
        .filter(|s| s.ell > ell_k + 1e-9)
        .map(|s| s.couplings[b])
        .collect();
    assert!(after.len() > 3);
    assert!(after.iter().all(|y| *y == t.coupling), "{after:?}");
    // Growing before, at the tree-level rate (second-order corrections are
    // below 1 % here: Delta_b moves by about y^2/(8 (2 - Delta)) < 0.01).
    let before: Vec<f64> = r
        .samples
        .iter()
        .filter(|s| s.ell <= ell_k + 1e-9)
        .map(|s| s.couplings[b])
        .collect();
    assert!(before.windows(2).all(|w| w[1] > w[0]));
    let tree = yb * ((2.0 - luttinger(0.3)) * ell_k).exp();
    assert!(
        (t.coupling - tree).abs() < 0.01 * tree,
        "frozen at {}, tree level {tree}",
        t.coupling
    );
}

#[test]
fn a_flow_left_with_only_mismatched_terms_is_gapless() {
    // Only the mismatched backscattering: after ell_k nothing flows any more
    // and the incommensurate term has dropped out, so no gap opens.
    let r = run(&system(&detuned(0.005, 1e-3, 0.0)), defaults(40.0));
    assert_eq!(r.outcome, Outcome::Gapless);
    assert_eq!(r.winner, None);
    let ell_k = 100f64.ln();
    assert!(
        r.ell_end >= ell_k && r.ell_end < ell_k + 1.0,
        "{}",
        r.ell_end
    );
}

#[test]
fn runner_up_among_mirror_images_is_the_first_listed() {
    // flows/two_targets.toml: t_up and t_dn are mirror images (spin up and
    // down), so their couplings are equal at every ell and differ only by
    // the rounding of the sums (1e-15 relative, either sign). The
    // runner-up among them is the first listed (as the winner,
    // `FlowRhs::strongest`), not the one rounding favours: before this
    // rule it flipped between t_up and t_dn with the number of wires and
    // the order of the OPE sums. A consistency check, no physics values.
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("flows/two_targets.toml");
    let text = std::fs::read_to_string(path).expect("bundled model");
    let mut layouts = vec!["wires = \"infinite\"\n".to_string()];
    for wires in [6, 13, 24] {
        for boundary in ["open", "periodic"] {
            layouts.push(format!("wires = {wires}\nboundary = \"{boundary}\"\n"));
        }
    }
    for layout in layouts {
        let model = text
            .replace("boundary = \"periodic\"\n", "")
            .replace("wires = 4\n", &layout);
        let sys = system(&model);
        let r = run(&sys, FlowOptions::default());
        assert_eq!(r.winner.as_deref(), Some("t_diff"), "{layout}");
        let up = r.runner_up.as_ref().expect("runner-up");
        assert_eq!(up.name, "t_up", "{layout}");
    }
}
