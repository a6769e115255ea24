//! The C library's run-time side against the Rust firmware library, command by command (the C driver is
//! `tests/c_driver/runtime.c`): the same verdict and the same error kind for every image a fitted unit's
//! image becomes under every single-bit flip, every truncation, every single-bit flip and every byte set to
//! small values, the extremes and its own value ±1 with the CRC made good again (so that the structure and value checks behind the CRC are
//! reached), and the same tables after loading; models moved across each proof of `Calibration::validate`
//! (slope, pole, monotone in x, residual, magnitudes), with a count of the defects Rust found; the A/B choice of images over pairs of good, older,
//! duplicate, corrupted, erased and table-less slots; trim and blank records likewise (flips, truncations,
//! flips behind a good CRC, A/B with and without binding); the layers on readings at the ends of the Q24
//! range; and a firmware that holds no unit data — image, trim and blank from their slots, readings through
//! all of it — bit for bit with the Rust fixed path and `Layers::apply_fixed`.

mod common;

use std::fmt::Write as _;

use common::cc::CBuild;
use logtrim::field::{self, Blank, FixedStandard, Layers, RecordInfo, Trim, TrimLimits};
use logtrim::fixed::{FixedCalibration, FixedReading};
use logtrim::image::{slots, DefaultFixedStorage, Image, ImageError, ImageValueError};
use logtrim::record::crc32;
use logtrim::record::slots::{Rejected, SlotId};
use logtrim::Unit;
use logtrim_host::calfile::CalFile;
use logtrim_host::emit::c::{error_code, field_code, image_code, record_code, rejected_code};
use logtrim_host::frontend::preset;
use logtrim_host::image_file::{build_image, build_image_with};
use logtrim_host::tables::TableOptions;

/// A fitted unit of a simulator preset (seeded simulation), with the raw NTC channel of `photometer-ntc`
/// when `ntc`.
fn fitted(name: &str, ntc: bool) -> CalFile {
    let mut f = common::fitted::preset_unit(name, "0007");
    if ntc {
        f.temperature_sensor = preset("photometer-ntc").unwrap().firmware_sensor();
    }
    f
}

fn image_of(file: &CalFile, serial: Option<&str>, sequence: u32) -> Vec<u8> {
    build_image_with(file, serial, sequence, Some(&TableOptions::default())).unwrap()
}

/// FNV-1a over 64-bit values, as the C driver's `digest`.
struct Fnv(u64);

impl Fnv {
    fn mix(&mut self, v: i64) {
        self.0 ^= v as u64;
        self.0 = self.0.wrapping_mul(1_099_511_628_211);
    }
}

fn fault_code(f: logtrim::error::SensorFault) -> i64 {
    error_code(&logtrim::Error::Sensor(f)) as i64
}

fn digest(c: &FixedCalibration<'_>, identity: u32) -> u64 {
    let mut h = Fnv(14_695_981_039_346_656_037);
    let x = &c.header;
    for v in [
        i64::from(x.layout),
        i64::from(x.adc_max_code),
        i64::from(x.rail_margin),
        i64::from(x.temp_min),
        i64::from(x.temp_max),
        i64::from(x.temp_lo),
        i64::from(x.temp_hi),
        i64::from(x.t_knots),
        i64::from(x.t_origin),
        i64::from(x.t_step_log2),
        i64::from(x.offset_frac),
        i64::from(x.inv_slope_frac),
        i64::from(x.bias_bend),
        i64::from(x.sensitivity_limit),
        i64::from(x.xa_knots),
        i64::from(x.xa_origin),
        i64::from(x.xa_step_log2),
        i64::from(x.residual_frac),
        i64::from(x.x_min),
        i64::from(x.x_max),
    ] {
        h.mix(v);
    }
    for t in [c.offset, c.inv_slope, c.ln_bias, c.u_min] {
        h.mix(t.len() as i64);
        t.iter().for_each(|&v| h.mix(i64::from(v)));
    }
    h.mix(c.residual.len() as i64);
    c.residual.iter().for_each(|&v| h.mix(i64::from(v)));
    h.mix(i64::from(c.sensor.is_some()));
    if let Some(s) = &c.sensor {
        for v in [
            i64::from(s.code_lo),
            i64::from(s.code_hi),
            i64::from(s.step_log2),
            fault_code(s.fault_below),
            i64::from(s.far_below_code),
            fault_code(s.fault_far_below),
            fault_code(s.fault_above),
            i64::from(s.far_above_code),
            fault_code(s.fault_far_above),
            s.knots.len() as i64,
        ] {
            h.mix(v);
        }
        s.knots.iter().for_each(|&v| h.mix(i64::from(v)));
    }
    h.mix(i64::from(identity));
    h.0
}

