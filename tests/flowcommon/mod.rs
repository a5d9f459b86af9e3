//! Helpers shared by the flow tests: small model files written as text,
//! flows with chosen options, and the single-cosine formulas of the
//! Kosterlitz-Thouless flow.
//!
//! Conventions [physics reference section 3]: y is normalised so that one
//! null cosine obeys dDelta/dell = -(y^2/4) Delta^2, dy/dell = (2 - Delta) y.
#![allow(dead_code)]

use pinflow::core::system::System;
use pinflow::flow::{Closure, Flow, FlowOptions, FlowResult};
use pinflow::model::Model;

/// A validated system from model text.
pub fn system(text: &str) -> System {
    let model = Model::parse(text, "test.toml").unwrap_or_else(|e| panic!("{e}\n{text}"));
    System::new(model).unwrap_or_else(|e| panic!("{e}"))
}

/// The default parameter point of a system.
pub fn point(sys: &System) -> Vec<f64> {
    sys.model.params.defaults().to_vec()
}

/// Options with tight tolerances and the given closure and ell_max.
pub fn tight(closure: Closure, ell_max: f64) -> FlowOptions {
    FlowOptions {
        ell_max,
        closure,
        rtol: 1e-11,
        atol: 1e-15,
        max_steps: 1_000_000,
        ..FlowOptions::default()
    }
}

/// Flow a system at its default point.
pub fn run(sys: &System, opts: FlowOptions) -> FlowResult {
    let p = point(sys);
    Flow::new(sys, opts).run(&p).expect("flow runs")
}

/// Index of a term in a result, by name.
pub fn term(r: &FlowResult, name: &str) -> usize {
    r.terms
        .iter()
        .position(|t| t.name == name)
        .unwrap_or_else(|| {
            let names: Vec<&str> = r.terms.iter().map(|t| t.name.as_str()).collect();
            panic!("no term {name} among {names:?}")
        })
}

/// A float written so that TOML reads it back exactly.
pub fn num(x: f64) -> String {
    let s = format!("{x:?}");
    if s.contains('.') || s.contains('e') || s.contains("inf") || s.contains("NaN") {
        s
    } else {
        format!("{s}.0")
    }
}

/// One `[[term]]` table: name, particle content (a TOML list or per-wire
/// table, written as given), coupling, and extra lines.
pub fn term_toml(name: &str, particles: &str, coupling: f64, extra: &str) -> String {
    format!(
        "\n[[term]]\nname = \"{name}\"\nparticles = {particles}\ncoupling = {}\n{extra}\n",
        num(coupling)
    )
}

/// A single wire of spinless fermions: K = diag(1, -1), t = (1, 1),
/// V = [[1, lam], [lam, 1]], followed by the given `[[term]]` tables.
pub fn wire(lam: f64, terms: &str) -> String {
    format!(
        "name = \"wire\"\n[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nV = [[1.0, {l}], [{l}, 1.0]]\n{terms}",
        l = num(lam)
    )
}

/// Luttinger parameter of the single wire [Giamarchi (2004), ch. 2, in the
/// form of checks.md: K_L = sqrt((1 - lam)/(1 + lam))].
pub fn luttinger(lam: f64) -> f64 {
    ((1.0 - lam) / (1.0 + lam)).sqrt()
}

/// The intrawire lam giving a Luttinger parameter K_L (inverse of the above).
pub fn lam_for(k_l: f64) -> f64 {
    (1.0 - k_l * k_l) / (1.0 + k_l * k_l)
}

/// The conserved quantity of the single-cosine flow (derived in flow_kt.rs).
pub fn kt_invariant(y: f64, delta: f64) -> f64 {
    0.5 * y * y - 8.0 / delta - 4.0 * delta.ln()
}

/// Its value on the separatrix through (y, Delta) = (0, 2).
pub fn kt_separatrix() -> f64 {
    -4.0 - 4.0 * 2f64.ln()
}

/// Critical bare coupling for a bare dimension Delta0 > 2.
pub fn y_critical(delta0: f64) -> f64 {
    (2.0 * (8.0 / delta0 + 4.0 * (delta0 / 2.0).ln() - 4.0)).sqrt()
}
