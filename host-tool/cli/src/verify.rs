//! `logtrim verify COEFFS.json`: every log ADC code against a temperature grid, the fixed-point and f32
//! paths against the f64 reference. Exit 0 within the bound, 1 over it, 2 on bad input.

use std::io::IsTerminal;
use std::path::PathBuf;

use clap::{Args, ValueEnum};
use logtrim_host::verify::{self, F32Backend, VerifyOptions};

use crate::emit::{load_tables, TableArgs};
use crate::values::{real, Span};
use crate::Failure;

/// f32 backends.
#[derive(ValueEnum, Debug, Clone, Copy)]
pub enum BackendArg {
    /// libm's logf/expf (the default backend of the firmware).
    Libm,
    /// micromath's approximations (coarse; reported honestly).
    Micromath,
}

/// Which paths to verify.
#[derive(ValueEnum, Debug, Clone, Copy, PartialEq, Eq)]
pub enum PathArg {
    /// The fixed-point and the f32 path.
    Both,
    /// The fixed-point path only.
    Fixed,
    /// The f32 path only.
    F32,
}

/// Arguments of `logtrim verify`.
#[derive(Args, Debug)]
pub struct VerifyArgs {
    /// The calibration file.
    pub coeffs: PathBuf,
    /// Error bound in LSB equivalents, for both paths.
    #[arg(long, default_value_t = 0.25, value_parser = real(Span::closed(0.0, 1e6)))]
    pub bound_lsb: f64,
    /// Largest temperature step of the grid, K.
    #[arg(long, default_value_t = 0.05, value_parser = real(Span::closed(0.001, 100.0)))]
    pub temp_step: f64,
    /// The f32 path's backend.
    #[arg(long, value_enum, default_value_t = BackendArg::Libm)]
    pub backend: BackendArg,
    /// The paths to verify against the f64 reference.
    #[arg(long, value_enum, default_value_t = PathArg::Both)]
    pub path: PathArg,
    /// A sampled run of about 4 million points spread over every code and temperature range (sets the
    /// strides; reported as sampled).
    #[arg(long, conflicts_with_all = ["code_stride", "temp_stride"])]
    pub sample: bool,
    /// Verify every N-th log code only (a quicker, sampled run).
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u32).range(1..=1 << 24))]
    pub code_stride: u32,
    /// Verify every N-th temperature of the grid only.
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u32).range(1..=1 << 24))]
    pub temp_stride: u32,
    /// Half width, in codes, of the band around the reference's status edges where a status disagreement is
    /// tolerated (counted and reported).
    #[arg(long, default_value_t = 1, value_parser = clap::value_parser!(u32).range(0..=1 << 24))]
    pub edge_codes: u32,
    /// Evaluate the f64 reference by its exact path at every point instead of the warm-started sweep
    /// (the same statuses, values within 1e-12 Np; slower).
    #[arg(long)]
    pub exact_reference: bool,
    /// Print the report as JSON instead of text.
    #[arg(long)]
    pub json: bool,
    /// The unit the text report gives errors in, beside nepers and LSB: np, mnp, db10, db20, pct or mau.
    #[arg(long, value_name = "UNIT", default_value = "db10", value_parser = crate::plot::parse_unit)]
    pub error_unit: logtrim_host::error_scale::ErrorScale,
    #[command(flatten)]
    pub tables: TableArgs,
}

/// Seconds as a rough duration for people.
fn duration(s: f64) -> String {
    if s < 1.0 {
        "under a second".into()
    } else if s < 120.0 {
        format!("about {s:.0} s")
    } else if s < 7200.0 {
        format!("about {:.0} min", s / 60.0)
    } else {
        format!("about {:.1} h", s / 3600.0)
    }
}

