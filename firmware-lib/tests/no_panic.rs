//! No public function of logtrim panics, on any input.
//!
//! Property tests throw arbitrary codes (any `u32`), temperatures, resistances and x values (any `f32`/`f64`,
//! NaN and ±∞ included) and arbitrary calibration and sensor descriptions (every field, lengths up to 255)
//! at the public API. Test builds have overflow checks on (workspace profile), so integer wrapping panics
//! too. Two kinds of descriptions: fully arbitrary ones (mostly rejected early) and realistic ones with a
//! few fields replaced by arbitrary values (to reach the arithmetic past the checks).
//!
//! Besides "no panic", each property checks what an `Ok` promises: finite values, within the declared
//! ranges. Value strategies are boxed so that the value trees live on the heap: unboxed, the nested
//! calibration strategy overflows a test thread's 2 MiB stack in debug builds.

mod common;

use logtrim::calibration::{
    AdcScaling, BiasTerm, Model, Residual, Series, TemperatureRange, XRange, MAX_RESIDUAL, MAX_SERIES,
};
use logtrim::divider::{Divider, Placement};
use logtrim::math::Libm;
use logtrim::rtd::Rtd;
use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::thermistor::{Beta, CurvePoint, SteinhartHart};
use logtrim::{physics, Calibration, Error, Unit};
use proptest::prelude::*;
use proptest::test_runner::{RngAlgorithm, RngSeed};

const CASES: u32 = 2_000;

/// 2 000 cases per property from a fixed seed; `PROPTEST_CASES` and `PROPTEST_RNG_SEED` override them to
/// explore further (e.g. `PROPTEST_CASES=100000 PROPTEST_RNG_SEED=7 cargo test -p logtrim --test no_panic`).
fn config() -> ProptestConfig {
    // XorShift: the cheap generator (ChaCha dominates the run time in debug builds).
    let mut c = ProptestConfig { rng_algorithm: RngAlgorithm::XorShift, ..ProptestConfig::default() };
    if std::env::var_os("PROPTEST_CASES").is_none() {
        c.cases = CASES;
    }
    if c.rng_seed == RngSeed::Random {
        c.rng_seed = RngSeed::Fixed(0x6c6f_6774_7269_6d00);
    }
    c
}

// ---------------------------------------------------------------------------------------------------------
// Value strategies

const EDGE_F32: [f32; 23] = [
    0.0,
    -0.0,
    1.0,
    -1.0,
    0.5,
    f32::NAN,
    f32::INFINITY,
    f32::NEG_INFINITY,
    f32::MAX,
    f32::MIN,
    f32::MIN_POSITIVE,
    1e-45,
    1e-30,
    1e30,
    -1e30,
    25.0,
    -273.15,
    -273.0,
    -200.0,
    850.0,
    4096.0,
    65535.0,
    1e9,
];
const EDGE_F64: [f64; 18] = [
    0.0,
    -0.0,
    1.0,
    -1.0,
    f64::NAN,
    f64::INFINITY,
    f64::NEG_INFINITY,
    f64::MAX,
    f64::MIN,
    f64::MIN_POSITIVE,
    5e-324,
    1e-300,
    1e300,
    25.0,
    -273.15,
    -200.0,
    850.0,
    4.5e9,
];
const EDGE_CODES: [u32; 11] = [0, 1, 2, 4095, 4096, 32768, 65535, 65536, 1 << 24, u32::MAX - 1, u32::MAX];

/// `fn $name() -> any $t`: arbitrary bit patterns (NaN, ±∞, subnormals), the edge values and ordinary
/// magnitudes; one definition for both widths.
macro_rules! any_float {
    ($name:ident, $t:ident, $edges:expr, $ordinary:expr) => {
        fn $name() -> BoxedStrategy<$t> {
            prop_oneof![
                3 => proptest::num::$t::ANY,
                2 => prop::sample::select(&$edges[..]),
                3 => $ordinary,
            ]
            .boxed()
        }
    };
}
any_float!(any_f32, f32, EDGE_F32, -1e4f32..1e4f32);
any_float!(any_f64, f64, EDGE_F64, -1e5f64..1e5f64);

