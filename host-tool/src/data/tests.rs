use super::*;

fn cal(text: &str) -> Result<CalData, DataError> {
    read_calibration(text.as_bytes(), "cal.csv", &ReadOptions::default())
}

fn readings(text: &str) -> Result<Readings, DataError> {
    read_readings(text.as_bytes(), "readings.csv", &ReadOptions::default())
}

/// The value error inside, or a panic naming what came instead.
fn value_err(r: Result<CalData, DataError>) -> RowError {
    match r {
        Err(DataError::Value(e)) => *e,
        other => panic!("expected a value error, got {other:?}"),
    }
}

#[test]
fn columns_in_any_order_extra_columns_ignored() {
    let text = "\u{feff}note, Ratio ,temp_c,code,weight,unit\n\
                first,0.5,25.0,30000,2,SN-1\n\
                \n\
                second , 1e-3 , -20.5 , 12 , 0.5 , SN-2\n\
                third,100,85,65535,1,SN-1\n";
    let d = cal(text).unwrap();
    assert_eq!(d.rows.len(), 3);
    assert_eq!(d.columns.code, 3);
    assert_eq!(d.columns.temperature_kind, TemperatureColumn::Celsius);
    assert_eq!(d.units, vec!["SN-1".to_string(), "SN-2".to_string()]);
    let r = d.rows[1];
    assert_eq!((r.line, r.code, r.temp_c, r.ratio, r.unit, r.weight), (4, 12, -20.5, 1e-3, Some(1), 0.5));
    assert_eq!((d.rows[2].line, d.rows[2].code, d.rows[2].unit), (5, 65535, Some(0)));
    assert!(d.skipped.is_empty());
}

#[test]
fn weight_defaults_to_one_and_unit_to_none() {
    let d = cal("code,temp_c,ratio\n100,20,1\n").unwrap();
    assert_eq!((d.rows[0].weight, d.rows[0].unit), (1.0, None));
    assert!(d.units.is_empty());
}

#[test]
fn temp_code_goes_through_the_converter() {
    let conv = |c: u32| -> Result<f64, logtrim::Error> {
        if c == 0 {
            Err(logtrim::Error::Sensor(logtrim::error::SensorFault::Short))
        } else {
            Ok(f64::from(c) / 100.0 - 50.0)
        }
    };
    let opts = ReadOptions { temp_converter: Some(&conv), ..ReadOptions::default() };
    let d = read_calibration("code,temp_code,ratio\n100,7500,1\n".as_bytes(), "cal.csv", &opts).unwrap();
    assert_eq!(d.rows[0].temp_c, 25.0);
    assert_eq!(d.columns.temperature_kind, TemperatureColumn::Code);
    // In calibration data a refused code is an error naming the sensor's verdict ...
    let e = value_err(read_calibration("code,temp_code,ratio\n100,0,1\n".as_bytes(), "cal.csv", &opts));
    assert!(matches!(e.problem, Problem::Conversion(logtrim::Error::Sensor(_))), "{e}");
    assert!(e.to_string().contains("short circuit"), "{e}");
    // ... in readings it is that row's outcome.
    let r = read_readings("code,temp_code\n100,0\n100,7600\n".as_bytes(), "r.csv", &opts).unwrap();
    assert!(matches!(r.rows[0].temp_c, Err(logtrim::Error::Sensor(_))));
    assert_eq!(r.rows[1].temp_c, Ok(26.0));
}

#[test]
fn readings_keep_every_column_and_value_in_order() {
    let r = readings("id,temp_c,code,comment\n7,21.5,400,\"a, b\"\n8,22,401,x\n").unwrap();
    assert_eq!(r.headers, vec!["id", "temp_c", "code", "comment"]);
    assert_eq!(r.rows[0].record.iter().collect::<Vec<_>>(), vec![&b"7"[..], b"21.5", b"400", b"a, b"]);
    assert_eq!((r.rows[1].code, r.rows[1].temp_c, r.rows[1].ratio), (401, Ok(22.0), None));
    let r = readings("code,temp_c,ratio\n400,21.5,0.25\n").unwrap();
    assert_eq!(r.rows[0].ratio, Some(0.25));
}

#[test]
fn error_non_positive_ratio() {
    let e = value_err(cal("code,temp_c,ratio\n100,25,1\n100,25,-0.5\n"));
    assert_eq!((e.line, e.column, e.problem.clone()), (3, 3, Problem::NotPositive));
    let s = e.to_string();
    for part in
        ["cal.csv", "line 3", "column 3", "ratio", "\"-0.5\"", "not positive", "positive finite ratio"]
    {
        assert!(s.contains(part), "{part:?} missing from {s}");
    }
    assert_eq!(value_err(cal("code,temp_c,ratio\n100,25,0\n")).problem, Problem::NotPositive);
}

