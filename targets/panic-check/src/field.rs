//! Field records and layers: blank and trim records (f32 and fixed), their A/B slots, layers over the
//! factory calibration, and channel banks.

use crate::{bytes, keep, o};
use logtrim::field::{
    self, slots, Bank, Blank, BlankParts, FixedStandard, Layers, LogChannel, RecordInfo, Standard,
    ThroughLayers, Trim, TrimKind, TrimLimits, TrimParts,
};
use logtrim::fixed::{FixedCalibration, FixedReading};
use logtrim::{Calibration, Reading};

fn info() -> RecordInfo {
    o(RecordInfo { sequence: o(1), written_at: o(0), factory: o(0) })
}

fn reading() -> Reading {
    o(Reading { x: o(0.0), temperature_extrapolated: o(false) })
}

fn fixed_reading() -> FixedReading {
    o(FixedReading { x: o(0), temperature_extrapolated: o(false) })
}

fn trim(t: &Trim) {
    keep(t.to_bytes());
    let mut buf = [0u8; 64];
    keep(t.write(o(&mut buf[..])));
    keep((t.parts(), t.info(), t.kind(), t.is_cleared(), t.offset(), t.gain(), t.offset_q24(), t.gain_q30()));
    keep(t.apply(&reading()));
    keep(t.apply_fixed(&fixed_reading()));
}

fn blank(b: &Blank) {
    keep(b.to_bytes());
    let mut buf = [0u8; 64];
    keep(b.write(o(&mut buf[..])));
    keep((b.parts(), b.info(), b.x(), b.temp_mc(), b.samples(), b.x_q24()));
    keep(b.relative(&reading()));
    keep(b.relative_fixed(&fixed_reading()));
}

fn layers(l: &Layers) {
    keep((l.trim(), l.blank(), l.without_blank()));
    keep(l.apply(&reading()));
    keep(l.apply_fixed(&fixed_reading()));
    keep(reading().through(l));
    keep(fixed_reading().through(l));
}

/// Every public entry point of the field module.
#[inline(never)]
pub fn run() {
    let cal = crate::f32_path::calibration();
    let temp_mc = o(25_000);
    keep(field::fingerprint(&cal));
    if let Ok(img) = logtrim::Image::parse(bytes()) {
        keep(field::fingerprint_of_image(&img));
    }
    let kind = o(TrimKind::TwoPoint);
    keep((kind.code(), TrimKind::from_code(o(0)), kind.name()));

    // Limits, trims from standards (f32 and fixed), and from bytes.
    let limits = match TrimLimits::new(o(0.5), o(0.2), o(0.1)) {
        Ok(l) => l,
        Err(e) => return keep(e),
    };
    keep((limits.max_offset_np(), limits.max_gain_error(), limits.min_separation_np()));
    let s = |m: f32, k: f32| o(Standard { measured: m, known: k });
    let fs = |m: i32, k: i32| o(FixedStandard { measured: m, known: k });
    let cleared = Trim::cleared(info(), temp_mc);
    trim(&cleared);
    keep(limits.check(&cleared));
    for t in [
        Trim::one_point(info(), s(0.0, 0.0), temp_mc, &limits),
        Trim::one_point_keeping_gain(info(), &cleared, s(0.0, 0.0), temp_mc, &limits),
        Trim::two_point(info(), s(0.0, 0.0), s(1.0, 1.0), temp_mc, &limits),
        Trim::one_point_fixed(info(), fs(0, 0), temp_mc, &limits),
        Trim::one_point_keeping_gain_fixed(info(), &cleared, fs(0, 0), temp_mc, &limits),
        Trim::two_point_fixed(info(), fs(0, 0), fs(1, 1), temp_mc, &limits),
    ]
    .into_iter()
    .flatten()
    {
        trim(&t);
    }
    let parts = o(TrimParts {
        info: info(),
        kind,
        offset: 0.0,
        gain: 1.0,
        offset_q24: 0,
        gain_q30: 1 << 30,
        standards: [0.0; 2],
        temp_mc: 0,
    });
    let made = Trim::new(parts);
    let parsed = Trim::parse(bytes());
    let prefix = Trim::parse_prefix(bytes()).map(|(t, rest)| (keep(rest), t).1);
    for t in [made.ok(), parsed.ok(), prefix.ok()].into_iter().flatten() {
        trim(&t);
    }

    // Blanks.
    let made = Blank::new(o(BlankParts { info: info(), x: 0.0, x_q24: 0, temp_mc: 0, samples: 1 }));
    let from_reading = Blank::from_reading(info(), &reading(), temp_mc, o(16));
    let from_fixed = Blank::from_fixed(info(), &fixed_reading(), temp_mc, o(16));
    let parsed = Blank::parse(bytes());
    let prefix = Blank::parse_prefix(bytes()).map(|(b, rest)| (keep(rest), b).1);
    for b in [made.ok(), from_reading.ok(), from_fixed.ok(), parsed.ok(), prefix.ok()].into_iter().flatten() {
        blank(&b);
    }

    // A/B slots of records.
    keep(slots::select::<Trim>(bytes(), bytes(), o(Some(0))));
    keep(slots::select::<Blank>(bytes(), bytes(), o(None)));
    keep(slots::next_write::<Trim>(bytes(), bytes(), o(Some(0))));
    keep(slots::next_write::<Blank>(bytes(), bytes(), o(None)));

    // Layers.
    let layers_ = Layers::new(
        parsed.ok().and(Trim::parse(bytes()).ok()),
        Blank::parse(bytes()).ok(),
        &limits,
        o(Some(0)),
    );
    let layers_ = layers_.unwrap_or(o(Layers::FACTORY));
    layers(&layers_);

    // Banks of channels, f32 and fixed.
    bank(cal, layers_);
    crate::fixed_path::with_calibration(|fixed| fixed_bank(fixed, layers_));
}

