//! The charts of one calibrated unit, built from its calibration and its data into the plain figures of
//! [`super`]:
//!
//! | figure | what it shows |
//! |---|---|
//! | [`error_vs_x`] | the error in x against x at each chamber set-point, before and after correction (points, with the noise floor's band) |
//! | [`error_vs_temperature`] | rms and max error per temperature bin over a validation run, before and after |
//! | [`f32_error_map`] | the f32 correction's error against the f64 reference over (ADC code, temperature), in LSB, on the scale of the ¼-LSB bound |
//! | [`fixed_error_map`] | the same for the integer fixed-point correction, worst of several codes per cell |
//!
//! The error maps are coloured on a scale of at least ± the bound `verify` holds both firmware paths to
//! (¼ LSB by default, [`crate::verify::VerifyOptions`]), and their subtitle gives the worst error as a share
//! of it: an f32 error of 1e-4 LSB is a map of the middle colour, which is what a calibration reader needs
//! to see (the arithmetic is far inside the bound), not a map stretched to its own noise.
//!
//! Corrections are made with firmware-lib's f32 [`Calibration::correct`] and its fixed-point
//! [`FixedCalibration::correct`], the code the MCU runs.
//!
//! # "Before correction"
//!
//! Before correction a unit would be read with its nominal equation ([`nominal_of`]): the ideal law
//! `x = (code − L₀) / (S₀ · T_K/T_ref)` ([`Calibration::nominal`]), a slope proportional to absolute
//! temperature as kT/q gives, with no offset drift and no bends. `L₀` and `S₀` are the calibration's own
//! zero code and slope at its reference temperature T_ref: the code its model (without the bias-current,
//! bulk-resistance and residual terms) gives at ratio 1 and at ratio e, at T_ref. A fitted calibration's
//! raw `level_shift_code` is only a normalisation (the median code of its data), so the zero is taken from
//! the model rather than from that field. The "before" error is therefore what a one-point trim at T_ref
//! leaves: offset drift, the compensation's residual slope drift, and the bends at either end.

use std::collections::BTreeMap;

use logtrim::calibration::{BiasTerm, Residual, Series};
use logtrim::fixed::{FixedCalibration, X_FRAC};
use logtrim::Calibration;

use super::validation::ValidationPoint;
use super::{Axis, ColourScale, Grid, HeatMap, LineFigure, Panel, PlotError, Style};
use crate::error_scale::ErrorScale;
use crate::fit::FitData;

/// The nominal equation of a unit (see the module docs): PTAT slope and zero code from the calibration at
/// its reference temperature, nothing else.
pub fn nominal_of(cal: &Calibration) -> Calibration {
    let mut plain = *cal;
    plain.model.bias = BiasTerm::OFF;
    plain.model.bulk = Series::ZERO;
    plain.model.residual = Residual::OFF;
    let t_ref_c = f64::from(cal.model.t_ref_k) - logtrim::physics::ZERO_CELSIUS_K;
    let zero = plain.forward_code_f64(0.0, t_ref_c);
    let slope = plain.forward_code_f64(1.0, t_ref_c) - zero;
    Calibration::nominal(cal.adc.bits, zero as f32, slope as f32, t_ref_c as f32)
}

/// The error in x of the f32 correction of one reading, or `None` where the firmware refuses it.
fn error_of(cal: &Calibration, code: u32, temp_c: f64, x_true: f64) -> Option<f64> {
    cal.correct(code, temp_c as f32).ok().map(|r| f64::from(r.x) - x_true)
}

