//! `logtrim simulate`: simulate chamber calibration and validation runs of a front end and write their files.

use std::f64::consts::LN_10;
use std::path::PathBuf;

use clap::Args;
use logtrim_host::error_scale::{db_amplitude, db_power};
use logtrim_host::frontend::{FrontEnd, PRESETS};
use logtrim_host::output::number::Num;
use logtrim_host::simulate::{self, ChamberPlan, Plan};

use crate::population::Temps;
use crate::Failure;

/// Options of `logtrim simulate`.
#[derive(Args, Debug)]
pub struct SimulateArgs {
    /// Built-in front end to simulate (see --list-presets).
    #[arg(long, value_name = "NAME", conflicts_with = "frontend")]
    preset: Option<String>,
    /// Front-end description to simulate: a JSON file as written by --write-preset.
    #[arg(long, value_name = "FILE.json")]
    frontend: Option<PathBuf>,
    /// Seed of every random draw: the same seed and sizes give the same files, bit for bit.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Directory to write cal.csv, readings.csv, truth.csv, frontend.json and manifest.json into
    /// (created if missing); for a front end with an `aging` key (a unit drifted since its calibration)
    /// also standards.csv (readings of two reference standards, for `logtrim trim`) and blank.csv (readings
    /// of a blank, for `logtrim blank`).
    #[arg(long, value_name = "DIR")]
    out_dir: Option<PathBuf>,
    /// Chamber temperature set-points, evenly spaced over the operating range, ends included.
    #[arg(long, value_name = "N", default_value_t = ChamberPlan::default().setpoints, conflicts_with = "setpoints_at")]
    setpoints: usize,
    /// Chamber set-points at these temperatures instead, °C, comma-separated (a production plan's, as
    /// `logtrim plan` prints them).
    #[arg(long, value_name = "T1,T2,…", allow_hyphen_values = true, value_parser = crate::population::parse_temps)]
    setpoints_at: Option<Temps>,
    /// Units of the batch drawn from outside the population: at seeded places, with 5x the design's
    /// unit-to-unit spread (marked in units.json and manifest.json).
    #[arg(long, value_name = "N", default_value_t = 0)]
    outliers: usize,
    /// Ratios per sweep, log-spaced over the operating range, ends included.
    #[arg(long, value_name = "N", default_value_t = ChamberPlan::default().ratios_per_setpoint)]
    ratios: usize,
    /// Sweeps at each set-point.
    #[arg(long, value_name = "N", default_value_t = ChamberPlan::default().repeats)]
    repeats: usize,
    /// Validation readings per unit, at random (ratio, temperature) over the whole range.
    #[arg(long, value_name = "N", default_value_t = Plan::default().validation_count)]
    validation: usize,
    /// Units to simulate; more than one draws each from the description's unit-to-unit spread and adds
    /// a `unit` column to every CSV file.
    #[arg(long, value_name = "N", default_value_t = 1)]
    units: usize,
    /// Write the chosen front end's description to FILE as JSON (to start your own from it), every key
    /// included: the optional ones (spread, aging, chamber_faults) as null where the preset has none; with
    /// --out-dir the simulation runs as well.
    #[arg(long, value_name = "FILE")]
    write_preset: Option<PathBuf>,
    /// List the built-in front ends and stop.
    #[arg(long)]
    list_presets: bool,
    /// The serial of a single simulated unit (in cal.csv's unit column) [default: U0001].
    #[arg(long, value_name = "SERIAL")]
    serial: Option<String>,
    /// Dirty chamber run: the probability that a reading is glitched (front-end key
    /// chamber_faults.glitch_rate).
    #[arg(long, value_name = "P")]
    glitch_rate: Option<f64>,
    /// Dirty chamber run: the glitches' sizes, drawn log-uniformly, as MIN:MAX codes
    /// (chamber_faults.glitch_codes_min, glitch_codes_max) [default: 300:3000].
    #[arg(long, value_name = "MIN:MAX")]
    glitch_codes: Option<String>,
    /// Dirty chamber run: the pair's temperature lag at the start of each set-point's first sweep, K
    /// (chamber_faults.unsettled_lag_k).
    #[arg(long, value_name = "K", allow_hyphen_values = true)]
    unsettled_lag: Option<f64>,
    /// Dirty chamber run: readings over which the lag decays by a factor e
    /// (chamber_faults.unsettled_readings) [default: 10].
    #[arg(long, value_name = "N")]
    unsettled_readings: Option<f64>,
    /// Dirty chamber run: the share of set-points that start unsettled (chamber_faults.unsettled_share)
    /// [default: 1].
    #[arg(long, value_name = "SHARE")]
    unsettled_share: Option<f64>,
}

