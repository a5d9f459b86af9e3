//! `dims` flags the listed terms that break a declared symmetry (issue 16):
//! JSON `breaks_symmetry` and a note per term (src/search/breaks.rs).
//!
//! Sources: Giamarchi, "Quantum Physics in One Dimension" (2004), ch. 7:
//! on a spinful wire the spin-flip pair psi+_{R up} psi+_{L up} psi_{R down}
//! psi_{L down} (m = (1, 1, -1, -1), cos sqrt8 theta_sigma) changes S_z by
//! 2, while g1 spin backscattering (m = (1, -1, -1, 1), cos sqrt8 phi_sigma)
//! conserves S_z and is even under the spin flip. The other expectations
//! are derived in comments.

mod common;

use pinflow::core::system::System;
use pinflow::dims::DimsReport;
use pinflow::search::breaks::annotate;

use common::system;

/// A spinful wire, fields (R up, L up, R down, L down). S_z charge
/// (1, 1, -1, -1) in units of 1/2; spin flip exchanges up and down.
fn spinful(terms: &str) -> String {
    format!(
        r#"
name = "spinful wire"
[params]
a = 0.2
b = 0.1
c = 0.15
chi = 0.0
y2 = 0.1
[fields]
K = [[1, 0, 0, 0], [0, -1, 0, 0], [0, 0, 1, 0], [0, 0, 0, -1]]
charge = [1, 1, 1, 1]
V = [["1", "a", "c", "b"], ["a", "1", "b", "c"], ["c", "b", "1", "a"], ["b", "c", "a", "1"]]

[[symmetry]]
name = "Sz"
charge = [1, 1, -1, -1]

[[symmetry]]
name = "spin_flip"
map = [[0, 0, 1, 0], [0, 0, 0, 1], [1, 0, 0, 0], [0, 1, 0, 0]]
order = 2
{terms}"#
    )
}

fn annotated(sys: &System, set: &[(&str, f64)]) -> DimsReport {
    let set: Vec<(String, f64)> = set.iter().map(|(n, v)| (n.to_string(), *v)).collect();
    let point = sys.model.point_with(&set, "test").unwrap();
    let mut r = DimsReport::build(sys, &point).unwrap();
    annotate(sys, &point, &mut r).unwrap();
    r
}

/// g1 backscattering and the spin-flip pair of the spinful wire.
const G1_AND_SPIN_FLIP_PAIR: &str = r#"
[[term]]
name = "g1"
particles = [1, -1, -1, 1]
coupling = 0.1
[[term]]
name = "spin_flip_pair"
particles = [1, 1, -1, -1]
coupling = 0.1
"#;

/// The notes of a JSON output that say a term breaks a declared symmetry.
fn broken_symmetry_notes(v: &serde_json::Value) -> Vec<&str> {
    v["notes"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|n| n.as_str())
        .filter(|n| n.contains("breaks the declared symmetry"))
        .collect()
}

fn breaks(r: &DimsReport, name: &str) -> Vec<String> {
    common::term(r, name).breaks_symmetry.clone()
}

#[test]
fn spin_flip_pair_breaks_sz_and_g1_breaks_nothing() {
    // Giamarchi (2004), ch. 7. S_z of (1, 1, -1, -1) with charge
    // (1, 1, -1, -1): 1 + 1 + 1 + 1 = 4 (S_z = 2 in units of 1/2). Both
    // map to minus themselves under the flip (W^-1 m = -m), which a real
    // cosine (chi = 0) is invariant under.
    let sys = system(&spinful(G1_AND_SPIN_FLIP_PAIR));
    let r = annotated(&sys, &[]);
    assert!(breaks(&r, "g1").is_empty(), "{:?}", breaks(&r, "g1"));
    assert_eq!(breaks(&r, "spin_flip_pair"), vec!["Sz".to_string()]);
    assert!(
        r.notes
            .iter()
            .any(|n| n.contains("\"spin_flip_pair\"") && n.contains("Sz charge 4")),
        "{:#?}",
        r.notes
    );
    let json = serde_json::to_value(&r).unwrap();
    assert_eq!(
        json["terms"][1]["breaks_symmetry"],
        serde_json::json!(["Sz"])
    );
}

#[test]
fn one_spin_species_alone_breaks_the_flip_until_its_partner_is_listed() {
    // Backscattering of the up species only, m = (1, -1, 0, 0): S_z 0, and
    // the flip maps it to (0, 0, 1, -1), the down species. Alone it breaks
    // the flip; with its partner at the same coupling it does not; with
    // the partner at another coupling (y2 = 0.2) both break it.
    let up = r#"
[[term]]
name = "bs_up"
particles = [1, -1, 0, 0]
coupling = 0.1
"#;
    let down = r#"
[[term]]
name = "bs_dn"
particles = [0, 0, 1, -1]
coupling = "y2"
"#;
    let alone = annotated(&system(&spinful(up)), &[]);
    assert_eq!(breaks(&alone, "bs_up"), vec!["spin_flip".to_string()]);
    assert!(alone
        .notes
        .iter()
        .any(|n| n.contains("\"bs_up\"") && n.contains("not a listed term")));
    let both = system(&spinful(&format!("{up}{down}")));
    let r = annotated(&both, &[]);
    assert!(breaks(&r, "bs_up").is_empty() && breaks(&r, "bs_dn").is_empty());
    let r = annotated(&both, &[("y2", 0.2)]);
    assert_eq!(breaks(&r, "bs_up"), vec!["spin_flip".to_string()]);
    assert_eq!(breaks(&r, "bs_dn"), vec!["spin_flip".to_string()]);
}