/// The error in x against x at each chamber set-point, before (nominal equation) and after correction.
///
/// Rows are grouped into set-points as the fit groups them (a gap above `gap_k` starts a new one); each
/// point is the mean error over the repeats at one applied ratio. Readings the firmware refuses are left
/// out and counted in the panel's caption. Before correction the points of a set-point are joined (the
/// error is systematic); after correction they are points only, over a band of ±σ/√n about zero: σ is
/// `noise_floor_np`, the unit's noise in x as the fit measured it from its repeats (the calibration file's
/// `fit.noise_floor_np`), and n the median number of readings behind a point. Without a noise floor there
/// is no band.
pub fn error_vs_x(
    cal: &Calibration,
    data: &FitData,
    gap_k: f64,
    noise_floor_np: Option<f64>,
    unit: ErrorScale,
    subtitle: &str,
) -> LineFigure {
    let groups = crate::fit::setpoints(&data.temp_c, gap_k);
    let title = "Error in x against x, per chamber set-point";
    let axis = "x = ln(I_sig/I_ref) [Np]";
    before_and_after(cal, (title, subtitle, (1200, 560)), axis, unit, |c, after| {
        let mut refused = 0usize;
        let mut series = Vec::new();
        let mut counts = Vec::new();
        let (mut x_lo, mut x_hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for g in &groups {
            let mean_t = g.iter().map(|&i| data.temp_c[i]).sum::<f64>() / g.len().max(1) as f64;
            let mut by_ratio: BTreeMap<u64, (f64, f64, usize)> = BTreeMap::new();
            for &i in g {
                let x = data.ratio[i].ln();
                match error_of(c, data.code[i], data.temp_c[i], x) {
                    Some(e) => {
                        // Keyed by x's bits mapped to an order-preserving integer, so the line runs in x.
                        let slot = by_ratio.entry(order_key(x)).or_insert((x, 0.0, 0));
                        slot.1 += e;
                        slot.2 += 1;
                    }
                    None => refused += 1,
                }
            }
            let points = by_ratio.values().map(|&(x, sum, n)| (x, unit.of_np(sum / n as f64))).collect();
            for &(x, _, n) in by_ratio.values() {
                counts.push(n);
                (x_lo, x_hi) = (x_lo.min(x), x_hi.max(x));
            }
            series.push(super::Series {
                label: format!("{:.1} °C", crate::output::number::Num(mean_t)),
                points,
                style: if after { Style::Markers } else { Style::LineAndMarkers },
            });
        }
        if let (true, Some(sigma)) =
            (after && x_lo < x_hi, noise_floor_np.filter(|v| v.is_finite() && *v > 0.0))
        {
            counts.sort_unstable();
            let n = counts.get(counts.len() / 2).copied().unwrap_or(1).max(1);
            let h = unit.of_np(sigma / (n as f64).sqrt()).abs();
            series.push(super::Series {
                label: format!(
                    "noise floor ±σ/√n: σ = {} {u} from the unit's repeats (fit), n = {n}",
                    super::tick(unit.of_np(sigma).abs()),
                    u = unit.label()
                ),
                points: vec![(x_lo, h), (x_hi, h)],
                style: Style::Band,
            });
        }
        (refused, series)
    })
}

/// A figure (`title`, `subtitle`, `size`) of two panels of errors in x against `x_label`: before correction
/// (the nominal equation of [`nominal_of`]) and after (`cal`). `panel` gives each panel's count of refused
/// readings and its series, from the calibration to use and whether it is the corrected one.
fn before_and_after(
    cal: &Calibration,
    (title, subtitle, size): (&str, &str, (u32, u32)),
    x_label: &str,
    unit: ErrorScale,
    mut panel: impl FnMut(&Calibration, bool) -> (usize, Vec<super::Series>),
) -> LineFigure {
    let nominal = nominal_of(cal);
    let panels = [("before correction (nominal equation)", &nominal, false), ("after correction", cal, true)]
        .into_iter()
        .map(|(which, c, after)| {
            let (refused, series) = panel(c, after);
            error_panel(which, refused, x_label, unit, series)
        })
        .collect();
    LineFigure { title: title.into(), subtitle: subtitle.to_string(), panels, size }
}

/// A panel of errors in x against `x_label`, captioned `which` with the count of refused readings, if any.
fn error_panel(
    which: &str,
    refused: usize,
    x_label: &str,
    unit: ErrorScale,
    series: Vec<super::Series>,
) -> Panel {
    let title = match refused {
        0 => which.to_string(),
        1 => format!("{which}: 1 reading refused"),
        n => format!("{which}: {n} readings refused"),
    };
    Panel { title, x_label: x_label.into(), y_label: format!("error in x [{}]", unit.label()), series }
}

/// A u64 whose order is the order of the f64 (for finite values).
fn order_key(v: f64) -> u64 {
    let b = v.to_bits();
    if b >> 63 == 1 {
        !b
    } else {
        b | (1 << 63)
    }
}

/// The rms and max |error| per bin of the unit's true temperature over a validation run, before (nominal
/// equation) and after correction; after correction with the oracle's rms (the irreducible error of the
/// readings) for comparison, when the truth has it. Bins are `bins` equal slices of the run's range of
/// true temperature; an empty bin breaks the lines.
pub fn error_vs_temperature(
    cal: &Calibration,
    points: &[ValidationPoint],
    bins: usize,
    unit: ErrorScale,
    subtitle: &str,
) -> LineFigure {
    let bins = bins.max(1);
    let (t0, t1) = points
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| (a.min(p.t_true_c), b.max(p.t_true_c)));
    let width = if t1 > t0 { (t1 - t0) / bins as f64 } else { 1.0 };
    let bin_of = |t: f64| (((t - t0) / width) as usize).min(bins - 1);
    let centre = |k: usize| t0 + (k as f64 + 0.5) * width;
    let title = "Error against temperature over the validation run";
    let axis = "unit's true temperature [°C]";
    before_and_after(cal, (title, subtitle, (1200, 540)), axis, unit, |c, with_oracle| {
        let mut acc = vec![(0.0f64, 0.0f64, 0usize); bins];
        let mut oracle = vec![(0.0f64, 0usize); bins];
        let mut refused = 0usize;
        for p in points {
            let k = bin_of(p.t_true_c);
            match error_of(c, p.code, p.temp_c, p.x_true) {
                Some(e) => {
                    acc[k].0 += e * e;
                    acc[k].1 = acc[k].1.max(e.abs());
                    acc[k].2 += 1;
                }
                None => refused += 1,
            }
            if let Some(xo) = p.x_oracle {
                oracle[k].0 += (xo - p.x_true).powi(2);
                oracle[k].1 += 1;
            }
        }
        let line = |f: &dyn Fn(usize) -> f64| (0..bins).map(|k| (centre(k), f(k))).collect::<Vec<_>>();
        let rms =
            |k: usize| if acc[k].2 > 0 { unit.of_np((acc[k].0 / acc[k].2 as f64).sqrt()) } else { f64::NAN };
        let max = |k: usize| if acc[k].2 > 0 { unit.of_np(acc[k].1) } else { f64::NAN };
        let mut series = vec![
            super::Series { label: "rms error".into(), points: line(&rms), style: Style::LineAndMarkers },
            super::Series { label: "max |error|".into(), points: line(&max), style: Style::LineAndMarkers },
        ];
        if with_oracle && oracle.iter().any(|o| o.1 > 0) {
            let orms = |k: usize| {
                if oracle[k].1 > 0 {
                    unit.of_np((oracle[k].0 / oracle[k].1 as f64).sqrt())
                } else {
                    f64::NAN
                }
            };
            series.push(super::Series {
                label: "oracle rms (irreducible)".into(),
                points: line(&orms),
                style: Style::Dashed,
            });
        }
        (refused, series)
    })
}

