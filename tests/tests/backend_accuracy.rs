//! Accuracy of the f32 math backends, re-measured against f64.
//!
//! The reference is std's f64 `ln`/`exp` (a general-purpose reference library; its error, under 1 ULP of
//! f64, is about 2⁻²⁹ of an f32 ULP and negligible here). Inputs are f32 values, so the reference sees
//! exactly the input the backend sees. For each function and range: evenly spaced points plus seeded
//! random ones, over the ranges the correction uses — `ln` over 1e-6…1e6 split at 1, `exp` over −20…20.
//!
//! The bounds asserted here are the figures in the table of `firmware-lib/src/math/backend.rs`; the test also
//! checks that the table states them, so neither can drift from the other or from the code. For
//! micromath the check is two-sided (the measured error must be at least half the stated bound), so an
//! improvement in the crate shows up as a failing test and a doc update, not as stale pessimism.

use rand::{RngExt, SeedableRng};
use rand_xorshift::XorShiftRng;

/// Points per function and range: half evenly spaced, half random.
const POINTS: usize = 100_000;

/// The module docs whose table this test keeps honest.
const MATH_DOCS: &str = include_str!("../../firmware-lib/src/math/backend.rs");

#[derive(Debug, Default)]
struct Stats {
    max_abs: f64,
    max_rel: f64,
    max_ulp: f64,
    worst_input: f32,
}

/// The spacing of f32 values in the binade of `r` (the f32 ULP at `r`).
fn ulp_f32(r: f64) -> f64 {
    let a = r.abs();
    if a < f64::from(f32::MIN_POSITIVE) {
        return 2f64.powi(-149);
    }
    2f64.powi(a.log2().floor() as i32 - 23)
}

fn measure(inputs: &[f32], f: impl Fn(f32) -> f32, reference: impl Fn(f64) -> f64) -> Stats {
    let mut s = Stats::default();
    for &x in inputs {
        let want = reference(f64::from(x));
        let got = f64::from(f(x));
        // A NaN result counts as an infinite error (f64::max would silently drop it).
        let diff = (got - want).abs();
        let abs = if diff.is_nan() { f64::INFINITY } else { diff };
        let ulp = abs / ulp_f32(want);
        s.max_abs = s.max_abs.max(abs);
        if want != 0.0 {
            s.max_rel = s.max_rel.max(abs / want.abs());
        }
        if ulp > s.max_ulp {
            s.max_ulp = ulp;
            s.worst_input = x;
        }
    }
    s
}

/// Evenly spaced in ln x plus seeded log-uniform random points over [lo, hi).
fn log_spaced(lo: f64, hi: f64, seed: u64) -> Vec<f32> {
    let (a, b) = (lo.ln(), hi.ln());
    let half = POINTS / 2;
    let mut v: Vec<f32> = (0..half).map(|i| (a + (b - a) * i as f64 / half as f64).exp() as f32).collect();
    let mut rng = XorShiftRng::seed_from_u64(seed);
    v.extend((0..half).map(|_| rng.random_range(a..b).exp() as f32));
    v.retain(|x| f64::from(*x) >= lo && f64::from(*x) < hi);
    v
}

/// Evenly spaced plus seeded uniform random points over [lo, hi].
fn lin_spaced(lo: f64, hi: f64, seed: u64) -> Vec<f32> {
    let half = POINTS / 2;
    let mut v: Vec<f32> = (0..=half).map(|i| (lo + (hi - lo) * i as f64 / half as f64) as f32).collect();
    let mut rng = XorShiftRng::seed_from_u64(seed);
    v.extend((0..half).map(|_| rng.random_range(lo..hi) as f32));
    v
}

fn report(name: &str, s: &Stats) {
    println!(
        "{name:<28} max abs {:.3e}  max rel {:.3e}  max ULP {:.3e}  (worst at {:e})",
        s.max_abs, s.max_rel, s.max_ulp, s.worst_input
    );
}

/// Asserts the docs' table states `text` (so that the bound asserted below is the one documented).
fn documented(text: &str) {
    assert!(
        MATH_DOCS.contains(text),
        "firmware-lib/src/math/backend.rs docs no longer state `{text}`: keep in step"
    );
}

