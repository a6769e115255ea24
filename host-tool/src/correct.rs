//! Correcting readings row by row with the firmware's own paths: the f32 path with a chosen backend, the
//! integer fixed-point path, and field layers (a trim, a blank) on top of either. Rows run in parallel.
//!
//! A corrected row ([`RowValue`]) holds its value in every unit of [`Unit::ALL`], in that order, so that
//! whatever writes it ([`crate::apply`]) follows the firmware's list of units. A row the firmware refuses
//! keeps the firmware's error.
//!
//! The readings of a unit are read as its firmware reads them ([`read_unit_readings`]): a `temp_code`
//! column goes through the calibration file's temperature sensor in f32.

use std::path::Path;

use logtrim::field::Layers;
use logtrim::fixed::{FixedCalibration, FixedReading, X_FRAC};
use logtrim::math::{Backend, Libm, Micromath};
use logtrim::{Calibration, Error, Reading, Unit};
use rayon::prelude::*;

use crate::calfile::CalFile;
use crate::data::{read_readings_file, DataError, ReadOptions, Readings, TemperatureColumn};

/// What a user of the micromath backend is told (by `apply --path f32-micromath` and `verify --backend
/// micromath`): where it must not be used (see `logtrim::math::Backend`).
pub const MICROMATH_WARNING: &str = "the micromath backend is coarse: its exp is 2.4e-3 relative (about \
2.4e-3 Np, 0.01 dB), far outside a quarter-LSB budget, and readings near the ends of the calibrated range \
can be refused; use it only where that error is acceptable, never where safety rests on the reading";

/// Which arithmetic corrects the readings.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Arithmetic {
    /// firmware-lib's f32 path with the libm backend (the default on parts with an FPU).
    #[default]
    F32,
    /// firmware-lib's f32 path with the micromath backend (fast, coarse).
    F32Micromath,
}

/// How many output units there are: one value per unit of [`Unit::ALL`].
pub const UNITS: usize = Unit::ALL.len();

/// A corrected row: the value in every unit of [`Unit::ALL`] (as the path computed it, widened to f64 for
/// writing) and whether the temperature was extrapolated.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RowValue {
    /// x = ln(I_sig/I_ref).
    pub x: f64,
    /// The value in each unit of [`Unit::ALL`], in that order.
    pub units: [f64; UNITS],
    /// The temperature lay outside the calibrated range, within the allowed extrapolation.
    pub temperature_extrapolated: bool,
    /// Digits to write: the f32 path's values are f32 (shortest f32 text); the fixed path's are exact
    /// binary fractions (shortest f64 text).
    pub f32_digits: bool,
}

impl RowValue {
    /// The value in `unit`.
    pub fn value(&self, unit: Unit) -> f64 {
        let i = Unit::ALL.iter().position(|&u| u == unit).unwrap_or(0);
        self.units[i]
    }

    fn of_f32(r: &Reading) -> RowValue {
        RowValue {
            x: f64::from(r.x),
            units: Unit::ALL.map(|u| f64::from(r.value(u))),
            temperature_extrapolated: r.temperature_extrapolated,
            f32_digits: true,
        }
    }

    fn of_fixed(r: &FixedReading) -> Result<RowValue, Error> {
        let mut units = [0.0; UNITS];
        for (v, u) in units.iter_mut().zip(Unit::ALL) {
            let q = r.value(u)?;
            *v = q as f64 / (1u64 << logtrim::fixed::value_frac_bits(u)) as f64;
        }
        Ok(RowValue {
            x: x_of_q24(r.x),
            units,
            temperature_extrapolated: r.temperature_extrapolated,
            f32_digits: false,
        })
    }
}

/// The x of the fixed path's Q24 value, in nepers (exact).
pub fn x_of_q24(x: i32) -> f64 {
    f64::from(x) / f64::from(1u32 << X_FRAC)
}

