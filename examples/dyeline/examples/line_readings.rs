//! A shift on the Quillmere dye line, as the photometer's firmware sees it (invented scenario).
//!
//! At boot the firmware reads the unit's calibration image from EEPROM (here: the committed
//! `calibration/QM-DL2-0117.bin`) and checks it, and checks that it belongs to the fixed-point tables
//! `build.rs` compiled in. Clean process water gives the blank. Then come readings of the dye: each is
//! corrected on the f32 path (calibration from the image) and on the integer path (tables from build.rs),
//! and turned into the dye's concentration by the Beer–Lambert law. The readings are rows of the committed
//! validation run (`data/readings.csv`), so the simulator's truth (`data/truth.csv`) is printed beside them;
//! the last four are made up to show what the firmware does with bad readings.
//!
//! Run with `cargo run -p dyeline --example line_readings`.

use std::collections::HashMap;
use std::path::Path;

use dyeline::dye::{CONCENTRATION_FRAC, MG_PER_L_PER_AU};
use dyeline::{boot, temperature, FixedLineReading, FloatLineReading, ReadError};
use logtrim_host::data::{read_readings_file, ReadOptions};
use logtrim_host::image_file::utc_string;

/// The unit's EEPROM, as the board's driver would read it.
const EEPROM: &[u8] = include_bytes!("../calibration/QM-DL2-0117.bin");

/// Q24 and Q16 scales, for printing.
const Q24: f64 = (1u64 << 24) as f64;
const Q16: f64 = (1u64 << CONCENTRATION_FRAC) as f64;

/// One validation reading: what the converter and the sensor gave, and the simulator's truth.
struct Row {
    id: u32,
    code: u32,
    temp_raw: i16,
    /// The true ratio I_sig/I_ref.
    ratio: f64,
}

fn load_rows(dir: &Path) -> Result<Vec<Row>, Box<dyn std::error::Error>> {
    let readings = read_readings_file(&dir.join("data/readings.csv"), &ReadOptions::default())?;
    let truth = std::fs::read_to_string(dir.join("data/truth.csv"))?;
    let mut ratio_of: HashMap<u32, f64> = HashMap::new();
    for line in truth.lines().skip(1) {
        let mut f = line.split(',');
        if let (Some(id), Some(ratio)) = (f.next(), f.next()) {
            ratio_of.insert(id.parse()?, ratio.parse()?);
        }
    }
    let id_col = readings.headers.iter().position(|h| h == "id").ok_or("readings.csv has no id column")?;
    let mut rows = Vec::new();
    for r in &readings.rows {
        let id: u32 = std::str::from_utf8(r.record.get(id_col).unwrap_or_default())?.parse()?;
        let temp_c = r.temp_c?;
        let ratio = *ratio_of.get(&id).ok_or_else(|| format!("no truth for reading {id}"))?;
        rows.push(Row { id, code: r.code, temp_raw: (temp_c * 128.0).round() as i16, ratio });
    }
    Ok(rows)
}

/// The row whose true absorbance is nearest `a`.
fn nearest(rows: &[Row], a: f64) -> Option<&Row> {
    rows.iter().min_by(|p, q| {
        let d = |r: &Row| (-r.ratio.log10() - a).abs();
        d(p).total_cmp(&d(q))
    })
}

fn flags(extrapolated: bool) -> &'static str {
    if extrapolated {
        "T extrap."
    } else {
        ""
    }
}

fn f32_cell(r: &Result<FloatLineReading, ReadError>) -> String {
    match r {
        Ok(v) => format!("{:>8.5} {:>9.4}      ", v.absorbance, v.concentration_mg_per_l),
        Err(e) => format!("{:<24}", error_name(e)),
    }
}

fn fixed_cell(r: &Result<FixedLineReading, ReadError>) -> String {
    match r {
        Ok(v) => format!(
            "{:>10} {:>10} {:>9.4} {:<9}",
            v.absorbance_q24,
            v.concentration_q16,
            f64::from(v.concentration_q16) / Q16,
            flags(v.reading.temperature_extrapolated)
        ),
        Err(e) => format!("{:<41}", error_name(e)),
    }
}

