//! What a flow's summary says (issue 13 item 6): terms stopped by their
//! momentum cut-off are named with the coupling they reached, and near ties
//! of a strong-coupling outcome are flagged (JSON `runner_up`).
//!
//! Models are single spinless wires (K = diag(1, -1), V = [[1, lam],
//! [lam, 1]]; backscattering m = (1, -1) has Delta = K_L =
//! sqrt((1 - lam)/(1 + lam)) [Giamarchi (2004) ch. 2]) and pairs of
//! identical decoupled wires; the numbers are demo values.

#[path = "flowcommon/mod.rs"]
mod common;

use common::*;
use pinflow::flow::report::FlowReport;
use pinflow::flow::{FlowOptions, Outcome};

fn report(text: &str) -> FlowReport {
    let sys = system(text);
    let r = run(&sys, FlowOptions::default());
    FlowReport::new("test", &[], &[], r, FlowOptions::default())
}

/// Two identical decoupled wires (fields R1, L1, R2, L2), a backscattering
/// cosine on each with couplings y1 and y2.
fn two_wires(y1: f64, y2: f64) -> String {
    let lam = lam_for(0.8);
    format!(
        "name = \"two\"\n[fields]\nK = [[1,0,0,0],[0,-1,0,0],[0,0,1,0],[0,0,0,-1]]\ncharge = [1,1,1,1]\nV = [[1.0,{l},0.0,0.0],[{l},1.0,0.0,0.0],[0.0,0.0,1.0,{l}],[0.0,0.0,{l},1.0]]\n{}{}",
        term_toml("a", "[1, -1, 0, 0]", y1, ""),
        term_toml("b", "[0, 0, 1, -1]", y2, ""),
        l = num(lam)
    )
}

// A relevant backscattering term (Delta = 0.82) with momentum k = 0.4
// grows from 0.05 and stops at ell_k = ln(1/0.4) = 0.92 (physics
// reference section 3); nothing else flows after that, so the flow is
// gapless. The summary must say that it grew and was cut off, not that
// every coupling decayed.
#[test]
fn a_term_stopped_by_its_cut_off_is_named() {
    let lam = 0.2;
    let text = format!(
        "name = \"w\"\n[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nV = [[1.0, {l}], [{l}, 1.0]]\nmomentum = [0.2, -0.2]\n{}",
        term_toml("bs", "[1, -1]", 0.05, ""),
        l = num(lam)
    );
    let rep = report(&text);
    assert_eq!(rep.result.outcome, Outcome::Gapless);
    let t = &rep.result.terms[0];
    assert!(t.coupling > 0.05, "it grew: {}", t.coupling);
    let h = rep.headline();
    assert!(!h.contains("every coupling decayed"), "{h}");
    assert!(
        h.contains("bs grew to") && h.contains("momentum cut-off ell_k = 0.92"),
        "{h}"
    );
}

// Two identical wires with y1 = 0.1 and y2 = 0.0995: the first wins, the
// second has |y| within 5 % of y_strong at ell* (same flow, started 0.5 %
// lower). Flagged in the headline and in JSON `runner_up`.
#[test]
fn a_near_tie_is_flagged() {
    let rep = report(&two_wires(0.1, 0.0995));
    assert_eq!(rep.result.outcome, Outcome::Strong);
    assert_eq!(rep.result.winner.as_deref(), Some("a"));
    let ru = rep.result.runner_up.as_ref().expect("a runner-up");
    assert_eq!(ru.name, "b");
    assert!(
        ru.near_tie && ru.coupling > 0.95 && ru.coupling < 1.0,
        "{ru:?}"
    );
    assert!(rep.headline().contains("near tie: b"), "{}", rep.headline());
    let json: serde_json::Value =
        serde_json::from_str(&pinflow::output::to_json(&rep).unwrap()).unwrap();
    assert_eq!(json["runner_up"]["name"], "b");
    assert!(json["runner_up"]["coupling"].as_f64().unwrap() > 0.95);
}

// A clear winner (y2 ten times smaller): runner_up is present but not a
// near tie, and the headline says nothing about a tie.
#[test]
fn a_clear_winner_is_not_a_tie() {
    let rep = report(&two_wires(0.1, 0.01));
    let ru = rep.result.runner_up.as_ref().expect("a runner-up");
    assert!(!ru.near_tie && ru.coupling < 0.5, "{ru:?}");
    assert!(!rep.headline().contains("near tie"), "{}", rep.headline());
}
