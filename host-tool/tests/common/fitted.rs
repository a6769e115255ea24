//! Units fitted from the simulator's presets (seeded simulation), as calibration files.
#![allow(dead_code)]

use logtrim_host::calfile::CalFile;
use logtrim_host::demo::fit_data;
use logtrim_host::fit::{fit, FitOptions};
use logtrim_host::frontend::preset;
use logtrim_host::simulate::{simulate, Plan};

/// The first unit of a seeded simulation of the preset `name`, fitted: its file names the unit by the
/// preset's first three letters and `number` (`PHO-0007`) and carries a fixed creation time.
pub fn preset_unit(name: &str, number: &str) -> CalFile {
    let fe = preset(name).unwrap();
    let plan = Plan { validation_count: 10, ..Plan::default() };
    let sim = simulate(&fe, &plan).unwrap();
    let out = fit(&fit_data(&sim.chamber, 0).unwrap(), &FitOptions::default()).unwrap();
    let mut f = CalFile::new(out.calibration, Some(format!("{}-{number}", &name[..3].to_uppercase())));
    f.created_unix_s = 1_767_225_600;
    f
}
