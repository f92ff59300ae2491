//! The session reader against a catalogue of malformed files (each with the exact error and line
//! it must give), valid corner cases, and a writer -> reader round trip (proptest).
//!
//! The format is the project's own (session-format.md of the shared specification); there is no
//! outside reference for it. The decimal round trip relies on Rust's documented guarantee that
//! `Display`/`LowerExp` of a float print the shortest digits that parse back to the same value.

use lumisorb::session::{
    lines, Event, Field, Led, Metadata, MetadataKey, Model, NumberError, ReadError,
    ReadErrorKind as K, Role, Row, SessionReader, SessionWriter, WriteError,
};
use proptest::prelude::*;

const PRE: &str = "# lumisorb-session: 1\n# full_scale: 4095\n";
const HDR: &str = "t_ms,channel,nm,led,role,id,conc,signal,reference\n";

/// Reads a whole file; returns the rows read or the first error.
fn read(bytes: &[u8]) -> Result<(SessionReader, usize), ReadError> {
    let mut r = SessionReader::new();
    let mut rows = 0;
    for line in lines(bytes) {
        if let Event::Row(_) = r.feed(line)? {
            rows += 1;
        }
    }
    r.finish()?;
    Ok((r, rows))
}

/// A file made of the standard preamble, header and the given rows.
fn with_rows(rows: &str) -> String {
    format!("{PRE}{HDR}{rows}")
}

#[test]
fn a_valid_file_reads() {
    let file = format!(
        "{PRE}# unit: mg/L\n# path_mm: 10\n# analyte: blue complex\n# model: quadratic\n\
         # a free comment: with a colon\n{HDR}\
         0,red,630,off,blank,B1,,10,20\n1,red,630,on,blank,B1,,4000,3000\n\n\
         # note between rows\n\
         2,red,630,on,standard,S1,0.5,3000,3001\n2,red,630,on,standard,S1,0.5,3002,3003\n\
         3,red,,on,sample,X,,1500,\n4,red,,off,check,C,1e-3,11,\n"
    );
    let (r, rows) = read(file.as_bytes()).unwrap();
    assert_eq!(rows, 6);
    let m = r.metadata().unwrap();
    assert_eq!(m.full_scale, 4095);
    assert_eq!(m.unit.as_deref(), Some("mg/L"));
    assert_eq!(m.path_mm, Some(10.0));
    assert_eq!(m.analyte.as_deref(), Some("blue complex"));
    assert_eq!(m.model(), Model::Quadratic);
}

#[test]
fn crlf_bom_and_final_line_without_newline() {
    let file = "\u{FEFF}# lumisorb-session: 1\r\n# full_scale: 10\r\nt_ms,channel,nm,led,role,id,conc,signal,reference\r\n0,a,,on,blank,b,,10,";
    let (r, rows) = read(file.as_bytes()).unwrap();
    assert_eq!(rows, 1);
    assert_eq!(r.metadata().unwrap().model(), Model::Linear);
}

#[test]
fn rows_are_returned_exactly() {
    let mut r = SessionReader::new();
    for l in lines(format!("{PRE}{HDR}").as_bytes()) {
        r.feed(l).unwrap();
    }
    let ev = r.feed_str("17,ir,880,on,check,C-2,0.125,4095,0").unwrap();
    assert_eq!(
        ev,
        Event::Row(Row {
            t_ms: 17,
            channel: "ir",
            nm: Some(880),
            led: Led::On,
            role: Role::Check,
            id: "C-2",
            conc: Some(0.125),
            signal: 4095,
            reference: Some(0),
        })
    );
    assert_eq!(r.feed_str("# x").unwrap(), Event::Comment("x"));
    assert_eq!(r.feed_str("   ").unwrap(), Event::Empty);
}

/// One malformed file: what it shows, the file, the line of the error and its kind.
struct Bad {
    what: &'static str,
    file: Vec<u8>,
    line: u32,
    kind: K,
}

fn bad(what: &'static str, file: impl Into<Vec<u8>>, line: u32, kind: K) -> Bad {
    Bad {
        what,
        file: file.into(),
        line,
        kind,
    }
}

