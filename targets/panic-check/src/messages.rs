//! The messages of the error types the crate returns, as a firmware that logs them over `core::fmt` would
//! print them: `Display` of the errors the entry points give for opaque inputs. (Not the two that print an
//! f32, see the crate docs.)

use crate::f32_path::calibration;
use crate::misc::show;
use crate::{bytes, o};
use logtrim::field::{self, Bank, Blank, BlankParts, LogChannel, RecordInfo, Trim};
use logtrim::image::{self, slots, Image, ImageError, ImageInfo};
use logtrim::record::RecordType;
use logtrim::thermistor::CurvePoint;
use logtrim::Beta;

/// `Display` of the error types outside `hal` (see [`crate::hal::messages`] for those).
#[inline(never)]
pub fn run() {
    let cal = calibration();
    if let Err(e) = cal.correct(o(0), o(0.0)) {
        show(e);
    }
    if let Err(e) = Beta::from_points(o(CurvePoint::new(0.0, 1.0)), o(CurvePoint::new(0.0, 1.0))) {
        show(e);
    }
    match Image::parse(bytes()) {
        Err(ImageError::Format(f)) => show(f),
        Err(e) => show(e),
        Ok(_) => {}
    }
    let info = o(ImageInfo { serial: o("unit"), calibrated_at: o(0), sequence: o(1) });
    if let Err(e) = image::write(o(&mut [0u8; 64][..]), &info, &cal) {
        show(e);
    }
    match slots::select(bytes(), bytes()) {
        Ok(s) => show(s.other),
        Err(e) => show(e),
    }
    if let Err(e) = slots::next_write(bytes(), bytes()) {
        show(e);
    }
    if let Some(t) = RecordType::of_magic(o([0; 4])) {
        show(t);
    }

    let rinfo = o(RecordInfo { sequence: o(1), written_at: o(0), factory: o(0) });
    match Trim::parse(bytes()) {
        Ok(t) => {
            if let Err(e) = t.write(o(&mut [0u8; 8][..])) {
                show(e);
            }
        }
        Err(e) => show(e),
    }
    if let Err(e) = Blank::new(o(BlankParts { info: rinfo, x: 0.0, x_q24: 0, temp_mc: 0, samples: 1 })) {
        show(e);
    }
    if let Err(e) = Bank::new([o(LogChannel { calibration: cal, layers: field::Layers::FACTORY })]) {
        show(e);
    }
}