fn info_text(img: &Image<'_>) -> String {
    let sensor = img.sensor().map_or(String::new(), |s| {
        use logtrim::sensor::SensorElement as E;
        let (element, c) = match s.element {
            E::NtcBeta(b) => (0, [b.r0_ohm, b.t0_c, b.beta_k]),
            E::NtcSteinhartHart(sh) => (1, [sh.a, sh.b, sh.c]),
            E::Rtd(r) => (2, [r.r0_ohm, 0.0, 0.0]),
        };
        let d = &s.divider;
        let placement = u8::from(d.placement == logtrim::Placement::HighSide);
        format!(
            " sensor {element} {placement} {} {:08x} {:08x} {:08x} {:08x} {} {} {} {:08x} {:08x}",
            d.bits,
            c[0].to_bits(),
            c[1].to_bits(),
            c[2].to_bits(),
            d.series_ohm.to_bits(),
            d.full_scale_code,
            d.open_margin,
            d.short_margin,
            s.min_c.to_bits(),
            s.max_c.to_bits()
        )
    });
    format!(
        " {} {} [{}] {:08x} {:08x} {}{sensor}",
        img.sequence(),
        img.calibrated_at(),
        img.serial(),
        field::fingerprint_of_image(img),
        img.crc(),
        img.len()
    )
}

/// What the driver prints for an image: the status of checking it, of loading it, and what was loaded.
fn image_line(bytes: &[u8]) -> String {
    let check = Image::parse(bytes).map_or_else(|e| image_code(&e), |_| 0);
    let mut storage = DefaultFixedStorage::new();
    let loaded = Image::parse(bytes).and_then(|img| img.fixed_into(&mut storage).map(|c| (img, c)));
    match loaded {
        Ok((img, cal)) => {
            format!("{check} 0{} {:016x}", info_text(&img), digest(&cal, field::fingerprint_of_image(&img)))
        }
        Err(e) => format!("{check} {}", image_code(&e)),
    }
}

/// [`image_line`], counting the calibration defect (by name) that the Rust parser refuses the image for.
fn tallied(bytes: &[u8], kinds: &mut std::collections::BTreeMap<String, usize>) -> String {
    if let Err(ImageError::Value(ImageValueError::Calibration(logtrim::Error::InvalidCalibration(d)))) =
        Image::parse(bytes)
    {
        *kinds.entry(format!("{d:?}")).or_insert(0) += 1;
    }
    image_line(bytes)
}

/// Any calibration defect: they all share one image status.
fn bad_calibration() -> ImageError {
    ImageError::Value(ImageValueError::Calibration(logtrim::Error::InvalidCalibration(
        logtrim::error::CalibrationDefect::ZeroSlope,
    )))
}

/// Where the f32 model's payload starts in an image (the section walk of the layout).
fn model_payload(image: &[u8]) -> usize {
    use logtrim::image::layout::{header, model_f32, section};
    let u16_at = |at: usize| usize::from(u16::from_le_bytes([image[at], image[at + 1]]));
    let mut at = header::LEN;
    while u16_at(at + section::KIND.offset) != usize::from(model_f32::KIND) {
        at += section::HEADER_LEN + u16_at(at + section::LEN.offset);
    }
    at + section::HEADER_LEN
}

/// Copies of a good image whose f32 model is moved across each of the proofs of `Calibration::validate`
/// (the CRC made good again; the fixed tables then belong to another model, which the loaders report
/// next): a slope series that dips below zero inside the range (a T_4 term), a slope tilted over (T_1),
/// the gain pole at and around `1 + q·τ = 0.05` at either end, a bulk term that breaks monotonicity in x
/// (constant, and a T_2 bump), a residual whose ξ slope nears x_h, and magnitudes beyond 1e30 and a bias
/// term beyond e^60. Each family is a geometric sweep with fine steps around 1, so both sides of each
/// boundary, and the bisection close to it, are compared.
fn model_variants(image: &[u8]) -> Vec<(&'static str, Vec<Vec<u8>>)> {
    use logtrim::image::layout::model_f32 as mf;
    use logtrim::record::layout::Field;
    let at = model_payload(image);
    let cal = Image::parse(image).unwrap().calibration();
    let m = cal.model;
    let put = |b: &mut Vec<u8>, f: &Field, i: usize, v: f32| {
        let o = at + f.offset + 4 * i;
        b[o..o + 4].copy_from_slice(&v.to_le_bytes());
    };
    let put_u8 = |b: &mut Vec<u8>, f: &Field, v: u8| b[at + f.offset] = v;
    let mut sweep: Vec<f64> = (0..40).map(|i| 10f64.powf(-1.5 + 3.0 * f64::from(i) / 39.0)).collect();
    for e in [1e-2, 1e-3, 1e-4, 1e-5, 2e-5, 1e-6, 1e-7] {
        sweep.extend([1.0 - e, 1.0 + e]);
    }
    let s0 = f64::from(m.slope.coeffs[0]);
    let lo = f64::from(cal.temperature.min_c) - f64::from(cal.temperature.extrapolation_k);
    let hi = f64::from(cal.temperature.max_c) + f64::from(cal.temperature.extrapolation_k);
    let tau = |t: f64| (t - f64::from(m.t_center_c)) / f64::from(m.t_half_span_k);
    let (ta, tb) = (tau(lo), tau(hi));
    let e_max = (-f64::from(cal.x_range.max)).exp();
    let xh = f64::from(m.residual.x_half_span);
    let mut out = Vec::new();
    let family = |f: &dyn Fn(&mut Vec<u8>, f64), ks: &[f64]| -> Vec<Vec<u8>> {
        ks.iter()
            .map(|&k| {
                let mut b = image.to_vec();
                f(&mut b, k);
                with_crc(b)
            })
            .collect()
    };
    // One coefficient of a series set to (sign·k)·s0·scale, the series lengthened to hold it.
    let term = |len: &'static Field, n: u8, coeffs: &'static Field, i: usize, sign: f64, scale: f64| {
        move |b: &mut Vec<u8>, k: f64| {
            put_u8(b, len, n.max(i as u8 + 1));
            put(b, coeffs, i, (sign * k * s0 * scale) as f32);
        }
    };
    out.push(("slope-dip", family(&term(&mf::SLOPE_LEN, m.slope.len, &mf::SLOPE, 4, 1.0, 1.0), &sweep)));
    let tilt: Vec<f64> = sweep.iter().map(|k| k / ta.abs().max(tb.abs())).collect();
    out.push(("slope-tilt", family(&term(&mf::SLOPE_LEN, m.slope.len, &mf::SLOPE, 1, 1.0, 1.0), &tilt)));
    let mut poles: Vec<f64> = (-12..=12).map(|i| f64::from(i) * 0.25).collect();
    for end in [ta, tb] {
        if end != 0.0 {
            poles.extend(sweep.iter().filter(|k| (**k - 1.0).abs() < 0.1).map(|k| -0.95 / end * k));
        }
    }
    out.push(("pole", family(&|b, q| put(b, &mf::POLE, 0, q as f32), &poles)));
    let bulk = |i| term(&mf::BULK_LEN, m.bulk.len, &mf::BULK, i, -1.0, e_max);
    out.push(("bulk-constant", family(&bulk(0), &sweep)));
    out.push(("bulk-bump", family(&bulk(2), &sweep)));
    out.push((
        "residual-slope",
        family(
            &|b, k| {
                put_u8(b, &mf::RESIDUAL_NX, m.residual.nx.max(2));
                put_u8(b, &mf::RESIDUAL_NT, m.residual.nt.max(1));
                put(b, &mf::RESIDUAL, 4, (k * xh) as f32);
            },
            &sweep,
        ),
    ));
    out.push((
        "magnitudes",
        family(
            &|b, k| {
                if k < 10.0 {
                    put_u8(b, &mf::BIAS_ENABLED, 1);
                    put(b, &mf::LN_BETA0, 0, 0.0);
                    put(b, &mf::LN_BETA1, 0, (k * 60.0 / ta.abs().max(tb.abs())) as f32);
                } else {
                    put_u8(b, &mf::SLOPE_LEN, 6);
                    put(b, &mf::SLOPE, 5, k as f32);
                }
            },
            &[0.5, 0.999, 1.001, 2.0, 1e29, 1e31, 1e35],
        ),
    ));
    out
}

