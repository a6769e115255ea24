//! The host half of the Cortex-M measurement (`scripts/bench-arm.sh`, sources in `bench/arm/`): from a
//! unit's calibration file it writes what the ARM builds and the emulator runner need, into one folder:
//!
//! * `unit.c` and `unit.rs`: the unit's tables as `logtrim emit --format c|rust` writes them (the C under
//!   the name `unit_cal`), and the C library `ltrm.h`, `ltrm.c` as `logtrim c-library` writes it;
//! * `naive.h`: the coefficients of the naive float correction the figures are compared with
//!   (Steinhart–Hart through three points of the unit's NTC, offset and slope quadratics in T through
//!   three temperatures of the calibration);
//! * `bench.json`: the input streams (log code, temperature code or m°C) and, for each, the results of
//!   the host library's fixed path (status, x, power dB, ratio) one call at a time and through the
//!   stage cache and through the code table in stream order: what the ARM builds must reproduce bit for bit.
//!
//! `arm_bench COEFFS.json OUT_DIR [SAMPLES]`. Streams are drawn by a seeded generator over the calibrated
//! ranges: `new` (a new temperature at every sample), `held` (one temperature), `wander` (an oversampled
//! temperature drifting by ±0.3 K with a little noise, at the input's resolution: the channel's code, or
//! m°C).

use std::fmt::Write as _;
use std::path::PathBuf;

use logtrim::fixed::{CodeTable, FixedCalibration, FixedReading, StageCache};
use logtrim::{Error, Unit};
use logtrim_host::calfile::CalFile;
use logtrim_host::emit::{self, c::status_code, Format, Provenance};
use logtrim_host::tables::TableOptions;
use serde::Serialize;

// The seeded generator the streams are drawn with.
use logtrim_checks::XorShift64 as Rng;

#[derive(Serialize)]
struct Stream {
    name: &'static str,
    code: Vec<u32>,
    /// The temperature channel's code (raw unit) or m°C as its u32 bit pattern.
    temp: Vec<u32>,
    /// Per sample: [status, x, dB status, dB, ratio status, ratio] of the direct path.
    direct: Vec<[i64; 6]>,
    /// The same through one stage cache over the stream, in order.
    cached: Vec<[i64; 6]>,
    /// The same through one code table over the stream, in order.
    table: Vec<[i64; 6]>,
    /// The samples of `table` whose code the table did not interpolate (they took the stage cache), of those
    /// whose code the direct path accepts.
    table_fallbacks: usize,
    table_valid_codes: usize,
}

#[derive(Serialize)]
struct Doc {
    unit: String,
    raw: bool,
    table_bytes: usize,
    universal_bytes: usize,
    streams: Vec<Stream>,
}

fn outputs(r: Result<FixedReading, Error>) -> [i64; 6] {
    let st = status_code(&r) as i64;
    match r {
        Ok(r) => {
            let db = r.value(Unit::DbPower);
            let ratio = r.value(Unit::Ratio);
            [
                st,
                i64::from(r.x),
                status_code(&db) as i64,
                db.unwrap_or(0),
                status_code(&ratio) as i64,
                ratio.unwrap_or(0),
            ]
        }
        Err(_) => [st, 0, 0, 0, 0, 0],
    }
}

fn correct(f: &FixedCalibration<'_>, raw: bool, code: u32, temp: u32) -> Result<FixedReading, Error> {
    if raw {
        f.correct_raw(code, temp)
    } else {
        f.correct(code, temp as i32)
    }
}

fn correct_cached(c: &mut StageCache<'_>, raw: bool, code: u32, temp: u32) -> Result<FixedReading, Error> {
    if raw {
        c.correct_raw(code, temp)
    } else {
        c.correct(code, temp as i32)
    }
}

