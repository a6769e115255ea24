//! The host's generator: two units from a calibration file (its image with fixed tables, and the same unit
//! with a raw NTC channel and its sensor table), seeded inputs for every [`Kind`] (ordinary values, edges,
//! and invalid ones), and the host's outcome for each.

use std::format;
use std::path::Path;
use std::string::{String, ToString};
use std::vec::Vec;

use logtrim::image::DefaultFixedStorage;
use logtrim_host::calfile::CalFile;
use logtrim_host::image_file::build_image_with;
use logtrim_host::tables::TableOptions;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::eval::{self, Kind, TestUnit};
use crate::format::{encode, Record};

/// Records per kind: the corrections get the most. The Cortex-M0 build of `targets/qemu` (the vectors and
/// the library in the emulated machine's 256 KiB of flash) is at its limit: the micromath correction, which
/// the fixed path does not share, gives up a few records to the fixed path's code.
fn count(kind: Kind) -> usize {
    match kind {
        Kind::F32Correct | Kind::FixedCorrect => 400,
        Kind::F32Micromath => 184,
        Kind::FixedRaw | Kind::ImageParse => 200,
        _ => 120,
    }
}

/// Makes the vector file from the calibration file at `coeffs`, with inputs from `seed`.
pub fn generate(coeffs: &Path, seed: u64) -> Result<Vec<u8>, String> {
    let file = CalFile::load(coeffs).map_err(|e| e.to_string())?;
    let opts = TableOptions::default();
    let plain = build_image_with(&file, Some("VEC-0"), 1, Some(&opts))
        .map_err(|e| format!("{}: {e}", coeffs.display()))?;
    let mut with_ntc = file.clone();
    with_ntc.temperature_sensor = Some(eval::sensors()[0]);
    let ntc = build_image_with(&with_ntc, Some("VEC-1"), 2, Some(&opts))
        .map_err(|e| format!("{}: {e}", coeffs.display()))?;
    for img in [&plain, &ntc] {
        if img.len() > eval::IMAGE_BUF {
            return Err(format!(
                "an image of {} bytes exceeds the target's buffer ({})",
                img.len(),
                eval::IMAGE_BUF
            ));
        }
    }
    let images = [&plain[..], &ntc[..]];
    let (mut s0, mut s1) = (DefaultFixedStorage::new(), DefaultFixedStorage::new());
    let units = [
        eval::load(&plain, &mut s0).map_err(|e| format!("unit 0: {e}"))?,
        eval::load(&ntc, &mut s1).map_err(|e| format!("unit 1: {e}"))?,
    ];

    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut records = Vec::new();
    for kind in Kind::ALL {
        for i in 0..count(kind) {
            let input = inputs(kind, i, &mut rng, &units, &images);
            let out = eval::eval(kind, &input, &units, &images).ok_or_else(|| {
                format!("{kind:?} {input:?}: no outcome (a unit or sensor that does not exist)")
            })?;
            records.push(Record { kind: kind as u32, input, primary: out.primary, digest: out.digest });
        }
    }
    Ok(encode(&images, &records))
}

/// Values that break things: NaN, infinities, signed zeros, subnormals, extremes.
const EDGE_F32: [f32; 10] =
    [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.0, -0.0, 1e-45, f32::MAX, f32::MIN, 1e30, -273.15];

/// An f32 in `lo..hi` most of the time, an edge value now and then.
fn value(rng: &mut ChaCha8Rng, lo: f32, hi: f32) -> u32 {
    if rng.random_range(0..10) == 0 {
        EDGE_F32[rng.random_range(0..EDGE_F32.len())].to_bits()
    } else {
        rng.random_range(lo..hi).to_bits()
    }
}

/// A log-channel code: half the time the code of an x in the calibrated x range at the temperature (the
/// arithmetic past the range checks), else any code of the converter, the rails and beyond now and then.
fn log_code(rng: &mut ChaCha8Rng, cal: &logtrim::Calibration, temp: u32) -> u32 {
    let t = f64::from(f32::from_bits(temp));
    let (lo, hi) = (f64::from(cal.x_range.min), f64::from(cal.x_range.max));
    let max = (1u32 << cal.adc.bits) - 1;
    match cal.forward_code_f64(rng.random_range(lo..hi), t) {
        c if rng.random_range(0..2) == 0 && c.is_finite() && (0.0..=f64::from(max)).contains(&c) => {
            c.round() as u32
        }
        _ => code(rng, u32::from(cal.adc.bits)),
    }
}

/// A converter code of a `bits`-bit converter, the rails and beyond now and then.
fn code(rng: &mut ChaCha8Rng, bits: u32) -> u32 {
    let max = (1u32 << bits) - 1;
    match rng.random_range(0..20) {
        0 => [0, 1, max - 1, max, max + 1, u32::MAX][rng.random_range(0..6)],
        _ => rng.random_range(0..=max),
    }
}

