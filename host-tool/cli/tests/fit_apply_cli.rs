//! `logtrim fit`, `apply` and `demo` end to end through the binary: files, exit codes and error messages.

mod common;

use common::{file_names, logtrim, s, scratch};
use std::path::Path;
use std::process::Command;

fn simulate(dir: &Path, units: &str) {
    let (code, out, err) = logtrim(&[
        "simulate",
        "--preset",
        "gas-uncompensated",
        "--out-dir",
        s(dir),
        "--setpoints",
        "5",
        "--ratios",
        "21",
        "--repeats",
        "2",
        "--validation",
        "500",
        "--units",
        units,
        "--seed",
        "3",
    ]);
    assert_eq!(code, 0, "{out}{err}");
}

#[test]
fn fit_then_apply_corrects_the_held_out_run() {
    let d = scratch("one");
    simulate(&d, "1");
    let coeffs = d.join("coeffs.json");
    let (code, out, err) = logtrim(&["fit", s(&d.join("cal.csv")), "-o", s(&coeffs)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(
        out.contains("cross-validation") && out.contains("noise floor") && out.contains("wrote"),
        "{out}"
    );
    let corrected = d.join("out.csv");
    let (code, out, err) = logtrim(&["apply", s(&coeffs), s(&d.join("readings.csv")), "-o", s(&corrected)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("500 rows"), "{out}");
    assert!(!err.contains("warning"), "{err}");
    // The micromath backend runs, and says where it must not be used.
    let (code, out, err) = logtrim(&[
        "apply",
        s(&coeffs),
        s(&d.join("readings.csv")),
        "-o",
        s(&d.join("mm.csv")),
        "--path",
        "f32-micromath",
    ]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(err.contains("warning: the micromath backend is coarse") && err.contains("safety"), "{err}");
    // Compare with the truth: the simulator's x_true, by id.
    let truth = std::fs::read_to_string(d.join("truth.csv")).unwrap();
    let mut x_true = std::collections::HashMap::new();
    for line in truth.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        x_true.insert(f[0].to_string(), f[2].parse::<f64>().unwrap());
    }
    let text = std::fs::read_to_string(&corrected).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    let (id, ln, err_col) = (col("id"), col("ln_ratio"), col("error"));
    let mut worst: f64 = 0.0;
    let mut n = 0;
    for line in lines {
        let f: Vec<&str> = line.split(',').collect();
        if f[err_col].is_empty() {
            worst = worst.max((f[ln].parse::<f64>().unwrap() - x_true[f[id]]).abs());
            n += 1;
        }
    }
    assert!(n >= 490, "{n} corrected");
    // The simulator's noise gives errors of ~1e-3 Np at worst here (hot low end): far below 0.05.
    assert!(worst < 0.05, "worst {worst}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn fit_errors_name_the_problem_and_leave_no_file() {
    let d = scratch("errors");
    let out = d.join("c.json");
    let (code, _, err) = logtrim(&["fit", s(&d.join("missing.csv")), "-o", s(&out)]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("missing.csv"), "{err}");
    // One temperature only: refused with what to add (exit 1: the data were read, the fit refused).
    let one = d.join("one.csv");
    let mut text = String::from("code,temp_c,ratio\n");
    for k in 0..40 {
        text.push_str(&format!("{},25.0,{}\n", 30000 + 100 * k, 10f64.powf(-2.0 + 0.1 * f64::from(k))));
    }
    std::fs::write(&one, text).unwrap();
    let (code, _, err) = logtrim(&["fit", s(&one), "-o", s(&out)]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("one temperature") && err.contains("set-points"), "{err}");
    // A bad ratio names file, line, column and value.
    std::fs::write(&one, "code,temp_c,ratio\n30000,25,0.5\n30100,25,-2\n").unwrap();
    let (code, _, err) = logtrim(&["fit", s(&one), "-o", s(&out)]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("one.csv") && err.contains("line 3") && err.contains("-2"), "{err}");
    // A fixed model that the data cannot determine.
    let (code, _, err) = logtrim(&["fit", s(&one), "-o", s(&out), "--model", "offset=9"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("--model"), "{err}");
    assert!(!out.exists());
    assert_eq!(file_names(&d), vec!["one.csv".to_string()], "no partial or temporary files");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn apply_errors_and_refused_rows() {
    let d = scratch("apply");
    simulate(&d, "1");
    let coeffs = d.join("coeffs.json");
    let (code, _, err) = logtrim(&["fit", s(&d.join("cal.csv")), "-o", s(&coeffs), "-q"]);
    assert_eq!(code, 0, "{err}");
    // Rows the firmware refuses are kept, named.
    let r = d.join("r.csv");
    std::fs::write(&r, "code,temp_c,tag\n30000,25,a\n0,25,rail\n30000,150,hot\n").unwrap();
    let out = d.join("o.csv");
    let (code, stdout, err) = logtrim(&["apply", s(&coeffs), s(&r), "-o", s(&out)]);
    assert_eq!(code, 0, "{err}");
    assert!(stdout.contains("3 rows: 1 corrected, 2 rejected"), "{stdout}");
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.contains(",rail,") && text.contains("saturated"), "{text}");
    assert!(text.contains("temperature_out_of_range"), "{text}");
    // A code beyond the converter is the firmware's to refuse, in its row (issue 18); a code no ADC can give
    // (negative, not an integer) is a bad file.
    std::fs::write(&r, "code,temp_c\n70000,25\n30000,25\n").unwrap();
    let (code, stdout, err) = logtrim(&["apply", s(&coeffs), s(&r), "-o", s(&d.join("o2.csv"))]);
    assert_eq!(code, 0, "{err}");
    assert!(stdout.contains("2 rows: 1 corrected, 1 rejected (1 code_out_of_adc_range)"), "{stdout}");
    std::fs::write(&r, "code,temp_c\n-5,25\n").unwrap();
    let (code, _, err) = logtrim(&["apply", s(&coeffs), s(&r), "-o", s(&d.join("o4.csv"))]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("-5") && err.contains("line 2"), "{err}");
    assert!(!d.join("o4.csv").exists());
    let (code, _, err) = logtrim(&["apply", s(&r), s(&r), "-o", s(&d.join("o3.csv"))]);
    assert_eq!(code, 2, "{err}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn a_batch_fits_every_unit_and_a_failed_unit_stops_no_other() {
    let d = scratch("batch");
    simulate(&d, "3");
    // Add a fourth unit that has only one temperature: it must fail alone.
    let mut cal = std::fs::read_to_string(d.join("cal.csv")).unwrap();
    let first = cal.lines().next().unwrap().to_string();
    let header: Vec<&str> = first.split(',').collect();
    let cols: Vec<String> = header
        .iter()
        .map(|h| match *h {
            "unit" => "BAD-1".to_string(),
            "code" => "30000".to_string(),
            "temp_c" => "25.0".to_string(),
            "ratio" => "1.0".to_string(),
            _ => String::new(),
        })
        .collect();
    for k in 0..20 {
        let mut c = cols.clone();
        let i = header.iter().position(|h| *h == "ratio").unwrap();
        c[i] = format!("{}", 1.0 + f64::from(k));
        cal.push_str(&c.join(","));
        cal.push('\n');
    }
    std::fs::write(d.join("cal.csv"), cal).unwrap();
    let out = d.join("units");
    let (code, stdout, err) = logtrim(&["fit", s(&d.join("cal.csv")), "-o", s(&out)]);
    assert_eq!(code, 1, "{stdout}{err}");
    assert!(stdout.contains("4 units: 3 passed, 0 failed acceptance"), "{stdout}");
    assert!(stdout.contains("1 could not be calibrated"), "{stdout}");
    assert!(stdout.contains("BAD-1") && stdout.contains("ERROR"), "{stdout}");
    let files: Vec<String> = file_names(&out).into_iter().filter(|f| !f.starts_with("summary.")).collect();
    assert_eq!(files.len(), 6, "{files:?}");
    assert!(files.iter().all(|f| !f.contains("BAD") && !f.starts_with('.')), "{files:?}");
    // Each image inspects clean.
    for f in files.iter().filter(|f| f.ends_with(".bin")) {
        let (code, _, err) = logtrim(&["inspect", s(&out.join(f))]);
        assert_eq!(code, 0, "{f}: {err}");
    }
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn demo_runs_and_reports_against_the_noise_limit() {
    let d = scratch("demo");
    let (code, out, err) =
        logtrim(&["demo", "--preset", "photometer-compensated", "--validation", "800", "--out-dir", s(&d)]);
    assert_eq!(code, 0, "{out}{err}");
    for m in ["nominal equation", "two-point at room", "logtrim fit (f32)", "noise-only limit", "target"] {
        assert!(out.contains(m), "{m}: {out}");
    }
    assert!(d.join("photometer-compensated/coeffs.json").exists());
    std::fs::remove_dir_all(&d).unwrap();
}

/// SOURCE_DATE_EPOCH (the reproducible-builds convention, common practice) replaces "now": two fits of the
/// same data stamped by it give the same calibration file, and a malformed value is refused up front.
#[test]
fn source_date_epoch_makes_fits_reproducible() {
    let d = scratch("epoch");
    simulate(&d, "1");
    let fit = |out: &Path, epoch: &str| {
        Command::new(env!("CARGO_BIN_EXE_logtrim"))
            .args(["fit", s(&d.join("cal.csv")), "-o", s(out), "-q"])
            .env("SOURCE_DATE_EPOCH", epoch)
            .output()
            .expect("the binary runs")
    };
    let (a, b) = (d.join("a.json"), d.join("b.json"));
    for p in [&a, &b] {
        let o = fit(p, "1700000000");
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let text = std::fs::read_to_string(&a).unwrap();
    assert!(text.contains("\"created_unix_s\": 1700000000"), "{text}");
    assert_eq!(text, std::fs::read_to_string(&b).unwrap());
    let o = fit(&d.join("c.json"), "yesterday");
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("SOURCE_DATE_EPOCH") && err.contains("\"yesterday\""), "{err}");
    assert!(!d.join("c.json").exists(), "nothing is written when the stamp time is refused");
}