fn with_crc(mut bytes: Vec<u8>) -> Vec<u8> {
    let n = bytes.len() - 4;
    let crc = crc32(&bytes[..n]);
    bytes[n..].copy_from_slice(&crc.to_le_bytes());
    bytes
}

fn flip(bytes: &[u8], bit: usize) -> Vec<u8> {
    let mut b = bytes.to_vec();
    b[bit / 8] ^= 1 << (bit % 8);
    b
}

fn slot_index(s: SlotId) -> i32 {
    match s {
        SlotId::A => 0,
        SlotId::B => 1,
    }
}

fn other_index<E>(r: &Rejected<E>) -> i32 {
    match r {
        Rejected::Invalid(_) => 0,
        Rejected::OtherCalibration { .. } => 1,
        Rejected::Older { .. } => 2,
        Rejected::Tie { identical: true } => 3,
        Rejected::Tie { identical: false } => 4,
        _ => -2,
    }
}

/// The A/B choice as the driver prints it: status, slot, each slot's status, why the other lost.
fn selection_text<R, E: Copy>(
    r: &Result<logtrim::record::slots::Selection<R, E>, logtrim::record::slots::NoValidRecord<E>>,
    code: impl Fn(&E) -> usize + Copy,
) -> String {
    match r {
        Ok(sel) => {
            let other = rejected_code(&sel.other, code);
            let (a, b) = if sel.slot == SlotId::A { (0, other) } else { (other, 0) };
            format!("0 {} {a} {b} {}", slot_index(sel.slot), other_index(&sel.other))
        }
        Err(e) => {
            format!("{} -1 {} {} -1", *STATUS_NO_VALID, rejected_code(&e.a, code), rejected_code(&e.b, code))
        }
    }
}

/// `LTRM_NO_VALID_RECORD`'s number, found by name in the list the C enum is generated from.
static STATUS_NO_VALID: std::sync::LazyLock<usize> = std::sync::LazyLock::new(|| {
    logtrim_host::emit::c::STATUSES.iter().position(|(n, _)| *n == "LTRM_NO_VALID_RECORD").unwrap()
});

/// A record's header as the C driver prints it: counter, time, factory binding.
fn record_info_text(i: &RecordInfo) -> String {
    format!(" {} {} {:08x}", i.sequence, i.written_at, i.factory)
}

fn trim_text(t: &Trim) -> String {
    let p = t.parts();
    let [s0, s1] = p.standards.map(f32::to_bits);
    let (offset, gain) = (p.offset.to_bits(), p.gain.to_bits());
    let values = format!(
        " {} {} {} {} {offset:08x} {gain:08x} {s0:08x} {s1:08x}",
        p.kind.code(),
        p.offset_q24,
        p.gain_q30,
        p.temp_mc
    );
    record_info_text(&p.info) + &values
}