/// Runs `logtrim verify`.
pub fn run(args: &VerifyArgs) -> Result<(), Failure> {
    let (file, tables) = load_tables(&args.coeffs, &args.tables)?;
    let mut opts = VerifyOptions {
        bound_lsb: args.bound_lsb,
        temp_step_k: args.temp_step,
        code_stride: args.code_stride,
        temp_stride: args.temp_stride as usize,
        edge_codes: args.edge_codes,
        f32_backend: match args.backend {
            BackendArg::Libm => F32Backend::Libm,
            BackendArg::Micromath => F32Backend::Micromath,
        },
        check_fixed: args.path != PathArg::F32,
        check_f32: args.path != PathArg::Fixed,
        // The code table and the stage cache are the fixed path's too: verified with it.
        check_table: args.path != PathArg::F32,
        check_cache: args.path != PathArg::F32,
        exact_reference: args.exact_reference,
    };
    let (codes, temps) = verify::plan(&file, &opts).map_err(Failure::input)?;
    if args.sample {
        // About 2^22 points: 2^12 codes × 2^10 temperatures at most, each spread over its whole range.
        opts.code_stride = u32::try_from(codes.div_ceil(4096)).unwrap_or(u32::MAX).max(1);
        opts.temp_stride = usize::try_from(temps.div_ceil(1024)).unwrap_or(usize::MAX).max(1);
    }
    let (codes, temps) = verify::plan(&file, &opts).map_err(Failure::input)?;
    // The estimate up front: one temperature row timed on one thread, times the rows over the threads.
    let probe = VerifyOptions {
        temp_stride: usize::try_from(temps).unwrap_or(usize::MAX).max(1).saturating_mul(opts.temp_stride),
        ..opts
    };
    let t0 = std::time::Instant::now();
    let _ = verify::run_file(&file, &tables.view(), &probe, &logtrim_host::progress::quiet);
    let per_row = t0.elapsed().as_secs_f64();
    let threads = rayon::current_num_threads().max(1);
    let estimate = per_row * temps as f64 / threads as f64;
    let sampled = if opts.code_stride > 1 || opts.temp_stride > 1 {
        format!(" (sampled: every {} code(s) × every {} temperature(s))", opts.code_stride, opts.temp_stride)
    } else {
        String::new()
    };
    note!(
        "verify: {codes} codes × {temps} temperatures = {} points{sampled}; estimated {} on {threads} thread(s){}",
        codes * temps,
        duration(estimate),
        if estimate > 60.0 && !args.sample { "; --sample for a quick sampled run" } else { "" }
    );
    if matches!(args.backend, BackendArg::Micromath) {
        note!("warning: {}", logtrim_host::correct::MICROMATH_WARNING);
    }
    let start = std::time::Instant::now();
    let terminal = std::io::stderr().is_terminal() && std::io::stdout().is_terminal();
    let bar = crate::progress::bar("verify {bar:40} {pos}/{len} temperatures, {eta} left", terminal);
    // Without a terminal, a line at every tenth of the rows.
    let report = {
        let tenths = std::sync::atomic::AtomicU64::new(0);
        let on_bar = crate::progress::on(&bar);
        let progress = |p: logtrim_host::progress::Progress| {
            on_bar(p);
            if !terminal && p.total > 0 {
                let tenth = p.done * 10 / p.total;
                if tenth > tenths.fetch_max(tenth, std::sync::atomic::Ordering::Relaxed) && tenth < 10 {
                    note!("verify: {}% of the temperatures done", tenth * 10);
                }
            }
        };
        // With a raw temperature channel, every temperature code is swept through the sensor's own
        // conversion (f64) as the reference.
        verify::run_file(&file, &tables.view(), &opts, &progress)
    };
    crate::progress::finish(bar);
    let report = report.map_err(Failure::input)?;
    let secs = start.elapsed().as_secs_f64();
    if args.json {
        let text = serde_json::to_string_pretty(&report).map_err(Failure::input)?;
        say!("{text}");
    } else {
        say!("{}: {} bytes of fixed-point tables", args.coeffs.display(), tables.bytes());
        say_raw!("{}", report.render(args.error_unit));
        say!("verified in {secs:.2} s on {} threads", rayon::current_num_threads());
    }
    if report.passed() {
        Ok(())
    } else {
        Err(Failure::check(
            "verification failed: an error exceeds the bound or a status disagrees away from an edge",
        ))
    }
}