/// The codes of the calibrated x range at every calibrated temperature, with a 4 % margin each side so the
/// refused edges show, within the converter's codes.
fn code_span(cal: &Calibration) -> (f64, f64) {
    let t = &cal.temperature;
    let (tmin, tmax) = (f64::from(t.min_c), f64::from(t.max_c));
    let (mut c0, mut c1) = (f64::INFINITY, f64::NEG_INFINITY);
    for k in 0..=8 {
        let tc = tmin + (tmax - tmin) * f64::from(k) / 8.0;
        for x in [cal.x_range.min, cal.x_range.max] {
            let c = cal.forward_code_f64(f64::from(x), tc);
            if c.is_finite() {
                c0 = c0.min(c);
                c1 = c1.max(c);
            }
        }
    }
    let max_code = f64::from(cal.adc.max_code().unwrap_or(1));
    let (c0, c1) = if c1 > c0 { super::padded(c0, c1, 0.04) } else { (0.0, max_code) };
    (c0.max(0.0), c1.min(max_code))
}

/// The axes of the error maps: the codes of [`code_span`] and the calibrated temperature range.
fn map_axes(cal: &Calibration) -> (Axis, Axis) {
    let (c0, c1) = code_span(cal);
    let t = &cal.temperature;
    (
        Axis { label: "ADC code of the log channel".into(), min: c0, max: c1 },
        Axis { label: "temperature [°C]".into(), min: f64::from(t.min_c), max: f64::from(t.max_c) },
    )
}