fn error_name(e: &ReadError) -> &'static str {
    match e {
        ReadError::Correction(e) => e.name(),
        ReadError::Concentration(_) => "concentration_out_of_range",
        _ => "refused",
    }
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"));

    // Boot: the image from EEPROM, checked once; then that it belongs to the compiled-in tables.
    let image = boot::load(EEPROM)?;
    println!("boot");
    println!(
        "  EEPROM  {}-byte image, CRC-32 {:#010x} ok, serial {}, calibrated {} UTC, sequence {}",
        image.len(),
        image.crc(),
        image.serial(),
        utc_string(image.calibrated_at()),
        image.sequence()
    );
    boot::matches_tables(&image)?;
    println!(
        "  tables  built by build.rs for {} from calibration/COEFFS.json: {} bytes (+ {} bytes shared by every \
         unit); the image matches them",
        dyeline::unit::SERIAL,
        dyeline::unit::TABLE_BYTES,
        logtrim::fixed::universal::BYTES
    );
    let cal = image.calibration();

    let rows = load_rows(dir)?;
    // Commissioning: clean process water in the cell. Each path keeps the blank it measured itself.
    let blank_row = nearest(&rows, 0.02).ok_or("no readings")?;
    let blank_fixed = dyeline::read_fixed(blank_row.code, blank_row.temp_raw, 0)?.absorbance_q24;
    let blank_f32 = dyeline::read_f32(&cal, blank_row.code, blank_row.temp_raw, 0.0)?.absorbance;
    let blank_true = -blank_row.ratio.log10();
    println!(
        "  blank   clean process water (reading {}): A0 = {blank_f32:.5} AU (f32), {blank_fixed} = {:.5} AU (Q24)",
        blank_row.id,
        blank_fixed as f64 / Q24
    );
    println!(
        "  dye     c = (A − A0) · {MG_PER_L_PER_AU:.4} mg/L per AU  (ε 21 500 L/(mol·cm), l 4 mm, M 612.4 g/mol)"
    );
    println!();

    let mut scenes: Vec<(String, u32, i16, Option<f64>)> = Vec::new();
    for (what, a) in [
        ("rinse water", 0.08),
        ("start of dosing", 0.45),
        ("dosing at target", 1.05),
        ("after a top-up", 1.6),
        ("overdosed batch", 2.6),
    ] {
        if let Some(r) = nearest(&rows, a) {
            scenes.push((format!("{what} (reading {})", r.id), r.code, r.temp_raw, Some(r.ratio)));
        }
    }
    let target = nearest(&rows, 1.05).ok_or("no readings")?;
    // Made-up readings: the same code with the cabinet warmed by the afternoon sun (within the 5 K the
    // calibration allows beyond its range, then beyond it), a bubble that blocks the sample beam, and the
    // reference photodiode's connector come loose (no reference current: the log stage runs to its rail).
    let hot = ((cal.temperature.max_c + 2.5) * 128.0).round() as i16;
    let too_hot = ((cal.temperature.max_c + 6.0) * 128.0).round() as i16;
    scenes.push(("same code, cabinet in the sun".into(), target.code, hot, None));
    scenes.push(("same code, cabinet too hot".into(), target.code, too_hot, None));
    scenes.push(("bubble blocks the sample beam".into(), 1_200, target.temp_raw, None));
    scenes.push(("reference beam lost".into(), 65_535, target.temp_raw, None));

    println!(
        "{:<34}  code  T reg       T | f32 path (image)         | integer path (build.rs tables)            | truth",
        ' '
    );
    println!(
        "reading{:<44}[°C] |   A [AU]  c [mg/L]       |      A Q24      c Q16  c [mg/L] flags     |  c [mg/L]",
        ' '
    );
    for (what, code, raw, ratio) in &scenes {
        let f = dyeline::read_f32(&cal, *code, *raw, blank_f32);
        let q = dyeline::read_fixed(*code, *raw, blank_fixed);
        let truth = match ratio {
            Some(r) => format!("{:>9.4}", (-r.log10() - blank_true) * f64::from(MG_PER_L_PER_AU)),
            None => format!("{:>9}", "—"),
        };
        println!(
            "{what:<34} {code:>5} {:#06x} {:>7.3} | {} | {} | {truth}",
            *raw as u16,
            temperature::celsius(*raw),
            f32_cell(&f),
            fixed_cell(&q)
        );
    }
    Ok(())
}