/// Any u32, with the rails and ADC limits over-represented.
fn any_code() -> BoxedStrategy<u32> {
    prop_oneof![
        2 => any::<u32>(),
        2 => 0u32..70_000,
        1 => prop::sample::select(&EDGE_CODES[..]),
    ]
    .boxed()
}

/// Any u8 length or bit count (255 included), with the meaningful ones over-represented.
fn any_u8() -> BoxedStrategy<u8> {
    prop_oneof![any::<u8>(), 0u8..=25].boxed()
}

// ---------------------------------------------------------------------------------------------------------
// Calibrations

fn series() -> BoxedStrategy<Series> {
    (any_u8(), prop::array::uniform6(any_f32())).prop_map(|(len, coeffs)| Series { len, coeffs }).boxed()
}

fn residual() -> BoxedStrategy<Residual> {
    (any_u8(), any_u8(), any_f32(), any_f32(), prop::array::uniform16(any_f32()))
        .prop_map(|(nx, nt, x_center, x_half_span, coeffs)| Residual {
            nx,
            nt,
            x_center,
            x_half_span,
            coeffs,
        })
        .boxed()
}

/// A calibration with every field arbitrary.
fn any_calibration() -> impl Strategy<Value = Calibration> {
    let adc = (any_u8(), any_code(), any_f32())
        .prop_map(|(bits, rail_margin, level_shift_code)| AdcScaling { bits, rail_margin, level_shift_code });
    let temperature = (any_f32(), any_f32(), any_f32())
        .prop_map(|(min_c, max_c, extrapolation_k)| TemperatureRange { min_c, max_c, extrapolation_k });
    let x_range = (any_f32(), any_f32(), any_f32()).prop_map(|(min, max, min_sensitivity)| XRange {
        min,
        max,
        min_sensitivity,
    });
    let bias = (any::<bool>(), any_f32(), any_f32(), any_f32()).prop_map(
        |(enabled, ln_beta0, ln_beta1, reference)| BiasTerm { enabled, ln_beta0, ln_beta1, reference },
    );
    let model =
        ((any_f32(), any_f32(), any_f32(), any_f32()), (series(), series(), series()), bias, residual())
            .prop_map(
                |((t_center_c, t_half_span_k, t_ref_k, pole), (offset, slope, bulk), bias, residual)| Model {
                    t_center_c,
                    t_half_span_k,
                    t_ref_k,
                    pole,
                    offset,
                    slope,
                    bulk,
                    bias,
                    residual,
                },
            );
    (adc, temperature, x_range, model).prop_map(|(adc, temperature, x_range, model)| Calibration {
        adc,
        temperature,
        x_range,
        model,
    })
}

/// A realistic unit: strong bias-current bend, bulk term, residual (invented values).
fn realistic_calibration() -> Calibration {
    let mut c = common::bent(-2.0);
    c.model.residual = Residual { nx: 2, nt: 2, x_center: -1.0, x_half_span: 5.0, ..Residual::OFF };
    c.model.residual.coeffs[0] = 0.01;
    c.model.residual.coeffs[MAX_RESIDUAL] = 0.004;
    c
}

/// Replaces `slot` by `v` when the strategy chose to.
fn put<T>(slot: &mut T, v: Option<T>) {
    if let Some(v) = v {
        *slot = v;
    }
}