#[test]
fn a_phase_breaks_the_flip_of_a_term_it_maps_to_minus_itself() {
    // Derived: g1 maps to minus itself (l -> -l) with no phase, so
    // cos(l.phi + chi) -> cos(l.phi - chi): invariant for chi = 0, broken
    // for chi = 1 (the symmetric sum is cos(chi) cos(l.phi), but the term
    // as listed is not it).
    let sys = system(&spinful(
        r#"
[[term]]
name = "g1"
particles = [1, -1, -1, 1]
coupling = 0.1
phase = "chi"
"#,
    ));
    assert!(breaks(&annotated(&sys, &[]), "g1").is_empty());
    assert_eq!(
        breaks(&annotated(&sys, &[("chi", 1.0)]), "g1"),
        vec!["spin_flip".to_string()]
    );
}

#[test]
fn a_potential_that_breaks_the_flip_is_noted_not_blamed_on_terms() {
    // V with c != its flipped partner: W^T V W swaps the up and down
    // blocks, equal here only when the two diagonal blocks agree; a
    // different intra-species a for down (V[2][3] = 0.3) breaks it, so the
    // flip is not used at that point and no term is flagged for it.
    let text = spinful(
        r#"
[[term]]
name = "bs_up"
particles = [1, -1, 0, 0]
coupling = 0.1
"#,
    )
    .replace(
        r#"["c", "b", "1", "a"], ["b", "c", "a", "1"]"#,
        r#"["c", "b", "1", "0.3"], ["b", "c", "0.3", "1"]"#,
    );
    let r = annotated(&system(&text), &[]);
    assert!(breaks(&r, "bs_up").is_empty());
    assert!(
        r.notes
            .iter()
            .any(|n| n.contains("spin_flip") && n.contains("V breaks it")),
        "{:#?}",
        r.notes
    );
}

/// The spinful wire written to a temporary folder, with these terms.
fn model_file(terms: &str) -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().expect("temporary directory");
    let path = dir.path().join("spinful.toml");
    std::fs::write(&path, spinful(terms)).expect("write the model");
    (dir, path)
}

#[test]
fn flow_notes_the_listed_term_that_breaks_a_declared_u1() {
    // Giamarchi (2004), ch. 7: the spin-flip pair m = (1, 1, -1, -1)
    // carries S_z charge 1 + 1 + 1 + 1 = 4 (in units of 1/2) against the
    // declared charge (1, 1, -1, -1); g1 (m = (1, -1, -1, 1)) carries 0.
    let (dir, path) = model_file(G1_AND_SPIN_FLIP_PAIR);
    let out = common::pinflow(dir.path())
        .args(["flow", path.to_str().unwrap(), "--format", "json"])
        .assert()
        .success();
    let json = common::without_provenance(&out.get_output().stdout);
    let notes = broken_symmetry_notes(&json);
    assert_eq!(notes.len(), 1, "{notes:#?}");
    assert!(
        notes[0].contains("\"spin_flip_pair\"") && notes[0].contains("Sz charge 4"),
        "{notes:#?}"
    );
    let text = common::pinflow(dir.path())
        .args(["flow", path.to_str().unwrap()])
        .assert()
        .success();
    let text = String::from_utf8_lossy(&text.get_output().stdout).to_string();
    assert!(
        text.contains("term \"spin_flip_pair\" breaks the declared symmetry Sz"),
        "{text}"
    );
}

#[test]
fn scan_counts_the_points_where_a_term_breaks_the_spin_flip() {
    // Derived: bs_up (1, -1, 0, 0) maps under the flip to bs_dn (0, 0, 1,
    // -1); with couplings 0.1 and y2 both are invariant only where y2 =
    // 0.1. On y2 = 0.05, 0.1, 0.15 each breaks the flip at 2 of 3 points:
    // one note per term and symmetry, not one per point.
    let (dir, path) = model_file(
        r#"
[[term]]
name = "bs_up"
particles = [1, -1, 0, 0]
coupling = 0.1
[[term]]
name = "bs_dn"
particles = [0, 0, 1, -1]
coupling = "y2"
"#,
    );
    let out = dir.path().join("scan");
    common::pinflow(dir.path())
        .args(["scan", path.to_str().unwrap(), "--x", "y2=0.05:0.15:3"])
        .arg("--out")
        .arg(&out)
        .args(["--quiet", "--threads", "1"])
        .assert()
        .success();
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("summary.json")).unwrap()).unwrap();
    let notes = broken_symmetry_notes(&summary);
    assert_eq!(notes.len(), 2, "{notes:#?}");
    assert!(notes[0].contains("\"bs_up\"") && notes[1].contains("\"bs_dn\""));
    for n in &notes {
        assert!(
            n.contains("spin_flip") && n.contains("at 2 of the 3 points"),
            "{n}"
        );
        assert!(n.contains("y2=0.05"), "{n}");
    }
}
