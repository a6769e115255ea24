//! Units, the display filter, physics and the math backends.

use crate::{keep, o};
use logtrim::filter::Ema;
use logtrim::math::{Backend, Libm, Micromath};
use logtrim::{physics, Unit};

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

    if let Ok(mut ema) = Ema::new(o(4.0)) {
        keep(ema.update(x));
        keep(ema.feed(o(Some(x))));
        keep((ema.value(), ema.alpha(), ema.time_constant()));
        ema.reset();
        keep(ema);
    }
    keep(o(logtrim::Error::NonFinite).name());
}
