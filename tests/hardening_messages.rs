//! Issue 19, "Messages that mislead": a fixed point that cannot be computed
//! accurately names its real cause (subnormal V entries, or K's large
//! entries with a well-conditioned V) instead of "V is badly conditioned
//! (condition number 1.0e0)". The models are invented demos: the numbers
//! only have to trigger each cause. (The unknown-function message is
//! tested in `tests/hardening_gaps.rs` and in `src/model/expr.rs`.)

use predicates::prelude::*;

mod common;

use common::pinflow;

#[test]
fn subnormal_v_entries_are_named() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("tiny.toml"),
        "[fields]\nK = [[1, 0], [0, -1]]\ncharge = [1, 1]\nV = [[\"1e-310\", \"0\"], [\"0\", \"1e-310\"]]\n\n[[term]]\nname = \"b\"\nvector = [1, -1]\n",
    )
    .unwrap();
    pinflow(dir.path())
        .args(["dims", "tiny.toml"])
        .assert()
        .failure()
        .stderr(
            predicate::str::contains("tiny.toml")
                .and(predicate::str::contains(
                    "V's entries are tiny (largest |V_ij| = 1.0e-310, some subnormal)",
                ))
                .and(predicate::str::contains("condition number").not()),
        );
}

#[test]
fn large_k_entries_are_named_when_v_is_not_the_cause() {
    // An infinite array (q-space path) whose cell K has entries near the
    // 2^20 limit and determinant -1: V = [[1, 0.3], [0.3, 1]] is well
    // conditioned (condition number 1.3/0.7), K is not.
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("bigk.toml"),
        "[params]\nlambda = 0.3\n\n[array]\nwires = \"infinite\"\nK = [[1048576, 1048575], [1048575, 1048574]]\ncharge = [1, 1]\n\n[array.V]\n0 = [[\"1\", \"lambda\"], [\"lambda\", \"1\"]]\n\n[[term]]\nname = \"t\"\nvector = [1, -1]\n",
    )
    .unwrap();
    pinflow(dir.path())
        .args(["dims", "bigk.toml"])
        .assert()
        .code(1)
        .stderr(
            predicate::str::contains("bigk.toml")
                .and(predicate::str::contains(
                    "K has large entries (largest |K_ij| = 1048576; V is not the cause)",
                ))
                .and(predicate::str::contains("choose a K with smaller entries"))
                .and(predicate::str::contains("V is badly conditioned").not()),
        );
}
