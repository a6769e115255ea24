//! The temperature channel: divider, NTC (Beta, Steinhart–Hart), RTD, and the sensor that combines them.

use crate::{keep, o};
use logtrim::thermistor::CurvePoint;
use logtrim::{Beta, Divider, Placement, Rtd, SensorElement, SteinhartHart, TemperatureSensor};

/// Every public entry point of the sensor modules, for each kind of element.
#[inline(never)]
pub fn run() {
    let ohm = o(10_000.0f32);
    let celsius = o(25.0f32);
    let divider = o(Divider::ratiometric(o(Placement::LowSide), o(10_000.0), o(12)));
    keep(divider.max_code());
    keep(divider.validate());
    keep(divider.resistance(o(0)));
    keep(divider.resistance_f64(o(0)));
    keep(divider.code_f64(o(0.0)));

    let beta = o(Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 });
    keep(beta.validate());
    keep(beta.celsius(ohm));
    keep(beta.celsius_f64(o(0.0)));
    keep(beta.resistance(celsius));
    keep(beta.resistance_f64(o(0.0)));
    keep(beta.to_steinhart_hart());
    let p = |t: f64, r: f64| o(CurvePoint::new(t, r));
    keep(Beta::from_points(p(0.0, 1.0), p(0.0, 1.0)));

    let sh = o(beta.to_steinhart_hart());
    keep(sh.validate());
    keep(sh.celsius(ohm));
    keep(sh.celsius_f64(o(0.0)));
    keep(sh.resistance(celsius));
    keep(sh.resistance_f64(o(0.0)));
    keep(sh.slope_at_f64(o(0.0)));
    keep(SteinhartHart::from_points(p(0.0, 1.0), p(0.0, 1.0), p(0.0, 1.0)));

    let rtd = o(Rtd::PT100);
    keep(rtd.validate());
    keep(rtd.celsius(ohm));
    keep(rtd.celsius_f64(o(0.0)));
    keep(rtd.resistance(celsius));
    keep(rtd.resistance_f64(o(0.0)));

    for element in
        [SensorElement::NtcBeta(beta), SensorElement::NtcSteinhartHart(sh), SensorElement::Rtd(rtd)]
    {
        let element = o(element);
        keep(element.validate());
        keep(element.celsius(ohm));
        keep(element.celsius_f64(o(0.0)));
        keep(element.resistance_f64(o(0.0)));
        let sensor = o(TemperatureSensor { element, divider, min_c: -40.0, max_c: 125.0 });
        keep(sensor.validate());
        keep(sensor.celsius(o(0)));
        keep(sensor.celsius_f64(o(0)));
        keep(sensor.code_f64(o(0.0)));
    }
}

/// A temperature channel (an NTC behind a divider) the optimiser knows nothing about.
pub fn sensor() -> TemperatureSensor {
    let beta = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };
    let divider = Divider::ratiometric(Placement::LowSide, 10_000.0, 12);
    o(TemperatureSensor { element: SensorElement::NtcBeta(beta), divider, min_c: -40.0, max_c: 125.0 })
}