fn blank_text(b: &Blank) -> String {
    let p = b.parts();
    record_info_text(&p.info) + &format!(" {} {:08x} {} {}", p.x_q24, p.x.to_bits(), p.temp_mc, p.samples)
}

fn record_line(trim: bool, bytes: &[u8]) -> String {
    if trim {
        Trim::parse(bytes).map_or_else(|e| record_code(&e).to_string(), |t| format!("0{}", trim_text(&t)))
    } else {
        Blank::parse(bytes).map_or_else(|e| record_code(&e).to_string(), |b| format!("0{}", blank_text(&b)))
    }
}

const XS: [i32; 12] = [
    i32::MIN,
    -1_073_741_824,
    -1_677_721_600,
    -16_777_216,
    -12_345,
    0,
    1,
    987_654,
    16_777_216,
    1_677_721_600,
    1_073_741_824,
    i32::MAX,
];

/// Commands for the driver and the lines the Rust code gives for them.
struct Script {
    commands: String,
    expected: Vec<String>,
}

impl Script {
    fn new() -> Self {
        Script { commands: String::new(), expected: Vec::new() }
    }

    fn push(&mut self, command: String, expected: String) {
        self.commands.push_str(&command);
        self.commands.push('\n');
        self.expected.push(expected);
    }

    /// Runs the driver and compares line by line; returns how many lines were accepted (start with `0`).
    fn run(self, exe: &std::path::Path, label: &str) -> usize {
        let out = CBuild::run(exe, &[], self.commands.clone());
        let lines: Vec<&str> = out.lines().collect();
        let commands: Vec<&str> = self.commands.lines().filter(|l| !l.starts_with("base ")).collect();
        assert_eq!(lines.len(), self.expected.len(), "{label}: lines");
        for ((line, want), cmd) in lines.iter().zip(&self.expected).zip(&commands) {
            assert_eq!(line, want, "{label}: command `{cmd}`");
        }
        self.expected.iter().filter(|l| l.starts_with("0 ") || l.as_str() == "0").count()
    }
}

fn driver() -> Option<(CBuild, std::path::PathBuf)> {
    let build = CBuild::new("runtime")?;
    build.write("runtime.c", include_bytes!("c_driver/runtime.c"));
    let exe = build.compile(&["runtime.c"]);
    Some((build, exe))
}

#[test]
fn images_get_the_same_verdict_and_tables_in_c_and_rust() {
    let Some((build, exe)) = driver() else { return };
    for (name, ntc) in [("photometer-compensated", true), ("gas-uncompensated", false)] {
        let file = fitted(name, ntc);
        let image = image_of(&file, None, 5);
        let path = build.write(&format!("{name}.img"), &image);
        let mut s = Script::new();
        s.commands.push_str(&format!("base {}\n", path.display()));
        // The image itself, every truncation, every single-bit flip.
        let mut kinds = std::collections::BTreeMap::new();
        s.push(format!("t {}", image.len()), tallied(&image, &mut kinds));
        for len in 0..image.len() {
            s.push(format!("t {len}"), tallied(&image[..len], &mut kinds));
        }
        for bit in 0..image.len() * 8 {
            s.push(format!("f {bit}"), tallied(&flip(&image, bit), &mut kinds));
        }
        // Behind a good CRC: every bit flip, and every byte set to values that hit flags, counts and enums.
        let body = image.len() - 4;
        for bit in 0..body * 8 {
            let m = with_crc(flip(&image, bit));
            let crc = u32::from_le_bytes(m[body..].try_into().unwrap());
            s.push(format!("r {bit} {crc:x}"), tallied(&m, &mut kinds));
        }
        for at in 0..body {
            // Small values (flags, enums, term counts and their capacities), the extremes, and the byte's
            // own value one up and one down (every bound moved by one).
            let near = [image[at].wrapping_add(1), image[at].wrapping_sub(1)];
            let mut values = vec![0u8, 1, 2, 3, 4, 5, 6, 7, 0x7f, 0x80, 0xff];
            values.extend(near.iter().filter(|v| !values.contains(v)).collect::<Vec<_>>());
            for v in values {
                if image[at] == v {
                    continue;
                }
                let mut m = image.clone();
                m[at] = v;
                let m = with_crc(m);
                let crc = u32::from_le_bytes(m[body..].try_into().unwrap());
                s.push(format!("b {at} {v} {crc:x}"), tallied(&m, &mut kinds));
            }
        }
        let mutations = s.expected.len();
        // Models moved across each proof's boundary (behind a good CRC).
        for (family, variants) in model_variants(&image) {
            let (mut refused, mut passed) = (0, 0);
            for (i, v) in variants.iter().enumerate() {
                let path = build.write(&format!("{name}-{family}-{i}.img"), v);
                let line = tallied(v, &mut kinds);
                if line.starts_with(&format!("{} ", image_code(&bad_calibration()))) {
                    refused += 1;
                } else {
                    passed += 1;
                }
                s.push(format!("img {}", path.display()), line);
            }
            eprintln!("{name}: {family}: {refused} models refused by validation, {passed} passed it");
            assert!(refused > 0 && passed > 0, "{name}: the {family} models do not straddle the boundary");
        }
        let n = s.expected.len();
        let accepted = s.expected.iter().filter(|l| l.starts_with("0 0 ")).count();
        s.run(&exe, name);
        eprintln!("{name}: {n} images ({mutations} mutations, the rest model variants), {accepted} of them loaded (with identical tables) by both");
        eprintln!("{name}: calibration defects Rust found, all agreed by C: {kinds:?}");
        for kind in ["Pole", "ZeroSlope", "NotMonotone", "Coefficient"] {
            assert!(kinds.contains_key(kind), "{name}: no image refused for {kind}");
        }
        // The original loads, and some mutations behind a good CRC still pass every check: the tables
        // comparison is not empty.
        assert!(accepted > 10, "{name}: only {accepted} images accepted");
    }
}

