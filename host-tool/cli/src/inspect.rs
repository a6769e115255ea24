//! `logtrim inspect`: decode and check an image file (binary or Intel HEX) exactly as the firmware would,
//! and print it, its fixed-point tables included. A bad image exits with 1 and its specific error; so does
//! an image whose fixed-point tables a fixed-point firmware would refuse (after printing what it holds).
//! A trim or blank record file (recognised by its magic) is checked by the firmware's parser and printed,
//! with the calibration ID it is bound to (the image's `calib. ID`).

use std::path::PathBuf;

use logtrim_host::image_file::{self, ImageFileError, ImageFormat};

use crate::Failure;

/// Options of `logtrim inspect`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The image or field record file (trim or blank): raw binary, or Intel HEX (recognised by its leading
    /// ':').
    pub image: PathBuf,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

pub fn run(args: Args) -> Result<(), Failure> {
    let name = args.image.display().to_string();
    let file = image_file::read_file(&args.image).map_err(|e| match e {
        ImageFileError::File(_) => Failure::input(e),
        // A HEX file whose records are broken is a bad image file.
        other => Failure::check(format!("{name}: bad Intel HEX: {other}")),
    })?;
    if let Some(record) = logtrim_host::records::parse_field_record(&file.bytes, &name)
        .map_err(|e| Failure::check(format!("bad record: {e}")))?
    {
        if args.json {
            let mut v = logtrim_host::records::field_record_json(&record);
            v["file"] = serde_json::json!(name);
            say!("{}", serde_json::to_string_pretty(&v).unwrap_or_default());
        } else {
            say!("{name}: {} bytes", file.bytes.len());
            say_raw!("{}", logtrim_host::records::describe_field_record(&record));
        }
        return Ok(());
    }
    let img =
        logtrim::Image::parse(&file.bytes).map_err(|e| Failure::check(format!("{name}: bad image: {e}")))?;
    let place = match (file.format, file.base) {
        (ImageFormat::Hex, Some(base)) => format!("Intel HEX, {} bytes at {base:#010x}", file.bytes.len()),
        _ => format!("binary, {} bytes", file.bytes.len()),
    };
    if args.json {
        let mut v = image_file::describe_json(&img);
        v["file"] = serde_json::json!(name);
        v["base_address"] = serde_json::json!(file.base);
        say!("{}", serde_json::to_string_pretty(&v).unwrap_or_default());
    } else {
        say!("{name}: {place}");
        say_raw!("{}", image_file::describe(&img));
    }
    image_file::load_fixed(&img)
        .map_err(|e| Failure::check(format!("{name}: bad fixed-point tables: {e}")))?;
    Ok(())
}