/// The realistic unit with each field replaced by an arbitrary value with probability 1/24 (about one
/// field per case).
fn perturbed_calibration() -> impl Strategy<Value = Calibration> {
    let w = 1.0 / 24.0;
    let f = move || prop::option::weighted(w, any_f32());
    let scalars = (
        (prop::option::weighted(w, any_u8()), prop::option::weighted(w, any_code()), f()),
        (f(), f(), f()),
        (f(), f(), f()),
        (f(), f(), f(), f()),
    );
    let parts = (
        prop::option::weighted(w, series()),
        prop::option::weighted(w, series()),
        prop::option::weighted(w, series()),
        (prop::option::weighted(w, any::<bool>()), f(), f()),
        prop::option::weighted(w, residual()),
        (prop::option::weighted(w, any_u8()), prop::option::weighted(w, 0usize..MAX_SERIES), f()),
    );
    (scalars, parts).prop_map(|(s, p)| {
        let mut c = realistic_calibration();
        put(&mut c.adc.bits, s.0 .0);
        put(&mut c.adc.rail_margin, s.0 .1);
        put(&mut c.adc.level_shift_code, s.0 .2);
        put(&mut c.temperature.min_c, s.1 .0);
        put(&mut c.temperature.max_c, s.1 .1);
        put(&mut c.temperature.extrapolation_k, s.1 .2);
        put(&mut c.x_range.min, s.2 .0);
        put(&mut c.x_range.max, s.2 .1);
        put(&mut c.x_range.min_sensitivity, s.2 .2);
        put(&mut c.model.t_center_c, s.3 .0);
        put(&mut c.model.t_half_span_k, s.3 .1);
        put(&mut c.model.t_ref_k, s.3 .2);
        put(&mut c.model.pole, s.3 .3);
        put(&mut c.model.offset, p.0);
        put(&mut c.model.slope, p.1);
        put(&mut c.model.bulk, p.2);
        put(&mut c.model.bias.enabled, p.3 .0);
        put(&mut c.model.bias.ln_beta0, p.3 .1);
        put(&mut c.model.bias.ln_beta1, p.3 .2);
        put(&mut c.model.residual, p.4);
        // One slope length and one slope coefficient on their own, the values most likely to matter.
        put(&mut c.model.slope.len, p.5 .0);
        if let (Some(i), Some(v)) = (p.5 .1, p.5 .2) {
            if let Some(slot) = c.model.slope.coeffs.get_mut(i) {
                *slot = v;
            }
        }
        c
    })
}

/// Calls every public calibration function and checks what an `Ok` promises.
fn exercise_calibration(c: &Calibration, code: u32, temp: f32, code_f: f64, temp_f: f64, x_f: f64) {
    let valid = c.validate();
    let _ = c.adc.max_code();
    let _ = c.adc.check_code(code);
    let _ = (c.model.offset.terms(), c.model.slope.terms(), c.model.bulk.terms());
    let _ = c.forward_code_f64(x_f, temp_f);
    let _ = c.forward_code_f64(x_f, f64::from(temp));
    let results = [
        c.correct(code, temp),
        c.correct_with::<Libm>(code, temp),
        #[cfg(feature = "micromath")]
        c.correct_with::<logtrim::math::Micromath>(code, temp),
        c.correct_mean(code_f as f32, temp),
        c.correct_mean(code as f32 + 0.5, temp),
    ];
    for r in results {
        match r {
            Ok(reading) => {
                assert!(reading.x.is_finite(), "{reading:?}");
                if valid.is_ok() {
                    assert!(reading.x >= c.x_range.min && reading.x <= c.x_range.max, "{reading:?} {c:?}");
                }
                for u in Unit::ALL {
                    let _ = reading.value(u);
                }
            }
            Err(e) => {
                let _ = std::format!("{e}");
                let _ = e.name();
            }
        }
    }
    for (cf, tf) in [(code_f, temp_f), (f64::from(code), f64::from(temp)), (f64::from(code), temp_f)] {
        match c.correct_f64(cf, tf) {
            Ok(r) => assert!(r.x.is_finite(), "{r:?}"),
            Err(e) => {
                let _ = std::format!("{e}");
            }
        }
    }
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn calibration_arbitrary(c in any_calibration(), code in any_code(), temp in any_f32(),
                             code_f in any_f64(), temp_f in any_f64(), x_f in any_f64()) {
        exercise_calibration(&c, code, temp, code_f, temp_f, x_f);
    }

    #[test]
    fn calibration_perturbed(c in perturbed_calibration(),
                             code in prop_oneof![1 => any_code(), 3 => 10_000u32..45_000],
                             temp in prop_oneof![1 => any_f32(), 3 => -25f32..90.0],
                             code_f in any_f64(), temp_f in any_f64(), x_f in any_f64()) {
        exercise_calibration(&c, code, temp, code_f, temp_f, x_f);
    }

    #[test]
    fn calibration_constructors(bits in any_u8(), level in any_f32(), slope in any_f32(), t_ref in any_f32(),
                                coeffs in prop::collection::vec(any_f32(), 0..=2 * MAX_SERIES),
                                code in any_code(), temp in any_f32()) {
        let c = Calibration::nominal(bits, level, slope, t_ref);
        exercise_calibration(&c, code, temp, f64::from(code), f64::from(temp), 0.0);
        match Series::from_slice(&coeffs) {
            Some(s) => {
                let bits = |v: &[f32]| v.iter().map(|x| x.to_bits()).collect::<Vec<u32>>();
                prop_assert_eq!(bits(s.terms()), bits(&coeffs));
            }
            None => prop_assert!(coeffs.len() > MAX_SERIES),
        }
    }

    #[test]
    fn units_and_physics(x in any_f32(), xf in any_f64(), name in "\\PC{0,12}") {
        for u in Unit::ALL {
            let _ = u.from_x(x);
            let _ = u.from_x_with::<Libm>(x);
            #[cfg(feature = "micromath")]
            let _ = u.from_x_with::<logtrim::math::Micromath>(x);
            let _ = u.from_x_f64(xf);
            let _ = u.derivative_f64(xf);
            prop_assert_eq!(Unit::from_name(u.name()), Some(u));
        }
        let _ = Unit::from_name(&name);
        let _ = physics::thermal_voltage(xf);
        let _ = physics::thermal_voltage_celsius_f32(x);
    }
}

