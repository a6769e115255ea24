//! The docs state the layouts right: each format's layout table (`image/LAYOUT.md`, `field/LAYOUT.md`) is
//! rendered from its constants and states every field's offset and size as they are, and every offset or
//! length the module docs of `record/`, `image/` and `field/` state in words is checked against the layout
//! constants. A number of bytes stated in those docs without a check here fails the test, so a new statement
//! cannot drift unnoticed.

use std::string::{String, ToString};
use std::vec::Vec;
use std::{format, vec};

use crate::field::layout as fl;
use crate::image::layout::{self as il, fixed as lf, header, model_f32, ranges, section, sensor, trailer};
use crate::record::layout::{Field, ALIGN, TRAILER_LEN};

// -------------------------------------------------------------------------------------------------------
// The layout tables

/// Renders a table and compares it with the file the docs include (`LOGTRIM_BLESS=1` rewrites the file).
fn check_rendered(file: &str, render: fn(&mut dyn core::fmt::Write) -> core::fmt::Result) -> String {
    let mut table = String::new();
    render(&mut table).unwrap();
    let path = format!("{}/src/{file}", env!("CARGO_MANIFEST_DIR"));
    if std::env::var_os("LOGTRIM_BLESS").is_some() {
        std::fs::write(&path, &table).unwrap();
    }
    let doc = std::fs::read_to_string(&path).unwrap();
    assert_eq!(doc, table, "{file} is stale: run the tests with LOGTRIM_BLESS=1 to regenerate it");
    doc
}

/// A row of a layout table: part, offset (`None` for a table's `+`), size as written, name, type.
struct Row {
    part: String,
    offset: Option<usize>,
    size: String,
    name: String,
    ty: String,
}

/// The rows of a Markdown layout table, read back from its text.
fn rows(doc: &str) -> Vec<Row> {
    doc.lines()
        .skip(2)
        .map(|line| {
            let cells: Vec<&str> = line.trim_matches('|').split(" | ").map(str::trim).collect();
            assert!(cells.len() >= 6, "not a table row: {line}");
            let unquote = |s: &str| s.trim_matches('`').to_string();
            Row {
                part: cells[0].split(" (").next().unwrap().to_string(),
                offset: cells[1].parse().ok(),
                size: cells[2].to_string(),
                name: unquote(cells[3]),
                ty: unquote(cells[4]),
            }
        })
        .collect()
}

/// Checks the rows of one part against its fields: same names in the same order, each at the offset and
/// with the size and type the constants give, back to back, and the part as long as its length constant.
fn check_part(rows: &[&Row], fields: &[Field], len: usize, what: &str) {
    let field_rows: Vec<&&Row> = rows.iter().filter(|r| r.offset.is_some()).collect();
    assert_eq!(field_rows.len(), fields.len(), "{what}: rows");
    let mut at = fields.first().map_or(0, |f| f.offset);
    for (r, f) in field_rows.iter().zip(fields) {
        assert_eq!(r.name, f.name, "{what}");
        assert_eq!(r.offset, Some(f.offset), "{what}.{}: offset", f.name);
        assert_eq!(r.offset, Some(at), "{what}.{}: not right after the field before it", f.name);
        assert_eq!(r.size, f.size().to_string(), "{what}.{}: size", f.name);
        assert_eq!(r.ty, f.kind.display().to_string(), "{what}.{}: type", f.name);
        at += f.size();
    }
    assert_eq!(at, len, "{what}: the fields end at {at}, the part's length is {len}");
}