fn catalogue() -> Vec<Bad> {
    let ok = "0,red,630,off,blank,B1,,10,\n";
    vec![
        bad("empty file", "", 1, K::MissingHeader),
        bad("only comments", "# hello\n# world\n", 3, K::MissingHeader),
        bad(
            "missing version",
            format!("# full_scale: 10\n{HDR}"),
            2,
            K::MissingVersion,
        ),
        bad(
            "unknown version",
            "# lumisorb-session: 2\n",
            1,
            K::UnknownVersion { found: 2 },
        ),
        bad(
            "version not a number",
            "# lumisorb-session: one\n",
            1,
            K::BadVersion,
        ),
        bad(
            "missing full_scale",
            format!("# lumisorb-session: 1\n{HDR}"),
            2,
            K::MissingFullScale,
        ),
        bad(
            "full_scale zero",
            "# lumisorb-session: 1\n# full_scale: 0\n",
            2,
            K::BadFullScale,
        ),
        bad(
            "full_scale above 24 bits",
            "# lumisorb-session: 1\n# full_scale: 16777216\n",
            2,
            K::BadFullScale,
        ),
        bad(
            "full_scale not integer",
            "# lumisorb-session: 1\n# full_scale: 4095.0\n",
            2,
            K::BadFullScale,
        ),
        bad(
            "duplicate metadata",
            format!("{PRE}# full_scale: 100\n"),
            3,
            K::DuplicateMetadata {
                key: MetadataKey::FullScale,
            },
        ),
        bad(
            "unknown model",
            format!("{PRE}# model: cubic\n"),
            3,
            K::UnknownModel,
        ),
        bad(
            "path_mm zero",
            format!("{PRE}# path_mm: 0\n"),
            3,
            K::BadPathLength,
        ),
        bad(
            "path_mm not a number",
            format!("{PRE}# path_mm: ten\n"),
            3,
            K::BadPathLength,
        ),
        bad(
            "path_mm infinite",
            format!("{PRE}# path_mm: 1e40\n"),
            3,
            K::BadPathLength,
        ),
        bad(
            "unit too long",
            format!("{PRE}# unit: {}\n", "u".repeat(17)),
            3,
            K::TextTooLong {
                field: Field::Unit,
                max: 16,
            },
        ),
        bad(
            "control character in a metadata text",
            format!("{PRE}# analyte: dye\rx\n"),
            3,
            K::ControlCharacter {
                field: Field::Analyte,
            },
        ),
        bad(
            "control character in an id",
            with_rows("0,red,630,off,blank,B\u{0}1,,10,\n"),
            4,
            K::ControlCharacter { field: Field::Id },
        ),
        bad(
            "metadata after header",
            format!("{PRE}{HDR}{ok}# unit: mg/L\n"),
            5,
            K::MetadataAfterHeader {
                key: MetadataKey::Unit,
            },
        ),
        bad(
            "bad header (renamed column)",
            format!("{PRE}t_ms,chan,nm,led,role,id,conc,signal,reference\n"),
            3,
            K::BadHeader,
        ),
        bad(
            "bad header (data row instead)",
            format!("{PRE}{ok}"),
            3,
            K::BadHeader,
        ),
        bad(
            "header only, no reads",
            format!("{PRE}{HDR}"),
            4,
            K::NoReads,
        ),
        bad(
            "too few columns",
            with_rows("0,red,630,off,blank,B1,,10\n"),
            4,
            K::WrongColumnCount { found: 8 },
        ),
        bad(
            "too many columns",
            with_rows("0,red,630,off,blank,B1,,10,,\n"),
            4,
            K::WrongColumnCount { found: 10 },
        ),
        bad(
            "non-integer t_ms",
            with_rows("0.5,red,630,off,blank,B1,,10,\n"),
            4,
            K::BadTime(NumberError::NotInteger),
        ),
        bad(
            "empty t_ms",
            with_rows(",red,630,off,blank,B1,,10,\n"),
            4,
            K::BadTime(NumberError::Empty),
        ),
        bad(
            "t_ms overflow",
            with_rows("4294967296,red,630,off,blank,B1,,10,\n"),
            4,
            K::BadTime(NumberError::TooLarge),
        ),
        bad(
            "decreasing t_ms",
            with_rows("5,red,630,off,blank,B1,,10,\n4,red,630,off,blank,B1,,10,\n"),
            5,
            K::TimeDecreasing {
                previous: 5,
                found: 4,
            },
        ),
        bad(
            "empty channel",
            with_rows("0,,630,off,blank,B1,,10,\n"),
            4,
            K::EmptyChannel,
        ),
        bad(
            "channel too long",
            with_rows(&format!("0,{},630,off,blank,B1,,10,\n", "c".repeat(33))),
            4,
            K::TextTooLong {
                field: Field::Channel,
                max: 32,
            },
        ),
        bad(
            "nm not integer",
            with_rows("0,red,63x,off,blank,B1,,10,\n"),
            4,
            K::BadWavelength(NumberError::NotInteger),
        ),
        bad(
            "nm zero",
            with_rows("0,red,0,off,blank,B1,,10,\n"),
            4,
            K::BadWavelength(NumberError::OutOfRange),
        ),
        bad(
            "nm above u16",
            with_rows("0,red,70000,off,blank,B1,,10,\n"),
            4,
            K::BadWavelength(NumberError::TooLarge),
        ),
        bad(
            "nm changes inside a measurement",
            with_rows("0,red,630,off,blank,B1,,10,\n1,red,631,on,blank,B1,,10,\n"),
            5,
            K::WavelengthChanged,
        ),
        bad(
            "bad led",
            with_rows("0,red,630,ON,blank,B1,,10,\n"),
            4,
            K::BadLed,
        ),
        bad(
            "bad role",
            with_rows("0,red,630,off,blanc,B1,,10,\n"),
            4,
            K::BadRole,
        ),
        bad(
            "empty id",
            with_rows("0,red,630,off,blank,,,10,\n"),
            4,
            K::EmptyId,
        ),
        bad(
            "id too long",
            with_rows(&format!("0,red,630,off,blank,{},,10,\n", "i".repeat(33))),
            4,
            K::TextTooLong {
                field: Field::Id,
                max: 32,
            },
        ),
        bad(
            "conc on a sample row",
            with_rows("0,red,630,on,sample,X,0.5,10,\n"),
            4,
            K::UnexpectedConcentration,
        ),
        bad(
            "conc on a blank row",
            with_rows("0,red,630,on,blank,B,0,10,\n"),
            4,
            K::UnexpectedConcentration,
        ),
        bad(
            "missing conc on a standard",
            with_rows("0,red,630,on,standard,S1,,10,\n"),
            4,
            K::MissingConcentration,
        ),
        bad(
            "missing conc on a check",
            with_rows("0,red,630,on,check,C1,,10,\n"),
            4,
            K::MissingConcentration,
        ),
        bad(
            "conc not a number",
            with_rows("0,red,630,on,standard,S1,half,10,\n"),
            4,
            K::BadConcentration,
        ),
        bad(
            "conc NaN",
            with_rows("0,red,630,on,standard,S1,NaN,10,\n"),
            4,
            K::BadConcentration,
        ),
        bad(
            "negative conc",
            with_rows("0,red,630,on,standard,S1,-0.5,10,\n"),
            4,
            K::NegativeConcentration,
        ),
        bad(
            "conc changes inside a measurement",
            with_rows("0,red,630,on,standard,S1,0.5,10,\n1,red,630,on,standard,S1,0.6,10,\n"),
            5,
            K::ConcentrationChanged,
        ),
        bad(
            "negative signal",
            with_rows("0,red,630,off,blank,B1,,-3,\n"),
            4,
            K::BadSignal(NumberError::Negative),
        ),
        bad(
            "non-integer signal",
            with_rows("0,red,630,off,blank,B1,,10.5,\n"),
            4,
            K::BadSignal(NumberError::NotInteger),
        ),
        bad(
            "empty signal",
            with_rows("0,red,630,off,blank,B1,,,\n"),
            4,
            K::BadSignal(NumberError::Empty),
        ),
        bad(
            "signal above full_scale",
            with_rows("0,red,630,on,blank,B1,,4096,\n"),
            4,
            K::SignalAboveFullScale {
                signal: 4096,
                full_scale: 4095,
            },
        ),
        bad(
            "bad reference",
            with_rows("0,red,630,on,blank,B1,,10,x\n"),
            4,
            K::BadReference(NumberError::NotInteger),
        ),
        bad(
            "reference above full_scale",
            with_rows("0,red,630,on,blank,B1,,10,5000\n"),
            4,
            K::ReferenceAboveFullScale {
                reference: 5000,
                full_scale: 4095,
            },
        ),
        bad(
            "reference present then absent inside a measurement",
            with_rows("0,red,630,off,blank,B1,,10,7\n1,red,630,on,blank,B1,,10,\n"),
            5,
            K::ReferenceVanished,
        ),
        bad(
            "reference absent then present inside a measurement",
            with_rows("0,red,630,off,blank,B1,,10,\n1,red,630,on,blank,B1,,10,7\n"),
            5,
            K::ReferenceAppeared,
        ),
        bad(
            "non-UTF-8 bytes in a row",
            [
                with_rows("").as_bytes(),
                b"0,r\xffd,630,off,blank,B1,,10,\n",
            ]
            .concat(),
            4,
            K::NotUtf8,
        ),
        bad(
            "non-UTF-8 bytes in the preamble",
            b"# lumisorb-session: 1\n# \xc3\x28\n".to_vec(),
            2,
            K::NotUtf8,
        ),
    ]
}