/// The error of the f32 correction ([`Calibration::correct`]) against the f64 reference
/// ([`Calibration::correct_f64`]) at the same code and the same (f32) temperature, in LSB (the x error over
/// ∂x/∂code), over `nx × ny` cells of (ADC code, temperature). The temperature axis is the calibrated
/// range; the code axis spans the codes of the calibrated x range at every temperature, with a 4 % margin
/// so the refused edges show. A cell the firmware refuses has no value.
pub fn f32_error_map(cal: &Calibration, nx: usize, ny: usize, subtitle: &str) -> Result<HeatMap, PlotError> {
    let (codes, temps) = map_axes(cal);
    let grid = Grid::from_fn(codes, temps, nx, ny, |code, temp| {
        let code = code.round() as u32;
        let t32 = temp as f32;
        match (cal.correct(code, t32), cal.correct_f64(f64::from(code), f64::from(t32))) {
            (Ok(a), Ok(b)) if b.dx_dcode.is_finite() && b.dx_dcode != 0.0 => {
                (f64::from(a.x) - b.x) / b.dx_dcode
            }
            _ => f64::NAN,
        }
    })?;
    Ok(HeatMap {
        title: "f32 correction against the f64 reference".into(),
        subtitle: against_bound(subtitle, &grid),
        grid,
        value_label: "error of f32 [LSB]".into(),
        scale: ColourScale::DivergingAtLeast(verify_bound_lsb()),
        no_value_label: "refused by the firmware (out of range)".into(),
        size: (1000, 620),
    })
}

/// The bound `verify` holds both paths to by default, LSB.
fn verify_bound_lsb() -> f64 {
    crate::verify::VerifyOptions::default().bound_lsb
}

/// The subtitle of an error map: `subtitle`, then the worst |error| against the bound of `verify`.
fn against_bound(subtitle: &str, grid: &Grid) -> String {
    let bound = verify_bound_lsb();
    let worst = grid.finite_range().map_or(f64::NAN, |(lo, hi)| lo.abs().max(hi.abs()));
    let share = format!("{:.2}", crate::output::number::Num(100.0 * worst / bound));
    let said = format!(
        "worst |error| {} LSB, {share} % of verify's {bound}-LSB bound (scale ±{bound} LSB)",
        super::tick(worst)
    );
    if subtitle.is_empty() {
        said
    } else {
        format!("{subtitle}; {said}")
    }
}