#[test]
fn error_non_numeric_ratio() {
    let e = value_err(cal("code,temp_c,ratio\n100,25,half\n"));
    assert_eq!((e.column, e.value.as_str(), e.problem), (3, "half", Problem::NotNumber));
}

#[test]
fn error_non_finite_ratio() {
    assert_eq!(value_err(cal("code,temp_c,ratio\n100,25,inf\n")).problem, Problem::NotFinite);
}

#[test]
fn error_code_outside_the_adc_range() {
    let e = value_err(cal("code,temp_c,ratio\n65536,25,1\n"));
    assert_eq!(e.problem, Problem::CodeOutOfRange { max: 65535 });
    assert!(e.to_string().contains("0..=65535 (16-bit"), "{e}");
    assert_eq!(
        value_err(cal("code,temp_c,ratio\n-3,25,1\n")).problem,
        Problem::CodeOutOfRange { max: 65535 }
    );
    let huge = "code,temp_c,ratio\n123456789012345678901234567890,25,1\n";
    assert_eq!(value_err(cal(huge)).problem, Problem::CodeOutOfRange { max: 65535 });
}

#[test]
fn error_code_outside_a_12_bit_adc() {
    let opts = ReadOptions { adc_bits: 12, ..ReadOptions::default() };
    let ok = read_calibration("code,temp_c,ratio\n4095,25,1\n".as_bytes(), "c", &opts).unwrap();
    assert_eq!(ok.rows[0].code, 4095);
    let e = read_calibration("code,temp_c,ratio\n4096,25,1\n".as_bytes(), "c", &opts).unwrap_err();
    assert!(
        matches!(e, DataError::Value(ref v) if v.problem == Problem::CodeOutOfRange { max: 4095 }),
        "{e}"
    );
}

#[test]
fn error_code_not_an_integer() {
    for bad in ["12.5", "1e3", "0x10", "twelve"] {
        let e = value_err(cal(&format!("code,temp_c,ratio\n{bad},25,1\n")));
        assert_eq!((e.column, e.problem.clone()), (1, Problem::NotInteger), "{bad}");
    }
}

#[test]
fn error_non_finite_temperature() {
    for bad in ["NaN", "inf", "-infinity"] {
        let e = value_err(cal(&format!("code,temp_c,ratio\n100,{bad},1\n")));
        assert_eq!((e.column, e.problem.clone()), (2, Problem::NotFinite), "{bad}");
        assert!(e.to_string().contains("finite temperature in °C"));
    }
}

#[test]
fn error_non_numeric_temperature() {
    assert_eq!(value_err(cal("code,temp_c,ratio\n100,warm,1\n")).problem, Problem::NotNumber);
}

#[test]
fn error_empty_value() {
    let e = value_err(cal("code,temp_c,ratio\n100,,1\n"));
    assert_eq!((e.column, e.problem), (2, Problem::Empty));
}

#[test]
fn error_bad_weight() {
    let e = value_err(cal("code,temp_c,ratio,weight\n100,25,1,0\n"));
    assert_eq!((e.column, e.problem.clone()), (4, Problem::NotPositive));
    assert!(e.to_string().contains("positive finite weight"));
}

#[test]
fn error_empty_unit_serial() {
    let e = value_err(cal("code,temp_c,ratio,unit\n100,25,1, \n"));
    assert_eq!((e.column, e.problem), (4, Problem::Empty));
}

#[test]
fn error_row_with_the_wrong_number_of_fields() {
    let e = value_err(cal("code,temp_c,ratio\n100,25\n"));
    assert_eq!((e.line, e.column), (2, 0));
    assert_eq!(e.problem, Problem::FieldCount { expected: 3, found: 2 });
    assert!(e.to_string().contains("line 2: the row has 2 fields where the header has 3"), "{e}");
}

#[test]
fn error_empty_file() {
    for text in ["", "\n\n"] {
        let e = cal(text).unwrap_err();
        assert!(matches!(e, DataError::Empty { .. }), "{e}");
        assert!(e.to_string().contains("cal.csv: the file is empty"), "{e}");
    }
}

#[test]
fn error_header_without_data_rows() {
    let e = cal("code,temp_c,ratio\n").unwrap_err();
    assert!(matches!(e, DataError::NoRows { .. }), "{e}");
    assert!(matches!(readings("code,temp_c\n\n"), Err(DataError::NoRows { .. })));
}

