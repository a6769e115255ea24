//! `logtrim trim`, `logtrim blank` and `logtrim apply --trim/--blank` end to end through the binary, on a
//! simulated unit that has aged since its calibration: files, exit codes, messages, and the corrected
//! values against the simulator's truth (`truth.csv`).

mod common;

use common::{logtrim, s, scratch, write_design};
use std::collections::HashMap;
use std::path::{Path, PathBuf};

/// An aged photometer (+3 mV at the output, +0.8 % gain since calibration): simulated and fitted.
fn aged_unit(d: &Path, offset_v: f64, gain: f64) -> PathBuf {
    let fe = d.join("fe.json");
    write_design("photometer-compensated", &fe, |json| {
        json["aging"] = serde_json::json!({ "output_offset_v": offset_v, "gain_factor": gain });
    });
    let sim = d.join("sim");
    let (code, out, err) = logtrim(&[
        "simulate",
        "--frontend",
        s(&fe),
        "--out-dir",
        s(&sim),
        "--validation",
        "1000",
        "--seed",
        "8",
    ]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(sim.join("standards.csv").exists() && sim.join("blank.csv").exists(), "{out}");
    // The summary says what each field file is for.
    assert!(out.lines().any(|l| l.contains("standards.csv") && l.contains("reference standards")), "{out}");
    assert!(out.lines().any(|l| l.contains("blank.csv") && l.contains("a blank")), "{out}");
    let coeffs = d.join("coeffs.json");
    let (code, out, err) = logtrim(&["fit", s(&sim.join("cal.csv")), "-o", s(&coeffs), "-q"]);
    assert_eq!(code, 0, "{out}{err}");
    coeffs
}

/// `column` of an apply output by `id`, for the rows without an error.
fn column(path: &Path, name: &str) -> HashMap<String, f64> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |n: &str| head.iter().position(|h| *h == n).unwrap();
    let (id, c, e) = (col("id"), col(name), col("error"));
    lines
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[e].is_empty())
        .map(|f| (f[id].to_string(), f[c].parse().unwrap()))
        .collect()
}

