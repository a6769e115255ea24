//! The proofs behind [`Calibration::validate`]: that the slope is positive and the model monotone in x over
//! the **whole** accepted temperature range (not at a few points), and that no term can overflow f32.
//!
//! # Method
//!
//! A Chebyshev series of degree ≤ 5 is rewritten exactly in powers of τ (`P(τ) = Σ a_j τ^j`; the
//! coefficients of `T_k` are small integers). On a piece `[u, v]` of the τ range with midpoint `m`, half
//! width `h` and `r = max(|u|, |v|)`, Taylor's theorem bounds the series:
//!
//! ```text
//! |P(τ) − P(m)| ≤ |P'(m)|·h + S₂(r)·h²/2 + δ,   S₂(r) = Σ_{j≥2} |a_j|·j(j−1)·r^(j−2),
//! ```
//!
//! with `δ = 1e-12·Σ|a_j| r^j` covering the rounding of the f64 evaluation. A piece whose lower bound is
//! positive is proven; a piece whose midpoint already fails is a counterexample; any other piece is cut in
//! two. The search is depth-first on a fixed stack (no heap) with a budget of [`MAX_PIECES`] pieces; an
//! undecided range is refused, so what `validate` accepts is proven.
//!
//! What is proven, over `τ ∈ [τ(T_min − extrapolation), τ(T_max + extrapolation)]`:
//!
//! * the pole: `1 + q·τ > 0.05` (linear, so its ends suffice);
//! * the slope: `P_s(τ) > 1e-5·Σ|a_j| r^j` — positive with a margin far above f32 rounding, so the
//!   firmware's f32 slope is positive at every accepted temperature;
//! * monotone in x: the forward model's `∂code/∂x ∝ (T_K/T_ref)·P_s·e^x/(e^x+β) + P_h·e^x` is positive for
//!   every x up to `x_max`, which (with `P_s > 0`) holds exactly when
//!   `g(τ) = (T_K/T_ref)·P_s(τ) + P_h(τ)·(e^x_max + β(τ)) > 0` — interval products of the pieces' bounds
//!   (`T_K/T_ref` and `β` are monotone in τ). This is also the condition under which the firmware's Newton
//!   step `1 + h·e^z` stays positive;
//! * the residual: `x = x₀ + R(ξ, τ)` is monotone in `x₀` when `|∂R/∂ξ| < x_h`, bounded over the box by
//!   `Σ |r_ij|·T_i'(ρ_ξ)·T_j(ρ_τ)` with `ρ = max(1, |ends|)` (Chebyshev polynomials and their derivatives
//!   take their largest magnitude on `[−ρ, ρ]` at `ρ`, common practice);
//! * magnitudes: every series bounded by `Σ|a_j| r^j ≤ 1e30` over the range, so f32 never overflows.

use super::{Calibration, Model, Series, MAX_RESIDUAL, MAX_SERIES};
use crate::physics::ZERO_CELSIUS_K;

/// Most pieces the bisection may examine for one property.
pub const MAX_PIECES: u32 = 1 << 14;
/// Deepest bisection (pieces of 2^-40 of the range).
const MAX_DEPTH: usize = 40;
/// The largest magnitude any term may reach (f32 holds 3.4e38; headroom for the products).
pub const MAX_MAGNITUDE: f64 = 1e30;
/// The slope's margin above zero, relative to its series' magnitude.
const SLOPE_MARGIN: f64 = 1e-5;

/// A series in powers of τ.
#[derive(Debug, Clone, Copy)]
struct Poly {
    a: [f64; MAX_SERIES],
}

impl Poly {
    /// The monomial form of a Chebyshev series (its first [`MAX_SERIES`] coefficients).
    fn of(s: &Series) -> Poly {
        let mut a = [0.0; MAX_SERIES];
        let mut prev = [0.0; MAX_SERIES];
        let mut cur = [0.0; MAX_SERIES];
        if let Some(c) = cur.first_mut() {
            *c = 1.0;
        }
        for (k, &ck) in s.terms().iter().enumerate() {
            for (d, t) in a.iter_mut().zip(&cur) {
                *d += f64::from(ck) * t;
            }
            // T_(k+1) = 2τ·T_k − T_(k−1), and T_1 = τ·T_0.
            let factor = if k == 0 { 1.0 } else { 2.0 };
            let mut next = [0.0; MAX_SERIES];
            for (d, t) in next.iter_mut().skip(1).zip(&cur) {
                *d = factor * t;
            }
            for (d, p) in next.iter_mut().zip(&prev) {
                *d -= p;
            }
            prev = cur;
            cur = next;
        }
        Poly { a }
    }

    fn eval(&self, x: f64) -> f64 {
        self.a.iter().rev().fold(0.0, |acc, &c| acc * x + c)
    }

    fn derivative(&self, x: f64) -> f64 {
        self.a.iter().enumerate().skip(1).rev().fold(0.0, |acc, (j, &c)| acc * x + c * j as f64)
    }

