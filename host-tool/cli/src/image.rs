//! `logtrim image`: build a unit's calibration image from a calibration file, as a raw binary for an
//! EEPROM writer or as Intel HEX for a flash programmer. The image carries the unit's fixed-point tables
//! (the same as `logtrim emit` generates, with the temperature-sensor table of a raw channel) unless
//! `--no-fixed` is given.

use std::path::PathBuf;

use clap::builder::TypedValueParser as _;
use clap::ValueEnum;
use logtrim_host::calfile::CalFile;
use logtrim_host::image_file::{self, ImageFormat};

use crate::emit::TableArgs;
use crate::Failure;

/// Output formats.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// The image bytes as they are.
    Bin,
    /// Intel HEX text.
    Hex,
}

/// Options of `logtrim image`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The calibration file (COEFFS.json).
    pub coeffs: PathBuf,
    /// The image file to write.
    #[arg(short, long, value_name = "UNIT.bin")]
    pub output: PathBuf,
    /// Output format [default: hex for a .hex or .ihex output name, bin otherwise].
    #[arg(long, value_enum)]
    pub format: Option<Format>,
    /// The unit serial, at most 16 printable ASCII characters [default: the file's "unit"].
    #[arg(long, value_name = "S")]
    pub serial: Option<String>,
    /// Address of the image in the part's EEPROM or flash map, decimal or 0x-hex (Intel HEX only) [default: 0].
    #[arg(long, value_name = "A")]
    pub base_address: Option<String>,
    /// Bytes per Intel HEX data record: 16 or 32.
    #[arg(long, value_name = "N", default_value_t = 16,
          value_parser = clap::builder::PossibleValuesParser::new(["16", "32"]).map(|s| s.parse::<usize>().unwrap_or(16)))]
    pub record_len: usize,
    /// Sequence counter of the image; of two valid A/B slots the firmware uses the higher one.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub sequence: u32,
    /// Leave out the fixed-point tables: an image for firmware that corrects in f32 only.
    #[arg(long)]
    pub no_fixed: bool,
    /// Sizes of the fixed-point tables (ignored with --no-fixed).
    #[command(flatten)]
    pub tables: TableArgs,
}

pub fn run(args: Args) -> Result<(), Failure> {
    crate::check_outputs(&[Some(&args.coeffs)], &[Some(&args.output)], &[])?;
    let format = match args.format {
        Some(Format::Bin) => ImageFormat::Bin,
        Some(Format::Hex) => ImageFormat::Hex,
        None => ImageFormat::from_path(&args.output),
    };
    let base = match (&args.base_address, format) {
        (Some(_), ImageFormat::Bin) => {
            return Err(Failure::input("--base-address applies to Intel HEX output only (--format hex)"));
        }
        (Some(text), ImageFormat::Hex) => image_file::parse_address(text).map_err(Failure::input)?,
        (None, _) => 0,
    };
    if format == ImageFormat::Bin && args.record_len != 16 {
        return Err(Failure::input("--record-len applies to Intel HEX output only (--format hex)"));
    }
    let file = CalFile::load(&args.coeffs).map_err(Failure::input)?;
    if file.failed_acceptance() {
        return Err(Failure::rejected(format!(
            "{}: the unit failed its acceptance limits (marked FAIL in the file): no image is made from it",
            args.coeffs.display()
        )));
    }
    let options = args.tables.options();
    let tables = (!args.no_fixed).then_some(&options);
    let bytes = image_file::build_image_with(&file, args.serial.as_deref(), args.sequence, tables)
        .map_err(|e| Failure::input(format!("{}: {e}", args.coeffs.display())))?;
    // The image is checked as the firmware will check it before anything is written, its tables loaded as
    // a fixed-point firmware loads them.
    let img =
        logtrim::Image::parse(&bytes).map_err(|e| Failure::check(format!("built image refused: {e}")))?;
    image_file::load_fixed(&img).map_err(|e| Failure::check(format!("built image's tables refused: {e}")))?;
    if img.serial().is_empty() {
        note!(
            "logtrim: warning: no serial (neither --serial nor \"unit\" in the file): the image carries none"
        );
    }
    let content = image_file::encode_file(&bytes, format, base, args.record_len).map_err(Failure::input)?;
    image_file::write_file(&args.output, &content).map_err(Failure::input)?;
    let place = match format {
        ImageFormat::Bin => "binary".to_string(),
        ImageFormat::Hex => format!("Intel HEX at {base:#010x}"),
    };
    let fixed = match img.fixed() {
        None => "f32 model only".to_string(),
        Some(sec) => {
            let h = sec.header();
            let sensor = if sec.sensor().is_some() { ", sensor table" } else { "" };
            let residual = if sec.len_of(&logtrim::image::layout::fixed::RESIDUAL) == 0 {
                ", residual none (zero everywhere)"
            } else {
                ""
            };
            format!("fixed-point tables {}×{} knots{sensor}{residual}", h.t_knots, h.xa_knots)
        }
    };
    let fixed = match img.sensor() {
        Some(_) => format!("{fixed}; temperature sensor description"),
        None => fixed,
    };
    say!(
        "{}: {} byte image ({place}; {fixed}), serial {:?}, sequence {}, CRC-32 {:#010x}",
        args.output.display(),
        img.len(),
        img.serial(),
        img.sequence(),
        img.crc()
    );
    Ok(())
}
