//! The f32 correction: `Calibration` and everything it offers a firmware, with both backends, and the
//! staged form behind `path::CorrectionPath`.
//!
//! The host's f64 reference (`correct_f64`, `stage_f64`, `x_from_w_f64`, `reference_stage`,
//! `correct_staged_f64`, `reference_sweep`, `forward_code_f64`) is behind the crate's `reference` feature,
//! which a firmware does not enable: it is not a firmware entry point and is not built here.

use crate::{keep, o};
use logtrim::calibration::Series;
use logtrim::math::{Libm, Micromath};
use logtrim::path::CorrectionPath;
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

    // The same through the path trait (what a bank of channels calls).
    keep(CorrectionPath::validate(&cal));
    let stage = CorrectionPath::stage(&cal, temp);
    keep(CorrectionPath::correct_staged(&cal, &stage, code));
}