fn bank(cal: Calibration, layers: Layers) {
    let ch = |c: Calibration| o(LogChannel { calibration: c, layers });
    let mut bank = match Bank::new([ch(cal), ch(cal), ch(cal)]) {
        Ok(b) => b,
        Err(e) => return keep(e),
    };
    keep(bank.channels());
    keep(bank.set_layers(o(1), layers));
    let at = Ok(bank.cycle_at(o(25.0)));
    let cycles =
        [at, bank.cycle_from_celsius(o(25.0)), bank.cycle_from_code(&crate::sensors::sensor(), o(0))];
    for cycle in cycles.into_iter().flatten() {
        keep((cycle.celsius(), cycle.temperature(), cycle.stage(o(1))));
        keep(bank.correct_factory(&cycle, o(0), o(0)));
        keep(bank.correct_one(&cycle, o(2), o(0)));
        keep(bank.correct(&cycle, &o([0; 3])));
    }
}

fn fixed_bank(cal: FixedCalibration<'_>, layers: Layers) {
    let ch = o(LogChannel { calibration: cal, layers });
    let bank = Bank::new([ch, ch]).and_then(|b| b.with_sensor_channel(o(0)));
    let mut bank = match bank {
        Ok(b) => b,
        Err(e) => return keep(e),
    };
    keep(bank.channels());
    keep(bank.set_layers(o(1), layers));
    let from_theta = Ok(bank.cycle_from_theta(o(0)));
    let at = Ok(bank.cycle_at(o(0)));
    let cycles = [from_theta, at, bank.cycle_from_millicelsius(o(0)), bank.cycle_from_code(o(0))];
    for cycle in cycles.into_iter().flatten() {
        keep((cycle.theta(), cycle.millicelsius(), cycle.temperature(), cycle.stage(o(1))));
        keep(bank.correct_factory(&cycle, o(0), o(0)));
        keep(bank.correct_one(&cycle, o(1), o(0)));
        keep(bank.correct(&cycle, &o([0; 2])));
    }
}