/// The mean x of fixed-path readings, in Q24 rounded to nearest (integer arithmetic, as the MCU would); 0
/// for no readings.
pub fn mean_q24(v: &[FixedReading]) -> i32 {
    let n = v.len().max(1) as i64;
    let s: i64 = v.iter().map(|r| i64::from(r.x)).sum();
    let q = (s + if s >= 0 { n / 2 } else { -(n / 2) }) / n;
    // A mean of i32 values is an i32.
    q as i32
}

/// The converter of a unit's `temp_code` column: the calibration file's temperature sensor in f32, as the
/// MCU converts it (`None` for a unit that reads °C).
pub fn sensor_converter(file: &CalFile) -> Option<impl Fn(u32) -> Result<f64, Error> + Sync + '_> {
    file.temperature_sensor.as_ref().map(|s| move |code: u32| s.celsius(code).map(f64::from))
}

/// Reads a readings file of a unit as its firmware reads it: codes of the calibration's ADC resolution, and
/// a `temp_code` column converted to °C by the calibration file's temperature sensor in f32 (as the MCU
/// converts it). Bad rows are skipped and listed in [`Readings::skipped`] when `skip_bad_rows` is set.
pub fn read_unit_readings(file: &CalFile, path: &Path, skip_bad_rows: bool) -> Result<Readings, DataError> {
    let conv = sensor_converter(file);
    let opts = ReadOptions {
        adc_bits: file.calibration.adc.bits,
        skip_bad_rows,
        temp_converter: conv.as_ref().map(|c| c as &dyn Fn(u32) -> Result<f64, Error>),
    };
    read_readings_file(path, &opts)
}

fn correct_one<B: Backend>(
    cal: &Calibration,
    code: u32,
    temp: &Result<f64, Error>,
) -> Result<Reading, Error> {
    let t = (*temp)?;
    cal.correct_with::<B>(code, t as f32)
}

/// The factory f32-path reading of every row of `readings` (in parallel), with the chosen backend.
pub fn factory_readings(
    cal: &Calibration,
    readings: &Readings,
    arith: Arithmetic,
) -> Vec<Result<Reading, Error>> {
    readings
        .rows
        .par_iter()
        .map(|r| match arith {
            Arithmetic::F32 => correct_one::<Libm>(cal, r.code, &r.temp_c),
            Arithmetic::F32Micromath => correct_one::<Micromath>(cal, r.code, &r.temp_c),
        })
        .collect()
}

/// Corrects every row of `readings` (in parallel) with the chosen arithmetic.
pub fn correct_rows(
    cal: &Calibration,
    readings: &Readings,
    arith: Arithmetic,
) -> Vec<Result<RowValue, Error>> {
    correct_rows_layered(cal, readings, arith, &Layers::FACTORY)
}

/// [`correct_rows`] with field layers (a trim, a blank) on top of the factory correction.
pub fn correct_rows_layered(
    cal: &Calibration,
    readings: &Readings,
    arith: Arithmetic,
    layers: &Layers,
) -> Vec<Result<RowValue, Error>> {
    factory_readings(cal, readings, arith)
        .into_iter()
        .map(|r| r.map(|r| RowValue::of_f32(&layers.apply(&r))))
        .collect()
}

/// A row's raw temperature code, as written in its `temp_code` column (checked by the reader).
fn temp_code(readings: &Readings, r: &crate::data::ReadingRow) -> Option<u32> {
    let field = r.record.get(readings.columns.temperature)?;
    std::str::from_utf8(field).ok()?.trim().parse::<u32>().ok()
}

/// The factory fixed-path reading of every row of `readings` (in parallel), as on the MCU.
///
/// A `temp_c` column is passed as m°C (rounded); a `temp_code` column goes through the tables' own
/// temperature-sensor table, as on the MCU.
pub fn factory_readings_fixed(
    fixed: &FixedCalibration<'_>,
    readings: &Readings,
) -> Vec<Result<FixedReading, Error>> {
    let raw = readings.columns.temperature_kind == TemperatureColumn::Code;
    readings
        .rows
        .par_iter()
        .map(|r| {
            if raw {
                let code = temp_code(readings, r).ok_or(Error::NonFinite)?;
                fixed.correct_raw(r.code, code)
            } else {
                let t = r.temp_c?;
                let mc = (t * 1000.0).round();
                if !(mc >= f64::from(i32::MIN) && mc <= f64::from(i32::MAX)) {
                    // `as` saturates: the error reports the nearest i32 m°C.
                    return Err(Error::TemperatureOutOfRange { millicelsius: mc as i32 });
                }
                fixed.correct(r.code, mc as i32)
            }
        })
        .collect()
}