#[test]
fn the_image_layout_table_states_the_constants() {
    let doc = check_rendered("image/LAYOUT.md", il::write_markdown_table);
    let rows = rows(&doc);
    let lens = [
        ("header", header::LEN),
        ("section header", section::HEADER_LEN),
        ("ranges", ranges::LEN),
        ("model_f32", model_f32::LEN),
        ("sensor", sensor::LEN),
        ("fixed", lf::HEAD_LEN),
        ("trailer", trailer::LEN),
    ];
    assert_eq!(il::PARTS.len(), lens.len());
    for (part, (name, len)) in il::PARTS.iter().zip(lens) {
        assert_eq!(part.name, name);
        let mine: Vec<&Row> = rows.iter().filter(|r| r.part == part.name).collect();
        check_part(&mine, part.fields, len, part.name);
        // The variable tables follow the fields, in order, sized by their count fields.
        let tables: Vec<&&Row> = mine.iter().filter(|r| r.offset.is_none()).collect();
        assert_eq!(tables.len(), part.tables.len(), "{}: tables", part.name);
        for (r, t) in tables.iter().zip(part.tables) {
            assert_eq!(r.name, t.name);
            assert_eq!(r.size, format!("{}·`{}`", t.elem.size(), t.count.name), "{}", t.name);
            assert_eq!(r.ty, format!("{}[{}]", t.elem.type_name(), t.count.name), "{}", t.name);
        }
    }
    assert_eq!(rows.len(), il::PARTS.iter().map(|p| p.fields.len() + p.tables.len()).sum::<usize>());
}

#[test]
fn the_field_records_layout_table_states_the_constants() {
    let doc = check_rendered("field/LAYOUT.md", fl::write_markdown_table);
    let rows = rows(&doc);
    let part = |name: &str| -> Vec<&Row> { rows.iter().filter(|r| r.part == name).collect() };
    check_part(&part("both"), fl::header::FIELDS, fl::header::END, "header");
    for (name, fields, end, len) in [
        ("blank", fl::blank::FIELDS, fl::blank::END, fl::BLANK_LEN),
        ("trim", fl::trim::FIELDS, fl::trim::END, fl::TRIM_LEN),
    ] {
        let mine = part(name);
        let (crc, payload) = mine.split_last().unwrap();
        check_part(payload, fields, end, name);
        // The CRC is the record's last four bytes.
        assert_eq!((crc.name.as_str(), crc.offset), ("crc32", Some(len - TRAILER_LEN)), "{name}");
        assert_eq!(crc.size, TRAILER_LEN.to_string());
    }
    assert_eq!(rows.len(), fl::header::FIELDS.len() + fl::blank::FIELDS.len() + fl::trim::FIELDS.len() + 2);
}

// -------------------------------------------------------------------------------------------------------
// Offsets and lengths stated in words

/// The doc comments (`//!` and `///`) of a source file, as one line of text.
fn doc_text(source: &str) -> String {
    let mut out = String::new();
    for line in source.lines() {
        let t = line.trim_start();
        if let Some(rest) = t.strip_prefix("//!").or_else(|| t.strip_prefix("///")) {
            out.push(' ');
            out.push_str(rest.trim());
        }
    }
    out.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// A number as the docs write it: groups of three digits separated by a space from 1 000 on.
fn grouped(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(' ');
        }
        out.push(c);
    }
    out
}

/// Every place a text states a number of bytes or a byte offset: "N bytes", "N-byte", "byte N" (N with
/// optional space-separated groups of three digits). Returns the byte ranges of the statements.
fn byte_statements(text: &str) -> Vec<core::ops::Range<usize>> {
    let b = text.as_bytes();
    let number_at = |mut i: usize| -> Option<usize> {
        // The end of a number starting at i.
        let start = i;
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        if i == start {
            return None;
        }
        while i + 3 < b.len()
            && b[i] == b' '
            && b[i + 1..i + 4].iter().all(u8::is_ascii_digit)
            && b.get(i + 4).is_none_or(|c| !c.is_ascii_digit())
        {
            i += 4;
        }
        Some(i)
    };
    let mut out = vec![];
    let mut i = 0;
    while i < b.len() {
        let starts_number = b[i].is_ascii_digit() && (i == 0 || !b[i - 1].is_ascii_alphanumeric());
        if starts_number {
            let end = number_at(i).unwrap_or(i + 1);
            let after = &b[end..];
            if after.starts_with(b" bytes") || after.starts_with(b" byte ") || after.starts_with(b"-byte") {
                out.push(i..end);
            }
            i = end;
            continue;
        }
        if b[i..].starts_with(b"byte ") && (i == 0 || !b[i - 1].is_ascii_alphanumeric()) {
            if let Some(end) = number_at(i + 5) {
                out.push(i + 5..end);
                i = end;
                continue;
            }
        }
        i += 1;
    }
    out
}

