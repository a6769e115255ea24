//! `logtrim demo`: the whole job on simulated units, from chamber run to corrected readings, with the
//! error of three methods side by side.

use std::path::PathBuf;

use clap::Args;
use logtrim_host::calfile::CalFile;
use logtrim_host::demo::{render, run as run_demo};
use logtrim_host::fit::{render_report, FitOptions};
use logtrim_host::frontend::{preset, PRESETS};
use logtrim_host::simulate::Plan;

use crate::Failure;

/// Options of `logtrim demo`.
#[derive(Args, Debug)]
pub struct DemoArgs {
    /// Run only this built-in front end (default: every preset).
    #[arg(long, value_name = "NAME")]
    preset: Option<String>,
    /// Seed of the simulation.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Validation readings (held out from the fit), at random over the whole range.
    #[arg(long, default_value_t = 5000, value_name = "N")]
    validation: usize,
    /// Folder for the files the demo makes (chamber run, validation run and its truth, calibration):
    /// the starting point for trying `logtrim apply`, `image`, `verify` by hand.
    #[arg(long, default_value = "logtrim-demo", value_name = "DIR")]
    out_dir: PathBuf,
}

const STORY: &str = "\
A production line of two-beam process monitors: each unit splits its lamp's light into a reference beam
and a sample beam, and a log-ratio stage turns the two photocurrents into one voltage. One unit off the
line goes into the temperature chamber; logtrim fits its calibration, and a held-out run it never saw
(readings at random ratios and temperatures across the whole range) measures three ways of reading it.";

/// Runs the verb.
pub fn run(args: DemoArgs) -> Result<(), Failure> {
    crate::check_outputs(&[], &[], &[Some(&args.out_dir)])?;
    let names: Vec<&str> = match &args.preset {
        Some(p) => vec![p.as_str()],
        None => PRESETS.iter().map(|p| p.name).collect(),
    };
    say!("{STORY}\n");
    for name in names {
        let fe = preset(name).ok_or_else(|| {
            let known: Vec<&str> = PRESETS.iter().map(|p| p.name).collect();
            Failure::input(format!("unknown preset {name:?}; known: {}", known.join(", ")))
        })?;
        let plan = Plan { seed: args.seed, validation_count: args.validation, ..Plan::default() };
        let out = run_demo(&fe, &plan, &FitOptions::default()).map_err(Failure::check)?;
        let dir = args.out_dir.join(name);
        std::fs::create_dir_all(&dir).map_err(|e| Failure::input(format!("{}: {e}", dir.display())))?;
        out.simulation.write_to(&dir).map_err(Failure::input)?;
        // A raw temperature channel's description goes with the calibration, so that apply reads temp_code.
        let serial = out.simulation.units[0].serial.clone();
        let file = CalFile::of_fit(&out.fit, Some(serial), fe.firmware_sensor(), crate::stamp::now());
        let coeffs = dir.join("coeffs.json");
        file.save(&coeffs).map_err(Failure::input)?;
        say!("== {name}: {}", fe.description);
        say!(
            "chamber run: {} rows at {} set-points; validation run: {} readings",
            out.simulation.chamber.len(),
            plan.chamber.setpoints,
            out.simulation.validation.len()
        );
        say_raw!("{}", render_report(&out.fit));
        say!();
        say_raw!("{}", render(&out));
        say!("files: {} (cal.csv, readings.csv, truth.csv, frontend.json, coeffs.json)\n", dir.display());
    }
    say!(
        "next: logtrim apply {0}/<preset>/coeffs.json {0}/<preset>/readings.csv -o corrected.csv",
        args.out_dir.display()
    );
    Ok(())
}