/// The temperature the fixed path reads for each row of readings with a raw `temp_code` column: the
/// tables' sensor table at the code (θ, as °C); `None` where it reads none (a fault, no sensor table) and
/// for readings in °C.
pub fn fixed_temperatures(fixed: &FixedCalibration<'_>, readings: &Readings) -> Vec<Option<f64>> {
    let raw = readings.columns.temperature_kind == TemperatureColumn::Code;
    readings
        .rows
        .iter()
        .map(|r| {
            let theta = fixed.theta_from_code(temp_code(readings, r)?).ok()?;
            raw.then(|| f64::from(theta) / (1000.0 * f64::from(1u32 << logtrim::fixed::THETA_FRAC)))
        })
        .collect()
}

/// Corrects every row of `readings` (in parallel) with the firmware's integer fixed-point path.
///
/// A `temp_c` column is passed as m°C (rounded); a `temp_code` column goes through the tables' own
/// temperature-sensor table, as on the MCU.
pub fn correct_rows_fixed(fixed: &FixedCalibration<'_>, readings: &Readings) -> Vec<Result<RowValue, Error>> {
    correct_rows_fixed_layered(fixed, readings, &Layers::FACTORY)
}

/// [`correct_rows_fixed`] with field layers (a trim, a blank) on top of the factory correction, in the
/// fixed path's integer arithmetic.
pub fn correct_rows_fixed_layered(
    fixed: &FixedCalibration<'_>,
    readings: &Readings,
    layers: &Layers,
) -> Vec<Result<RowValue, Error>> {
    factory_readings_fixed(fixed, readings)
        .into_iter()
        .map(|r| r.and_then(|r| layers.apply_fixed(&r)).and_then(|r| RowValue::of_fixed(&r)))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::read_readings;

    #[test]
    fn every_unit_has_its_value_in_the_order_of_unit_all() {
        // A row of each path holds, at each unit's place, that unit's conversion of the same reading: a
        // unit added to Unit::ALL without its place in RowValue would misplace the values after it.
        let cal = Calibration::nominal(16, 32768.0, 3000.0, 25.0);
        let csv = "temp_c,code\n25,35768\n25,30000\n";
        let readings = read_readings(csv.as_bytes(), "mem.csv", &ReadOptions::default()).unwrap();
        let tables = crate::tables::build(&cal, None, &crate::tables::TableOptions::default()).unwrap();
        let f32_rows = correct_rows(&cal, &readings, Arithmetic::F32);
        let fixed_rows = correct_rows_fixed(&tables.view(), &readings);
        let f32_readings = factory_readings(&cal, &readings, Arithmetic::F32);
        let fixed_readings = factory_readings_fixed(&tables.view(), &readings);
        assert_eq!(UNITS, Unit::ALL.len());
        for i in 0..2 {
            let (a, r) = (f32_rows[i].unwrap(), f32_readings[i].unwrap());
            let (b, q) = (fixed_rows[i].unwrap(), fixed_readings[i].unwrap());
            for u in Unit::ALL {
                assert_eq!(a.value(u), f64::from(r.value(u)), "{u:?}");
                let want = q.value(u).unwrap() as f64 / (1u64 << logtrim::fixed::value_frac_bits(u)) as f64;
                assert_eq!(b.value(u), want, "{u:?}");
            }
        }
        // x = 1 Np at T_ref (3000 codes above the zero at 3000 codes per neper): 1 Np is 10·log10(e) =
        // 4.3429448 dB of a power ratio (ISO 80000-3).
        assert!((f32_rows[0].unwrap().value(Unit::DbPower) - 4.342_944_8).abs() < 1e-6);
    }
}
