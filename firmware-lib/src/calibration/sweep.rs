//! The f64 reference swept over a temperature's codes ([`ReferenceSweep`], feature `reference`): what
//! `logtrim verify` compares both firmware paths with, at a fraction of [`Calibration::correct_f64`]'s cost
//! per code.

// Comparisons are written as `!(a > b)` on purpose: a NaN makes them true and so is rejected.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::nonminimal_bool)]

use super::inverse::Stage;
use super::reference::reading_f64;
use super::{Calibration, F64Stage, ReadingF64, MAX_EXP_ARG};
use crate::error::Error;
use crate::math::F64Math;

impl Calibration {
    /// A sweep of the f64 reference over the whole codes at one temperature, with the bend's Newton solve
    /// started from the previous code's solution (see [`ReferenceSweep`]).
    pub fn reference_sweep(&self, temp_c: f64) -> ReferenceSweep<'_> {
        let stage = self.reference_stage(temp_c);
        let inv_slope = stage.inner.as_ref().map_or(0.0, |st| 1.0 / st.terms.slope);
        ReferenceSweep { cal: self, stage, inv_slope, seed: None, near: Anchors::NONE, warm: 0 }
    }
}

/// The f64 reference over many codes at one temperature, for exhaustive checks on the host.
///
/// [`ReferenceSweep::correct`] gives the status (value or error) of [`Calibration::correct_staged_f64`] at
/// every code, and its x, sensitivity and ∂x/∂code to f64 precision, but solves the bend's
/// `z + h(e^z − β) = w` by Newton from the previous code's solution (a second-order prediction, then steps
/// until one is at most 1e-9, its error then below 1e-18): one exponential per code where the exact path,
/// started at `z = w`, takes two to four. The two solutions differ only by the exact path's own remaining
/// error (half its last step squared, its last step at most `2e-7·(1 + |z|)`) and rounding. Its `exp` and
/// `ln` are libm's at an anchor, renewed every few codes, and short series from there (within 3 ULP).
/// Codes may come in any order; in increasing order the warm start answers almost everywhere.
///
/// It vouches for the status only where the exact path provably converges to the same root within its
/// steps (`h ≥ 0` and `h·(e^z + β) ≤ ½`; without a bend, `h = 0`, both take `z = w`) and the point lies
/// farther than a thousand times that remaining error, propagated to e^x, the sensitivity and x, from
/// every limit (`e^x = 0`, the sensitivity limit, both ends of the x range). It gives a value only where
/// `e^z/e^x`, by which z's rounding grows in x, is at most 100 (the two paths' x then agree within
/// 1e-12 Np). Everywhere else, and after any error that leaves no solution to start from, it runs the
/// exact path itself.
#[derive(Debug, Clone)]
pub struct ReferenceSweep<'a> {
    cal: &'a Calibration,
    stage: F64Stage,
    /// `1/slope`: the warm start's w is `(code − offset)·(1/slope)`, within 2 ULP of the exact path's.
    inv_slope: f64,
    seed: Option<Seed>,
    near: Anchors,
    warm: u64,
}

/// `exp` and `ln` near points where libm evaluated them: `e^z = e^a·e^(z−a)` and
/// `ln y = ln b + ln(1 + (y − b)/b)` by short series while `|z − a|` and `|y − b|/b` stay at most
/// [`ANCHOR_REACH`] (e^z within 3 ULP of libm's own value, ln y within `4e-16·(1 + |ln y|)` of it), a new
/// anchor from libm beyond.
#[derive(Debug, Clone, Copy)]
pub(super) struct Anchors {
    /// a and e^a.
    pub(super) z: f64,
    pub(super) exp_z: f64,
    /// b, ln b and 1/b.
    pub(super) y: f64,
    pub(super) ln_y: f64,
    pub(super) inv_y: f64,
}

