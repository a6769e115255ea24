//! Chebyshev series: [`clenshaw`], the one evaluation of `Σ c_k T_k(t)` in the crate (the calibration's
//! series over temperature and its residual surface).

use super::Real;

/// `Σ c_k T_k(t)` by Clenshaw's recurrence, in `F`, for coefficients stored as f32 or already in `F`.
/// An empty series is zero.
pub(crate) fn clenshaw<F: Real + From<C>, C: Copy>(c: &[C], t: F) -> F {
    let (c0, tail) = match c.split_first() {
        Some(s) => s,
        None => return F::of(0.0),
    };
    let mut b1 = F::of(0.0);
    let mut b2 = F::of(0.0);
    let two_t = t + t;
    for &ck in tail.iter().rev() {
        let b0 = F::from(ck) + two_t * b1 - b2;
        b2 = b1;
        b1 = b0;
    }
    F::from(*c0) + t * b1 - b2
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clenshaw_sums_chebyshev_polynomials() {
        // T_0 = 1, T_1 = t, T_2 = 2t² − 1, T_3 = 4t³ − 3t: the Chebyshev polynomials of the first kind
        // from their recurrence T_(n+1) = 2t·T_n − T_(n−1) (their definition, common practice).
        let c = [0.5f32, -1.25, 2.0, 0.75];
        for i in -8..=8 {
            let t = f64::from(i) / 8.0;
            let want = 0.5 - 1.25 * t + 2.0 * (2.0 * t * t - 1.0) + 0.75 * (4.0 * t * t * t - 3.0 * t);
            assert!((clenshaw(&c, t) - want).abs() < 1e-14, "t = {t}");
            let c64 = c.map(f64::from);
            assert_eq!(clenshaw(&c64, t), clenshaw(&c, t));
        }
        assert_eq!(clenshaw::<f64, f32>(&[], 0.3), 0.0);
        assert_eq!(clenshaw(&[3.0f32], 0.3f32), 3.0);
    }
}