/// The front end with the dirty-run options applied over its `chamber_faults`.
fn with_faults(mut fe: FrontEnd, args: &SimulateArgs) -> Result<FrontEnd, Failure> {
    let any = args.glitch_rate.is_some()
        || args.glitch_codes.is_some()
        || args.unsettled_lag.is_some()
        || args.unsettled_readings.is_some()
        || args.unsettled_share.is_some();
    if !any {
        return Ok(fe);
    }
    let mut f = fe.chamber_faults.unwrap_or_default();
    if let Some(v) = args.glitch_rate {
        f.glitch_rate = v;
    }
    if let Some(t) = &args.glitch_codes {
        let bad = || Failure::input(format!("--glitch-codes {t:?}: expected MIN:MAX, two sizes in codes"));
        let (a, b) = t.split_once(':').ok_or_else(bad)?;
        f.glitch_codes_min = a.trim().parse().map_err(|_| bad())?;
        f.glitch_codes_max = b.trim().parse().map_err(|_| bad())?;
    }
    if let Some(v) = args.unsettled_lag {
        f.unsettled_lag_k = v;
    }
    if let Some(v) = args.unsettled_readings {
        f.unsettled_readings = v;
    }
    if let Some(v) = args.unsettled_share {
        f.unsettled_share = v;
    }
    fe.chamber_faults = Some(f);
    fe.validate().map_err(Failure::input)?;
    Ok(fe)
}

/// Runs the verb.
pub fn run(args: SimulateArgs) -> Result<(), Failure> {
    if args.list_presets {
        for p in PRESETS {
            say!("{:<24} {}", p.name, p.summary);
        }
        return Ok(());
    }
    crate::check_outputs(
        &[args.frontend.as_deref()],
        &[args.write_preset.as_deref()],
        &[args.out_dir.as_deref()],
    )?;
    let fe = with_faults(chosen_frontend(&args)?, &args)?;
    if let Some(path) = &args.write_preset {
        logtrim_host::output::write_atomic(path, fe.to_json_every_key().as_bytes())
            .map_err(|e| Failure::input(format!("{}: {e}", path.display())))?;
        say!("wrote {} (front end {:?})", path.display(), fe.name);
    }
    let Some(dir) = &args.out_dir else {
        if args.write_preset.is_some() {
            return Ok(());
        }
        return Err(Failure::input("nothing to do: give --out-dir DIR to simulate, or --write-preset FILE"));
    };
    let setpoints_c = args.setpoints_at.clone().map(|t| t.0).unwrap_or_default();
    let plan = Plan {
        seed: args.seed,
        chamber: ChamberPlan {
            setpoints: if setpoints_c.is_empty() { args.setpoints } else { setpoints_c.len() },
            ratios_per_setpoint: args.ratios,
            repeats: args.repeats,
        },
        validation_count: args.validation,
        units: args.units,
    };
    let lot = simulate::Lot { outliers: args.outliers, setpoints_c };
    let mut sim = simulate::simulate_lot(&fe, &plan, &lot).map_err(Failure::input)?;
    if let Some(s) = &args.serial {
        if args.units != 1 {
            return Err(Failure::input("--serial names a single unit; a batch's units are U0001, U0002, …"));
        }
        if s.trim().is_empty() {
            return Err(Failure::input("--serial: expected a non-empty serial"));
        }
        if let Some(u) = sim.units.first_mut() {
            u.serial = s.clone();
        }
    }
    let written = sim.write_to(dir).map_err(Failure::input)?;
    summary(&sim, &written)
}

