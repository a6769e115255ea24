use logtrim_checks::published::IEC_60751_PT100;
use logtrim_checks::within;

use super::*;
use logtrim::sensor::{SensorElement, TemperatureSensor};
use logtrim::{Divider, Placement};

fn p(celsius: f64, ohm: f64) -> CurvePoint {
    CurvePoint::new(celsius, ohm)
}

/// The Steinhart–Hart equation written out: T in °C at R, `1/T = A + B·ln R + C·(ln R)³`.
fn sh_celsius(a: f64, b: f64, c: f64, ohm: f64) -> f64 {
    let l = ohm.ln();
    1.0 / (a + b * l + c * l * l * l) - 273.15
}

/// Coefficient sets from the literature (from memory): the set commonly quoted in thermistor application
/// notes for a 10 kΩ NTC, and the textbook example for a thermistor of about 3 kΩ at room temperature.
const PUBLISHED_SH: [(f64, f64, f64, f64); 2] =
    [(1.009_249_522e-3, 2.378_405_444e-4, 2.019_202_697e-7, 10_000.0), (1.40e-3, 2.37e-4, 9.90e-8, 3_000.0)];

#[test]
fn steinhart_hart_through_three_points_reproduces_the_published_curve() {
    for (a, b, c, r_room) in PUBLISHED_SH {
        // Three points of the curve, at resistances spanning roughly 0…60 °C.
        let rs = [3.0 * r_room, r_room, 0.25 * r_room];
        let pts: Vec<CurvePoint> = rs.iter().map(|&r| p(sh_celsius(a, b, c, r), r)).collect();
        let sh = steinhart_hart_from_points(&pts).unwrap();
        // The coefficients come back, to the f32 they are stored in (C, the small one, a little less
        // closely: it is what the three points pin down least).
        assert!(within(f64::from(sh.a), a, 0.0, 1e-6), "A {} vs {a}", sh.a);
        assert!(within(f64::from(sh.b), b, 0.0, 1e-6), "B {} vs {b}", sh.b);
        assert!(within(f64::from(sh.c), c, 0.0, 1e-5), "C {} vs {c}", sh.c);
        // And the curve comes back: between the points and beyond them, to a millikelvin.
        let e = SensorElement::NtcSteinhartHart(sh);
        for i in 0..=40 {
            let r = 0.1 * r_room * (100.0f64).powf(f64::from(i) / 40.0);
            let want = sh_celsius(a, b, c, r);
            let got = e.celsius_f64(r).unwrap();
            assert!(within(got, want, 1e-3, 0.0), "{r} Ω: {got} vs {want} °C");
        }
    }
}

#[test]
fn beta_from_two_points_is_the_secant_beta() {
    // β = ln(R₁/R₂)/(1/T₁ − 1/T₂) (the definition of β between two temperatures, common practice); a data
    // sheet's R25 and R85 of a β = 3900 K part, by the Beta model R = R25·exp(β(1/T − 1/T25)).
    let r85 = 10_000.0 * (3900.0 * (1.0 / 358.15 - 1.0 / 298.15f64)).exp();
    let pts = [p(25.0, 10_000.0), p(85.0, r85)];
    let b = beta_from_points(&pts).unwrap();
    assert_eq!((b.r0_ohm, b.t0_c), (10_000.0, 25.0));
    assert!(within(f64::from(b.beta_k), 3900.0, 0.0, 1e-6), "{}", b.beta_k);
    assert!(within(secant_beta_k(pts[0], pts[1]), 3900.0, 0.0, 1e-12));
    // The model reproduces the curve elsewhere: R(50 °C) by the formula.
    let want = 10_000.0 * (3900.0 * (1.0 / 323.15 - 1.0 / 298.15f64)).exp();
    assert!(within(b.resistance_f64(50.0).unwrap(), want, 0.0, 1e-6));
    // Given in the other order, the reference moves to 85 °C but the curve is the same.
    let back = beta_from_points(&[pts[1], pts[0]]).unwrap();
    assert_eq!(back.t0_c, 85.0);
    assert!(within(back.resistance_f64(25.0).unwrap(), 10_000.0, 0.0, 1e-5));
    // Through ElementSpec: two points make a Beta model, three Steinhart–Hart.
    let e = ElementSpec::Points(pts.to_vec()).element().unwrap();
    assert!(matches!(e, SensorElement::NtcBeta(_)));
}