/// The error of the integer fixed-point correction ([`FixedCalibration::correct`], the tables of the
/// calibration: `logtrim_host::tables::build`) against the f64 reference ([`Calibration::correct_f64`]) at
/// the same code and temperature, in LSB (the x error over ∂x/∂code), over `nx × ny` cells of (ADC code,
/// temperature); the axes are those of [`f32_error_map`]. Each cell holds the signed error of largest
/// magnitude over `codes_per_cell` codes spread evenly across it (both ends included), at the cell's
/// central temperature rounded to the m°C the fixed path takes: a table's error moves with the code at the
/// scale of its knots, which one code per cell can miss. Codes where either path refuses the reading are
/// left out; a cell without any value is drawn grey. The temperature is given in m°C, so a sensor table in
/// the tables is not used here (`logtrim verify` covers it).
pub fn fixed_error_map(
    cal: &Calibration,
    fixed: &FixedCalibration<'_>,
    nx: usize,
    ny: usize,
    codes_per_cell: u32,
    subtitle: &str,
) -> Result<HeatMap, PlotError> {
    if codes_per_cell == 0 {
        return Err(PlotError::BadGrid {
            what: "0 codes per cell".into(),
            expected: "at least one code per cell",
        });
    }
    let (codes, temps) = map_axes(cal);
    let cell = (codes.max - codes.min) / nx.max(1) as f64;
    let q24 = f64::from(1u32 << X_FRAC);
    let grid = Grid::from_fn(codes, temps, nx, ny, |centre, temp| {
        let mc = (temp * 1000.0).round() as i32;
        let temp = f64::from(mc) / 1000.0;
        let (first, last) = ((centre - 0.5 * cell).ceil(), (centre + 0.5 * cell).floor());
        let mut worst = f64::NAN;
        for k in 0..codes_per_cell {
            let f = if codes_per_cell == 1 { 0.5 } else { f64::from(k) / f64::from(codes_per_cell - 1) };
            let code = (first + (last - first).max(0.0) * f).round();
            if !(0.0..=f64::from(u32::MAX)).contains(&code) {
                continue;
            }
            let code = code as u32;
            if let (Ok(a), Ok(b)) = (fixed.correct(code, mc), cal.correct_f64(f64::from(code), temp)) {
                if b.dx_dcode.is_finite() && b.dx_dcode != 0.0 {
                    let e = (f64::from(a.x) / q24 - b.x) / b.dx_dcode;
                    if worst.is_nan() || e.abs() > worst.abs() {
                        worst = e;
                    }
                }
            }
        }
        worst
    })?;
    Ok(HeatMap {
        title: "fixed-point correction against the f64 reference".into(),
        subtitle: against_bound(
            &if subtitle.is_empty() {
                format!("worst of {codes_per_cell} codes per cell")
            } else {
                format!("{subtitle}; worst of {codes_per_cell} codes per cell")
            },
            &grid,
        ),
        grid,
        value_label: "error of fixed point [LSB]".into(),
        scale: ColourScale::DivergingAtLeast(verify_bound_lsb()),
        no_value_label: "refused by the firmware (out of range)".into(),
        size: (1000, 620),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn order_key_orders_like_f64() {
        let v = [-3.5, -1e-9, 0.0, 1e-9, 2.0, 7.25];
        for w in v.windows(2) {
            assert!(order_key(w[0]) < order_key(w[1]), "{w:?}");
        }
    }

    #[test]
    fn nominal_reads_an_ideal_ptat_unit_exactly() {
        // An ideal unit (PTAT slope, constant zero): its nominal equation is itself, so "before" is exact.
        let ideal = Calibration::nominal(16, 30000.0, 2000.0, 25.0);
        let n = nominal_of(&ideal);
        for (x, t) in [(-4.0, 0.0), (0.0, 25.0), (3.0, 70.0)] {
            let code = ideal.forward_code_f64(x, t);
            let got = n.correct_f64(code, t).unwrap().x;
            assert!((got - x).abs() < 1e-4, "x={x} t={t}: {got}");
        }
    }
}