#[test]
fn image_slots_choose_alike_in_c_and_rust() {
    let Some((build, exe)) = driver() else { return };
    let file = fitted("photometer-compensated", true);
    let mut later = file.clone();
    later.created_unix_s += 3600;
    let mut padded = image_of(&file, None, 2);
    padded.resize(4096, 0xff);
    let slots_: Vec<(&str, Vec<u8>)> = vec![
        ("seq1", image_of(&file, None, 1)),
        ("seq2", image_of(&file, None, 2)),
        ("seq2-copy", image_of(&file, None, 2)),
        ("seq2-other-serial", image_of(&file, Some("OTHER-SERIAL"), 2)),
        ("seq2-later", image_of(&later, None, 2)),
        ("seq3-corrupted", flip(&image_of(&file, None, 3), 777)),
        ("seq2-padded", padded),
        ("erased", vec![0xff; 4096]),
        ("blank", vec![0; 64]),
        ("no-fixed-section", build_image(&file, None, 9).unwrap()),
        ("truncated", image_of(&file, None, 4)[..1000].to_vec()),
    ];
    let paths: Vec<String> =
        slots_.iter().map(|(n, b)| build.write(&format!("{n}.slot"), b).display().to_string()).collect();
    let mut s = Script::new();
    for (i, (_, a)) in slots_.iter().enumerate() {
        for (j, (_, b)) in slots_.iter().enumerate() {
            let mut storage = DefaultFixedStorage::new();
            let r = slots::select_fixed(a, b, &mut storage);
            let mut want = selection_text(&r.map(|(sel, _)| sel), image_code);
            let mut storage = DefaultFixedStorage::new();
            if let Ok((sel, cal)) = slots::select_fixed(a, b, &mut storage) {
                let id = field::fingerprint_of_image(&sel.record);
                let _ = write!(want, "{} {:016x}", info_text(&sel.record), digest(&cal, id));
            }
            s.push(format!("sel {} {}", paths[i], paths[j]), want);
        }
    }
    let chosen = s.run(&exe, "image slots");
    assert!(chosen > 20, "only {chosen} pairs gave an image");
}

/// Trim and blank records of a unit bound to `factory`.
fn records(factory: u32) -> Vec<(&'static str, Vec<u8>)> {
    let info =
        |sequence, factory| RecordInfo { sequence, written_at: 1_767_225_600 + u64::from(sequence), factory };
    let wide = TrimLimits::new(1.0, 0.5, 0.01).unwrap();
    let std = |m: i32, k: i32| FixedStandard { measured: m, known: k };
    let t2 = Trim::two_point_fixed(
        info(2, factory),
        std(-33_554_432, -33_000_000),
        std(16_777_216, 17_000_000),
        25_000,
        &TrimLimits::DEFAULT,
    )
    .unwrap();
    let t1 = Trim::one_point(
        info(1, factory),
        field::Standard { measured: 0.51, known: 0.5 },
        24_000,
        &TrimLimits::DEFAULT,
    )
    .unwrap();
    let big = Trim::two_point_fixed(
        info(3, factory),
        std(-33_554_432, -30_000_000),
        std(16_777_216, 20_000_000),
        25_000,
        &wide,
    )
    .unwrap();
    let other = Trim::one_point(
        info(4, factory ^ 0x5a5a),
        field::Standard { measured: 0.2, known: 0.19 },
        24_000,
        &TrimLimits::DEFAULT,
    )
    .unwrap();
    let unbound = Trim::cleared(info(5, 0), 21_000);
    let reading = FixedReading { x: -25_165_824, temperature_extrapolated: false };
    let b1 = Blank::from_fixed(info(1, factory), &reading, 25_000, 16).unwrap();
    let b2 = Blank::from_fixed(info(2, factory), &FixedReading { x: 123_456, ..reading }, 26_000, 1).unwrap();
    let b3 = Blank::from_fixed(info(3, factory ^ 1), &reading, 25_000, 4).unwrap();
    vec![
        ("trim-2pt", t2.to_bytes().to_vec()),
        ("trim-1pt", t1.to_bytes().to_vec()),
        ("trim-past-limits", big.to_bytes().to_vec()),
        ("trim-other-cal", other.to_bytes().to_vec()),
        ("trim-cleared-unbound", unbound.to_bytes().to_vec()),
        ("blank-1", b1.to_bytes().to_vec()),
        ("blank-2", b2.to_bytes().to_vec()),
        ("blank-other-cal", b3.to_bytes().to_vec()),
    ]
}