#[test]
fn trim_blank_and_apply_undo_the_ageing() {
    let d = scratch("full");
    let coeffs = aged_unit(&d, 3e-3, 1.008);
    let sim = d.join("sim");
    let trim = d.join("trim.bin");
    let (code, out, err) = logtrim(&[
        "trim",
        s(&coeffs),
        s(&sim.join("standards.csv")),
        "-o",
        s(&trim),
        "--written-at",
        "1767225600",
    ]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("two-point") && out.contains("2 standards") && out.contains("60 bytes"), "{out}");
    let t = logtrim::field::Trim::parse(&std::fs::read(&trim).unwrap()).unwrap();
    assert_eq!(t.info().written_at, 1_767_225_600);
    let blank = d.join("blank.bin");
    let (code, out, err) = logtrim(&["blank", s(&coeffs), s(&sim.join("blank.csv")), "-o", s(&blank)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("16 readings") && out.contains("44 bytes"), "{out}");

    // inspect reads both records back, each bound to the calibration ID that inspect shows for the image.
    let image = d.join("unit.bin");
    let (code, out, err) = logtrim(&["image", s(&coeffs), "-o", s(&image), "--no-fixed"]);
    assert_eq!(code, 0, "{out}{err}");
    let (code, img_text, err) = logtrim(&["inspect", s(&image)]);
    assert_eq!(code, 0, "{img_text}{err}");
    let id_line = img_text.lines().find(|l| l.starts_with("calib. ID")).expect("the image's calibration ID");
    let id = id_line.split_whitespace().nth(2).unwrap().to_string();
    let (code, out, err) = logtrim(&["inspect", s(&trim)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("record       trim") && out.contains("kind         two-point"), "{out}");
    assert!(out.contains(&format!("calibration  {id}")) && out.contains("2026-01-01"), "{out}");
    let (code, out, err) = logtrim(&["inspect", "--json", s(&blank)]);
    assert_eq!(code, 0, "{out}{err}");
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!((v["record"].as_str(), v["calibration_id"].as_str()), (Some("blank"), Some(id.as_str())));
    assert_eq!(v["samples"], 16);
    // One flipped bit in the record: refused by the firmware's parser, the file named, exit 1.
    let mut bytes = std::fs::read(&trim).unwrap();
    bytes[20] ^= 0x10;
    let bad = d.join("bad-trim.bin");
    std::fs::write(&bad, bytes).unwrap();
    let (code, out, err) = logtrim(&["inspect", s(&bad)]);
    assert_eq!(code, 1, "{out}{err}");
    assert!(err.contains("bad-trim.bin") && err.contains("bad record"), "{err}");

    // Truth: the ratio of each reading; the blank is at ratio 1, so x against the blank is x_true.
    let truth = std::fs::read_to_string(sim.join("truth.csv")).unwrap();
    let x_true: HashMap<String, f64> = truth
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect::<Vec<_>>())
        .map(|f| (f[0].to_string(), f[2].parse().unwrap()))
        .collect();
    let readings = sim.join("readings.csv");
    let rms = |m: &HashMap<String, f64>| {
        let e: Vec<f64> = m.iter().map(|(id, x)| x - x_true[id]).collect();
        (e.iter().map(|v| v * v).sum::<f64>() / e.len() as f64).sqrt()
    };
    let plain = d.join("plain.csv");
    let (code, out, err) = logtrim(&["apply", s(&coeffs), s(&readings), "-o", s(&plain)]);
    assert_eq!(code, 0, "{out}{err}");
    let mut layered = Vec::new();
    for path in ["f32", "fixed"] {
        let o = d.join(format!("layered-{path}.csv"));
        let (code, out, err) = logtrim(&[
            "apply",
            s(&coeffs),
            s(&readings),
            "-o",
            s(&o),
            "--trim",
            s(&trim),
            "--blank",
            s(&blank),
            "--path",
            path,
        ]);
        assert_eq!(code, 0, "{out}{err}");
        assert!(out.contains("trim: two-point") && out.contains("relative to it"), "{out}");
        layered.push(column(&o, "ln_ratio"));
    }
    let before = rms(&column(&plain, "ln_ratio"));
    let (after, after_fixed) = (rms(&layered[0]), rms(&layered[1]));
    eprintln!(
        "ln_ratio rms error: factory {before:.3e}, trim + blank {after:.3e} (f32), {after_fixed:.3e} (fixed)"
    );
    assert!(after < 0.25 * before && after_fixed < 0.25 * before, "{before} → {after}, {after_fixed}");
    // The two paths agree to well under a code (about 2.3e-4 Np here) on every row.
    let worst = layered[0].iter().map(|(id, x)| (x - layered[1][id]).abs()).fold(0.0f64, f64::max);
    assert!(worst < 6e-5, "f32 and fixed differ by {worst} Np");
    // Absorbance against the blank: −log10 of the ratio (the blank is ratio 1), to a few 1e-3 AU.
    let o = d.join("layered-f32.csv");
    let a = column(&o, "absorbance");
    let worst =
        a.iter().map(|(id, v)| (v + x_true[id] / std::f64::consts::LN_10).abs()).fold(0.0f64, f64::max);
    assert!(worst < 5e-3, "absorbance off by {worst} AU");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn a_blank_reads_zero_against_itself_and_a_cleared_trim_is_the_factory() {
    let d = scratch("zero");
    let coeffs = aged_unit(&d, 3e-3, 1.008);
    let sim = d.join("sim");
    // A blank of one reading, applied to that reading: exactly 0 in both paths.
    let text = std::fs::read_to_string(sim.join("blank.csv")).unwrap();
    let one = d.join("one.csv");
    let first: Vec<&str> = text.lines().take(2).collect();
    std::fs::write(&one, format!("id,{}\n1,{}\n", first[0], first[1])).unwrap();
    let blank = d.join("blank.bin");
    let (code, out, err) = logtrim(&["blank", s(&coeffs), s(&one), "-o", s(&blank)]);
    assert_eq!(code, 0, "{out}{err}");
    for path in ["f32", "fixed"] {
        let o = d.join(format!("one-{path}.csv"));
        let (code, out, err) =
            logtrim(&["apply", s(&coeffs), s(&one), "-o", s(&o), "--blank", s(&blank), "--path", path]);
        assert_eq!(code, 0, "{out}{err}");
        for name in ["ln_ratio", "absorbance", "db_power"] {
            assert_eq!(column(&o, name)["1"], 0.0, "{path} {name}");
        }
        assert_eq!(column(&o, "linear_ratio")["1"], 1.0, "{path}");
    }
    // A cleared trim gives the factory output byte for byte, in both paths.
    let (code, out, err) =
        logtrim(&["trim", s(&coeffs), s(&sim.join("standards.csv")), "-o", s(&d.join("t.bin"))]);
    assert_eq!(code, 0, "{out}{err}");
    let cleared = d.join("cleared.bin");
    let (code, out, err) = logtrim(&["trim", s(&coeffs), "--clear", "--sequence", "2", "-o", s(&cleared)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("cleared"), "{out}");
    let readings = sim.join("readings.csv");
    let t_bin = d.join("t.bin");
    for path in ["f32", "fixed"] {
        let (a, b, c) = (d.join("a.csv"), d.join("b.csv"), d.join("c.csv"));
        assert_eq!(logtrim(&["apply", s(&coeffs), s(&readings), "-o", s(&a), "--path", path]).0, 0);
        let args = ["apply", s(&coeffs), s(&readings), "-o", s(&b), "--path", path, "--trim", s(&cleared)];
        assert_eq!(logtrim(&args).0, 0);
        let args = ["apply", s(&coeffs), s(&readings), "-o", s(&c), "--path", path, "--trim", s(&t_bin)];
        assert_eq!(logtrim(&args).0, 0);
        assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap(), "{path}");
        assert_ne!(std::fs::read(&a).unwrap(), std::fs::read(&c).unwrap(), "{path}: the trim does something");
    }
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn refusals_name_the_problem_and_leave_no_file() {
    let d = scratch("refuse");
    // +6 % of gain since calibration: past the 2 % limit, a fault.
    let coeffs = aged_unit(&d, 0.0, 1.06);
    let sim = d.join("sim");
    let std_csv = sim.join("standards.csv");
    let out_bin = d.join("t.bin");
    let (code, _, err) = logtrim(&["trim", s(&coeffs), s(&std_csv), "-o", s(&out_bin)]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("past the limit") && err.contains("gain"), "{err}");
    assert!(!out_bin.exists());
    // A looser limit is the user's call.
    let (code, _, err) =
        logtrim(&["trim", s(&coeffs), s(&std_csv), "-o", s(&out_bin), "--max-trim-gain-error", "0.1"]);
    assert_eq!(code, 0, "{err}");
    // …and apply, under the default limit, refuses that record (exit 1) unless given the same limit.
    let readings = sim.join("readings.csv");
    let o = d.join("o.csv");
    let (code, _, err) = logtrim(&["apply", s(&coeffs), s(&readings), "-o", s(&o), "--trim", s(&out_bin)]);
    assert_eq!(code, 1, "{err}");
    assert!(err.contains("past the limit"), "{err}");
    assert!(!o.exists());
    // apply with the trim under the looser limit, on a calibration file.
    let loose = |coeffs: &Path| {
        let args = [
            "apply",
            s(coeffs),
            s(&readings),
            "-o",
            s(&o),
            "--trim",
            s(&out_bin),
            "--max-trim-gain-error",
            "0.1",
        ];
        logtrim(&args)
    };
    assert_eq!(loose(&coeffs).0, 0);
    std::fs::remove_file(&o).unwrap();

    // Damaged and foreign records: exit 2, with the defect named.
    let good = std::fs::read(&out_bin).unwrap();
    let bad = d.join("bad.bin");
    let cases: [(Vec<u8>, &str); 4] = [
        (
            {
                let mut b = good.clone();
                b[33] ^= 0x10;
                b
            },
            "CRC mismatch",
        ),
        (good[..30].to_vec(), "truncated"),
        (
            {
                let mut b = good.clone();
                b[4] = 9;
                b
            },
            "version 9",
        ),
        (vec![0xff; 60], "erased or foreign"),
    ];
    for (bytes, want) in cases {
        std::fs::write(&bad, &bytes).unwrap();
        let (code, _, err) = logtrim(&["apply", s(&coeffs), s(&readings), "-o", s(&o), "--trim", s(&bad)]);
        assert_eq!(code, 2, "{want}: {err}");
        assert!(err.contains(want) && err.contains("bad.bin"), "{want}: {err}");
        assert!(!o.exists());
    }
    let (code, _, err) = logtrim(&["apply", s(&coeffs), s(&readings), "-o", s(&o), "--blank", s(&out_bin)]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("a trim record, not a blank record"), "{err}");
    // A record made on another calibration (one coefficient changed) is refused.
    let mut json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&coeffs).unwrap()).unwrap();
    let c0 = json["calibration"]["model"]["offset"]["coeffs"][0].as_f64().unwrap();
    json["calibration"]["model"]["offset"]["coeffs"][0] = serde_json::json!(c0 + 0.5);
    let other = d.join("other.json");
    std::fs::write(&other, serde_json::to_string_pretty(&json).unwrap()).unwrap();
    let (code, _, err) = loose(&other);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("was made on factory calibration"), "{err}");
    // Standards files a trim cannot use.
    let three = d.join("three.csv");
    std::fs::write(&three, "code,temp_c,ratio\n20000,25,0.1\n30000,25,1\n40000,25,10\n").unwrap();
    let (code, _, err) = logtrim(&["trim", s(&coeffs), s(&three), "-o", s(&out_bin)]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("3 distinct standards"), "{err}");
    let no_ratio = d.join("noratio.csv");
    std::fs::write(&no_ratio, "code,temp_c\n20000,25\n").unwrap();
    let (code, _, err) = logtrim(&["trim", s(&coeffs), s(&no_ratio), "-o", s(&out_bin)]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("ratio"), "{err}");
    let leftovers: Vec<String> = std::fs::read_dir(&d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.starts_with('.'))
        .collect();
    assert!(leftovers.is_empty(), "temporary files left: {leftovers:?}");
    std::fs::remove_dir_all(&d).unwrap();
}