/// Coefficients of the quadratic through three points.
fn quadratic(p: [(f64, f64); 3]) -> [f64; 3] {
    let [(x0, y0), (x1, y1), (x2, y2)] = p;
    let d01 = (y1 - y0) / (x1 - x0);
    let d12 = (y2 - y1) / (x2 - x1);
    let c2 = (d12 - d01) / (x2 - x0);
    let c1 = d01 - c2 * (x0 + x1);
    let c0 = y0 - c1 * x0 - c2 * x0 * x0;
    [c0, c1, c2]
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    if args.len() < 3 {
        return Err("usage: arm_bench COEFFS.json OUT_DIR [SAMPLES]".into());
    }
    let file = CalFile::load(args[1].as_ref())?;
    let out = PathBuf::from(&args[2]);
    let n: usize = args.get(3).map_or(Ok(256), |s| s.parse())?;
    std::fs::create_dir_all(&out)?;
    let tables = file.fixed_tables(&TableOptions::default())?;
    let prov = Provenance { unit: file.unit.clone(), source: Some(args[1].clone()) };
    let identity = logtrim::field::fingerprint(&file.calibration)?;
    let name = emit::c::CName::new("unit_cal")?;
    std::fs::write(out.join("unit.c"), emit::c::render_unit(&tables, &prov, &name, identity))?;
    std::fs::write(out.join("ltrm.h"), emit::c::library_header())?;
    std::fs::write(out.join("ltrm.c"), emit::c::library_source())?;
    std::fs::write(out.join("unit.rs"), emit::render(&tables, Format::Rust, &prov))?;
    let cal = &file.calibration;
    let sensor = file.temperature_sensor;
    let raw = sensor.is_some();

    // The naive correction's coefficients.
    let (t0, t1) = (f64::from(cal.temperature.min_c), f64::from(cal.temperature.max_c));
    let temps = [t0, 0.5 * (t0 + t1), t1];
    let mut stage = Vec::new();
    for t in temps {
        stage.push((t, cal.stage_f64(t)?));
    }
    let off = quadratic([0, 1, 2].map(|i| (stage[i].0, stage[i].1.offset_codes)));
    let slope = quadratic([0, 1, 2].map(|i| (stage[i].0, stage[i].1.slope)));
    let mut naive = String::from("/* naive float correction: coefficients for this unit (generated) */\n");
    let _ = writeln!(naive, "#define NAIVE_RAW {}", u8::from(raw));
    for (name, c) in [("OFFSET", off), ("SLOPE", slope)] {
        for (i, v) in c.iter().enumerate() {
            let _ = writeln!(naive, "#define NAIVE_{name}{i} {v:e}f");
        }
    }
    if let Some(s) = &sensor {
        // Steinhart–Hart 1/T = a + b·ln R + c·(ln R)³ through three points of the element's curve.
        let pts: Vec<(f64, f64)> = [f64::from(s.min_c) + 10.0, 25.0, f64::from(s.max_c) - 10.0]
            .iter()
            .map(|&t| Ok((s.element.resistance_f64(t)?.ln(), 1.0 / (t + 273.15))))
            .collect::<Result<_, Error>>()?;
        let m = nalgebra::Matrix3::from_fn(|r, c| pts[r].0.powi([0, 1, 3][c]));
        let y = nalgebra::Vector3::new(pts[0].1, pts[1].1, pts[2].1);
        let abc = m.lu().solve(&y).ok_or("Steinhart–Hart points are singular")?;
        let _ = writeln!(naive, "#define NAIVE_SH_A {:e}f", abc[0]);
        let _ = writeln!(naive, "#define NAIVE_SH_B {:e}f", abc[1]);
        let _ = writeln!(naive, "#define NAIVE_SH_C {:e}f", abc[2]);
        let _ = writeln!(naive, "#define NAIVE_RS {:e}f", s.divider.series_ohm);
        let _ = writeln!(naive, "#define NAIVE_FULL {}.0f", s.divider.full_scale_code);
        let _ = writeln!(
            naive,
            "#define NAIVE_LOW_SIDE {}",
            u8::from(s.divider.placement == logtrim::divider::Placement::LowSide)
        );
    }
    std::fs::write(out.join("naive.h"), naive)?;

    // Streams.
    let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
    let adc_max = f64::from(cal.adc.max_code()?);
    let temp_input = |t: f64| -> Option<u32> {
        match &sensor {
            Some(s) => s.code_f64(t).ok().map(|c| c.round() as u32),
            None => Some((t * 1000.0).round() as i32 as u32),
        }
    };
    let temp_celsius = |temp: u32| -> Option<f64> {
        match &sensor {
            Some(s) => s.celsius_f64(temp).ok(),
            None => Some(f64::from(temp as i32) / 1000.0),
        }
    };
    let code_at = |rng: &mut Rng, t: f64| -> u32 {
        let x = f64::from(cal.x_range.min) + f64::from(cal.x_range.max - cal.x_range.min) * rng.unit();
        cal.forward_code_f64(x, t).round().clamp(0.0, adc_max) as u32
    };
    let margin = 0.3 + 0.1 * (t1 - t0) / 100.0;
    let mut streams = Vec::new();
    for name in ["new", "held", "wander"] {
        let mut code = Vec::with_capacity(n);
        let mut temp = Vec::with_capacity(n);
        let held = t0 + (t1 - t0) * (0.25 + 0.5 * rng.unit());
        let centre = t0 + margin + (t1 - t0 - 2.0 * margin) * rng.unit();
        let mut noise = 0.0;
        while code.len() < n {
            let i = code.len() as f64;
            let t = match name {
                "new" => t0 + (t1 - t0) * rng.unit(),
                "held" => held,
                _ => {
                    // Slow drift of ±0.3 K plus low-passed noise of a few hundredths of a kelvin.
                    noise = 0.9 * noise + 0.01 * (rng.unit() - 0.5);
                    centre + 0.3 * (2.0 * std::f64::consts::PI * i / 512.0).sin() + noise
                }
            };
            let Some(tc) = temp_input(t) else { continue };
            // The temperature the unit reads from that input (the code's own, for a raw channel).
            let Some(tr) = temp_celsius(tc) else { continue };
            code.push(code_at(&mut rng, tr));
            temp.push(tc);
        }
        let view = tables.view();
        let direct = code.iter().zip(&temp).map(|(&c, &t)| outputs(correct(&view, raw, c, t))).collect();
        let mut cache = StageCache::new(view);
        let cached =
            code.iter().zip(&temp).map(|(&c, &t)| outputs(correct_cached(&mut cache, raw, c, t))).collect();
        let mut table = CodeTable::new(view);
        let (mut table_fallbacks, mut table_valid_codes) = (0, 0);
        let table = code
            .iter()
            .zip(&temp)
            .map(|(&c, &t)| {
                let r = if raw { table.correct_raw(c, t) } else { table.correct(c, t as i32) };
                if view.check_code(c).is_ok() {
                    table_valid_codes += 1;
                    table_fallbacks += usize::from(!table.interpolates(c));
                }
                outputs(r)
            })
            .collect();
        streams.push(Stream { name, code, temp, direct, cached, table, table_fallbacks, table_valid_codes });
    }
    let doc = Doc {
        unit: file.unit.clone().unwrap_or_default(),
        raw,
        table_bytes: tables.bytes(),
        universal_bytes: logtrim::fixed::universal::BYTES,
        streams,
    };
    std::fs::write(out.join("bench.json"), serde_json::to_string(&doc)?)?;
    Ok(())
}
