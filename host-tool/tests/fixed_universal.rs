//! The firmware's universal fixed-point tables are exactly what the host generates, and the functions
//! built from them meet their error budgets against f64 (std's `ln`/`exp`, correctly rounded to well
//! below the budgets).
//!
//! Regenerate the checked-in file with `LOGTRIM_BLESS=1 cargo test -p logtrim-host --test fixed_universal`.

use logtrim::fixed::transcend::{bend_q24, exp_q32};

#[test]
fn universal_tables_are_current() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/../firmware-lib/src/fixed/universal.rs");
    let want = logtrim_host::emit::rust::universal_source().unwrap();
    if std::env::var_os("LOGTRIM_BLESS").is_some() {
        std::fs::write(path, &want).unwrap();
    }
    let have = std::fs::read_to_string(path).unwrap();
    assert!(have == want, "{path} is stale: regenerate it with LOGTRIM_BLESS=1 (see this file's docs)");
    assert_eq!(logtrim::fixed::universal::BEND.to_vec(), logtrim_host::tables::universal_bend().unwrap());
    assert_eq!(logtrim::fixed::universal::EXP64.to_vec(), logtrim_host::tables::universal_exp64());
}

/// Error budget of G(v) = ln(1 − e^(−v)), checked on every Q24 input whose low bits are zero at a spacing
/// of 2^6 (2^23 inputs over the table). An error δG in x̃ is an error of δG·S·s codes, S the slope in codes
/// per neper and s = 1 − e^(−v) the sensitivity there (the bias bend's ∂w/∂x): so the budget is on δG·s,
/// 2e-6 Np, a twentieth of a ¼-LSB budget at 6000 codes/Np. (δG itself is printed too, where s ≥ 0.1, the
/// default sensitivity limit below which readings are refused.)
#[test]
fn bend_meets_its_budget() {
    let q = 2f64.powi(24);
    let (mut worst_weighted, mut worst_usable) = (0.0f64, 0.0f64);
    let (mut at_weighted, mut at_usable) = (0.0, 0.0);
    let mut v = 1i32 << 14;
    while v < 1i32 << 29 {
        let got = f64::from(bend_q24(v).unwrap()) / q;
        let x = f64::from(v) / q;
        let s = -(-x).exp_m1();
        let want = s.ln();
        let e = (got - want).abs();
        if e * s > worst_weighted {
            worst_weighted = e * s;
            at_weighted = x;
        }
        if s >= 0.1 && e > worst_usable {
            worst_usable = e;
            at_usable = x;
        }
        v += 1 << 6;
    }
    eprintln!("bend: max error·sensitivity {worst_weighted:.3e} Np at v = {at_weighted}; max error {worst_usable:.3e} Np where the sensitivity is at least 0.1 (v = {at_usable})");
    assert!(worst_weighted < 2e-6, "bend error·sensitivity {worst_weighted:e} at v = {at_weighted}");
    // Below the table: the bias current swamps the signal.
    assert_eq!(bend_q24((1 << 14) - 1), Err(logtrim::Error::BelowRange));
    assert_eq!(bend_q24(i32::MIN), Err(logtrim::Error::BelowRange));
    // Above: |G| < e^-32.
    assert_eq!(bend_q24(1 << 29), Ok(0));
    assert_eq!(bend_q24(i32::MAX), Ok(0));
}

/// Error budget of e^x in Q32: relative 1.5e-8 (plus one unit of the last place) for x in [−20, 21.4],
/// on every Q24 input at a spacing of 2^8 (1.6e8/256 inputs).
#[test]
fn exp_meets_its_budget() {
    let q = 2f64.powi(24);
    let mut worst = 0.0f64;
    let mut at = 0.0;
    let mut x = (-20.0 * q) as i32;
    while x < (21.4 * q) as i32 {
        let got = exp_q32(x).unwrap() as f64 / 2f64.powi(32);
        let want = (x as f64 / q).exp();
        let e = (got - want).abs() / want;
        let ulp = 2f64.powi(-32) / want;
        if e - ulp > worst {
            worst = e - ulp;
            at = x as f64 / q;
        }
        x += 1 << 8;
    }
    eprintln!("exp: max relative error {worst:.3e} (beyond one Q32 unit) at x = {at}");
    assert!(worst < 1.5e-8, "exp error {worst:e} at x = {at}");
    // e^0 = 1 exactly; e^(ln 2) = 2.
    assert_eq!(exp_q32(0), Ok(1 << 32));
    assert!((exp_q32((std::f64::consts::LN_2 * q).round() as i32).unwrap() - (2i64 << 32)).abs() < 1 << 8);
    // Above 21.48 the ratio does not fit; far below it rounds to 0.
    assert_eq!(exp_q32((21.5 * q) as i32), Err(logtrim::Error::AboveRange));
    assert_eq!(exp_q32(i32::MAX), Err(logtrim::Error::AboveRange));
    assert_eq!(exp_q32(i32::MIN), Ok(0));
}
