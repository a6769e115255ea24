//! The integer path: `FixedCalibration` (tables from an image's fixed section), its stages, the stage
//! cache, readings in every unit, and the transcendental kernels.

use crate::{bytes, keep, o};
use logtrim::fixed::{transcend, FixedCalibration, StageCache};
use logtrim::image::DefaultFixedStorage;
use logtrim::{Image, Unit};

/// Runs `f` on a fixed-point calibration loaded from bytes the optimiser knows nothing about, as a
/// firmware loads it from its calibration image.
#[inline(always)]
pub fn with_calibration(f: impl FnOnce(FixedCalibration<'_>)) {
    let mut storage = DefaultFixedStorage::new();
    match Image::parse(bytes()) {
        Ok(image) => match image.fixed_into(&mut storage) {
            Ok(cal) => f(o(cal)),
            Err(e) => keep(e),
        },
        Err(e) => keep(e),
    }
}

/// The one call a firmware on the fixed path makes per sample (what `scripts/target-sizes.sh` measures).
/// The calibration comes in opaque (as a `const` from emitted tables would be to the code that uses it).
#[inline(never)]
pub fn correct_only(cal: &FixedCalibration<'_>) {
    keep(cal.correct(o(0), o(0)).and_then(|r| r.value(o(Unit::DbPower))));
}

/// Every public entry point of the fixed path.
#[inline(never)]
pub fn run() {
    with_calibration(|cal| {
        let (code, temp_mc, temp_code) = (o(0u32), o(0i32), o(0u32));
        keep(cal.validate());
        keep(cal.table_bytes());
        keep(cal.check_code(code));
        for unit in Unit::ALL {
            keep(cal.correct(code, temp_mc).and_then(|r| r.value(o(unit))));
            keep(logtrim::fixed::value_frac_bits(o(unit)));
        }
        keep(cal.correct_raw(code, temp_code));
        keep(cal.theta_from_code(temp_code));
        keep(cal.stage_code(temp_code));
        keep(cal.stage_theta(o(0)));
        if let Ok(stage) = cal.stage_millicelsius(temp_mc) {
            keep(stage.extrapolated());
            keep(cal.correct_staged(&stage, code));
            if let Ok(row) = cal.row_stage(&stage) {
                keep(row.extrapolated());
                keep(cal.correct_row(&row, code));
            }
        }
        let mut cache = StageCache::new(cal);
        keep(cache.correct(code, temp_mc));
        keep(cache.correct_raw(code, temp_code));
        keep(cache.calibration().table_bytes());
        cache.clear();
        keep(cache.correct(o(1), o(1)));
    });
    keep(transcend::bend_q24(o(0)));
    keep(transcend::exp_q32(o(0)));
}