fn chosen_frontend(args: &SimulateArgs) -> Result<FrontEnd, Failure> {
    let names = || PRESETS.iter().map(|p| p.name).collect::<Vec<_>>().join(", ");
    match (&args.preset, &args.frontend) {
        (Some(name), _) => logtrim_host::frontend::preset(name).ok_or_else(|| {
            Failure::input(format!("--preset {name:?}: no such preset; expected one of: {}", names()))
        }),
        (None, Some(path)) => FrontEnd::load(path).map_err(Failure::input),
        (None, None) => Err(Failure::input(format!(
            "no front end: give --preset NAME (one of: {}) or --frontend FILE.json",
            names()
        ))),
    }
}

fn summary(sim: &simulate::Simulation, written: &[simulate::WrittenFile]) -> Result<(), Failure> {
    let fe = &sim.nominal;
    let o = &fe.operating;
    let p = &sim.plan;
    let units =
        if p.units == 1 { "1 unit".to_string() } else { format!("{} units drawn from its spread", p.units) };
    say!("simulated {:?}, seed {}, {units}", fe.name, p.seed);
    if !fe.description.is_empty() {
        say!("  {}", fe.description);
    }
    say!(
        "  {}…{} °C, ratios {:e}…{:e}; slope at 25 °C {:.4} V/decade ({:.1} codes/Np)",
        o.temp_min_c,
        o.temp_max_c,
        o.ratio_min,
        o.ratio_max,
        fe.ideal_slope_v_per_neper(25.0) * LN_10,
        fe.code_slope(0.0, 25.0)
    );
    let sps: Vec<String> = sim.setpoints_c.iter().map(|&t| format!("{:.1}", Num(t))).collect();
    let outliers: Vec<&str> = sim.units.iter().filter(|u| u.outlier).map(|u| u.serial.as_str()).collect();
    if !outliers.is_empty() {
        say!("  units from outside the population (5x the spread): {}", outliers.join(", "));
    }
    let width = written.iter().map(|w| w.path.display().to_string().chars().count()).max().unwrap_or(0);
    for w in written {
        let name = w.path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        let what = match name.as_str() {
            "cal.csv" => format!(
                "chamber run: set-points {} °C × {} ratios × {} repeats",
                sps.join(", "),
                p.chamber.ratios_per_setpoint,
                p.chamber.repeats
            ),
            "readings.csv" => "validation readings at random (ratio, T) over the whole range".into(),
            "truth.csv" => "their truth: ratio, x_true, t_true_c and the oracle's x".into(),
            "frontend.json" => "the front end simulated".into(),
            "units.json" => "each unit's drawn front end".into(),
            "faults.csv" => "the chamber readings the faults made dirty, by their line in cal.csv".into(),
            "manifest.json" => "what generated these files".into(),
            "standards.csv" => {
                "the aged unit's readings of two reference standards, for `logtrim trim`".into()
            }
            "blank.csv" => "the aged unit's readings of a blank, for `logtrim blank`".into(),
            _ => String::new(),
        };
        let rows = w.rows.map(|r| format!("{r:>7} rows")).unwrap_or_default();
        say!("wrote {:<width$} {rows:>12}  {what}", w.path.display().to_string());
    }
    let s = sim.oracle_stats();
    say!(
        "oracle on the validation run ({} readings; {} undefined: at a rail or below the bias-current floor):",
        s.count, s.undefined
    );
    for (label, np) in [("rms", s.rms_np), ("max", s.max_np)] {
        say!(
            "  {label} {np:.3e} Np = {:.3e} dB (10·log10, power ratios) = {:.3e} dB (20·log10, amplitude ratios)",
            db_power(np),
            db_amplitude(np)
        );
    }
    Ok(())
}