#[test]
fn trim_and_blank_records_get_the_same_verdict_in_c_and_rust() {
    let Some((build, exe)) = driver() else { return };
    let factory = 0x1234_abcd;
    let recs = records(factory);
    let mut s = Script::new();
    for (name, bytes) in &recs {
        let trim = name.starts_with("trim");
        let p = build.write(&format!("{name}.rec"), bytes).display().to_string();
        let c = if trim { 't' } else { 'b' };
        s.push(format!("{} {p}", if trim { "trim" } else { "blank" }), record_line(trim, bytes));
        for len in 0..bytes.len() {
            s.push(format!("{c}t {p} {len}"), record_line(trim, &bytes[..len]));
        }
        for bit in 0..bytes.len() * 8 {
            s.push(format!("{c}f {p} {bit}"), record_line(trim, &flip(bytes, bit)));
        }
        let body = bytes.len() - 4;
        for bit in 0..body * 8 {
            let m = with_crc(flip(bytes, bit));
            let crc = u32::from_le_bytes(m[body..].try_into().unwrap());
            s.push(format!("{c}r {p} {bit} {crc:x}"), record_line(trim, &m));
        }
    }
    // A/B of every pair of the same type (and an erased slot), with and without the binding.
    let erased = build.write("erased.rec", &[0xffu8; 64]).display().to_string();
    for trim in [true, false] {
        let mut of_type: Vec<(String, Vec<u8>)> = recs
            .iter()
            .filter(|(n, _)| n.starts_with("trim") == trim)
            .map(|(n, b)| (build.dir.join(format!("{n}.rec")).display().to_string(), b.clone()))
            .collect();
        of_type.push((erased.clone(), vec![0xff; 64]));
        for (pa, a) in &of_type {
            for (pb, b) in &of_type {
                for f in [Some(factory), None] {
                    let arg = f.map_or("-".to_string(), |f| format!("{f:x}"));
                    let want = if trim {
                        let r = field::slots::select::<Trim>(a, b, f);
                        let mut t = selection_text(&r, record_code);
                        if let Ok(sel) = &r {
                            t.push_str(&trim_text(&sel.record));
                        }
                        t
                    } else {
                        let r = field::slots::select::<Blank>(a, b, f);
                        let mut t = selection_text(&r, record_code);
                        if let Ok(sel) = &r {
                            t.push_str(&blank_text(&sel.record));
                        }
                        t
                    };
                    s.push(format!("{} {pa} {pb} {arg}", if trim { "tsel" } else { "bsel" }), want);
                }
            }
        }
    }
    // Layers: every trim with every blank (and none), bound or not, on readings across the Q24 range.
    let trims: Vec<Option<&(&str, Vec<u8>)>> =
        std::iter::once(None).chain(recs.iter().filter(|(n, _)| n.starts_with("trim")).map(Some)).collect();
    let blanks: Vec<Option<&(&str, Vec<u8>)>> =
        std::iter::once(None).chain(recs.iter().filter(|(n, _)| n.starts_with("blank")).map(Some)).collect();
    for t in &trims {
        for b in &blanks {
            for f in [Some(factory), None] {
                let path = |r: &Option<&(&str, Vec<u8>)>| {
                    r.map_or("-".to_string(), |(n, _)| {
                        build.dir.join(format!("{n}.rec")).display().to_string()
                    })
                };
                let arg = f.map_or("-".to_string(), |f| format!("{f:x}"));
                let trim = t.map(|(_, b)| Trim::parse(b).unwrap());
                let blank = b.map(|(_, b)| Blank::parse(b).unwrap());
                let want = match Layers::new(trim, blank, &TrimLimits::DEFAULT, f) {
                    Err(e) => field_code(&e).to_string(),
                    Ok(layers) => {
                        let mut line = "0".to_string();
                        for (i, &x) in XS.iter().enumerate() {
                            let r = FixedReading { x, temperature_extrapolated: i % 2 == 1 };
                            match layers.apply_fixed(&r) {
                                Ok(o) => {
                                    let _ =
                                        write!(line, " 0:{}:{}", o.x, u8::from(o.temperature_extrapolated));
                                }
                                Err(e) => {
                                    let _ = write!(line, " {}", error_code(&e));
                                }
                            }
                        }
                        line
                    }
                };
                s.push(format!("layers {} {} {arg}", path(t), path(b)), want);
            }
        }
    }
    let accepted = s.run(&exe, "records");
    assert!(accepted > 100, "only {accepted} accepted");
}

/// One reading through the layers as the driver prints it.
fn layered(layers: &Layers, r: Result<FixedReading, logtrim::Error>) -> String {
    let r = r.and_then(|r| layers.apply_fixed(&r));
    match r {
        Err(e) => format!(" {}", error_code(&e)),
        Ok(o) => {
            let mut s = format!(" 0:{}:{}", o.x, u8::from(o.temperature_extrapolated));
            for u in Unit::ALL {
                let v = o.value(u);
                let _ = write!(s, ",{}:{}", logtrim_host::emit::c::status_code(&v), v.unwrap_or(0));
            }
            s
        }
    }
}