#[test]
fn rtd_table_matches_iec_60751_at_its_points() {
    let spec = TableSpec { from_c: -200.0, to_c: 850.0, step_k: 25.0 };
    for (r0, scale) in [(100.0, 1.0), (1000.0, 10.0)] {
        let element = ElementSpec::Rtd { r0_ohm: r0 }.element().unwrap();
        let rows = table(TableSource::Element(&element), &spec).unwrap();
        assert_eq!(rows.len(), 43);
        assert_eq!((rows[0].celsius, rows[42].celsius), (-200.0, 850.0));
        for (t, r) in IEC_60751_PT100 {
            let row = rows.iter().find(|row| row.celsius == t).unwrap();
            assert!(
                within(row.ohm, r * scale, 1e-3 * scale, 0.0),
                "R0 {r0}: {t} °C: {} vs {}",
                row.ohm,
                r * scale
            );
            assert!(row.code.is_none());
        }
    }
    // The text and CSV layouts carry the same values.
    let element = ElementSpec::Rtd { r0_ohm: 100.0 }.element().unwrap();
    let rows =
        table(TableSource::Element(&element), &TableSpec { from_c: 0.0, to_c: 100.0, step_k: 25.0 }).unwrap();
    let mut csv = Vec::new();
    write_table(&rows, TableFormat::Csv, &[], &mut csv).unwrap();
    let csv = String::from_utf8(csv).unwrap();
    assert!(csv.starts_with("temp_c,resistance_ohm\n0,100\n25,109.73"), "{csv}");
    let mut text = Vec::new();
    write_table(&rows, TableFormat::Text, &["Pt100".into()], &mut text).unwrap();
    let text = String::from_utf8(text).unwrap();
    assert!(text.starts_with("# Pt100\n"), "{text}");
    assert!(text.contains("138.5055"), "{text}");
}

#[test]
fn table_codes_follow_the_divider_equation_and_read_back() {
    let (element, divider) = ntc_parts();
    let rows = table(
        TableSource::Divided(&element, &divider),
        &TableSpec { from_c: -40.0, to_c: 125.0, step_k: 5.0 },
    )
    .unwrap();
    assert_eq!(rows.len(), 34);
    for r in &rows {
        let c = r.code.unwrap();
        // Ohm's law on the divider: a low-side sensor reads 2^bits·R/(R + R_s).
        assert!(within(c.exact, 4096.0 * r.ohm / (r.ohm + 10_000.0), 1e-9, 1e-12));
        assert_eq!(c.code, c.exact.round() as u32);
        // The firmware's f32 reading at the rounded code is within half a code (and f32 rounding) of T.
        let t = f64::from(c.firmware_c.unwrap());
        assert!(within(t, r.celsius, 0.5 * c.k_per_code * 1.01 + 2e-3, 0.0), "{r:?}");
    }
    // Finest near R = R_s (25 °C), coarser at the ends.
    let at = |t: f64| rows.iter().find(|r| r.celsius == t).unwrap().code.unwrap().k_per_code;
    assert!(at(25.0) < at(-40.0) && at(25.0) < at(125.0));
    // A divider supply above the ADC's reference (full scale 5000 codes of a 12-bit converter): the cold
    // end lies beyond the converter, and the table says so instead of converting the clipped code.
    let over = Divider { full_scale_code: 5000, ..divider };
    let rows_over =
        table(TableSource::Divided(&element, &over), &TableSpec { from_c: -40.0, to_c: 0.0, step_k: 40.0 })
            .unwrap();
    let cold = rows_over[0].code.unwrap();
    assert!(cold.exact > 4095.5 && cold.code == 4095, "{cold:?}");
    assert!(matches!(cold.firmware_c, Err(logtrim::Error::CodeOutOfAdcRange { max: 4095, .. })), "{cold:?}");
    assert!(rows_over[1].code.unwrap().firmware_c.is_ok());
    // A 10 kΩ NTC against 10 kΩ reads half scale at 25 °C (common practice for NTC dividers).
    assert!(within(rows.iter().find(|r| r.celsius == 25.0).unwrap().code.unwrap().exact, 2048.0, 1e-9, 0.0));
}

