//! The f32 correction: `Calibration` and everything it offers, both backends, and its f64 reference.

use crate::{keep, o};
use logtrim::calibration::{temperature_out_of_range_millicelsius, Series};
use logtrim::math::{Libm, Micromath};
use logtrim::{Calibration, Unit};

/// A calibration the optimiser knows nothing about.
pub fn calibration() -> Calibration {
    o(Calibration::nominal(o(16), o(32768.0), o(2000.0), o(25.0)))
}

/// The one call a firmware on the f32 path makes per sample (what `scripts/target-sizes.sh` measures).
#[inline(never)]
pub fn correct_only() {
    let cal = calibration();
    keep(cal.correct(o(0), o(0.0)).map(|r| r.value(o(Unit::DbPower))));
}

/// Every public entry point of the f32 path.
#[inline(never)]
pub fn run() {
    let cal = calibration();
    let (code, temp) = (o(0u32), o(0.0f32));
    keep(cal.validate());
    keep(cal.forward_code_f64(o(0.0), o(0.0)));
    keep(cal.adc.max_code());
    keep(cal.adc.check_code(code));
    keep(cal.model.offset.terms().len());
    keep(Series::from_slice(o(&[1.0f32, 2.0][..])));
    keep(cal.correct(code, temp).map(|r| r.value(o(Unit::Ratio))));
    keep(cal.correct_with::<Micromath>(code, temp));
    keep(cal.correct_mean(o(0.0), temp));
    keep(cal.correct_mean_with::<Micromath>(o(0.0), temp));
    let stage = cal.stage_with::<Libm>(temp);
    keep((stage.error(), stage.extrapolated()));
    keep(cal.correct_staged(&stage, code));
    let stage = cal.stage_with::<Micromath>(temp);
    keep(cal.correct_staged(&stage, code));
    keep(temperature_out_of_range_millicelsius(o(0)));

    // The f64 reference of the same model (host verification, but public and no_std).
    keep(cal.correct_f64(o(0.0), o(0.0)));
    keep(cal.stage_f64(o(0.0)));
    keep(cal.x_from_w_f64(o(0.0), o(0.0)));
    let rs = cal.reference_stage(o(0.0));
    keep(rs.error());
    keep(cal.correct_staged_f64(&rs, code));
    let mut sweep = cal.reference_sweep(o(0.0));
    keep(sweep.correct(code));
    keep(sweep.correct(o(1)));
    keep(sweep.warm_points());
}