#[test]
fn malformed_file_catalogue() {
    let cat = catalogue();
    let mut kinds = std::collections::HashSet::new();
    for b in &cat {
        let got = read(&b.file).err();
        assert_eq!(
            got,
            Some(ReadError {
                line: b.line,
                kind: b.kind
            }),
            "case `{}`",
            b.what
        );
        // Every error message names its line.
        let msg = got.unwrap().to_string();
        assert!(msg.starts_with(&format!("line {}: ", b.line)), "{msg}");
        kinds.insert(std::mem::discriminant(&b.kind));
    }
    println!(
        "{} malformed files, {} distinct error kinds",
        cat.len(),
        kinds.len()
    );
    assert!(
        kinds.len() >= 15,
        "catalogue covers only {} kinds",
        kinds.len()
    );
}

#[test]
fn reference_may_differ_between_measurements() {
    // A measurement without a reference after one with: allowed (the check is per measurement).
    let f = with_rows("0,red,630,off,blank,B1,,10,7\n1,red,630,on,sample,X,,10,\n");
    assert_eq!(read(f.as_bytes()).unwrap().1, 2);
}

#[test]
fn writer_refuses_what_reader_would_refuse() {
    let mut out = String::new();
    let mut w = SessionWriter::new(&mut out, &Metadata::new(100)).unwrap();
    let row = Row {
        t_ms: 5,
        channel: "a",
        nm: None,
        led: Led::On,
        role: Role::Sample,
        id: "x",
        conc: None,
        signal: 100,
        reference: None,
    };
    w.row(&row).unwrap();
    assert_eq!(
        w.row(&Row { signal: 101, ..row }),
        Err(WriteError::Invalid(K::SignalAboveFullScale {
            signal: 101,
            full_scale: 100
        }))
    );
    assert_eq!(
        w.row(&Row { t_ms: 4, ..row }),
        Err(WriteError::Invalid(K::TimeDecreasing {
            previous: 5,
            found: 4
        }))
    );
    assert_eq!(
        w.row(&Row {
            channel: "a,b",
            ..row
        }),
        Err(WriteError::Invalid(K::WrongColumnCount { found: 10 }))
    );
    assert_eq!(
        w.row(&Row { id: "x\ny", ..row }),
        Err(WriteError::NotRepresentable)
    );
    assert_eq!(
        w.row(&Row {
            conc: Some(f64::NAN),
            role: Role::Check,
            ..row
        }),
        Err(WriteError::Invalid(K::BadConcentration))
    );
    assert_eq!(
        w.comment("unit: mg"),
        Err(WriteError::Invalid(K::MetadataAfterHeader {
            key: MetadataKey::Unit
        }))
    );
    assert_eq!(w.comment(" padded"), Err(WriteError::NotRepresentable));
    // A refused row leaves the writer as it was.
    w.row(&Row { t_ms: 6, ..row }).unwrap();
    let mut bad_meta = Metadata::new(100);
    bad_meta.path_mm = Some(-1.0);
    assert_eq!(
        SessionWriter::new(String::new(), &bad_meta).err(),
        Some(WriteError::Invalid(K::BadPathLength))
    );
    assert_eq!(
        SessionWriter::new(String::new(), &Metadata::new(0)).err(),
        Some(WriteError::Invalid(K::BadFullScale))
    );
}

