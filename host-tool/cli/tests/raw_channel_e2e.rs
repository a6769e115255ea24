//! A unit whose temperature is read raw (an NTC behind a divider), end to end through the binary: simulate
//! the `photometer-ntc` preset, write the channel's settings file from its data-sheet values with
//! `logtrim sensor settings`, fit the chamber run with `--sensor`, correct the held-out readings with
//! `apply` (which converts `temp_code` through the calibration file's sensor in f32, as the firmware does),
//! and hold the corrected x against the truth: rms within 1.5× the oracle's, on the readings both give a
//! value for.

mod common;

use std::collections::HashMap;
use std::path::Path;

use common::{logtrim, logtrim_words, NTC_CHANNEL};
use logtrim_host::frontend::FrontEnd;

const RMS_BOUND: f64 = 1.5;

/// A CSV file as a header and rows of fields (the files here have no quoted fields).
fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text.lines();
    let head = lines.next().unwrap().split(',').map(str::to_string).collect();
    (head, lines.map(|l| l.split(',').map(str::to_string).collect()).collect())
}

fn column(head: &[String], name: &str) -> usize {
    head.iter().position(|h| h == name).unwrap_or_else(|| panic!("no column {name} in {head:?}"))
}

fn run(seed: u64) {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let p = |name: &str| d.join(name).to_str().unwrap().to_string();
    let sim = p("sim");
    let line = format!("simulate --preset photometer-ntc --seed {seed} --validation 3000 --out-dir");
    let (code, out, err) = logtrim_words(&line, &[&sim]);
    assert_eq!(code, 0, "{out}{err}");
    let cal = d.join("sim/cal.csv");
    assert!(std::fs::read_to_string(&cal).unwrap().starts_with("unit,code,temp_code,ratio\n"));

    // The settings from the channel's data-sheet values (the preset's invented ones).
    let sensor = p("sensor.json");
    let line = format!("sensor settings --beta 3900 --r0 10k --t0 25 {NTC_CHANNEL} -o");
    let (code, out, err) = logtrim_words(&line, &[&sensor]);
    assert_eq!(code, 0, "{out}{err}");
    // They are the description the simulated unit's firmware is given.
    let fe = FrontEnd::load(&d.join("sim/frontend.json")).unwrap();
    let written = logtrim_host::sensor_tool::load_settings(Path::new(&sensor)).unwrap();
    assert_eq!(fe.firmware_sensor(), Some(written));

    let coeffs = p("coeffs.json");
    let (code, out, err) = logtrim(&["fit", cal.to_str().unwrap(), "--sensor", &sensor, "-o", &coeffs, "-q"]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(std::fs::read_to_string(&coeffs).unwrap().contains("\"ntc_beta\""), "the sensor is stored");
    let corrected = p("out.csv");
    let (code, out, err) = logtrim(&["apply", &coeffs, &p("sim/readings.csv"), "-o", &corrected]);
    assert_eq!(code, 0, "{out}{err}");

    // plot takes the raw channel from the calibration file, for the chamber data and the validation run.
    let charts = p("charts");
    let args = ["plot", &coeffs, cal.to_str().unwrap(), "--validation", &p("sim/readings.csv")];
    let (code, out, err) = logtrim(
        &[&args[..], &["--truth", &p("sim/truth.csv"), "--map-cells", "16x8", "-o", &charts]].concat(),
    );
    assert_eq!(code, 0, "{out}{err}");
    let svgs = std::fs::read_dir(&charts).unwrap().filter_map(|e| e.ok()).count();
    assert_eq!(svgs, 3, "{out}");

    let (th, truth) = read_csv(&d.join("sim/truth.csv"));
    let (oh, rows) = read_csv(Path::new(&corrected));
    let (t_id, t_x, t_or) = (column(&th, "id"), column(&th, "x_true"), column(&th, "x_oracle"));
    let (o_id, o_x) = (column(&oh, "id"), column(&oh, "ln_ratio"));
    assert_eq!(column(&oh, "temp_code"), 2);
    let truth: HashMap<&str, (f64, Option<f64>)> =
        truth.iter().map(|r| (r[t_id].as_str(), (r[t_x].parse().unwrap(), r[t_or].parse().ok()))).collect();
    let (mut n, mut ours, mut oracle) = (0usize, 0.0f64, 0.0f64);
    for r in &rows {
        let (x_true, x_oracle) = truth[r[o_id].as_str()];
        let (Ok(x), Some(xo)) = (r[o_x].parse::<f64>(), x_oracle) else { continue };
        n += 1;
        ours += (x - x_true).powi(2);
        oracle += (xo - x_true).powi(2);
    }
    assert_eq!(rows.len(), 3000);
    assert!(n as f64 >= 0.98 * 3000.0, "seed {seed}: only {n} readings compared");
    let (ours, oracle) = ((ours / n as f64).sqrt(), (oracle / n as f64).sqrt());
    eprintln!(
        "seed {seed}: rms {ours:.3e} Np vs oracle {oracle:.3e} Np ({:.2}x) over {n} readings",
        ours / oracle
    );
    assert!(ours <= RMS_BOUND * oracle, "seed {seed}: rms {ours:.3e} vs oracle {oracle:.3e}");
}

#[test]
fn a_raw_ntc_channel_meets_the_target_through_the_binary() {
    for seed in [5, 6] {
        run(seed);
    }
}

#[test]
fn the_sensor_table_takes_any_number_of_segments() {
    // The demo's raw-channel unit at table sizes whose step leaves a short last segment (refused before
    // with "sensor temperature does not fit its integer format"), and the default.
    let d = common::scratch("raw-segments");
    let (code, _, err) = common::logtrim(&["demo", "--preset", "photometer-ntc", "--out-dir", common::s(&d)]);
    assert_eq!(code, 0, "{err}");
    let coeffs = d.join("photometer-ntc/coeffs.json");
    for segments in ["16", "24", "32", "33", "128"] {
        let img = d.join(format!("unit-{segments}.bin"));
        let (code, out, err) = common::logtrim(&[
            "image",
            common::s(&coeffs),
            "--sensor-segments",
            segments,
            "-o",
            common::s(&img),
        ]);
        assert_eq!(code, 0, "{segments}: {out}{err}");
        assert!(out.contains("sensor table"), "{segments}: {out}");
    }
    std::fs::remove_dir_all(&d).unwrap();
}