#[test]
fn libm_within_one_ulp() {
    let below = log_spaced(1e-6, 1.0, 1);
    let above = log_spaced(1.0, 1e6, 2);
    let exps = lin_spaced(-20.0, 20.0, 3);
    for (name, s) in [
        ("libm logf, 1e-6 <= x < 1", measure(&below, libm::logf, f64::ln)),
        ("libm logf, 1 <= x < 1e6", measure(&above, libm::logf, f64::ln)),
        ("libm expf, -20 <= x <= 20", measure(&exps, libm::expf, f64::exp)),
    ] {
        report(name, &s);
        assert!(s.max_ulp <= 1.0, "{name}: {s:?}");
        // Within 1 ULP is within 2⁻²³ relative (the largest ULP of a binade relative to its lowest value).
        assert!(s.max_rel <= 2f64.powi(-23), "{name}: {s:?}");
    }
    documented("`logf`/`expf` within 1 ULP");
}

/// Bound (figure, text as the docs' table writes it).
type Bound = (f64, &'static str);

/// Each bound is in the docs, and each measured figure (ln below 1 and at or above 1 absolute, exp
/// relative) is within its bound and at least half of it (a bound far above what is measured would say
/// little).
fn within_documented(who: &str, below: &Stats, above: &Stats, exps: &Stats, bounds: [Bound; 3]) {
    let names = ["ln below 1 (abs)", "ln at or above 1 (abs)", "exp (rel)"];
    let measured = [below.max_abs, above.max_abs, exps.max_rel];
    for ((name, got), (bound, text)) in names.into_iter().zip(measured).zip(bounds) {
        documented(text);
        assert!(got <= bound, "{who} {name}: measured {got:e} above the documented {bound:e}");
        assert!(got >= 0.5 * bound, "{who} {name}: measured {got:e}, far below the documented {bound:e}");
    }
}

#[test]
fn micromath_within_its_documented_bounds() {
    // (measured quantity, documented bound as written in the docs' table)
    const LN_BELOW_1_ABS: Bound = (0.12, "`ln` below 1: 0.12 absolute");
    const LN_ABOVE_1_ABS: Bound = (7e-5, "`ln` at or above 1: 7e-5 absolute");
    const EXP_REL: Bound = (2.5e-3, "`exp`: 2.5e-3 relative");
    let ln = |x: f32| micromath::F32Ext::ln(x);
    let exp = |x: f32| micromath::F32Ext::exp(x);
    let below = measure(&log_spaced(1e-6, 1.0, 4), ln, f64::ln);
    let above = measure(&log_spaced(1.0, 1e6, 5), ln, f64::ln);
    let exps = measure(&lin_spaced(-20.0, 20.0, 6), exp, f64::exp);
    report("micromath ln, 1e-6 <= x < 1", &below);
    report("micromath ln, 1 <= x < 1e6", &above);
    report("micromath exp, -20 <= x <= 20", &exps);
    within_documented("micromath", &below, &above, &exps, [LN_BELOW_1_ABS, LN_ABOVE_1_ABS, EXP_REL]);
}

/// The `Micromath` backend as the correction calls it: micromath's `ln` below 1 taken as −ln(1/x), its `exp`
/// as it is.
#[test]
fn the_micromath_backend_within_its_documented_bounds() {
    use logtrim::math::{Backend, Micromath};
    const LN_BELOW_1_ABS: Bound = (7e-5, "backend `ln` below 1: 7e-5 absolute");
    const EXP_REL: Bound = (2.5e-3, "backend `exp`: 2.5e-3 relative");
    let below = measure(&log_spaced(1e-6, 1.0, 4), Micromath::ln, f64::ln);
    let above = measure(&log_spaced(1.0, 1e6, 5), Micromath::ln, f64::ln);
    let exps = measure(&lin_spaced(-20.0, 20.0, 6), Micromath::exp, f64::exp);
    report("Micromath backend ln, 1e-6 <= x < 1", &below);
    report("Micromath backend exp, -20 <= x <= 20", &exps);
    within_documented("Micromath backend", &below, &above, &exps, [LN_BELOW_1_ABS, LN_BELOW_1_ABS, EXP_REL]);
}