#[test]
fn error_missing_column() {
    let e = cal("temp_c,ratio\n25,1\n").unwrap_err();
    assert!(matches!(e, DataError::MissingColumn { column: "code", .. }), "{e}");
    assert!(e.to_string().contains("the header has: temp_c,ratio"), "{e}");
    assert!(matches!(cal("code,ratio\n1,1\n"), Err(DataError::MissingColumn { column: "temp_c", .. })));
    assert!(matches!(cal("code,temp_c\n1,1\n"), Err(DataError::MissingColumn { column: "ratio", .. })));
    // Readings do not need a ratio.
    assert!(readings("code,temp_c\n1,1\n").is_ok());
}

#[test]
fn error_duplicate_column() {
    let e = cal("code,temp_c,ratio,CODE\n1,2,3,4\n").unwrap_err();
    match &e {
        DataError::DuplicateColumn { name, first, second, .. } => {
            assert_eq!((name.as_str(), *first, *second), ("CODE", 1, 4))
        }
        other => panic!("{other:?}"),
    }
    // Duplicates among columns the reader does not use are left alone.
    assert!(cal("code,temp_c,ratio,x,x\n1,2,3,4,5\n").is_ok());
}

#[test]
fn error_two_temperature_columns() {
    let e = cal("code,temp_c,temp_code,ratio\n1,2,3,4\n").unwrap_err();
    assert!(matches!(e, DataError::TwoTemperatureColumns { celsius: 2, code: 3, .. }), "{e}");
}

#[test]
fn error_temp_code_without_a_converter() {
    let e = cal("code,temp_code,ratio\n1,2,3\n").unwrap_err();
    assert!(matches!(e, DataError::NoTemperatureConverter { column: 2, .. }), "{e}");
}

#[test]
fn error_unusable_adc_bits() {
    let opts = ReadOptions { adc_bits: 0, ..ReadOptions::default() };
    let e = read_calibration("code,temp_c,ratio\n1,2,3\n".as_bytes(), "c", &opts).unwrap_err();
    assert!(matches!(e, DataError::AdcBits { bits: 0 }), "{e}");
}

#[test]
fn error_missing_file() {
    let e =
        read_calibration_file(Path::new("/nonexistent/dir/cal.csv"), &ReadOptions::default()).unwrap_err();
    assert!(
        matches!(e, DataError::File(crate::file_error::FileError::Io { .. }))
            && e.to_string().contains("/nonexistent/dir/cal.csv"),
        "{e}"
    );
}

#[test]
fn skipping_bad_rows_reports_which_and_why() {
    let text = "code,temp_c,ratio\n100,25,1\n100,25,-1\n70000,25,1\n101,26,2\n100,nan,1\n";
    let opts = ReadOptions { skip_bad_rows: true, ..ReadOptions::default() };
    let d = read_calibration(text.as_bytes(), "cal.csv", &opts).unwrap();
    assert_eq!(d.rows.iter().map(|r| r.line).collect::<Vec<_>>(), vec![2, 5]);
    let why: Vec<_> = d.skipped.iter().map(|e| (e.line, e.problem.clone())).collect();
    assert_eq!(
        why,
        vec![(3, Problem::NotPositive), (4, Problem::CodeOutOfRange { max: 65535 }), (6, Problem::NotFinite)]
    );
    // Every row bad is still an error.
    let e = read_calibration("code,temp_c,ratio\nx,1,1\n1,1,y\n".as_bytes(), "c", &opts).unwrap_err();
    assert!(matches!(e, DataError::NoGoodRows { count: 2, .. }), "{e}");
}

#[test]
fn line_numbers_count_blank_lines_crlf_and_quoted_newlines() {
    let text = "code,temp_c,ratio,note\r\n\r\n1,2,3,\"two\nlines\"\r\n\n\n4,5,-6,x\n";
    let e = value_err(cal(text));
    assert_eq!(e.line, 7, "{e}");
    let opts = ReadOptions { skip_bad_rows: true, ..ReadOptions::default() };
    let d = read_calibration(text.as_bytes(), "c", &opts).unwrap();
    assert_eq!(d.rows[0].line, 3);
    assert_eq!(d.skipped[0].line, 7);
}

