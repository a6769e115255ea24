//! The production line through the binary: serials, verdicts and exit codes, a batch's summary and files,
//! colliding serials, stale files of a re-run, an unreadable file in a folder, dirty runs named by line,
//! the fit's refused rows against `apply`'s, and `apply` with a unit column.

mod common;

use common::{file_names, logtrim, logtrim_words, s, scratch, write_design};
use std::path::{Path, PathBuf};

const SMALL: &str = "--preset gas-uncompensated --setpoints 5 --ratios 21 --repeats 3 --validation 300";

/// Simulates one unit named `serial` into `dir/serial/` with `extra` options; returns its cal.csv.
fn unit(dir: &Path, serial: &str, seed: &str, extra: &str) -> PathBuf {
    let out = dir.join(serial);
    let line = format!("simulate {SMALL} --serial {serial} --seed {seed} {extra}");
    let (code, o, e) = logtrim_words(&line, &["--out-dir", s(&out)]);
    assert_eq!(code, 0, "{o}{e}");
    out.join("cal.csv")
}

/// A small chamber run (5 set-points, 21 ratios, 100 validation readings) of the design file `fe` into
/// the folder `out`, with the repeats and seed of `more`.
fn simulate_design(fe: &Path, out: &Path, more: &str) {
    let words = format!("simulate --setpoints 5 --ratios 21 --validation 100 {more}");
    let (code, o, e) = logtrim_words(&words, &["--frontend", s(fe), "--out-dir", s(out)]);
    assert_eq!(code, 0, "{o}{e}");
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The summary's rows by serial: (verdict, image file).
fn summary(dir: &Path) -> Vec<(String, String, String)> {
    let text = std::fs::read_to_string(dir.join("summary.csv")).unwrap();
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|c| c == n).unwrap();
    let (a, b, c) = (col("serial"), col("verdict"), col("image_file"));
    r.records().map(|x| x.unwrap()).map(|x| (x[a].to_string(), x[b].to_string(), x[c].to_string())).collect()
}