/// A 10 kΩ NTC with β = 3900 K from a 12-bit ADC's input to ground, 10 kΩ to its reference, 8 codes of
/// fault band at either rail (invented figures, those of the `photometer-ntc` preset).
fn ntc_parts() -> (SensorElement, Divider) {
    let element = ElementSpec::Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3900.0 }.element().unwrap();
    (element, ntc_divider().divider().unwrap())
}

/// The divider of [`ntc_parts`].
fn ntc_divider() -> DividerSpec {
    DividerSpec {
        placement: Placement::LowSide,
        series_ohm: 10_000.0,
        bits: 12,
        full_scale_code: None,
        open_margin: 8,
        short_margin: 8,
    }
}

fn ntc_settings() -> TemperatureSensor {
    let (element, divider) = ntc_parts();
    build_sensor(element, divider, -40.0, 125.0).unwrap()
}

#[test]
fn settings_round_trip_through_serde_and_validate() {
    let s = ntc_settings();
    assert_eq!(s.validate(), Ok(()));
    let text = settings_json(&s);
    let back: TemperatureSensor = serde_json::from_str(&text).unwrap();
    assert_eq!(back, s);
    assert_eq!(back.validate(), Ok(()));
    assert_eq!(settings_from_json(&text, "mem").unwrap(), s);
    // Through a file, written atomically.
    let dir = std::env::temp_dir().join(format!("logtrim-sensor-settings-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("sensor.json");
    write_settings(&path, &s).unwrap();
    assert_eq!(load_settings(&path).unwrap(), s);
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 1);
    std::fs::remove_dir_all(&dir).unwrap();
    // Every element kind survives the round trip.
    for spec in [
        ElementSpec::Rtd { r0_ohm: 1000.0 },
        ElementSpec::SteinhartHart { a: PUBLISHED_SH[0].0, b: PUBLISHED_SH[0].1, c: PUBLISHED_SH[0].2 },
    ] {
        let e = spec.element().unwrap();
        let s =
            build_sensor(e, Divider::ratiometric(Placement::HighSide, 2_000.0, 16), -20.0, 120.0).unwrap();
        assert_eq!(settings_from_json(&settings_json(&s), "mem").unwrap(), s);
    }
    // A hand edit that breaks the description is refused with the file's name.
    let broken = text.replace("\"series_ohm\": 10000.0", "\"series_ohm\": -1.0");
    assert_ne!(broken, text);
    let e = settings_from_json(&broken, "sensor.json").unwrap_err();
    assert!(matches!(e, SensorToolError::Rejected { .. }) && e.to_string().contains("sensor.json"), "{e}");
    let e = settings_from_json("{\"element\": 3}", "sensor.json").unwrap_err();
    assert!(matches!(e, SensorToolError::File(FileError::Json { line: 1, .. })), "{e}");
    // The summary: the range's ends and the coarsest step.
    let sum = summarise(&s).unwrap();
    assert!(sum.at_min.1 > sum.at_max.1, "the code rises as a low-side NTC cools");
    assert!(sum.coarsest.1 >= sum.at_min.2.min(sum.at_max.2));
    assert!(sum.worst_error_k > 0.0 && sum.worst_error_k < sum.coarsest.1, "{sum:?}");
}

#[test]
fn equal_temperatures_are_named() {
    let e = steinhart_hart_from_points(&[p(25.0, 10_000.0), p(25.0, 9_000.0), p(50.0, 3_600.0)]).unwrap_err();
    assert!(matches!(e, SensorToolError::SameTemperature { celsius: 25.0, .. }), "{e}");
    let m = e.to_string();
    assert!(m.contains("point 25:10000 and point 25:9000") && m.contains("distinct temperatures"), "{m}");
    let e = beta_from_points(&[p(85.0, 1_000.0), p(85.0, 1_000.0)]).unwrap_err();
    assert!(matches!(e, SensorToolError::SameTemperature { .. }), "{e}");
    let e = beta_from_points(&[p(25.0, 1_000.0), p(85.0, 1_000.0)]).unwrap_err();
    assert!(matches!(e, SensorToolError::SameResistance { .. }), "{e}");
}

#[test]
fn negative_resistances_are_named() {
    let e = beta_from_points(&[p(25.0, -10_000.0), p(85.0, 1_000.0)]).unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::Point, .. }), "{e}");
    let m = e.to_string();
    assert!(m.contains("25:-10000") && m.contains("not positive") && m.contains("> 0 Ω"), "{m}");
    let spec = DividerSpec { series_ohm: -10_000.0, open_margin: 0, short_margin: 0, ..ntc_divider() };
    let e = spec.divider().unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::Series, .. }), "{e}");
    assert!(e.to_string().contains("-10000"), "{e}");
    let e = ElementSpec::Beta { r0_ohm: -1.0, t0_c: 25.0, beta_k: 3900.0 }.element().unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::R0, .. }), "{e}");
    let e = ElementSpec::Rtd { r0_ohm: 0.0 }.element().unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::Rtd, .. }), "{e}");
}