// ---------------------------------------------------------------------------------------------------------
// Temperature sensors

fn any_element() -> impl Strategy<Value = SensorElement> {
    prop_oneof![
        (any_f32(), any_f32(), any_f32()).prop_map(|(r0_ohm, t0_c, beta_k)| SensorElement::NtcBeta(Beta {
            r0_ohm,
            t0_c,
            beta_k
        })),
        (any_f32(), any_f32(), any_f32())
            .prop_map(|(a, b, c)| SensorElement::NtcSteinhartHart(SteinhartHart { a, b, c })),
        any_f32().prop_map(|r0_ohm| SensorElement::Rtd(Rtd { r0_ohm })),
    ]
}

fn any_divider() -> impl Strategy<Value = Divider> {
    (any::<bool>(), any_f32(), any_u8(), any_code(), any_code(), any_code()).prop_map(
        |(high, series_ohm, bits, full_scale_code, open_margin, short_margin)| Divider {
            placement: if high { Placement::HighSide } else { Placement::LowSide },
            series_ohm,
            bits,
            full_scale_code,
            open_margin,
            short_margin,
        },
    )
}

fn any_sensor() -> impl Strategy<Value = TemperatureSensor> {
    (any_element(), any_divider(), any_f32(), any_f32())
        .prop_map(|(element, divider, min_c, max_c)| TemperatureSensor { element, divider, min_c, max_c })
}

/// Realistic channels (invented values): an NTC by Beta, the same by Steinhart–Hart, a Pt1000.
fn realistic_sensors() -> [TemperatureSensor; 3] {
    let beta = Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 };
    let divider = Divider::ratiometric(Placement::LowSide, 10_000.0, 12).with_margins(8, 8);
    let ntc = TemperatureSensor::new(SensorElement::NtcBeta(beta), divider, -40.0, 125.0);
    let sh = TemperatureSensor { element: SensorElement::NtcSteinhartHart(beta.to_steinhart_hart()), ..ntc };
    let rtd = TemperatureSensor {
        element: SensorElement::Rtd(Rtd::PT1000),
        divider: Divider::ratiometric(Placement::HighSide, 2_000.0, 16),
        min_c: -200.0,
        max_c: 850.0,
    };
    [ntc, sh, rtd]
}