fn inputs(
    kind: Kind,
    i: usize,
    rng: &mut ChaCha8Rng,
    units: &[TestUnit<'_>; 2],
    images: &[&[u8]; 2],
) -> [u32; 5] {
    let unit = (i % 2) as u32;
    let cal = &units[unit as usize].calibration;
    // The calibrated temperature range and 10 K either side: in range, extrapolated, refused.
    let (t_lo, t_hi) = (cal.temperature.min_c - 10.0, cal.temperature.max_c + 10.0);
    let temp = value(rng, t_lo, t_hi);
    let mc = (f32::from_bits(temp) * 1000.0).round() as i32 as u32; // NaN → 0, ±∞ saturate
    let q24 = |x: f32| (x * 16_777_216.0).round() as i32 as u32;
    match kind {
        Kind::F32Correct | Kind::F32Micromath | Kind::F32Staged => {
            [unit, log_code(rng, cal, temp), temp, 0, 0]
        }
        Kind::F32Mean => {
            let c = log_code(rng, cal, temp) as f32 + rng.random_range(0.0f32..1.0);
            [unit, c.to_bits(), temp, 0, 0]
        }
        Kind::FixedCorrect | Kind::FixedBlock => [unit, log_code(rng, cal, temp), mc, 0, 0],
        Kind::FixedRaw => {
            // A temperature code of the NTC channel near the calibrated range, or any code.
            let sensor = eval::sensors()[0];
            let t = f64::from(f32::from_bits(temp));
            let tc = match sensor.code_f64(t) {
                Ok(c) if rng.random_range(0..4) != 0 && c.is_finite() => c.round().clamp(0.0, 4095.0) as u32,
                _ => code(rng, 12),
            };
            [1, log_code(rng, cal, temp), tc, 0, 0]
        }
        Kind::SensorCode => {
            let s = (i % 4) as u32;
            let b = u32::from(eval::sensors()[s as usize].divider.bits);
            [s, code(rng, b), 0, 0, 0]
        }
        Kind::SensorElement => [(i % 4) as u32, value(rng, -250.0, 900.0), 0, 0, 0],
        Kind::ImageParse => {
            let len = images[unit as usize].len();
            let offset = rng.random_range(0..len) as u32;
            let mask = rng.random_range(1..=255u32);
            let cut = if rng.random_range(0..8) == 0 { rng.random_range(0..len) as u32 } else { 0 };
            [unit, offset, mask, cut, u32::from(rng.random_range(0..2) == 1)]
        }
        Kind::TrimF32 | Kind::TrimFixed => {
            // Two standards a few nepers apart, read with a small offset and gain error; now and then
            // wild values that the limits refuse.
            let (ka, kb) = (rng.random_range(-7.0f32..-3.0), rng.random_range(-2.0f32..0.5));
            let (off, gain) = (rng.random_range(-0.2f32..0.2), rng.random_range(0.9f32..1.1));
            let wild = rng.random_range(0..10) == 0;
            let ma = if wild { value(rng, -100.0, 100.0) } else { (ka * gain + off).to_bits() };
            let mb = (kb * gain + off).to_bits();
            let x = value(rng, -8.0, 1.0);
            if kind == Kind::TrimF32 {
                [ma, ka.to_bits(), mb, kb.to_bits(), x]
            } else {
                let g = |b: u32| q24(f32::from_bits(b));
                [g(ma), q24(ka), g(mb), q24(kb), g(x)]
            }
        }
        Kind::Blank => {
            let (bx, x) = (value(rng, -1.0, 1.0), value(rng, -8.0, 1.0));
            [bx, x, q24(f32::from_bits(bx)), q24(f32::from_bits(x)), 0]
        }
        Kind::RecordParse => {
            let which = (i % 2) as u32;
            [
                which,
                rng.random_range(0..64),
                rng.random_range(1..=255u32),
                u32::from(rng.random_range(0..2) == 1),
                0,
            ]
        }
        Kind::UnitFromX => [(i % 7) as u32, value(rng, -20.0, 5.0), 0, 0, 0],
        Kind::FixedTable => [unit, log_code(rng, cal, temp), mc, log_code(rng, cal, temp), 0],
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::format::Vectors;

    /// Every kind has records that give a value and records that give an error, so the target checks both
    /// the arithmetic and the refusals (seeded: the generator's default seed).
    #[test]
    fn every_kind_has_values_and_errors() {
        let coeffs =
            Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/dyeline/calibration/COEFFS.json");
        let bytes = generate(&coeffs, 17).unwrap();
        let v = Vectors::parse(&bytes).unwrap();
        for kind in Kind::ALL {
            let recs: Vec<_> = v.records().filter(|r| r.kind == kind as u32).collect();
            let values = recs.iter().filter(|r| r.primary != eval::NO_VALUE).count();
            std::eprintln!("{kind:?}: {} records, {values} with a value", recs.len());
            assert_eq!(recs.len(), count(kind));
            assert!(values >= recs.len() / 4, "{kind:?}: only {values} of {} give a value", recs.len());
            // `Unit::from_x` cannot fail: it maps every x to a value (NaN for NaN).
            if kind != Kind::UnitFromX {
                assert!(values < recs.len(), "{kind:?}: no record gives an error");
            }
        }
    }
}
