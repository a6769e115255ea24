//! A raw temperature code beyond its channel's converter (4096, 65535, 2^32 − 1 on a 12-bit channel) once
//! gave `code_out_of_adc_range` on the f32 path (naming the log channel's converter) and `sensor_fault` on
//! the fixed path. Both paths now give one status: the temperature channel's fault.

use logtrim::error::SensorFault;
use logtrim::{Beta, Calibration, Divider, Error, Placement, SensorElement, TemperatureSensor};
use logtrim_host::calfile::CalFile;
use logtrim_host::tables::TableOptions;

fn unit(placement: Placement, open: u32, short: u32) -> CalFile {
    let mut cal = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
    cal.temperature.min_c = -40.0;
    cal.temperature.max_c = 125.0;
    let mut f = CalFile::new(cal, Some("RAW-1".into()));
    f.temperature_sensor = Some(TemperatureSensor {
        element: SensorElement::NtcBeta(Beta { r0_ohm: 10_000.0, t0_c: 25.0, beta_k: 3950.0 }),
        divider: Divider {
            open_margin: open,
            short_margin: short,
            ..Divider::ratiometric(placement, 10_000.0, 12)
        },
        min_c: -40.0,
        max_c: 125.0,
    });
    f
}

#[test]
fn item11_a_raw_temperature_code_beyond_its_channel_gives_one_status_on_both_paths() {
    for (placement, open, short, want) in [
        (Placement::LowSide, 8, 8, SensorFault::Open),
        (Placement::HighSide, 8, 8, SensorFault::Short),
        (Placement::LowSide, 0, 0, SensorFault::OutOfModelRange),
    ] {
        let f = unit(placement, open, short);
        let sensor = f.temperature_sensor.unwrap();
        let tables = f.fixed_tables(&TableOptions::default()).unwrap();
        let fixed = tables.view();
        for tc in [4096, 4097, 65535, 1 << 24, u32::MAX] {
            let f32_path = sensor.celsius(tc).and_then(|t| f.calibration.correct(32768, t));
            let fixed_path = fixed.correct_raw(32768, tc);
            assert_eq!(f32_path, Err(Error::Sensor(want)), "{placement:?} {tc}");
            assert_eq!(fixed_path.map(|r| r.x), Err(Error::Sensor(want)), "{placement:?} {tc}");
            // The host's f64 reference agrees.
            assert_eq!(sensor.celsius_f64(tc), Err(Error::Sensor(want)), "{placement:?} {tc}");
        }
    }
}
