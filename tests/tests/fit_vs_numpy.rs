//! The fit's least-squares solver against an independent general-purpose one: numpy's `lstsq` (LAPACK
//! SVD), whose results on two deliberately hard designs are committed in `tests/tests/data/lstsq_reference.json`
//! together with the script that made them (`scripts/lstsq_reference.py`).

use logtrim_checks::within;
use logtrim_host::fit::solve::{linear_lstsq, LinearSolution};
use serde_json::Value;

fn load() -> Value {
    let text = include_str!("data/lstsq_reference.json");
    serde_json::from_str(text).unwrap()
}

fn column(v: &Value) -> Vec<f64> {
    v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
}

fn solve(case: &Value) -> (LinearSolution, Vec<Vec<f64>>, Vec<f64>) {
    let a: Vec<Vec<f64>> = case["a"].as_array().unwrap().iter().map(column).collect();
    let b = column(&case["b"]);
    let p = a[0].len();
    let s = linear_lstsq(a.len(), p, |i, buf| {
        buf.clear();
        buf.extend_from_slice(&a[i]);
        buf.push(b[i]);
    })
    .unwrap();
    (s, a, b)
}

fn fitted(a: &[Vec<f64>], x: &[f64]) -> Vec<f64> {
    a.iter().map(|r| r.iter().zip(x).map(|(p, q)| p * q).sum()).collect()
}

/// Solves the reference case `name` and checks what is unique in every case: the rank, the fitted values and
/// the SSE. Returns the solution and the case.
fn solve_and_check(name: &str) -> (LinearSolution, Value) {
    let case = load()[name].take();
    let (s, a, _) = solve(&case);
    assert_eq!(s.rank as u64, case["rank"].as_u64().unwrap(), "{name}");
    for (g, w) in fitted(&a, &s.coeffs).iter().zip(column(&case["fitted"]).iter()) {
        assert!(within(*g, *w, 1e-7, 1e-10), "{name}: fitted {g} vs numpy {w}");
    }
    assert!(
        within(s.sse, case["sse"].as_f64().unwrap(), 0.0, 1e-6),
        "{name}: sse {} vs {}",
        s.sse,
        case["sse"]
    );
    (s, case)
}

#[test]
fn ill_conditioned_design_matches_numpy_lstsq() {
    let (s, case) = solve_and_check("ill_conditioned");
    // Condition ≈ 4e9: coefficients agree to ~cond·eps relative to the largest, fitted values far better.
    let want = column(&case["x"]);
    let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    for (g, w) in s.coeffs.iter().zip(&want) {
        assert!(within(*g, *w, 1e-5 * scale, 1e-5), "coefficient {g} vs numpy {w}");
    }
}

#[test]
fn rank_deficient_design_matches_numpy_lstsq() {
    // The solution set is a line; only the fitted values and the SSE are unique, and the rank.
    solve_and_check("rank_deficient");
}