/// How far from its anchor [`Anchors`] evaluates a series: the first omitted terms are then below 1e-19
/// (`t⁶/720` for `exp`, `t⁷/7` for `ln`).
const ANCHOR_REACH: f64 = 2e-3;

impl Anchors {
    pub(super) const NONE: Anchors =
        Anchors { z: f64::NAN, exp_z: f64::NAN, y: f64::NAN, ln_y: f64::NAN, inv_y: f64::NAN };

    /// e^z.
    #[inline(always)]
    pub(super) fn exp(&mut self, z: f64) -> f64 {
        let t = z - self.z;
        if !(libm::fabs(t) <= ANCHOR_REACH) {
            self.z = z;
            self.exp_z = libm::exp(z);
            return self.exp_z;
        }
        // e^t − 1 to t⁵, split for a short dependency chain.
        let t2 = t * t;
        let em1 = t + t2 * ((0.5 + t * (1.0 / 6.0)) + t2 * (1.0 / 24.0 + t * (1.0 / 120.0)));
        self.exp_z + self.exp_z * em1
    }

    /// ln y, for y > 0.
    #[inline(always)]
    pub(super) fn ln(&mut self, y: f64) -> f64 {
        let r = (y - self.y) * self.inv_y;
        if !(libm::fabs(r) <= ANCHOR_REACH) {
            self.y = y;
            self.ln_y = libm::log(y);
            self.inv_y = 1.0 / y;
            return self.ln_y;
        }
        // ln(1 + r) to r⁶, split for a short dependency chain.
        let r2 = r * r;
        let a = r - r2 * 0.5;
        let b = r * (1.0 / 3.0) - r2 * 0.25;
        let c = r * 0.2 - r2 * (1.0 / 6.0);
        self.ln_y + (a + r2 * (b + r2 * c))
    }
}

/// A solution of the bend's equation to start the next one from.
#[derive(Debug, Clone, Copy)]
struct Seed {
    w: f64,
    z: f64,
    ez: f64,
    /// `1/(1 + h e^z)`, ∂z/∂w.
    inv_d: f64,
}

/// Newton steps of the warm start before it gives way to the exact path.
const WARM_STEPS: usize = 3;
/// The warm start stops after a step at most this large: its remaining error is then below `h e^z/2` times
/// the step squared.
const WARM_STEP: f64 = 1e-9;
/// How many times its own possible error a warm-started point must lie from a limit.
const WARM_MARGIN: f64 = 1e3;
/// The largest `e^z/e^x` (the factor by which an error in z grows in x) of a warm-started value.
const WARM_CONDITION: f64 = 100.0;

impl ReferenceSweep<'_> {
    /// The reference at `code` and the sweep's temperature: the status of
    /// [`Calibration::correct_staged_f64`], values to f64 precision.
    pub fn correct(&mut self, code: u32) -> Result<ReadingF64, Error> {
        let cal = self.cal;
        if self.stage.non_finite {
            return Err(Error::NonFinite);
        }
        cal.adc.check_code(code)?;
        let st = self.stage.inner.as_ref().map_err(|e| *e)?;
        let t = &st.terms;
        if let Some(seed) = self.seed.take() {
            let w = (f64::from(code) - t.offset) * self.inv_slope;
            if let Some(r) = warm(cal, st, w, seed, &mut self.seed, &mut self.near) {
                self.warm += 1;
                return r;
            }
        }
        // The exact path, step by step as `evaluate_staged`, keeping its solution as the next seed.
        let w = (f64::from(code) - t.offset) / t.slope;
        let z = cal.newton::<F64Math>(w, t)?;
        let ez = libm::exp(z);
        self.seed = Some(Seed { w, z, ez, inv_d: 1.0 / (1.0 + t.h * ez) });
        let (x, sens) = cal.x_from_ez::<F64Math>(ez, t)?;
        cal.range_checked(x, sens, st).map(reading_f64)
    }

    /// How many codes so far the warm start answered (the others took the exact path).
    pub fn warm_points(&self) -> u64 {
        self.warm
    }
}

