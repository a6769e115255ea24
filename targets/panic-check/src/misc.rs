//! Units, the display filter, physics, the math backends, the Q formats and the crate's error.

use crate::{keep, o};
use logtrim::filter::Ema;
use logtrim::math::{Backend, Libm, Micromath};
use logtrim::{physics, qformat, Unit};

/// Every public entry point of the small modules.
#[inline(never)]
pub fn run() {
    let unit = o(Unit::Absorbance);
    let x = o(0.0f32);
    keep(unit.name());
    keep(Unit::from_name(o("dB")));
    keep(unit.from_x(x));
    keep(unit.from_x_with::<Micromath>(x));
    keep(unit.from_x_f64(o(0.0)));
    keep(unit.derivative_f64(o(0.0)));
    keep((Libm::ln(x), Libm::exp(x), Micromath::ln(x), Micromath::exp(x)));
    keep(physics::thermal_voltage(o(300.0)));
    keep(physics::thermal_voltage_celsius_f32(x));

    // The Q formats.
    keep(qformat::q_from_f32(x, o(24)));
    keep(qformat::f32_from_q(o(0), o(24)));
    keep(qformat::theta_of_celsius(x));
    keep(qformat::celsius_of_theta(o(0)));
    keep(qformat::millicelsius_of_theta(o(0)));
    keep(qformat::millicelsius(x));
    keep(qformat::millicelsius_saturating(x));

    if let Ok(mut ema) = Ema::new(o(4.0)) {
        keep(ema.update(x));
        keep(ema.feed(o(Some(x))));
        keep((ema.value(), ema.alpha(), ema.time_constant()));
        ema.reset();
        keep(ema);
    }
    keep(o(logtrim::Error::NonFinite).name());
}

/// A `fmt::Write` that keeps nothing the optimiser can see through.
pub struct Sink;

impl core::fmt::Write for Sink {
    fn write_str(&mut self, s: &str) -> core::fmt::Result {
        keep(s);
        if o(false) {
            return Err(core::fmt::Error);
        }
        Ok(())
    }
}

/// Formats a value with `Display` into the sink, as a firmware that logs its errors does.
#[inline(always)]
pub fn show<T: core::fmt::Display>(v: T) {
    let v = o(v);
    keep(core::fmt::write(&mut Sink, format_args!("{v}")));
}

/// The layout tables the docs and the C header are rendered from (formatting through `core::fmt`).
#[inline(never)]
pub fn layout_tables() {
    keep(logtrim::image::layout::write_markdown_table(&mut Sink));
    keep(logtrim::field::layout::write_markdown_table(&mut Sink));
    let f = o(logtrim::record::layout::CRC);
    keep(f.write_row(&mut Sink, &o("trailer"), o(0)));
    keep(core::fmt::write(&mut Sink, format_args!("{}", f.kind.display())));
}