#[test]
fn a_firmware_without_unit_data_corrects_like_the_rust_fixed_path() {
    let Some((build, exe)) = driver() else { return };
    let file = fitted("photometer-compensated", true);
    let a = image_of(&file, None, 1);
    let b = flip(&image_of(&file, None, 2), 4000); // the newer slot is corrupted: the older one is used
    let identity = field::fingerprint(&file.calibration).unwrap();
    let recs = records(identity);
    let find = |n: &str| recs.iter().find(|(m, _)| *m == n).unwrap().1.clone();
    let w = |n: &str, bytes: &[u8]| build.write(n, bytes).display().to_string();
    let (pa, pb) = (w("a.img", &a), w("b.img", &b));
    let mut s = Script::new();
    // Trim and blank slots: a good pair, a pair with the newer trim past its limits, one made elsewhere.
    let cases = [
        ("trim-1pt", "trim-2pt", "blank-1", "blank-2"),
        ("trim-2pt", "trim-past-limits", "blank-2", "blank-other-cal"),
        ("trim-other-cal", "trim-cleared-unbound", "blank-other-cal", "blank-other-cal"),
    ];
    for (case, (ta, tb, ba, bb)) in cases.into_iter().enumerate() {
        let mut storage = DefaultFixedStorage::new();
        let (sel, cal) = slots::select_fixed(&a, &b, &mut storage).unwrap();
        assert_eq!(sel.slot, SlotId::A);
        let id = field::fingerprint_of_image(&sel.record);
        assert_eq!(id, identity);
        let (ta, tb, ba, bb) = (find(ta), find(tb), find(ba), find(bb));
        let trim = field::slots::select::<Trim>(&ta, &tb, Some(id));
        let blank = field::slots::select::<Blank>(&ba, &bb, Some(id));
        let tc = if trim.is_ok() { 0 } else { *STATUS_NO_VALID };
        let bc = if blank.is_ok() { 0 } else { *STATUS_NO_VALID };
        let t = trim.ok().map(|s| s.record);
        let k = blank.ok().map(|s| s.record);
        let (lc, layers) = match Layers::new(t, k, &TrimLimits::DEFAULT, Some(id)) {
            Ok(l) => (0, l),
            Err(e) => (field_code(&e), Layers::FACTORY),
        };
        let mut want = format!("0 {tc} {bc} {lc}");
        for code in (0..=65_536u32).step_by(1013) {
            for t in [-30_000, 0, 25_000, 41_234, 70_000] {
                want.push_str(&layered(&layers, cal.correct(code, t)));
            }
            for tc in (100..4096u32).step_by(997) {
                want.push_str(&layered(&layers, cal.correct_raw(code, tc)));
            }
        }
        let p = |name: &str, bytes: Vec<u8>| w(&format!("{name}{case}.run"), &bytes);
        s.push(
            format!("run {pa} {pb} {} {} {} {}", p("ta", ta), p("tb", tb), p("ba", ba), p("bb", bb)),
            want,
        );
    }
    s.run(&exe, "firmware");
}