    /// `Σ |a_j| r^j`: a bound of |P| on [−r, r].
    fn magnitude(&self, r: f64) -> f64 {
        self.a.iter().rev().fold(0.0, |acc, &c| acc * r + libm::fabs(c))
    }

    /// `Σ_{j≥2} |a_j| j(j−1) r^(j−2)`: a bound of |P''| on [−r, r].
    fn curvature(&self, r: f64) -> f64 {
        self.a
            .iter()
            .enumerate()
            .skip(2)
            .rev()
            .fold(0.0, |acc, (j, &c)| acc * r + libm::fabs(c) * (j * (j - 1)) as f64)
    }

    /// Bounds of P on [u, v]: (lower, upper).
    fn bounds(&self, u: f64, v: f64) -> (f64, f64) {
        let (m, h) = (0.5 * (u + v), 0.5 * (v - u));
        let r = libm::fmax(libm::fabs(u), libm::fabs(v));
        let spread =
            libm::fabs(self.derivative(m)) * h + 0.5 * self.curvature(r) * h * h + 1e-12 * self.magnitude(r);
        let p = self.eval(m);
        (p - spread, p + spread)
    }
}

/// The verdict on one piece.
enum Piece {
    /// The property holds on the whole piece.
    Proven,
    /// The property fails (or is too close to failing) at the piece's midpoint.
    Fails,
    /// Cut the piece in two.
    Undecided,
}

/// Whether `judge` proves every piece of `[a, b]` within the budget.
fn prove(a: f64, b: f64, mut judge: impl FnMut(f64, f64) -> Piece) -> bool {
    let mut stack = [(0.0f64, 0.0f64, 0usize); MAX_DEPTH + 1];
    let mut top = 1;
    if let Some(s) = stack.first_mut() {
        *s = (a, b, 0);
    }
    let mut pieces = 0u32;
    while top > 0 {
        top -= 1;
        let Some(&(u, v, depth)) = stack.get(top) else { return false };
        pieces += 1;
        if pieces > MAX_PIECES {
            return false;
        }
        match judge(u, v) {
            Piece::Proven => {}
            Piece::Fails => return false,
            Piece::Undecided => {
                if depth >= MAX_DEPTH || top + 2 > stack.len() {
                    return false;
                }
                let m = 0.5 * (u + v);
                if let Some(s) = stack.get_mut(top) {
                    *s = (m, v, depth + 1);
                }
                if let Some(s) = stack.get_mut(top + 1) {
                    *s = (u, m, depth + 1);
                }
                top += 2;
            }
        }
    }
    true
}

/// The lower end of the product of two intervals.
fn product_lower((a, b): (f64, f64), (c, d): (f64, f64)) -> f64 {
    libm::fmin(libm::fmin(a * c, a * d), libm::fmin(b * c, b * d))
}

/// The τ range of the accepted temperatures (with the extrapolation band), in f64.
pub(super) fn tau_range(cal: &Calibration) -> (f64, f64) {
    let t = &cal.temperature;
    let m = &cal.model;
    let lo = f64::from(t.min_c) - f64::from(t.extrapolation_k);
    let hi = f64::from(t.max_c) + f64::from(t.extrapolation_k);
    (m.tau(lo), m.tau(hi))
}

/// Every series (offset, slope, bulk) bounded by [`MAX_MAGNITUDE`] over the τ range.
pub(super) fn magnitudes_ok(m: &Model, (ta, tb): (f64, f64)) -> bool {
    let r = libm::fmax(libm::fabs(ta), libm::fabs(tb));
    [&m.offset, &m.slope, &m.bulk].iter().all(|s| Poly::of(s).magnitude(r) <= MAX_MAGNITUDE)
}

/// The slope series is positive, with its margin, over the τ range.
pub(super) fn slope_positive(m: &Model, (ta, tb): (f64, f64)) -> bool {
    let p = Poly::of(&m.slope);
    prove(ta, tb, |u, v| {
        let r = libm::fmax(libm::fabs(u), libm::fabs(v));
        let margin = SLOPE_MARGIN * p.magnitude(r);
        if !(p.eval(0.5 * (u + v)) > margin) {
            return Piece::Fails;
        }
        if p.bounds(u, v).0 > margin {
            Piece::Proven
        } else {
            Piece::Undecided
        }
    })
}