/// A realistic channel with each field replaced by an arbitrary value with probability 1/12 (about one
/// field per case).
fn perturbed_sensor() -> impl Strategy<Value = TemperatureSensor> {
    let w = 1.0 / 12.0;
    let f = move || prop::option::weighted(w, any_f32());
    (
        0usize..3,
        (f(), f(), f()),
        (f(), prop::option::weighted(w, any_u8()), prop::option::weighted(w, any_code())),
        (
            prop::option::weighted(w, any_code()),
            prop::option::weighted(w, any_code()),
            prop::bool::weighted(w),
        ),
        (f(), f()),
    )
        .prop_map(|(which, el, dv, margins, range)| {
            let mut s = realistic_sensors()[which];
            match &mut s.element {
                SensorElement::NtcBeta(b) => {
                    put(&mut b.r0_ohm, el.0);
                    put(&mut b.t0_c, el.1);
                    put(&mut b.beta_k, el.2);
                }
                SensorElement::NtcSteinhartHart(sh) => {
                    put(&mut sh.a, el.0);
                    put(&mut sh.b, el.1);
                    put(&mut sh.c, el.2);
                }
                SensorElement::Rtd(r) => put(&mut r.r0_ohm, el.0),
            }
            put(&mut s.divider.series_ohm, dv.0);
            put(&mut s.divider.bits, dv.1);
            put(&mut s.divider.full_scale_code, dv.2);
            put(&mut s.divider.open_margin, margins.0);
            put(&mut s.divider.short_margin, margins.1);
            if margins.2 {
                s.divider.placement = match s.divider.placement {
                    Placement::LowSide => Placement::HighSide,
                    Placement::HighSide => Placement::LowSide,
                };
            }
            put(&mut s.min_c, range.0);
            put(&mut s.max_c, range.1);
            s
        })
}

/// Calls every public sensor function and checks what an `Ok` promises.
fn exercise_sensor(s: &TemperatureSensor, code: u32, t: f64) {
    let _ = s.validate();
    let _ = s.element.validate();
    let _ = s.divider.validate();
    let _ = s.divider.max_code();
    let _ = s.divider.code_f64(t);
    let _ = s.element.resistance_f64(t);
    let _ = s.element.celsius(t as f32);
    let _ = s.element.celsius_f64(t);
    if let Ok(c) = s.celsius(code) {
        assert!(c.is_finite() && c >= s.min_c && c <= s.max_c, "{c} from {s:?}");
    }
    if let Ok(c) = s.celsius_f64(code) {
        assert!(c.is_finite() && c >= f64::from(s.min_c) && c <= f64::from(s.max_c), "{c} from {s:?}");
    }
    if let Ok(r) = s.divider.resistance(code) {
        assert!(r.is_finite() && r > 0.0, "{r} from {s:?}");
    }
    if let Ok(r) = s.divider.resistance_f64(code) {
        assert!(r.is_finite() && r > 0.0, "{r} from {s:?}");
    }
    if let Ok(c) = s.code_f64(t) {
        assert!(c.is_finite() && c >= 0.0, "{c} from {s:?}");
    }
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn sensor_arbitrary(s in any_sensor(), code in any_code(), t in any_f64()) {
        exercise_sensor(&s, code, t);
    }

    #[test]
    fn sensor_perturbed(s in perturbed_sensor(),
                        code in prop_oneof![1 => any_code(), 2 => 0u32..4096, 1 => 0u32..65536],
                        t in prop_oneof![1 => any_f64(), 3 => -210f64..860.0]) {
        exercise_sensor(&s, code, t);
    }

    #[test]
    fn sensor_elements(r0 in any_f32(), t0 in any_f32(), beta in any_f32(), abc in prop::array::uniform3(any_f32()),
                       ohm in any_f32(), celsius in any_f32(), ohm_f in any_f64(), celsius_f in any_f64()) {
        let b = Beta { r0_ohm: r0, t0_c: t0, beta_k: beta };
        let sh = SteinhartHart { a: abc[0], b: abc[1], c: abc[2] };
        let rtd = Rtd { r0_ohm: r0 };
        let _ = b.validate();
        let _ = b.to_steinhart_hart();
        let _ = sh.validate();
        let _ = sh.slope_at_f64(ohm_f);
        let _ = rtd.validate();
        let f32s = [b.celsius(ohm), b.resistance(celsius), sh.celsius(ohm), sh.resistance(celsius),
                    rtd.celsius(ohm), rtd.resistance(celsius)];
        for v in f32s.into_iter().flatten() {
            prop_assert!(v.is_finite());
        }
        // Resistances that come back are finite and positive; temperatures finite, above absolute zero.
        let ohms = [b.resistance_f64(celsius_f), sh.resistance_f64(celsius_f), rtd.resistance_f64(celsius_f)];
        for v in ohms.into_iter().flatten() {
            prop_assert!(v.is_finite() && v > 0.0);
        }
        let temps = [b.celsius_f64(ohm_f), sh.celsius_f64(ohm_f), rtd.celsius_f64(ohm_f)];
        for v in temps.into_iter().flatten() {
            prop_assert!(v.is_finite() && v > -physics::ZERO_CELSIUS_K);
        }
    }

    #[test]
    fn thermistor_fits(pts in prop::array::uniform6(any_f64())) {
        let p = |i: usize, j: usize| CurvePoint::new(pts[i], pts[j]);
        // Fits that succeed give coefficients that validate.
        if let Ok(b) = Beta::from_points(p(0, 1), p(2, 3)) {
            prop_assert_eq!(b.validate(), Ok(()));
        }
        if let Ok(sh) = SteinhartHart::from_points(p(0, 1), p(2, 3), p(4, 5)) {
            prop_assert_eq!(sh.validate(), Ok(()));
        }
    }

    #[test]
    fn thermistor_fits_near_a_real_curve(t in prop::array::uniform3(-60.0f64..200.0),
                                         jitter in prop::array::uniform3(-0.5f64..0.5)) {
        // Points near a 10 kΩ, β = 3950 K curve with up to ±50 % resistance errors: fits may fail, with an
        // error, but what they return validates and reproduces the points.
        let ohm = |t: f64, j: f64| 10_000.0 * (3950.0 * (1.0 / (t + 273.15) - 1.0 / 298.15)).exp() * (1.0 + j);
        let p: Vec<CurvePoint> = t.iter().zip(jitter).map(|(&t, j)| CurvePoint::new(t, ohm(t, j))).collect();
        if let Ok(sh) = SteinhartHart::from_points(p[0], p[1], p[2]) {
            prop_assert_eq!(sh.validate(), Ok(()));
            for q in &p {
                let back = sh.celsius_f64(q.ohm);
                prop_assert!(matches!(back, Ok(v) if (v - q.celsius).abs() < 0.05), "{:?} {:?} {:?}", sh, q, back);
            }
        }
    }
}