#[test]
fn status_texts_version_macros_and_a_cplusplus_caller() {
    let Some(build) = CBuild::new("text") else { return };
    build.write(
        "text.c",
        br#"#include <stdio.h>
#include "ltrm.h"
int main(void) {
    int s;
    printf("%s %d.%d.%d %u %u %u %s\n", LTRM_VERSION_STRING, LTRM_VERSION_MAJOR, LTRM_VERSION_MINOR,
           LTRM_VERSION_PATCH, LTRM_IMAGE_VERSION, LTRM_TRIM_VERSION, LTRM_LAYOUT_VERSION, LTRM_MAGIC_IMAGE);
    for (s = 0; s <= (int)LTRM_BAD_SENSOR + 1; s++) printf("%s\n", ltrm_status_text((ltrm_status)s));
    return 0;
}
"#,
    );
    let exe = build.compile(&["text.c"]);
    let out = CBuild::run(&exe, &[], String::new());
    let mut lines = out.lines();
    let v = env!("CARGO_PKG_VERSION");
    let want = format!(
        "{v} {v} {} {} {} LTCI",
        logtrim::image::layout::header::VERSION_VALUE,
        logtrim::field::layout::trim::VERSION_VALUE,
        logtrim::fixed::LAYOUT_VERSION
    );
    assert_eq!(lines.next(), Some(want.as_str()));
    let texts: Vec<&str> = lines.collect();
    let statuses = logtrim_host::emit::c::STATUSES;
    assert_eq!(texts.len(), statuses.len() + 1);
    for ((name, doc), text) in statuses.iter().zip(&texts) {
        assert_eq!(doc, text, "{name}");
    }
    // Every status has its own text, and a number outside the enum is named as such.
    let mut unique = texts.clone();
    unique.sort();
    unique.dedup();
    assert_eq!(unique.len(), texts.len());
    assert_eq!(texts.last(), Some(&"unknown status"));

    // The header from C++: its declarations have C linkage (the extern "C" guard), so a C++ caller links
    // against the library compiled as C.
    let cxx = std::env::var("CXX").unwrap_or_else(|_| "c++".into());
    if std::process::Command::new(&cxx).arg("--version").output().is_err() {
        eprintln!("SKIPPED: no C++ compiler ({cxx}); the extern \"C\" guard was not exercised");
        return;
    }
    let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
    let obj = build.dir.join("ltrm.o");
    let st = std::process::Command::new(&cc)
        .args(["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-c", "-o"])
        .arg(&obj)
        .arg(build.dir.join("ltrm.c"))
        .status()
        .unwrap();
    assert!(st.success());
    build.write(
        "caller.cpp",
        br#"#include <cstdio>
#include "ltrm.h"
int main() {
    ltrm_reading r = { 16777216, 0 };
    int64_t v = 0;
    ltrm_status s = ltrm_value(&r, LTRM_NEPERS, &v);
    std::printf("%s %lld\n", ltrm_status_text(s), (long long)v);
    return 0;
}
"#,
    );
    let exe = build.dir.join("caller");
    let out = std::process::Command::new(&cxx)
        .args(["-std=c++11", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o"])
        .arg(&exe)
        .arg(build.dir.join("caller.cpp"))
        .arg(&obj)
        .output()
        .unwrap();
    assert!(out.status.success(), "c++ failed:\n{}", String::from_utf8_lossy(&out.stderr));
    assert_eq!(CBuild::run(&exe, &[], String::new()), "ok 16777216\n");
}

/// The C kernel of the temperature splines at θ (`ltrm_spline_at`, the library's source compiled into the
/// driver) against `logtrim::fixed::interp::spline_at`: the same value or the same refusal, at the edges of
/// its 32-bit limits (each difference at its limit and one inside, words that overflow when subtracted) and
/// on random control points and fractions.
#[test]
fn temperature_spline_kernel_agrees_with_rust_at_its_limits() {
    use logtrim::fixed::interp::spline_at;
    let Some(build) = CBuild::new("spline") else { return };
    build.write(
        "spline.c",
        br#"#include <stdio.h>
#include "ltrm.c"
int main(void) {
    long a, b, c, d;
    unsigned long t;
    while (scanf("%ld %ld %ld %ld %lu", &a, &b, &c, &d, &t) == 5) {
        int32_t cp[4];
        int64_t v = 0;
        int ok;
        cp[0] = (int32_t)a; cp[1] = (int32_t)b; cp[2] = (int32_t)c; cp[3] = (int32_t)d;
        ok = ltrm_spline_at(cp, (uint32_t)t, &v);
        printf("%d %lld\n", ok, ok ? (long long)v : 0LL);
    }
    return 0;
}
"#,
    );
    let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
    let exe = build.dir.join("spline");
    let out = std::process::Command::new(&cc)
        .args(["-std=c99", "-O2", "-o"])
        .arg(&exe)
        .arg(build.dir.join("spline.c"))
        .output()
        .unwrap();
    assert!(out.status.success(), "cc failed:\n{}", String::from_utf8_lossy(&out.stderr));
    let mut cases: Vec<([i32; 4], u32)> = Vec::new();
    let base = [0i32, 1 << 29, -(1 << 30), i32::MAX - (1 << 27), i32::MIN + (1 << 27)];
    for &b in &base {
        for k in [-1i64, 0, 1] {
            // d = c2 − c0 at ±2^28, e = c0 − 2c1 + c2 at ±2^27, f = c1 − c2 at ±2^26, g = c3 − c0 at ±2^27.
            for s in [-1i64, 1] {
                let at = |v: i64| v.clamp(i64::from(i32::MIN), i64::from(i32::MAX)) as i32;
                let b64 = i64::from(b);
                let lim = |n: u32| s * ((1i64 << n) + k);
                cases.push(([b, b, at(b64 + lim(28)), b], 777_777));
                cases.push(([b, at(b64 - lim(27) / 2), b, b], 5));
                cases.push(([b, at(b64 + lim(26)), b, b], 1 << 19));
                cases.push(([b, b, b, at(b64 + lim(27))], (1 << 20) - 1));
            }
        }
    }
    for w in
        [[i32::MAX, -1, i32::MIN, 0], [i32::MIN, i32::MAX, i32::MIN, i32::MAX], [i32::MAX; 4], [i32::MIN; 4]]
    {
        cases.push((w, 123_456));
    }
    let mut rng = 0x9e37_79b9_7f4a_7c15u64;
    let mut next = || {
        rng ^= rng << 13;
        rng ^= rng >> 7;
        rng ^= rng << 17;
        rng
    };
    for _ in 0..4000 {
        let c0 = next() as i32;
        let spread = 1i64 << (next() % 31);
        let mut c = [c0; 4];
        for v in c.iter_mut().skip(1) {
            *v = (i64::from(c0) + (next() as i64 % spread)).clamp(i64::from(i32::MIN), i64::from(i32::MAX))
                as i32;
        }
        cases.push((c, (next() % (1 << 20)) as u32));
    }
    let input: String =
        cases.iter().map(|(c, t)| format!("{} {} {} {} {t}\n", c[0], c[1], c[2], c[3])).collect();
    let out = CBuild::run(&exe, &[], input);
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines.len(), cases.len());
    let mut refused = 0;
    for ((c, t), line) in cases.iter().zip(&lines) {
        let want = match spline_at(*c, *t) {
            Some(v) => format!("1 {v}"),
            None => {
                refused += 1;
                "0 0".to_string()
            }
        };
        assert_eq!(*line, want, "{c:?} at {t}");
    }
    // Both sides of the limits were reached.
    assert!(refused > 100 && refused < cases.len() - 100, "{refused} of {} refused", cases.len());
}
