//! `logtrim verify COEFFS.json`: every log ADC code against a temperature grid, the fixed-point and f32
//! paths against the f64 reference. Exit 0 within the bound, 1 over it, 2 on bad input.

use std::io::IsTerminal;
use std::path::PathBuf;

use clap::{Args, ValueEnum};
use logtrim_host::verify::{self, F32Backend, VerifyOptions};

use crate::emit::{load_tables, TableArgs};
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
    #[arg(long, default_value_t = 0.25)]
    pub bound_lsb: f64,
    /// Largest temperature step of the grid, K.
    #[arg(long, default_value_t = 0.05)]
    pub temp_step: f64,
    /// The f32 path's backend.
    #[arg(long, value_enum, default_value_t = BackendArg::Libm)]
    pub backend: BackendArg,
    /// The paths to verify against the f64 reference.
    #[arg(long, value_enum, default_value_t = PathArg::Both)]
    pub path: PathArg,
    /// Verify every N-th log code only (a quicker, sampled run).
    #[arg(long, default_value_t = 1)]
    pub code_stride: u32,
    /// Verify every N-th temperature of the grid only.
    #[arg(long, default_value_t = 1)]
    pub temp_stride: usize,
    /// Half width, in codes, of the band around the reference's status edges where a status disagreement is
    /// tolerated (counted and reported).
    #[arg(long, default_value_t = 1)]
    pub edge_codes: u32,
    /// Evaluate the f64 reference by its exact path at every point instead of the warm-started sweep
    /// (the same statuses, values within 1e-12 Np; slower).
    #[arg(long)]
    pub exact_reference: bool,
    /// Print the report as JSON instead of text.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub tables: TableArgs,
}

/// Runs `logtrim verify`.
pub fn run(args: &VerifyArgs) -> Result<(), Failure> {
    let (file, tables) = load_tables(&args.coeffs, &args.tables)?;
    let opts = VerifyOptions {
        bound_lsb: args.bound_lsb,
        temp_step_k: args.temp_step,
        code_stride: args.code_stride,
        temp_stride: args.temp_stride,
        edge_codes: args.edge_codes,
        f32_backend: match args.backend {
            BackendArg::Libm => F32Backend::Libm,
            BackendArg::Micromath => F32Backend::Micromath,
        },
        check_fixed: args.path != PathArg::F32,
        check_f32: args.path != PathArg::Fixed,
        exact_reference: args.exact_reference,
    };
    let start = std::time::Instant::now();
    let terminal = std::io::stderr().is_terminal() && std::io::stdout().is_terminal();
    let bar = crate::progress::bar("verify {bar:40} {pos}/{len} temperatures, {eta} left", terminal);
    // With a raw temperature channel, every temperature code is swept through the sensor's own
    // conversion (f64) as the reference.
    let report = verify::run_file(&file, &tables.view(), &opts, &crate::progress::on(&bar));
    crate::progress::finish(bar);
    let report = report.map_err(Failure::input)?;
    let secs = start.elapsed().as_secs_f64();
    if args.json {
        let text = serde_json::to_string_pretty(&report).map_err(Failure::input)?;
        say!("{text}");
    } else {
        say!("{}: {} bytes of fixed-point tables", args.coeffs.display(), tables.bytes());
        say_raw!("{report}");
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