#[test]
fn values_that_cannot_be_physical_are_refused_where_they_are_read() {
    // Ratios of 1e308 and 1e-310 once reached the fit's solver; they are refused with their line and
    // column, as are temperatures below absolute zero or above 1000 °C and absurd weights.
    for (text, column, name) in [
        ("code,temp_c,ratio\n100,25,1\n100,25,1e308\n", 3, "ratio"),
        ("code,temp_c,ratio\n100,25,1\n100,25,1.7e308\n", 3, "ratio"),
        ("code,temp_c,ratio\n100,25,1\n100,25,1e-310\n", 3, "ratio"),
        ("code,temp_c,ratio\n100,25,1\n100,-300,1\n", 2, "temp_c"),
        ("code,temp_c,ratio\n100,25,1\n100,1e6,1\n", 2, "temp_c"),
        ("code,temp_c,ratio,weight\n100,25,1,1\n100,25,1,1e300\n", 4, "weight"),
    ] {
        let e = value_err(cal(text));
        assert_eq!((e.line, e.column, e.name.as_str()), (3, column, name), "{e}");
        assert!(matches!(e.problem, Problem::Implausible { .. }), "{e}");
        assert!(e.to_string().contains("plausible span"), "{e}");
    }
    // The ends of the spans are accepted.
    assert!(cal("code,temp_c,ratio\n100,-273.15,1e-30\n100,1000,1e30\n").is_ok());
    // Readings too: a temperature the sensor converts to 2000 °C is no reading.
    let conv = |_: u32| -> Result<f64, logtrim::Error> { Ok(2000.0) };
    let opts = ReadOptions { temp_converter: Some(&conv), ..ReadOptions::default() };
    let e = read_readings("code,temp_code\n100,5\n".as_bytes(), "r.csv", &opts).unwrap_err();
    assert!(e.to_string().contains("plausible span"), "{e}");
}

#[test]
fn utf16_and_binary_files_are_refused_by_name_and_never_echoed() {
    let utf16: Vec<u8> = [0xFF, 0xFE]
        .into_iter()
        .chain("code,temp_c\n1,2\n".encode_utf16().flat_map(|u| u.to_le_bytes()))
        .collect();
    let e = read_readings(&utf16[..], "u.csv", &ReadOptions::default()).unwrap_err().to_string();
    assert!(e.contains("UTF-16") && !e.contains('\0'), "{e}");
    let no_bom: Vec<u8> = "code,temp_c\n1,2\n".encode_utf16().flat_map(|u| u.to_le_bytes()).collect();
    let e = read_readings(&no_bom[..], "u.csv", &ReadOptions::default()).unwrap_err().to_string();
    assert!(e.contains("binary") && !e.contains('\0'), "{e}");
    // Control bytes in a header are escaped in the message.
    let e = read_readings("co\x1bde,\x07temp\n1,2\n".as_bytes(), "c.csv", &ReadOptions::default())
        .unwrap_err()
        .to_string();
    assert!(!e.chars().any(|c| c.is_control()), "{e:?}");
    assert!(e.contains("\\u{1b}"), "{e}");
}

#[test]
fn an_endless_line_is_refused_with_memory_bounded() {
    // /dev/zero as input once grew to ~4 GB: a stretch of more than 1 MiB without a row is refused.
    let zeros = std::io::repeat(b'7').take(64 << 20);
    let e = read_readings(zeros, "endless", &ReadOptions::default()).unwrap_err().to_string();
    assert!(e.contains("without the end of a row"), "{e}");
    let head = "code,temp_c,ratio\n".as_bytes().chain(std::io::repeat(b'1').take(8 << 20));
    let e = read_calibration(head, "endless", &ReadOptions::default()).unwrap_err().to_string();
    assert!(e.contains("line 2") && e.contains("without the end of a row"), "{e}");
}

#[test]
fn a_stream_of_readings_gives_the_rows_of_the_whole_file_read() {
    let text = "id,code,temp_c\n\n1,100,25\n2,x,25\n\n\n3,300,26\n";
    let opts = ReadOptions { skip_bad_rows: true, ..ReadOptions::default() };
    let whole = read_readings(text.as_bytes(), "s.csv", &opts).unwrap();
    let mut stream = ReadingsStream::open(text.as_bytes(), "s.csv", &opts).unwrap();
    assert_eq!(stream.headers(), whole.headers.as_slice());
    let mut rows = Vec::new();
    while let Some(r) = stream.next_row().unwrap() {
        rows.push((r.line, r.code, r.record));
    }
    let want: Vec<_> = whole.rows.iter().map(|r| (r.line, r.code, r.record.clone())).collect();
    assert_eq!(rows, want);
    assert_eq!(rows.iter().map(|r| r.0).collect::<Vec<_>>(), [3, 7]);
    assert_eq!(stream.finish().unwrap(), whole.skipped);
}