#[test]
fn standards_may_be_given_in_absorbance_as_certified_filters_are() {
    let d = scratch("absorbance-standards");
    let coeffs = aged_unit(&d, 3e-3, 1.008);
    let by_ratio_file = d.join("sim/standards.csv");
    // The same standards with their ratio written as an absorbance A = −log10(ratio) (common practice).
    let text = std::fs::read_to_string(&by_ratio_file).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let r = head.iter().position(|h| *h == "ratio").unwrap();
    let mut out_csv =
        head.iter().map(|h| if *h == "ratio" { "absorbance" } else { h }).collect::<Vec<_>>().join(",");
    out_csv.push('\n');
    for l in lines {
        let mut f: Vec<String> = l.split(',').map(str::to_string).collect();
        f[r] = format!("{:e}", -f[r].parse::<f64>().unwrap().log10());
        out_csv.push_str(&f.join(","));
        out_csv.push('\n');
    }
    let absorbance = d.join("standards-au.csv");
    std::fs::write(&absorbance, out_csv).unwrap();
    let trim_of = |standards: &Path, name: &str| {
        let out = d.join(name);
        let (code, text, err) =
            logtrim(&["trim", s(&coeffs), s(standards), "-o", s(&out), "--written-at", "1767225600"]);
        assert_eq!(code, 0, "{text}{err}");
        logtrim::field::Trim::parse(&std::fs::read(&out).unwrap()).unwrap()
    };
    let (by_ratio, by_au) = (trim_of(&by_ratio_file, "t1.bin"), trim_of(&absorbance, "t2.bin"));
    // The same trim, to the last bits the round trip through log10 can move.
    assert!(
        (by_ratio.offset() - by_au.offset()).abs() <= 1e-6,
        "{} vs {}",
        by_ratio.offset(),
        by_au.offset()
    );
    assert!((by_ratio.gain() - by_au.gain()).abs() <= 1e-6, "{} vs {}", by_ratio.gain(), by_au.gain());
    // Both columns at once is ambiguous, and refused by name.
    let both = d.join("both.csv");
    let text = std::fs::read_to_string(&absorbance).unwrap().replacen("absorbance", "absorbance,ratio", 1);
    let text: String = text
        .lines()
        .enumerate()
        .map(|(i, l)| if i == 0 { format!("{l}\n") } else { format!("{l},0.5\n") })
        .collect();
    std::fs::write(&both, text).unwrap();
    let (code, _, err) = logtrim(&["trim", s(&coeffs), s(&both), "-o", s(&d.join("t3.bin"))]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("both ratio") && err.contains("absorbance"), "{err}");
    let _ = std::fs::remove_dir_all(&d);
}