/// An owned row for proptest.
#[derive(Clone, Debug)]
struct OwnedRow {
    dt: u32,
    channel: String,
    nm: Option<u16>,
    led: Led,
    role: Role,
    id: String,
    conc: f64,
    signal: u32,
    reference: Option<u32>,
}

fn name_strategy() -> impl Strategy<Value = String> {
    "[A-Za-z0-9_ .:;/+-]{1,32}".prop_filter("no # first", |s| !s.starts_with('#'))
}

fn row_strategy(full_scale: u32) -> impl Strategy<Value = OwnedRow> {
    (
        0u32..1000,
        prop::sample::select(vec!["red", "ir 880", "g"]).prop_map(String::from),
        prop::option::of(1u16..=u16::MAX),
        prop::sample::select(vec![Led::On, Led::Off]),
        prop::sample::select(vec![Role::Blank, Role::Standard, Role::Sample, Role::Check]),
        name_strategy(),
        prop_oneof![0.0..1e6f64, 0.0..1e-3f64, 1e9..1e300f64, Just(0.0)],
        0..=full_scale,
        prop::option::of(0..=full_scale),
    )
        .prop_map(
            |(dt, channel, nm, led, role, id, conc, signal, reference)| OwnedRow {
                dt,
                channel,
                nm,
                led,
                role,
                id,
                conc,
                signal,
                reference,
            },
        )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn writer_reader_round_trip(
        full_scale in 1u32..=0x00FF_FFFF,
        path in prop::option::of(1e-3f32..1e3),
        unit in prop::option::of("[a-zA-Z/%]{1,16}"),
        model in prop::option::of(prop::sample::select(vec![Model::Linear, Model::Origin, Model::Quadratic])),
        seeds in prop::collection::vec(row_strategy(0x00FF_FFFF), 1..40),
    ) {
        let mut meta = Metadata::new(full_scale);
        meta.path_mm = path;
        meta.unit = unit.as_deref().map(|u| heapless::String::try_from(u).unwrap());
        meta.model = model;
        // Clamp reads to the drawn full scale; make rows of one measurement consistent, as the
        // format demands, by letting each row open a new measurement (unique id suffix).
        let mut t = 0u32;
        let rows: Vec<(u32, OwnedRow)> = seeds.into_iter().enumerate().map(|(i, mut r)| {
            t = t.saturating_add(r.dt);
            r.signal %= full_scale + 1;
            r.reference = r.reference.map(|x| x % (full_scale + 1));
            r.id = format!("{}{}", &r.id[..r.id.len().min(28)], i);
            (t, r)
        }).collect();
        let mut text = String::new();
        let mut w = SessionWriter::new(&mut text, &meta).unwrap();
        w.comment("truth: none").unwrap();
        fn as_row((t, r): &(u32, OwnedRow)) -> Row<'_> {
            Row {
            t_ms: *t,
            channel: &r.channel,
            nm: r.nm,
            led: r.led,
            role: r.role,
            id: &r.id,
            conc: r.role.has_concentration().then_some(r.conc),
            signal: r.signal,
            reference: r.reference,
            }
        }
        for r in &rows {
            w.row(&as_row(r)).unwrap();
        }
        let mut reader = SessionReader::new();
        let mut back = Vec::new();
        for line in lines(text.as_bytes()) {
            if let Event::Row(row) = reader.feed(line).unwrap() {
                back.push(format!("{row:?}"));
            }
        }
        reader.finish().unwrap();
        prop_assert_eq!(reader.metadata().unwrap(), &meta);
        let want: Vec<String> = rows.iter().map(|r| format!("{:?}", as_row(r))).collect();
        prop_assert_eq!(back, want);
    }

    /// Arbitrary lines after a valid preamble never panic, and every error names the line fed.
    #[test]
    fn arbitrary_lines_never_panic(lines_in in prop::collection::vec(prop::collection::vec(any::<u8>(), 0..60), 0..30)) {
        let mut r = SessionReader::new();
        for l in lines(format!("{PRE}{HDR}").as_bytes()) {
            r.feed(l).unwrap();
        }
        for (i, l) in lines_in.iter().enumerate() {
            if let Err(e) = r.feed(l) {
                prop_assert_eq!(e.line as usize, i + 4);
            }
        }
    }
}
