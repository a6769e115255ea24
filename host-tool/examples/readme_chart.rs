//! Simulates a chamber run and a validation run of a built-in front end, fits it, and writes the files
//! `logtrim plot` reads: `cal.csv`, `readings.csv`, `truth.csv` (from the simulator) and `COEFFS.json`.
//!
//! `cargo run -p logtrim-host --example readme_chart -- PRESET SEED DIR` (used by
//! `scripts/make-readme-chart.sh`; until the CLI has a `fit` verb, this stands in for
//! `logtrim simulate` + `logtrim fit`).

use std::path::PathBuf;
use std::process::ExitCode;

use logtrim_host::calfile::CalFile;
use logtrim_host::fit::{self, FitData, FitOptions};
use logtrim_host::frontend::{preset, MeasuredTemperature, PRESETS};
use logtrim_host::simulate::{self, Plan};

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let [name, seed, dir] = args.as_slice() else {
        eprintln!("usage: readme_chart PRESET SEED DIR");
        return ExitCode::from(2);
    };
    let Some(fe) = preset(name) else {
        let names: Vec<&str> = PRESETS.iter().map(|p| p.name).collect();
        eprintln!("readme_chart: no preset {name:?}; expected one of: {}", names.join(", "));
        return ExitCode::from(2);
    };
    let Ok(seed) = seed.parse::<u64>() else {
        eprintln!("readme_chart: seed {seed:?}: expected an unsigned integer");
        return ExitCode::from(2);
    };
    let dir = PathBuf::from(dir);
    let plan = Plan { seed, validation_count: 4000, ..Plan::default() };
    let sim = match simulate::simulate(&fe, &plan) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("readme_chart: {e}");
            return ExitCode::from(2);
        }
    };
    if let Err(e) = sim.write_to(&dir) {
        eprintln!("readme_chart: {e}");
        return ExitCode::from(2);
    }
    let mut data = FitData::default();
    for r in &sim.chamber {
        let MeasuredTemperature::Celsius(t) = r.temperature else {
            eprintln!("readme_chart: the preset reads its temperature as a raw code; expected °C");
            return ExitCode::from(2);
        };
        data.code.push(r.code);
        data.temp_c.push(t);
        data.ratio.push(r.ratio);
    }
    let out = match fit::fit(&data, &FitOptions { bits: fe.adc.bits, ..FitOptions::default() }) {
        Ok(o) => o,
        Err(e) => {
            eprintln!("readme_chart: {e}");
            return ExitCode::from(1);
        }
    };
    print!("{}", fit::render_report(&out));
    let coeffs = dir.join("COEFFS.json");
    if let Err(e) = CalFile::new(out.calibration, Some(simulate::serial(0))).save(&coeffs) {
        eprintln!("readme_chart: {e}");
        return ExitCode::from(2);
    }
    println!("wrote {}", coeffs.display());
    ExitCode::SUCCESS
}
