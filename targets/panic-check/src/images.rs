//! Calibration images: parsing, accessors, sections, the fixed section and its storage, writing, A/B
//! slots.

use crate::{bytes, keep, o};
use logtrim::image::{self, layout, slots, DefaultFixedStorage, ImageInfo, Section};
use logtrim::record::{self, RecordType};
use logtrim::Image;

fn inspect(img: &Image<'_>) {
    keep(img.calibration());
    keep((img.serial(), img.calibrated_at(), img.sequence(), img.version(), img.crc()));
    keep((img.as_bytes(), img.len(), img.is_empty()));
    for s in img.sections() {
        keep(s);
    }
    keep(img.section(o(0x8003)));
    keep(img.sensor());
    keep(img.celsius(o(2048)));
    if let Some(f) = img.fixed() {
        keep((f.header(), f.sensor()));
        for t in layout::fixed::TABLES {
            keep(f.len_of(t));
        }
        keep(f.offset().sum::<i32>().wrapping_add(f.inv_slope().sum()));
        keep(f.ln_bias().chain(f.u_min()).chain(f.sensor_knots()).fold(0i32, i32::wrapping_add));
        keep(f.residual().fold(0i16, i16::wrapping_add));
        let mut storage = DefaultFixedStorage::new();
        keep(storage.load(&f));
        keep(storage.calibration());
        storage.clear();
    }
    let mut storage = DefaultFixedStorage::new();
    keep(img.fixed_into(&mut storage));
}

/// Every public entry point of the image module.
#[inline(never)]
pub fn run() {
    keep(record::crc32(bytes()));
    keep(RecordType::of_magic(o([0; 4])).map(RecordType::magic));
    match Image::parse(bytes()) {
        Ok(img) => inspect(&img),
        Err(e) => keep(e),
    }
    match Image::parse_prefix(bytes()) {
        Ok((img, rest)) => {
            inspect(&img);
            keep(rest);
            keep(slots::ActiveCalibration::from_image(&img));
        }
        Err(e) => keep(e),
    }

    let cal = crate::f32_path::calibration();
    let info = o(ImageInfo { serial: o("unit"), calibrated_at: o(0), sequence: o(1) });
    let extra = [o(Section { kind: o(0x8100), payload: bytes() })];
    keep(image::encoded_len(&extra));
    let mut buf = [0u8; 2048];
    keep(image::write(o(&mut buf[..]), &info, &cal));
    keep(image::write_with_sections(o(&mut buf[..]), &info, &cal, &extra));
    crate::fixed_path::with_calibration(|fixed| {
        let mut buf = [0u8; 2048];
        keep(image::encoded_len_with_fixed(&cal, Some(&fixed), &extra));
        keep(image::write_with_fixed(o(&mut buf[..]), &info, &cal, Some(&fixed), &extra));
        let sensor = crate::sensors::sensor();
        let contents =
            image::Contents { calibration: &cal, sensor: Some(&sensor), fixed: Some(&fixed), extra: &extra };
        keep(image::encoded_len_of(&contents));
        keep(image::write_contents(o(&mut buf[..]), &info, &contents));
    });

    // The layout's descriptions (what the C header and the docs are generated from).
    for f in layout::header::FIELDS.iter().chain(layout::trailer::FIELDS) {
        let f = o(*f);
        keep((f.size(), f.end(), f.kind.size(), f.kind.type_name()));
    }
    for t in layout::fixed::TABLES {
        let t = o(*t);
        keep((t.elem.size(), t.elem.type_name()));
    }

    let (a, b) = (bytes(), bytes());
    let selection = slots::select(a, b);
    let active = slots::ActiveCalibration::from_selection(&selection);
    keep((active.is_calibrated(), active.calibration()));
    keep(active.correct(o(0), o(0.0)));
    if let Ok(s) = &selection {
        keep(s.slot.other());
    }
    keep(selection);
    let mut storage = DefaultFixedStorage::new();
    keep(slots::select_fixed(a, b, &mut storage).map(|(s, fixed)| (s, fixed.correct(o(0), o(0)))));
    keep(slots::next_write(a, b));

    // The shared A/B rule of every record, on images.
    let shared = record::slots::select::<Image<'_>>(a, b, o(None));
    keep(shared.map(|s| (s.slot.other(), s.record.sequence())));
    keep(record::slots::select_with::<Image<'_>, _>(a, b, o(Some(0)), Image::parse_prefix));
    keep(record::slots::next_write::<Image<'_>>(a, b, o(None)));
}