#[test]
fn a_batch_gives_verdicts_a_summary_and_no_image_for_failures() {
    let d = scratch("line-batch");
    let folder = d.join("line");
    std::fs::create_dir_all(&folder).unwrap();
    for (serial, seed, extra) in [("A1", "1", ""), ("A2", "2", ""), ("B1", "3", "--unsettled-lag 0.8")] {
        std::fs::copy(unit(&d, serial, seed, extra), folder.join(format!("{serial}.csv"))).unwrap();
    }
    // C1: A1's run under another serial, with one temperature that is not a number.
    let a1 = std::fs::read_to_string(folder.join("A1.csv")).unwrap();
    let mut c1: Vec<String> = a1.lines().map(|l| l.replacen("A1,", "C1,", 1)).collect();
    let mut f: Vec<String> = c1[5].split(',').map(String::from).collect();
    f[2] = "nan".into();
    c1[5] = f.join(",");
    std::fs::write(folder.join("C1.csv"), c1.join("\n") + "\n").unwrap();
    let out = d.join("units");

    // With a generous limit on rows set aside, B1 (a third of its rows unsettled) passes …
    let (code, o, e) = logtrim(&["fit", s(&folder), "-o", s(&out), "--max-set-aside", "0.5"]);
    assert_eq!(code, 1, "C1 could not be calibrated: {o}{e}");
    assert!(file_names(&out).contains(&"B1.bin".to_string()), "{:?}", file_names(&out));
    // … and with the product's default limits it fails: its image of the earlier run is removed, its
    // calibration file is kept and marked, the unreadable unit is named, the others pass.
    let (code, o, e) = logtrim(&["fit", s(&folder), "-o", s(&out)]);
    assert_eq!(code, 1, "{o}{e}");
    assert!(o.contains("C1") && o.contains("ERROR") && o.contains("line 6"), "{o}");
    let rows = summary(&out);
    let verdict = |serial: &str| rows.iter().find(|r| r.0 == serial).map(|r| r.1.clone()).unwrap();
    assert_eq!(
        [verdict("A1"), verdict("A2"), verdict("B1"), verdict("C1")],
        ["PASS", "PASS", "FAIL", "ERROR"].map(String::from),
        "{o}"
    );
    assert_eq!(
        file_names(&out),
        ["A1.bin", "A1.json", "A2.bin", "A2.json", "B1.json", "summary.csv", "summary.json"]
            .map(String::from)
    );
    let b1 = json(&out.join("B1.json"));
    assert_eq!(b1["acceptance"]["verdict"], "FAIL");
    assert!(b1["acceptance"]["reasons"].as_str().unwrap().contains("unsettled"), "{}", b1["acceptance"]);
    let sj = json(&out.join("summary.json"));
    assert_eq!(sj["units"].as_array().unwrap().len(), 4);
    // No image is made from a failed unit's file by hand either (exit 3).
    let (code, _, e) = logtrim(&["image", s(&out.join("B1.json")), "-o", s(&d.join("b1.bin"))]);
    assert_eq!(code, 3, "{e}");
    assert!(!d.join("b1.bin").exists());
    // Alone, the failing unit exits 3 (fitted, failed acceptance), its file written and marked.
    let one = d.join("b1.json");
    let (code, o, _) = logtrim(&["fit", s(&folder.join("B1.csv")), "-o", s(&one)]);
    assert_eq!(code, 3, "{o}");
    assert!(o.contains("B1: FAIL") && o.contains("unsettled set-point"), "{o}");
    assert_eq!(json(&one)["unit"], "B1");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn serials_that_share_a_file_name_refuse_the_batch() {
    let d = scratch("line-collide");
    let cal = unit(&d, "X1", "4", "");
    let text = std::fs::read_to_string(&cal).unwrap();
    // Two units in one file whose serials differ only in a character a file name cannot hold.
    let mut both = String::from(text.lines().next().unwrap());
    both.push('\n');
    for (k, l) in text.lines().skip(1).enumerate() {
        let serial = if k % 2 == 0 { "A/B" } else { "A_b" };
        both.push_str(&l.replacen("X1,", &format!("{serial},"), 1));
        both.push('\n');
    }
    let file = d.join("two.csv");
    std::fs::write(&file, both).unwrap();
    let out = d.join("units");
    let (code, _, e) = logtrim(&["fit", s(&file), "-o", s(&out)]);
    assert_eq!(code, 2, "{e}");
    assert!(e.contains("\"A/B\"") && e.contains("\"A_b\"") && e.contains("share the file name"), "{e}");
    assert!(!out.exists() || file_names(&out).is_empty(), "nothing is written");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn every_glitched_line_is_named_and_set_aside() {
    let d = scratch("line-glitch");
    let cal = unit(&d, "G1", "5", "--glitch-rate 0.015");
    let faults = std::fs::read_to_string(cal.with_file_name("faults.csv")).unwrap();
    let lines: Vec<u64> =
        faults.lines().skip(1).map(|l| l.split(',').next().unwrap().parse().unwrap()).collect();
    assert!(!lines.is_empty(), "the run has glitches");
    let coeffs = d.join("g1.json");
    let (code, o, e) = logtrim(&["fit", s(&cal), "-o", s(&coeffs)]);
    assert_eq!(code, 0, "{o}{e}");
    for l in &lines {
        assert!(o.contains(&format!("cal.csv: line {l}: ")), "line {l} not named:\n{o}");
    }
    let file = json(&coeffs);
    let aside: Vec<u64> = file["fit"]["screening"]["set_aside"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["line"].as_u64().unwrap())
        .collect();
    assert_eq!(aside, lines, "exactly the glitched lines are set aside");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn the_fit_refuses_exactly_the_rows_apply_rejects() {
    // A front end whose top ratios clip when hot, so that the shipped calibration refuses rows (saturated,
    // and what else the firmware says): the fit lists the f32 path's refusals, which are apply's.
    let d = scratch("line-refused");
    let fe = d.join("fe.json");
    write_design("gas-uncompensated", &fe, |v| v["output_stage"]["level_shift_v"] = serde_json::json!(2.95));
    let out = d.join("run");
    simulate_design(&fe, &out, "--repeats 2 --seed 6");
    let coeffs = d.join("c.json");
    let (code, o, e) = logtrim(&["fit", s(&out.join("cal.csv")), "-o", s(&coeffs)]);
    assert_eq!(code, 0, "{o}{e}");
    let refused: Vec<(u64, String)> = json(&coeffs)["fit"]["screening"]["refused"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| (r["line"].as_u64().unwrap(), r["status"].as_str().unwrap().to_string()))
        .collect();
    assert!(refused.iter().any(|r| r.1 == "saturated"), "{refused:?}");
    let corrected = d.join("o.csv");
    let (code, o, e) = logtrim(&["apply", s(&coeffs), s(&out.join("cal.csv")), "-o", s(&corrected)]);
    assert_eq!(code, 0, "{o}{e}");
    let text = std::fs::read_to_string(&corrected).unwrap();
    let mut r = csv::Reader::from_reader(text.as_bytes());
    let err = r.headers().unwrap().iter().position(|h| h == "error").unwrap();
    let rejected: Vec<(u64, String)> = r
        .records()
        .enumerate()
        .filter_map(|(k, rec)| {
            let rec = rec.unwrap();
            (!rec[err].is_empty()).then(|| (k as u64 + 2, rec[err].to_string()))
        })
        .collect();
    assert_eq!(refused, rejected);
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn apply_corrects_each_unit_with_its_own_calibration() {
    let d = scratch("line-apply");
    let run = d.join("run");
    let (code, o, e) =
        logtrim_words(&format!("simulate {SMALL} --units 2 --seed 7"), &["--out-dir", s(&run)]);
    assert_eq!(code, 0, "{o}{e}");
    let cals = d.join("cals");
    let (code, o, e) = logtrim(&["fit", s(&run.join("cal.csv")), "-o", s(&cals)]);
    assert_eq!(code, 0, "{o}{e}");
    let readings = run.join("readings.csv");
    // A folder of calibrations: every row with its own unit's.
    let both = d.join("both.csv");
    let (code, o, e) = logtrim(&["apply", s(&cals), s(&readings), "-o", s(&both)]);
    assert_eq!(code, 0, "{o}{e}");
    assert!(o.contains("2 units, each corrected with its own calibration"), "{o}");
    // One unit's calibration and readings of two units: refused, with what to do …
    let one = d.join("one.csv");
    let (code, _, e) = logtrim(&["apply", s(&cals.join("U0001.json")), s(&readings), "-o", s(&one)]);
    assert_eq!(code, 2, "{e}");
    assert!(e.contains("U0002") && e.contains("--unit"), "{e}");
    assert!(!one.exists());
    // … unless --unit picks one: its rows, the same values as from the folder.
    let (code, o, e) =
        logtrim(&["apply", s(&cals.join("U0002.json")), s(&readings), "-o", s(&one), "--unit", "U0002"]);
    assert_eq!(code, 0, "{o}{e}");
    let rows =
        |p: &Path| -> Vec<String> { std::fs::read_to_string(p).unwrap().lines().map(String::from).collect() };
    let (all, mine) = (rows(&both), rows(&one));
    assert_eq!(mine.len(), 1 + 300);
    for l in &mine[1..] {
        assert!(l.contains(",U0002,"), "{l}");
        assert!(all.contains(l), "{l} differs from the folder's correction");
    }
    std::fs::remove_dir_all(&d).unwrap();
}

/// A 12-bit front end's chamber run (the `gas-uncompensated` preset with a 12-bit log channel); returns
/// (front-end file, cal.csv).
fn twelve_bit_run(d: &Path) -> (PathBuf, PathBuf) {
    let fe = d.join("fe12.json");
    write_design("gas-uncompensated", &fe, |v| v["adc"]["bits"] = serde_json::json!(12));
    let out = d.join("run12");
    simulate_design(&fe, &out, "--repeats 3 --seed 8");
    (fe, out.join("cal.csv"))
}

#[test]
fn adc_bits_come_from_the_design_and_narrow_data_get_a_warning() {
    let d = scratch("line-bits");
    let (fe, cal) = twelve_bit_run(&d);
    // Without bits: fitted as 16-bit, with a warning that says what to pass.
    let c16 = d.join("c16.json");
    let (code, o, e) = logtrim(&["fit", s(&cal), "-o", s(&c16)]);
    assert_eq!(code, 0, "{o}{e}");
    assert!(e.contains("less than a quarter") && e.contains("--bits 12"), "{e}");
    // With the design: its 12 bits, no warning, and the calibration says 12.
    let c12 = d.join("c12.json");
    let (code, o, e) = logtrim(&["fit", s(&cal), "--design", s(&fe), "-o", s(&c12)]);
    assert_eq!(code, 0, "{o}{e}");
    assert!(!e.contains("less than a quarter"), "{e}");
    assert_eq!(json(&c12)["calibration"]["adc"]["bits"], 12);
    // --bits against the design: refused, naming both.
    let (code, _, e) = logtrim(&["fit", s(&cal), "--design", s(&fe), "--bits", "14", "-o", s(&c12)]);
    assert_eq!(code, 2, "{e}");
    assert!(e.contains("--bits 14") && e.contains("12-bit"), "{e}");
    // A code the 12-bit converter cannot give (4200 > 4095) is an error naming its line.
    let text = std::fs::read_to_string(&cal).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let h: Vec<&str> = lines[0].split(',').collect();
    let code_col = h.iter().position(|c| *c == "code").unwrap();
    let mut f: Vec<String> = lines[9].split(',').map(String::from).collect();
    f[code_col] = "4200".into();
    lines[9] = f.join(",");
    let bad = d.join("bad.csv");
    std::fs::write(&bad, lines.join("\n") + "\n").unwrap();
    let out = d.join("bad.json");
    let (code, _, e) = logtrim(&["fit", s(&bad), "--bits", "12", "-o", s(&out)]);
    assert_eq!(code, 2, "{e}");
    assert!(e.contains("line 10") && e.contains("4200") && e.contains("4095"), "{e}");
    assert!(!out.exists());
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn an_all_saturated_unit_is_called_saturated() {
    // Every code at the top rail (a front end stuck at full scale): not "did not converge".
    let d = scratch("line-saturated");
    let cal = unit(&d, "S1", "9", "");
    let text = std::fs::read_to_string(&cal).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let h: Vec<String> = lines[0].split(',').map(String::from).collect();
    let code_col = h.iter().position(|c| c == "code").unwrap();
    for l in lines.iter_mut().skip(1) {
        let mut f: Vec<String> = l.split(',').map(String::from).collect();
        f[code_col] = "65535".into();
        *l = f.join(",");
    }
    std::fs::write(&cal, lines.join("\n") + "\n").unwrap();
    let out = d.join("s1.json");
    let (code, o, e) = logtrim(&["fit", s(&cal), "-o", s(&out)]);
    assert_ne!(code, 0, "{o}{e}");
    assert!(e.contains("saturated") && e.contains("rail"), "{e}");
    assert!(!e.contains("converge"), "{e}");
    assert!(!out.exists());
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn a_batch_takes_the_image_options_and_writes_a_report_per_unit() {
    let d = scratch("line-hex");
    let folder = d.join("line");
    std::fs::create_dir_all(&folder).unwrap();
    for (serial, seed) in [("H1", "11"), ("H2", "12")] {
        std::fs::copy(unit(&d, serial, seed, ""), folder.join(format!("{serial}.csv"))).unwrap();
    }
    let (out, reports) = (d.join("units"), d.join("reports"));
    let (code, o, e) = logtrim_words(
        "fit --format hex --base-address 0x08010000 --no-fixed --error-unit mau",
        &[s(&folder), "-o", s(&out), "--report", s(&reports)],
    );
    assert_eq!(code, 0, "{o}{e}");
    assert_eq!(
        file_names(&out),
        ["H1.hex", "H1.json", "H2.hex", "H2.json", "summary.csv", "summary.json"].map(String::from)
    );
    for serial in ["H1", "H2"] {
        // Intel HEX: an extended linear address record for 0x0801, then data at 0x0000 (Intel HEX spec).
        let hex = std::fs::read_to_string(out.join(format!("{serial}.hex"))).unwrap();
        assert!(hex.starts_with(":020000040801F1"), "{}", &hex[..40.min(hex.len())]);
        assert!(hex.trim_end().ends_with(":00000001FF"));
        // The image without fixed tables inspects as such, under its serial.
        let (code, o, e) = logtrim(&["inspect", s(&out.join(format!("{serial}.hex")))]);
        assert_eq!(code, 0, "{o}{e}");
        assert!(o.contains(serial), "{o}");
        let page = std::fs::read_to_string(reports.join(format!("{serial}-fit-report.md"))).unwrap();
        assert!(page.contains("| rms [Np] | max [Np] | rms [mAU] | max [mAU] |"), "the report in mAU");
    }
    let sj = json(&out.join("summary.json"));
    for u in sj["units"].as_array().unwrap() {
        assert_eq!(u["verdict"], "PASS");
        assert!(u["image_crc"].as_str().unwrap().starts_with("0x"), "{u}");
    }
    std::fs::remove_dir_all(&d).unwrap();
}