/// The warm start of [`ReferenceSweep::correct`] at `w`, or `None` where it cannot vouch for the exact
/// path's status. Sets the next seed where it answers.
fn warm(
    cal: &Calibration,
    st: &Stage<f64>,
    w: f64,
    seed: Seed,
    next: &mut Option<Seed>,
    near: &mut Anchors,
) -> Option<Result<ReadingF64, Error>> {
    let t = &st.terms;
    let (h, beta) = (t.h, t.beta);
    // Where w may lie on the other side of the exact path's limit, the exact path decides.
    if !(h >= 0.0 && w < f64::from(MAX_EXP_ARG) - 1e-9) {
        return None;
    }
    let (z, ez, inv_d) = if h == 0.0 {
        // No bend: z = w, as the exact path takes it without a Newton step.
        (w, near.exp(w), 1.0)
    } else {
        // z(w) to second order from the seed: z' = 1/(1 + h e^z), z'' = −h e^z/(1 + h e^z)³.
        let g = (w - seed.w) * seed.inv_d;
        let mut z = seed.z + g - 0.5 * h * seed.ez * g * g * seed.inv_d;
        let (mut ez, mut inv_d) = (f64::NAN, 0.0);
        for _ in 0..WARM_STEPS {
            let e = near.exp(z);
            inv_d = 1.0 / (1.0 + h * e);
            let step = (z + h * (e - beta) - w) * inv_d;
            z -= step;
            if libm::fabs(step) <= WARM_STEP {
                // e^(z − step): the first omitted term of the series is below 2e-28 relative.
                ez = e * (1.0 - step + 0.5 * step * step);
                break;
            }
        }
        (z, ez, inv_d)
    };
    if !(ez.is_finite() && z.is_finite()) {
        return None;
    }
    // From z = w the exact path's first error is at most h·(e^z + β); at most ½, each step at least halves
    // and squares it, so it converges to this root within its steps.
    let he = h * ez;
    if !(he + h * beta <= 0.5) {
        return None;
    }
    // The exact path's possible distance from the root, relative in e^z: at most h e^z/2 times its last
    // step squared, plus rounding; and in e^z itself.
    let az = libm::fabs(z);
    let last = 2e-7 * (1.0 + az);
    let rel = 0.5 * he * last * last + 2e-15 * (1.0 + az);
    let ez_err = ez * rel + 1e-15 * (ez + beta);
    let y = ez - beta; // e^x
    if !(libm::fabs(y) > WARM_MARGIN * ez_err) {
        return None;
    }
    *next = Some(Seed { w, z, ez, inv_d });
    if y < 0.0 {
        return Some(Err(Error::BelowRange));
    }
    let (x, sens) = cal.x_from_parts(ez, y, near.ln(y), t).ok()?;
    let xr = &cal.x_range;
    // Errors in the sensitivity e^x/e^z + h e^x (β < e^z here) and, times e^x, in x = ln e^x + R.
    let sens_err = (rel + 2e-15) * (1.0 + he) + 1e-15;
    let x_err_y = ez_err + 1e-15 * (1.0 + libm::fabs(x)) * y;
    let near = |v: f64, limit: f32, scale: f64, err: f64| {
        !(libm::fabs(v - f64::from(limit)) * scale > WARM_MARGIN * err)
    };
    if near(sens, xr.min_sensitivity, 1.0, sens_err) {
        return None;
    }
    // Below the sensitivity limit the status is BelowRange whatever x is.
    if !(sens < f64::from(xr.min_sensitivity)) && (near(x, xr.min, y, x_err_y) || near(x, xr.max, y, x_err_y))
    {
        return None;
    }
    let r = cal.range_checked(x, sens, st);
    // A value where x = ln(e^z − β) amplifies z's rounding more than a hundredfold is the exact path's.
    if r.is_ok() && !(WARM_CONDITION * y >= ez) {
        return None;
    }
    Some(r.map(reading_f64))
}
