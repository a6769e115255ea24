//! The integer path: `FixedCalibration` (tables from an image's fixed section), its stages, the stage
//! cache, the code table, readings in every unit, and the transcendental kernels.

use crate::{bytes, keep, o};
use logtrim::fixed::{arith, interp, transcend, CodeTable, FixedCalibration, StageCache};
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
            let codes = [code, o(1u32), o(2u32)];
            let mut out = [Err(logtrim::Error::NonFinite); 3];
            keep(cal.correct_block(&stage, &codes, &mut out));
            keep(out);
        }
        let mut cache = StageCache::new(cal);
        keep(cache.correct(code, temp_mc));
        keep(cache.correct_raw(code, temp_code));
        keep(cache.calibration().table_bytes());
        cache.clear();
        keep(cache.correct(o(1), o(1)));
        let mut table = CodeTable::new(cal);
        keep(table.correct(code, temp_mc));
        keep(table.correct_raw(code, temp_code));
        let codes = [code, o(1u32), o(2u32)];
        let mut out = [Err(logtrim::Error::NonFinite); 3];
        keep(table.correct_block(temp_mc, &codes, &mut out));
        keep(table.correct_block_raw(temp_code, &codes, &mut out));
        keep(out);
        keep(table.usable_intervals());
        keep(table.calibration().table_bytes());
        table.clear();
    });
    keep(transcend::bend_q24(o(0)));
    keep(transcend::exp_q32(o(0)));
    // The public integer kernels, each with inputs the optimiser knows nothing about.
    let (a, b, u) = (o(0i32), o(0i32), o(0u32));
    keep(arith::mul_parts(a, b));
    keep(arith::mul_parts_split(a, b));
    keep(arith::mul_wide(a, b));
    keep(arith::mul_hi(a, b));
    keep(arith::mul_hi_u(a, u));
    keep(arith::mul_hi_u_split(a, u));
    keep(arith::mulh16(a, u));
    keep(arith::top_bit(a));
    let c = [a, b, o(0i32), o(0i32)];
    keep(interp::spline16(c, u));
    keep(interp::spline6(c, u));
    keep(interp::basis16(u));
    keep(interp::basis6(u));
    let w = interp::window_weights(u);
    keep(interp::window_value(c, w));
    keep(interp::window_collapse([o(0i16); 4], w));
    keep(interp::spline_at(c, u));
    keep(interp::spline_at16(c, u));
    keep(interp::mulh20(a, u));
    keep(interp::collapse6([o(0i16); 4], interp::basis6(u)));
    keep(interp::four(&c[..], o(0usize)));
}