#[test]
fn non_monotone_curves_are_named() {
    // Resistance falls at every step, but by ×3 over the first 25 K and ×1.1 over the next: no
    // Steinhart–Hart curve through the three is monotone.
    let pts = [p(0.0, 30_000.0), p(25.0, 10_000.0), p(50.0, 9_000.0)];
    let e = steinhart_hart_from_points(&pts).unwrap_err();
    let SensorToolError::NotMonotone { from_c, to_c, ref betas, .. } = e else { panic!("{e}") };
    assert_eq!((from_c, to_c), (0.0, 50.0));
    // The secant β of each pair, by its definition.
    let want = format!(
        "{:.0} K, {:.0} K",
        (3.0f64).ln() / (1.0 / 273.15 - 1.0 / 298.15),
        (10.0f64 / 9.0).ln() / (1.0 / 298.15 - 1.0 / 323.15)
    );
    assert_eq!(betas, &want);
    // Rising resistance is not an NTC.
    let e =
        steinhart_hart_from_points(&[p(0.0, 30_000.0), p(25.0, 10_000.0), p(50.0, 12_000.0)]).unwrap_err();
    assert!(matches!(e, SensorToolError::NotNtc { .. }), "{e}");
    assert!(e.to_string().contains("point 25:10000 and point 50:12000"), "{e}");
    // A curve that is fine near its centre but turns back inside the range asked for.
    let turning = ElementSpec::SteinhartHart { a: 1.2e-3, b: 2.5e-4, c: -4.0e-7 }.element().unwrap();
    let d = Divider::ratiometric(Placement::LowSide, 10_000.0, 12);
    let e = build_sensor(turning, d, -40.0, 125.0).unwrap_err();
    assert!(matches!(e, SensorToolError::CurveOverRange { range: Input::Range, .. }), "{e}");
    let e = table(TableSource::Element(&turning), &TableSpec { from_c: -40.0, to_c: 125.0, step_k: 5.0 })
        .unwrap_err();
    assert!(matches!(e, SensorToolError::CurveOverRange { range: Input::TableRange, .. }), "{e}");
    // Point counts.
    let e = ElementSpec::Points(vec![p(25.0, 10_000.0)]).element().unwrap_err();
    assert!(matches!(e, SensorToolError::PointCount { count: 1, .. }), "{e}");
    let e = steinhart_hart_from_points(&pts[..2]).unwrap_err();
    assert!(matches!(e, SensorToolError::PointCount { count: 2, .. }), "{e}");
}