/// Regression: micromath 2.1's `exp` panics (debug assertion) for 88.72284 ≤ x ≤ 89.41598 and its `ln` for
/// negative x; the backend guards them. Every f32 from 88 to 90 and a spread of negatives.
#[cfg(feature = "micromath")]
#[test]
fn micromath_backend_exp_overflow_zone_and_negative_ln_do_not_panic() {
    use logtrim::math::{Backend, Micromath};
    let mut x = 88.0f32;
    while x <= 90.0 {
        let e = Micromath::exp(x);
        assert!(e > 1e38, "exp({x}) = {e}");
        x = f32::from_bits(x.to_bits() + 1);
    }
    assert!(Micromath::exp(f32::NAN).is_nan());
    for x in [-0.5f32, -1.0, -1e-30, -f32::MAX, f32::NEG_INFINITY, f32::NAN] {
        assert!(Micromath::ln(x).is_nan(), "ln({x})");
    }
    for x in [f32::NAN, 88.8, 89.0, 1e30] {
        for u in Unit::ALL {
            let _ = u.from_x_with::<Micromath>(x);
        }
    }
}

#[test]
fn an_error_is_not_a_panic() {
    // The properties above pass only if nothing panics; make sure the harness would see a failure at all:
    // a realistic calibration corrects a mid-scale code, and an open NTC input is an error, not a value.
    let c = realistic_calibration();
    assert!(c.validate().is_ok());
    assert!(c.correct(33_000, 25.0).is_ok());
    let [ntc, _, _] = realistic_sensors();
    assert_eq!(ntc.celsius(4095), Err(Error::Sensor(logtrim::error::SensorFault::Open)));
}
