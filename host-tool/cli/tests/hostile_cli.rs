//! The command under hostile input, signals and full disks: one regression test per finding, each named for
//! it (`itemNN_…`). Every run that could hang has a timeout guard: a run that does not end in time is
//! killed and fails its test.

mod common;

use std::io::Write as _;
use std::os::unix::fs::{symlink, FileTypeExt};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Output, Stdio};
use std::time::{Duration, Instant};

use common::{s, scratch};
use logtrim::Calibration;
use logtrim_host::calfile::CalFile;

/// How long any run here may take before it counts as a hang.
const TIMEOUT: Duration = Duration::from_secs(60);

/// Waits for `child` at most `limit`; kills it and fails the test if it is still running.
fn wait_or_kill(mut child: Child, limit: Duration, what: &str) -> Output {
    let start = Instant::now();
    loop {
        if child.try_wait().expect("the child can be waited on").is_some() {
            return child.wait_with_output().expect("the output can be read");
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("{what}: still running after {limit:?} (a hang)");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

fn spawn(args: &[&str], stdout: Stdio) -> Child {
    Command::new(env!("CARGO_BIN_EXE_logtrim"))
        .args(args)
        .stdin(Stdio::null())
        .stdout(stdout)
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary runs")
}

/// Runs `logtrim ARGS` with the timeout guard: exit code, stdout, stderr.
fn run(args: &[&str]) -> (i32, String, String) {
    let out = wait_or_kill(spawn(args, Stdio::piped()), TIMEOUT, &args.join(" "));
    let text = |b: &[u8]| String::from_utf8_lossy(b).into_owned();
    (out.status.code().unwrap_or(-1), text(&out.stdout), text(&out.stderr))
}

/// A nominal 16-bit unit (3000 codes per neper, ratio 1 at code 32768) as a calibration file.
fn coeffs(dir: &Path) -> PathBuf {
    let p = dir.join("C.json");
    let mut f = CalFile::new(Calibration::nominal(16, 32768.0, 3000.0, 25.0), Some("SN-HOSTILE".into()));
    f.created_unix_s = 1_764_614_400;
    f.save(&p).unwrap();
    p
}

/// Readings at 25 °C around ratio 1.
fn readings(dir: &Path, rows: usize) -> PathBuf {
    let p = dir.join("readings.csv");
    let mut text = String::from("id,code,temp_c\n");
    for i in 0..rows {
        text.push_str(&format!("{i},{},25\n", 30000 + (i % 5000)));
    }
    std::fs::write(&p, text).unwrap();
    p
}

fn no_panic(code: i32, err: &str, what: &str) {
    assert!(code != 101 && !err.contains("panicked"), "{what}: exit {code}: {err}");
}

fn temporary_files(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains(".tmp-"))
        .collect()
}

#[test]
fn item02_fit_on_a_ratio_of_1e308_ends_with_the_line_at_fault() {
    let d = scratch("h02");
    for bad in ["1e308", "1e305", "1.7e308", "1e-310"] {
        let cal = d.join("cal.csv");
        let mut text = String::from("code,temp_c,ratio\n");
        for t in [0, 25, 50] {
            for k in 0..10 {
                text.push_str(&format!("{},{t},{}\n", 20000 + 3000 * k, (f64::from(k) - 5.0).exp()));
            }
        }
        text.push_str(&format!("40000,25,{bad}\n"));
        std::fs::write(&cal, text).unwrap();
        let (code, out, err) = run(&["fit", s(&cal), "-o", s(&d.join("o.json"))]);
        assert_eq!(code, 2, "{bad}: {out}{err}");
        assert!(err.contains("line 32") && err.contains("plausible span"), "{bad}: {err}");
        assert!(!d.join("o.json").exists());
    }
}

#[test]
fn item04_a_device_as_output_is_written_in_place_and_never_replaced() {
    let d = scratch("h04");
    let c = coeffs(&d);
    let (code, out, err) = run(&["image", s(&c), "-o", "/dev/full"]);
    assert_eq!(code, 2, "{out}{err}");
    assert!(err.contains("/dev/full") && err.contains("No space left"), "{err}");
    assert!(!out.contains("wrote"), "{out}");
    for verb in [vec!["image", s(&c), "-o"], vec!["emit", s(&c), "--format", "c", "-o"]] {
        for dev in ["/dev/null", "/dev/full"] {
            let mut args = verb.clone();
            args.push(dev);
            let (code, out, err) = run(&args);
            assert_eq!(code, if dev == "/dev/full" { 2 } else { 0 }, "{args:?}: {out}{err}");
            let m = std::fs::symlink_metadata(dev).unwrap();
            assert!(m.file_type().is_char_device(), "{dev} was replaced by {args:?}");
        }
    }
}

/// Every verb, with arguments that make it print, in the folder `d`.
fn every_verb(d: &Path) -> Vec<Vec<String>> {
    let c = coeffs(d);
    let r = readings(d, 50);
    let img = d.join("u.bin");
    let (code, _, err) = run(&["image", s(&c), "-o", s(&img)]);
    assert_eq!(code, 0, "{err}");
    let blank = d.join("blank.csv");
    std::fs::write(&blank, "code,temp_c\n32800,25\n32801,25\n").unwrap();
    let (again, out, t, b) = (d.join("again.bin"), d.join("out.csv"), d.join("t.bin"), d.join("b.bin"));
    let sets: [&[&str]; 12] = [
        &["info"],
        &["simulate", "--list-presets"],
        &["budget"],
        &["sensor", "steinhart-hart", "--point", "0:32650", "--point", "25:10000", "--point", "85:1070"],
        &["sensor", "table", "--rtd", "pt100", "--from", "-50", "--to", "400", "--step", "1"],
        &["inspect", s(&img)],
        &["image", s(&c), "-o", s(&again)],
        &["apply", s(&c), s(&r), "-o", s(&out)],
        &["trim", s(&c), "--clear", "-o", s(&t)],
        &["blank", s(&c), s(&blank), "-o", s(&b)],
        &["verify", s(&c), "--code-stride", "4096", "--temp-stride", "400"],
        &["inspect", s(&img), "--json"],
    ];
    sets.iter().map(|a| a.iter().map(|w| w.to_string()).collect()).collect()
}

#[test]
fn item05_a_full_device_on_standard_output_is_a_clean_error_in_every_verb() {
    let d = scratch("h05full");
    for args in every_verb(&d) {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let full = std::fs::OpenOptions::new().write(true).open("/dev/full").unwrap();
        let out = wait_or_kill(spawn(&args, Stdio::from(full)), TIMEOUT, &args.join(" "));
        let (code, err) =
            (out.status.code().unwrap_or(-1), String::from_utf8_lossy(&out.stderr).into_owned());
        no_panic(code, &err, &args.join(" "));
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(err.contains("writing to standard output"), "{args:?}: {err}");
    }
}

#[test]
fn item05_a_closed_pipe_ends_quietly_in_every_verb() {
    let d = scratch("h05pipe");
    for args in every_verb(&d) {
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        // The reader is gone before the command starts, as `head` is after its lines (closing it after
        // the spawn would race with a command that prints little and quickly).
        let (reader, writer) = std::io::pipe().unwrap();
        drop(reader);
        let child = spawn(&args, Stdio::from(writer));
        let out = wait_or_kill(child, TIMEOUT, &args.join(" "));
        let (code, err) =
            (out.status.code().unwrap_or(-1), String::from_utf8_lossy(&out.stderr).into_owned());
        no_panic(code, &err, &args.join(" "));
        assert_eq!(code, 141, "{args:?}: {err}");
        assert!(
            !err.contains("logtrim:") && !err.contains("Broken pipe"),
            "{args:?}: a closed pipe is not an error to report: {err}"
        );
    }
    // The files of verbs that write one are whole.
    let text = std::fs::read_to_string(d.join("out.csv")).unwrap();
    assert_eq!(text.lines().count(), 51, "{text}");
}

#[test]
fn item06_a_failed_output_leaves_no_temporary_file() {
    let d = scratch("h06");
    let c = coeffs(&d);
    let taken = d.join("taken");
    std::fs::create_dir(&taken).unwrap();
    std::fs::write(taken.join("keep"), b"x").unwrap();
    for args in [
        vec!["image", s(&c), "-o", s(&taken)],
        vec!["emit", s(&c), "--format", "json", "-o", s(&taken)],
        vec!["trim", s(&c), "--clear", "-o", s(&taken)],
    ] {
        let (code, out, err) = run(&args);
        assert_eq!(code, 2, "{args:?}: {out}{err}");
        assert!(err.contains("is a folder"), "{args:?}: {err}");
        assert!(temporary_files(&d).is_empty(), "{args:?}: {:?}", temporary_files(&d));
    }
}

/// Starts `apply` on a large file, waits until its temporary output exists, sends `signal`, and checks the
/// exit code and that nothing is left behind.
fn interrupt_apply(signal: &str, want: i32) {
    let d = scratch(&format!("h06{signal}"));
    let c = coeffs(&d);
    let r = readings(&d, 1_500_000);
    let out = d.join("out.csv");
    let child = spawn(&["apply", s(&c), s(&r), "-o", s(&out)], Stdio::piped());
    let start = Instant::now();
    while temporary_files(&d).is_empty() {
        assert!(start.elapsed() < TIMEOUT, "no temporary file appeared");
        std::thread::sleep(Duration::from_millis(2));
    }
    let status =
        Command::new("kill").args([&format!("-{signal}"), &child.id().to_string()]).status().unwrap();
    assert!(status.success());
    let o = wait_or_kill(child, TIMEOUT, "interrupted apply");
    assert_eq!(o.status.code(), Some(want), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(temporary_files(&d).is_empty(), "{:?}", temporary_files(&d));
    assert!(!out.exists());
}

#[test]
fn item06_sigterm_during_apply_removes_the_temporary_file() {
    interrupt_apply("TERM", 143);
}

#[test]
fn item06_sigint_during_apply_removes_the_temporary_file() {
    interrupt_apply("INT", 130);
}

#[test]
fn item07_a_typo_inside_calibration_is_refused_by_every_verb() {
    let d = scratch("h07");
    let c = coeffs(&d);
    let typo = d.join("typo.json");
    let text = std::fs::read_to_string(&c).unwrap().replace("\"extrapolation_k\"", "\"extrapolate_k\"");
    std::fs::write(&typo, text).unwrap();
    let r = readings(&d, 3);
    for args in [
        vec!["apply", s(&typo), s(&r), "-o", s(&d.join("o.csv"))],
        vec!["image", s(&typo), "-o", s(&d.join("o.bin"))],
        vec!["emit", s(&typo), "--format", "c", "-o", s(&d.join("o.h"))],
        vec!["verify", s(&typo)],
        vec!["trim", s(&typo), "--clear", "-o", s(&d.join("t.bin"))],
        vec!["blank", s(&typo), s(&r), "-o", s(&d.join("b.bin"))],
    ] {
        let (code, out, err) = run(&args);
        assert_eq!(code, 2, "{args:?}: {out}{err}");
        assert!(
            err.contains("typo.json") && err.contains("unknown field `extrapolate_k`"),
            "{args:?}: {err}"
        );
    }
}

#[test]
fn item09_an_output_that_is_an_input_is_refused_before_anything_is_written() {
    let d = scratch("h09");
    let c = coeffs(&d);
    let before = std::fs::read(&c).unwrap();
    let hard = d.join("hard.json");
    std::fs::hard_link(&c, &hard).unwrap();
    let soft = d.join("soft.json");
    symlink(&c, &soft).unwrap();
    let r = readings(&d, 3);
    for out in [&c, &hard, &soft] {
        for args in [
            vec!["image", s(&c), "-o", s(out)],
            vec!["emit", s(&c), "--format", "rust", "-o", s(out)],
            vec!["trim", s(&c), "--clear", "-o", s(out)],
            vec!["blank", s(&c), s(&r), "-o", s(out)],
            vec!["apply", s(&c), s(&r), "-o", s(out)],
        ] {
            let (code, stdout, err) = run(&args);
            assert_eq!(code, 2, "{args:?}: {stdout}{err}");
            assert!(err.contains("never overwritten"), "{args:?}: {err}");
            assert_eq!(std::fs::read(&c).unwrap(), before, "{args:?} changed the calibration");
        }
    }
    let (code, _, err) = run(&["apply", s(&c), s(&r), "-o", s(&r)]);
    assert_eq!(code, 2, "{err}");
    assert!(std::fs::read_to_string(&r).unwrap().starts_with("id,code,temp_c\n"));
}

#[test]
fn also_noted_a_symlink_output_is_followed_and_stays_a_link() {
    let d = scratch("hlink");
    let c = coeffs(&d);
    let link = d.join("unit.bin");
    symlink("real.bin", &link).unwrap();
    let (code, out, err) = run(&["image", s(&c), "-o", s(&link)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(std::fs::symlink_metadata(&link).unwrap().file_type().is_symlink());
    assert!(std::fs::metadata(d.join("real.bin")).unwrap().len() > 100);
}

#[test]
fn also_noted_an_endless_input_is_refused_with_memory_bounded() {
    let d = scratch("hzero");
    let c = coeffs(&d);
    let (code, out, err) = run(&["apply", s(&c), "/dev/zero", "-o", s(&d.join("o.csv"))]);
    assert_eq!(code, 2, "{out}{err}");
    assert!(err.contains("/dev/zero") && !err.contains('\0'), "{err:?}");
    let (code, out, err) = run(&["fit", "/dev/zero", "-o", s(&d.join("o.json"))]);
    assert_eq!(code, 2, "{out}{err}");
    // An endless text line: refused after 1 MiB.
    let mut child = Command::new(env!("CARGO_BIN_EXE_logtrim"))
        .args(["apply", s(&c), "/dev/stdin", "-o", s(&d.join("o.csv"))])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let feeder = std::thread::spawn(move || {
        let _ = stdin.write_all(b"code,temp_c\n");
        let chunk = [b'9'; 65536];
        for _ in 0..1024 {
            if stdin.write_all(&chunk).is_err() {
                break;
            }
        }
    });
    let o = wait_or_kill(child, TIMEOUT, "apply of an endless line");
    feeder.join().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(err.contains("without the end of a row"), "{err}");
    assert!(temporary_files(&d).is_empty());
}

#[test]
fn also_noted_a_record_bound_to_no_calibration_is_applied_with_a_warning() {
    use logtrim::field::{RecordInfo, Trim};
    let d = scratch("hfp0");
    let c = coeffs(&d);
    let r = readings(&d, 3);
    let trim = d.join("t.bin");
    let info = RecordInfo { sequence: 1, written_at: 0, factory: 0 };
    std::fs::write(&trim, Trim::cleared(info, 25_000).to_bytes()).unwrap();
    let (code, out, err) = run(&["apply", s(&c), s(&r), "-o", s(&d.join("o.csv")), "--trim", s(&trim)]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(err.contains("warning: the trim record is bound to no calibration"), "{err}");
    // A record made by `logtrim trim` is bound: no warning.
    let bound = d.join("bound.bin");
    let (code, _, err) = run(&["trim", s(&c), "--clear", "-o", s(&bound)]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(&["apply", s(&c), s(&r), "-o", s(&d.join("o.csv")), "--trim", s(&bound)]);
    assert_eq!(code, 0, "{err}");
    assert!(!err.contains("warning"), "{err}");
}

/// A hand edit of the nominal unit's calibration, as JSON text replacements on its file.
fn edited(dir: &Path, name: &str, f: impl Fn(&mut serde_json::Value)) -> PathBuf {
    let c = coeffs(dir);
    let mut v: serde_json::Value = serde_json::from_str(&std::fs::read_to_string(&c).unwrap()).unwrap();
    f(&mut v["calibration"]);
    let p = dir.join(name);
    std::fs::write(&p, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    p
}

/// The exit code of each verb that reads a calibration file, on `c`.
fn verdicts(d: &Path, c: &Path) -> Vec<(String, i32, String)> {
    let r = readings(d, 20);
    let blank = d.join("blank.csv");
    std::fs::write(&blank, "code,temp_c\n32800,25\n32801,25\n").unwrap();
    let sets: Vec<Vec<&str>> = vec![
        vec!["apply", s(c), s(&r), "-o", "/dev/null"],
        vec!["image", s(c), "-o", "/dev/null"],
        vec!["image", s(c), "--no-fixed", "-o", "/dev/null"],
        vec!["emit", s(c), "--format", "c", "-o", "/dev/null"],
        vec!["verify", s(c), "--sample"],
        vec!["trim", s(c), "--clear", "-o", "/dev/null"],
        vec!["blank", s(c), s(&blank), "-o", "/dev/null"],
    ];
    sets.into_iter()
        .map(|a| {
            let (code, _, err) = run(&a);
            no_panic(code, &err, &a.join(" "));
            (a[0].to_string(), code, err)
        })
        .collect()
}

#[test]
fn item08_a_slope_negative_between_three_good_points_is_refused_by_every_verb() {
    let d = scratch("h08");
    // P_s = 3000 + 9000·T_4(τ) over τ ∈ [−1, 1]: positive at τ = −1, 0, 1, negative near ±0.5.
    let c = edited(&d, "bent.json", |cal| {
        cal["temperature"]["min_c"] = (-25.0).into();
        cal["temperature"]["max_c"] = 75.0.into();
        cal["model"]["slope"]["len"] = 5.into();
        cal["model"]["slope"]["coeffs"][4] = 9000.0.into();
    });
    for (verb, code, err) in verdicts(&d, &c) {
        assert_eq!(code, 2, "{verb}: {err}");
        assert!(
            err.contains("slope zero, negative or not finite somewhere in the temperature range"),
            "{verb}: {err}"
        );
    }
}

#[test]
fn item13_one_validation_and_a_specific_message_in_every_verb() {
    let d = scratch("h13");
    type Edit = Box<dyn Fn(&mut serde_json::Value)>;
    let cases: Vec<(&str, Edit, &str)> = vec![
        ("level.json", Box::new(|c| c["adc"]["level_shift_code"] = 1e39.into()), "level shift not finite"),
        (
            "xrange.json",
            Box::new(|c| {
                c["x_range"]["min"] = (-200.0).into();
                c["x_range"]["max"] = 200.0.into();
            }),
            "x range beyond ±100 Np",
        ),
        (
            "unused.json",
            Box::new(|c| c["model"]["offset"]["coeffs"][5] = 1e308.into()),
            "coefficient not finite",
        ),
        ("pole.json", Box::new(|c| c["model"]["pole"] = (-0.99).into()), "gain pole"),
    ];
    for (name, edit, want) in cases {
        let c = edited(&d, name, edit);
        for (verb, code, err) in verdicts(&d, &c) {
            assert_eq!(code, 2, "{name} {verb}: {err}");
            assert!(err.contains(want) && err.contains(name), "{name} {verb}: {err}");
            assert!(
                !err.contains("NonFinite {") && !err.contains("Value("),
                "{name} {verb}: debug text: {err}"
            );
        }
    }
}

#[test]
fn item13_a_binary_or_utf16_readings_file_is_named_and_never_echoed() {
    let d = scratch("h13bin");
    let c = coeffs(&d);
    let utf16 = d.join("u16.csv");
    let bytes: Vec<u8> = [0xFF, 0xFE]
        .into_iter()
        .chain("id,code,temp_c\n1,30000,25\n".encode_utf16().flat_map(|u| u.to_le_bytes()))
        .collect();
    std::fs::write(&utf16, bytes).unwrap();
    let bin = d.join("bin.csv");
    std::fs::write(&bin, [0u8, 1, 2, 27, b'[', b'2', b'J', 7, 0, 0xff]).unwrap();
    for (p, want) in [(&utf16, "UTF-16"), (&bin, "binary")] {
        let (code, out, err) = run(&["apply", s(&c), s(p), "-o", s(&d.join("o.csv"))]);
        assert_eq!(code, 2, "{out}{err}");
        assert!(err.contains(want), "{err}");
        assert!(!err.bytes().any(|b| b < 0x20 && b != b'\n'), "control bytes echoed: {err:?}");
    }
}

#[test]
fn item10_option_values_are_checked_where_they_are_parsed() {
    let d = scratch("h10");
    let cal = d.join("cal.csv");
    std::fs::write(&cal, "code,temp_c,ratio\n30000,25,1\n").unwrap();
    let c = coeffs(&d);
    let fit = |opt: &[&str]| {
        let mut a = vec!["fit", s(&cal), "-o", "/dev/null"];
        a.extend_from_slice(opt);
        a.iter().map(|w| w.to_string()).collect::<Vec<_>>()
    };
    let cases: Vec<(Vec<String>, &str)> = vec![
        (fit(&["--x-margin", "nan"]), "--x-margin"),
        (fit(&["--x-margin", "1e30"]), "--x-margin"),
        (fit(&["--x-margin", "-1"]), "--x-margin"),
        (fit(&["--extrapolate", "nan"]), "--extrapolate"),
        (fit(&["--extrapolate", "-5"]), "--extrapolate"),
        (fit(&["--extrapolate", "1e30"]), "--extrapolate"),
        (fit(&["--min-sensitivity", "nan"]), "--min-sensitivity"),
        (fit(&["--min-sensitivity", "2"]), "--min-sensitivity"),
        (fit(&["--rail-margin", "40000"]), "--rail-margin"),
        (fit(&["--setpoint-gap", "nan"]), "--setpoint-gap"),
        (fit(&["--setpoint-gap", "0"]), "--setpoint-gap"),
        (fit(&["--setpoint-gap", "-1"]), "--setpoint-gap"),
        (fit(&["--max-terms", "0"]), "--max-terms"),
        (fit(&["--model", "offset=2,slope=1,offset=3"]), "--model"),
        (fit(&["--model", ",,,"]), "--model"),
        (
            ["trim", s(&c), "--clear", "--clear-temp=nan", "-o", "/dev/null"].map(String::from).to_vec(),
            "--clear-temp",
        ),
        (
            ["trim", s(&c), "--clear", "--clear-temp=inf", "-o", "/dev/null"].map(String::from).to_vec(),
            "--clear-temp",
        ),
        (
            ["trim", s(&c), "--clear", "--clear-temp=1e30", "-o", "/dev/null"].map(String::from).to_vec(),
            "--clear-temp",
        ),
        (
            ["trim", s(&c), "--clear", "--clear-temp=-300", "-o", "/dev/null"].map(String::from).to_vec(),
            "--clear-temp",
        ),
        (["budget", "--vref", "1e-308"].map(String::from).to_vec(), "--vref"),
        (["budget", "--slope", "1e-30"].map(String::from).to_vec(), "--slope"),
        (["budget", "--noise-lsb", "1e30"].map(String::from).to_vec(), "--noise-lsb"),
        (["verify", s(&c), "--temp-step", "0"].map(String::from).to_vec(), "--temp-step"),
        (
            ["emit", s(&c), "--format", "c", "-o", "/dev/null", "--t-knots", "2"].map(String::from).to_vec(),
            "--t-knots",
        ),
    ];
    for (args, option) in cases {
        let a: Vec<&str> = args.iter().map(String::as_str).collect();
        let (code, out, err) = run(&a);
        assert_eq!(code, 2, "{a:?}: {out}{err}");
        assert!(err.contains(option), "{a:?}: {err}");
        let says = ["expected", "is not in", "give each term once", "empty term"];
        assert!(says.iter().any(|w| err.contains(w)), "{a:?} says nothing of what is valid: {err}");
    }
    // --report into a path that is a file fails before the calibration file is written.
    let report = d.join("report-file");
    std::fs::write(&report, b"x").unwrap();
    let out = d.join("COEFFS.json");
    let (code, _, err) = run(&["fit", s(&cal), "-o", s(&out), "--report", s(&report)]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("expected a folder"), "{err}");
    assert!(!out.exists());
}

#[test]
fn item12_verify_says_up_front_how_long_and_says_when_it_is_sampled() {
    let d = scratch("h12");
    let c = coeffs(&d);
    let (code, out, err) = run(&["verify", s(&c), "--sample"]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(err.contains("estimated") && err.contains("sampled"), "{err}");
    assert!(out.contains("SAMPLED") && out.contains("PASS (sampled)"), "{out}");
    assert!(out.contains(" dB ") && !out.contains("mAU"), "errors in power dB by default: {out}");
    // An absorbance product reads the same errors in mAU.
    let (code, out, err) = run(&["verify", s(&c), "--sample", "--error-unit", "mau"]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains(" mAU ") && !out.contains(" dB "), "{out}");
    let (code, out, err) = run(&["verify", s(&c), "--temp-stride", "200"]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(out.contains("SAMPLED: every 1 code(s) × every 200 temperature(s)"), "{out}");
    assert!(err.contains("% of the temperatures done"), "progress without a terminal: {err}");
}

#[test]
fn item08_an_image_with_fixed_tables_spliced_from_another_unit_is_refused_by_inspect() {
    let d = scratch("h08splice");
    let a = coeffs(&d);
    // A second unit: the same converter and ranges, its log stage a code higher.
    let b = d.join("B.json");
    let mut fb = CalFile::new(Calibration::nominal(16, 32769.0, 3000.0, 25.0), Some("SN-OTHER".into()));
    fb.created_unix_s = 1_764_614_400;
    fb.save(&b).unwrap();
    let (img_a, img_b) = (d.join("a.bin"), d.join("b.bin"));
    for (c, img) in [(&a, &img_a), (&b, &img_b)] {
        let (code, _, err) = run(&["image", s(c), "-o", s(img)]);
        assert_eq!(code, 0, "{err}");
    }
    let (bytes_a, bytes_b) = (std::fs::read(&img_a).unwrap(), std::fs::read(&img_b).unwrap());
    assert_eq!(bytes_a.len(), bytes_b.len(), "the same table sizes");
    // A's header and f32 sections (40 + 36 + 188 bytes), B's fixed section, a CRC recomputed over it all.
    let cut = 264;
    let end = bytes_a.len() - 4;
    let mut spliced = bytes_a[..cut].to_vec();
    spliced.extend_from_slice(&bytes_b[cut..end]);
    let crc = logtrim::record::crc32(&spliced);
    spliced.extend_from_slice(&crc.to_le_bytes());
    let path = d.join("spliced.bin");
    std::fs::write(&path, &spliced).unwrap();
    let (code, out, err) = run(&["inspect", s(&path)]);
    assert_eq!(code, 1, "{out}{err}");
    assert!(err.contains("fixed section was built from calibration"), "{err}");
    // Each image alone inspects fine.
    for img in [&img_a, &img_b] {
        let (code, out, err) = run(&["inspect", s(img)]);
        assert_eq!(code, 0, "{out}{err}");
    }
}