#[test]
fn bad_ranges_and_fault_bands_are_named() {
    let s = ntc_settings();
    // An RTD table beyond the IEC 60751 curve.
    let rtd = ElementSpec::Rtd { r0_ohm: 100.0 }.element().unwrap();
    let e =
        table(TableSource::Element(&rtd), &TableSpec { from_c: 0.0, to_c: 900.0, step_k: 10.0 }).unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::To, .. }), "{e}");
    let e =
        table(TableSource::Element(&rtd), &TableSpec { from_c: 10.0, to_c: 0.0, step_k: 1.0 }).unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::To, .. }), "{e}");
    let e =
        table(TableSource::Element(&rtd), &TableSpec { from_c: 0.0, to_c: 10.0, step_k: 0.0 }).unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::Step, .. }), "{e}");
    let e =
        table(TableSource::Element(&rtd), &TableSpec { from_c: 0.0, to_c: 800.0, step_k: 1e-3 }).unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::Step, .. }), "{e}");
    let e = build_sensor(s.element, s.divider, 50.0, 50.0).unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::Max, .. }), "{e}");
    // −80 °C reads code ≈ 4063 on the low-side NTC: inside an open band of 64 codes (≥ 4032).
    let wide = Divider { open_margin: 64, ..s.divider };
    let e = build_sensor(s.element, wide, -80.0, 125.0).unwrap_err();
    let SensorToolError::FaultAtRangeEnd { end, code, ref fault, .. } = e else { panic!("{e}") };
    assert_eq!(end, Input::Min);
    assert!(code >= 4032 && fault.contains("open"), "{e}");
    // Fault bands that leave nothing.
    let spec = DividerSpec { open_margin: 3000, short_margin: 1095, ..ntc_divider() };
    let e = spec.divider().unwrap_err();
    assert!(matches!(e, SensorToolError::Value { input: Input::FaultMargins, .. }), "{e}");
}

#[test]
fn option_values_parse_or_say_what_was_expected() {
    assert_eq!(parse_ohm("10k"), Ok(10_000.0));
    assert_eq!(parse_ohm("4.7k"), Ok(4_700.0));
    assert_eq!(parse_ohm("1M"), Ok(1e6));
    assert_eq!(parse_ohm("100Ω"), Ok(100.0));
    assert_eq!(parse_ohm("-10k"), Ok(-10_000.0));
    assert!(parse_ohm("10x").unwrap_err().to_string().contains("10k"));
    assert!(parse_ohm("nan").is_err() && parse_ohm("inf").is_err() && parse_ohm("").is_err());
    // Finite digits that overflow with their multiplier; the sign and zero are the options' to judge.
    assert!(parse_ohm("1e308k").is_err() && parse_ohm("-1e308M").is_err());
    assert_eq!(parse_ohm("0kΩ"), Ok(0.0));
    assert_eq!(parse_point("-40:336.5k"), Ok(p(-40.0, 336_500.0)));
    assert!(parse_point("25=10k").unwrap_err().to_string().contains("T:R"));
    assert_eq!(parse_coefficients("1e-3,2e-4,-3e-7"), Ok([1e-3, 2e-4, -3e-7]));
    assert!(parse_coefficients("1e-3,2e-4").is_err());
    assert_eq!(parse_rtd("PT100"), Ok(100.0));
    assert_eq!(parse_rtd("pt1000"), Ok(1000.0));
    assert_eq!(parse_rtd("500"), Ok(500.0));
    assert!(parse_rtd("pt50x").is_err());
}