/// A statement a doc makes: where, its words with `{}` for the number, and the number the constants give.
struct Claim {
    file: &'static str,
    words: &'static str,
    value: usize,
}

fn claim(file: &'static str, words: &'static str, value: usize) -> Claim {
    Claim { file, words, value }
}

/// Every offset and length the module docs state, with the value the layout constants give.
fn claims() -> Vec<Claim> {
    let ranges_payload = header::LEN + section::HEADER_LEN;
    let model_payload = ranges_payload + ranges::LEN + section::HEADER_LEN;
    let crc_at = model_payload + model_f32::LEN;
    // An image with a fixed section of 16 temperature and 40 x̃ knots: 16 + 2 temperature control points,
    // (16 + 2)·(40 + 2) residual entries, the bias-bend and sensitivity tables only where they are used,
    // a 128-segment sensor table of 131 control points.
    let (nt, nx, sensor) = (16 + 2, 40 + 2, 128 + 3);
    let fixed_image = |per_temperature_tables: usize| {
        let payload = lf::HEAD_LEN + 4 * per_temperature_tables * nt + 2 * nt * nx;
        il::F32_IMAGE_LEN + section::HEADER_LEN + payload.next_multiple_of(ALIGN)
    };
    let max_payload = usize::from(u16::MAX) & !(ALIGN - 1);
    vec![
        claim("image/mod.rs", "header ({} bytes)", header::LEN),
        claim("image/mod.rs", "CRC-32 ({} bytes)", trailer::LEN),
        claim("image/mod.rs", "serial ({} bytes of printable ASCII", header::SERIAL.size()),
        claim("image/mod.rs", "[`layout::F32_IMAGE_LEN`] = {} bytes", il::F32_IMAGE_LEN),
        claim("image/mod.rs", "it is {} bytes", fixed_image(2)),
        claim("image/mod.rs", "{} with the bias bend and the sensitivity limit", fixed_image(4)),
        claim("image/mod.rs", "and {} bytes more with a 128-segment", 4 * sensor),
        claim("image/mod.rs", "the *ranges* payload starts at byte {}", ranges_payload),
        claim("image/mod.rs", "the *model_f32* payload at byte {}", model_payload),
        claim("image/mod.rs", "CRC at byte {}", crc_at),
        claim("image/mod.rs", "section's header at byte {}", crc_at),
        claim("image/mod.rs", "its payload at byte {}", crc_at + section::HEADER_LEN),
        claim("image/mod.rs", "{} bytes more with the sensor section", il::SENSOR_SECTION_LEN),
        claim("image/mod.rs", "the *sensor* section, when there is one, at byte {}", crc_at),
        claim("image/mod.rs", "everything after it {} bytes later", il::SENSOR_SECTION_LEN),
        claim("image/mod.rs", "are {}-byte multiples", ALIGN),
        claim("image/error.rs", "longer than {} bytes", header::SERIAL.size()),
        claim("image/error.rs", "a multiple of {} bytes", ALIGN),
        claim("image/error.rs", "a section can hold ({} bytes)", max_payload),
        claim("image/write.rs", "a multiple of {} bytes", ALIGN),
        claim("image/fixed.rs", "padding to {} bytes", ALIGN),
        claim("image/layout.rs", "start {}-byte aligned", ALIGN),
        claim("image/layout.rs", "starts {}-byte aligned", ALIGN),
        claim("field/mod.rs", "[`layout::BLANK_LEN`] = {} bytes", fl::BLANK_LEN),
        claim("field/mod.rs", "[`layout::TRIM_LEN`] = {} bytes", fl::TRIM_LEN),
        claim("field/mod.rs", "a {}-byte header", fl::header::END),
        claim("field/layout.rs", "share a {}-byte header", fl::header::END),
        claim("record/mod.rs", "magic ({} bytes)", crate::record::MAGIC.size()),
        claim("record/mod.rs", "**Magic** ({} bytes)", crate::record::MAGIC.size()),
        claim("record/mod.rs", "a multiple of {} bytes", ALIGN),
        claim("record/layout.rs", "{} bytes before the end", TRAILER_LEN),
    ]
}