/// `g(τ) = (T_K/T_ref)·P_s(τ) + P_h(τ)·(e^x_max + β(τ)) > 0` over the τ range (see the module docs).
pub(super) fn monotone_in_x(cal: &Calibration, (ta, tb): (f64, f64)) -> bool {
    let m = &cal.model;
    let ps = Poly::of(&m.slope);
    let ph = Poly::of(&m.bulk);
    if m.bulk.terms().iter().all(|c| *c == 0.0) {
        return true;
    }
    let (t_c, t_h, t_ref) = (f64::from(m.t_center_c), f64::from(m.t_half_span_k), f64::from(m.t_ref_k));
    let ptat = |tau: f64| (t_c + t_h * tau + ZERO_CELSIUS_K) / t_ref;
    let ex = libm::exp(f64::from(cal.x_range.max));
    let (b0, b1) = (f64::from(m.bias.ln_beta0), f64::from(m.bias.ln_beta1));
    let beta = |tau: f64| if m.bias.enabled { libm::exp(b0 + b1 * tau) } else { 0.0 };
    let g = |tau: f64| ptat(tau) * ps.eval(tau) + ph.eval(tau) * (ex + beta(tau));
    prove(ta, tb, |u, v| {
        let mid = 0.5 * (u + v);
        let scale = libm::fabs(ptat(mid) * ps.eval(mid)) + libm::fabs(ph.eval(mid)) * (ex + beta(mid));
        let margin = SLOPE_MARGIN * scale;
        if !(g(mid) > margin) {
            return Piece::Fails;
        }
        let (pu, pv) = (ptat(u), ptat(v));
        let (bu, bv) = (beta(u), beta(v));
        let ptat_iv = (libm::fmin(pu, pv), libm::fmax(pu, pv));
        let e_iv = (ex + libm::fmin(bu, bv), ex + libm::fmax(bu, bv));
        let lower = product_lower(ptat_iv, ps.bounds(u, v)) + product_lower(ph.bounds(u, v), e_iv);
        if lower > margin {
            Piece::Proven
        } else {
            Piece::Undecided
        }
    })
}

/// `T_k(ρ)` and `T_k'(ρ)` for ρ ≥ 1 and k < [`MAX_RESIDUAL`]: the largest magnitudes on [−ρ, ρ].
fn chebyshev_extremes(rho: f64) -> ([f64; MAX_RESIDUAL], [f64; MAX_RESIDUAL]) {
    let mut t = [0.0; MAX_RESIDUAL];
    let mut d = [0.0; MAX_RESIDUAL];
    let (mut t0, mut t1) = (1.0, rho);
    let (mut d0, mut d1) = (0.0, 1.0);
    // The first term is T_0 = 1, T_0' = 0 (a flag, not an enumerate: its counter's overflow check
    // survives into release-checked builds).
    let mut first = true;
    for (tk, dk) in t.iter_mut().zip(d.iter_mut()) {
        if first {
            *tk = 1.0;
            *dk = 0.0;
            first = false;
            continue;
        }
        *tk = t1;
        *dk = d1;
        // T_(k+1) = 2ρT_k − T_(k−1); T_(k+1)' = 2T_k + 2ρT_k' − T_(k−1)'.
        let (t2, d2) = (2.0 * rho * t1 - t0, 2.0 * t1 + 2.0 * rho * d1 - d0);
        (t0, t1, d0, d1) = (t1, t2, d1, d2);
    }
    (t, d)
}

/// The residual is bounded by [`MAX_MAGNITUDE`] and keeps `x = x₀ + R` monotone in `x₀` (see the module
/// docs).
pub(super) fn residual_ok(cal: &Calibration, (ta, tb): (f64, f64)) -> bool {
    let r = &cal.model.residual;
    let (nx, nt) = (usize::from(r.nx).min(MAX_RESIDUAL), usize::from(r.nt).min(MAX_RESIDUAL));
    if nx == 0 || nt == 0 {
        return true;
    }
    let rho_t = libm::fmax(1.0, libm::fmax(libm::fabs(ta), libm::fabs(tb)));
    let (xc, xh) = (f64::from(r.x_center), f64::from(r.x_half_span));
    let (tt, _) = chebyshev_extremes(rho_t);
    // |R| over the whole box first (for the range of x₀), with ξ of any size up to the bound found.
    let mut slope_sum = 0.0;
    let xi_ends = |pad: f64| {
        let lo = (f64::from(cal.x_range.min) - pad - xc) / xh;
        let hi = (f64::from(cal.x_range.max) + pad - xc) / xh;
        libm::fmax(1.0, libm::fmax(libm::fabs(lo), libm::fabs(hi)))
    };
    let mut pad = 0.0;
    for _ in 0..2 {
        let (tx, dx) = chebyshev_extremes(xi_ends(pad));
        let mut size = 0.0;
        slope_sum = 0.0;
        for i in 0..nx {
            for j in 0..nt {
                let c = libm::fabs(f64::from(r.coeffs.get(i * MAX_RESIDUAL + j).copied().unwrap_or(0.0)));
                let tj = tt.get(j).copied().unwrap_or(0.0);
                size += c * tx.get(i).copied().unwrap_or(0.0) * tj;
                slope_sum += c * dx.get(i).copied().unwrap_or(0.0) * tj;
            }
        }
        if !(size <= MAX_MAGNITUDE) {
            return false;
        }
        pad = size;
    }
    slope_sum < (1.0 - SLOPE_MARGIN) * xh
}