/// The sources whose module docs are checked.
const SOURCES: &[(&str, &str)] = &[
    ("record/mod.rs", include_str!("mod.rs")),
    ("record/layout.rs", include_str!("layout.rs")),
    ("record/error.rs", include_str!("error.rs")),
    ("record/frame.rs", include_str!("frame.rs")),
    ("record/slots.rs", include_str!("slots.rs")),
    ("image/mod.rs", include_str!("../image/mod.rs")),
    ("image/layout.rs", include_str!("../image/layout.rs")),
    ("image/error.rs", include_str!("../image/error.rs")),
    ("image/parse.rs", include_str!("../image/parse.rs")),
    ("image/write.rs", include_str!("../image/write.rs")),
    ("image/fixed.rs", include_str!("../image/fixed.rs")),
    ("image/slots.rs", include_str!("../image/slots.rs")),
    ("field/mod.rs", include_str!("../field/mod.rs")),
    ("field/layout.rs", include_str!("../field/layout.rs")),
    ("field/header.rs", include_str!("../field/header.rs")),
    ("field/blank.rs", include_str!("../field/blank.rs")),
    ("field/trim.rs", include_str!("../field/trim.rs")),
    ("field/slots.rs", include_str!("../field/slots.rs")),
    ("field/layers.rs", include_str!("../field/layers.rs")),
    ("field/channels.rs", include_str!("../field/channels.rs")),
];

#[test]
fn every_offset_and_length_the_docs_state_is_the_layout_s() {
    let claims = claims();
    for c in &claims {
        assert!(SOURCES.iter().any(|(f, _)| *f == c.file), "no source {}", c.file);
    }
    for (file, source) in SOURCES {
        let text = doc_text(source);
        let mut checked: Vec<core::ops::Range<usize>> = vec![];
        for c in claims.iter().filter(|c| c.file == *file) {
            let words = c.words.replace("{}", &grouped(c.value));
            let found: Vec<usize> = text.match_indices(&words).map(|(i, _)| i).collect();
            assert!(!found.is_empty(), "{file}: the docs should say \"{words}\" (from the layout constants)");
            checked.extend(found.into_iter().map(|i| i..i + words.len()));
        }
        for s in byte_statements(&text) {
            let (mut from, mut to) = (s.start.saturating_sub(40), (s.end + 20).min(text.len()));
            while !text.is_char_boundary(from) {
                from -= 1;
            }
            while !text.is_char_boundary(to) {
                to += 1;
            }
            let context = &text[from..to];
            assert!(
                checked.iter().any(|c| c.start <= s.start && s.end <= c.end),
                "{file}: \"…{context}…\" states {} bytes or a byte offset without a check here",
                &text[s.clone()]
            );
        }
    }
}

#[test]
fn the_statement_finder_finds_statements() {
    let text = "a 24-byte header, at byte 44 and 65 532 bytes; 16 knots, 2 168 with, byte order";
    let found: Vec<&str> = byte_statements(text).into_iter().map(|r| &text[r]).collect();
    assert_eq!(found, ["24", "44", "65 532"]);
    assert_eq!(grouped(65_532), "65 532");
    assert_eq!(grouped(268), "268");
    assert_eq!(grouped(2168), "2 168");
}
