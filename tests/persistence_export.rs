//! Exports of the result log: CSV and the recorded-session format, read back value for value.

use lumisorb::persistence::{
    export_csv, export_session, ConcentrationInterval, FlashStore, MethodId, MockFlash,
    ResultEntry, SampleId, StoreLayout, CSV_HEADER, RESULT_COMMENT, RESULT_FLAGS_COMMENT,
};
use lumisorb::session::{lines, Event, Metadata, SessionReader};
use lumisorb::{Absorbance, Flag, Flags};

type Flash = MockFlash<8192, 1024, 4>;

const LAYOUT: StoreLayout = StoreLayout {
    map: 0..4096,
    log: 4096..8192,
};

/// Invented results (demo values), covering tiny, huge and negative numbers and all flags.
fn entries() -> Vec<ResultEntry> {
    let all = Flag::ALL.iter().fold(Flags::NONE, |s, f| s.with(*f));
    vec![
        ResultEntry {
            time_s: 1_700_000_000,
            sample: SampleId::new("BROOK-7").unwrap(),
            channel: 1,
            method: MethodId { id: 12, version: 2 },
            absorbance: Absorbance::new(0.4321).unwrap(),
            absorbance_sd: 0.0012,
            concentration: Some(ConcentrationInterval {
                value: 1.25,
                low: 1.2,
                high: 1.3,
            }),
            flags: Flags::only(Flag::BelowLoq).with(Flag::Unstable),
        },
        ResultEntry {
            time_s: u32::MAX,
            sample: SampleId::new("0123456789abcdef").unwrap(),
            channel: 255,
            method: MethodId {
                id: 65535,
                version: 65535,
            },
            absorbance: Absorbance::new(-1.234_567_8e-7).unwrap(),
            absorbance_sd: 3.456_789e-9,
            concentration: Some(ConcentrationInterval {
                value: -1.234_567_8e-12,
                low: -3.456_789e30,
                high: 2.345_678e20,
            }),
            flags: all,
        },
        ResultEntry {
            time_s: 42,
            sample: SampleId::new("a:b/c#1").unwrap(),
            channel: 0,
            method: MethodId { id: 1, version: 1 },
            absorbance: Absorbance::new(2.0).unwrap(),
            absorbance_sd: 0.0,
            concentration: None,
            flags: Flags::only(Flag::NoCalibration),
        },
    ]
}

fn store_with(entries: &[ResultEntry]) -> FlashStore<Flash> {
    let mut store = FlashStore::new(Flash::new(), LAYOUT).unwrap();
    for e in entries {
        e.append(&mut store).unwrap();
    }
    store
}

fn opt(v: &str) -> Option<f32> {
    (v != "-" && !v.is_empty()).then(|| v.parse().unwrap())
}

fn flags(words: &str, sep: char) -> Flags {
    if words == "-" || words.is_empty() {
        return Flags::NONE;
    }
    words
        .split(sep)
        .fold(Flags::NONE, |s, w| s.with(Flag::from_name(w).unwrap()))
}

/// Parses the result comments of an exported session back into entries.
fn parse_session(text: &str) -> Vec<ResultEntry> {
    let mut reader = SessionReader::new();
    let mut out: Vec<ResultEntry> = Vec::new();
    for line in lines(text.as_bytes()) {
        match reader.feed(line).unwrap() {
            Event::Comment(c) if c.starts_with(RESULT_FLAGS_COMMENT) => {
                let words = c[RESULT_FLAGS_COMMENT.len()..].trim();
                out.last_mut().unwrap().flags = flags(words, ',');
            }
            Event::Comment(c) if c.starts_with(RESULT_COMMENT) => {
                let field = |key: &str| {
                    c.split(' ')
                        .find_map(|kv| kv.strip_prefix(key).and_then(|v| v.strip_prefix('=')))
                        .unwrap()
                        .to_string()
                };
                let (id, version) = field("method")
                    .split_once('/')
                    .map(|(a, b)| (a.parse().unwrap(), b.parse().unwrap()))
                    .unwrap();
                let concentration = opt(&field("c")).map(|value| ConcentrationInterval {
                    value,
                    low: opt(&field("lo")).unwrap(),
                    high: opt(&field("hi")).unwrap(),
                });
                let f = field("flags");
                out.push(ResultEntry {
                    time_s: field("t").parse().unwrap(),
                    sample: SampleId::new(&field("id")).unwrap(),
                    channel: field("ch").parse().unwrap(),
                    method: MethodId { id, version },
                    absorbance: Absorbance::new(field("A").parse().unwrap()).unwrap(),
                    absorbance_sd: field("sd").parse().unwrap(),
                    concentration,
                    flags: if f == "+" {
                        Flags::NONE
                    } else {
                        flags(&f, ',')
                    },
                });
            }
            Event::Row(_) => panic!("the export has no data rows"),
            _ => {}
        }
    }
    // Every line is valid session syntax; a file without reads is not a replayable session,
    // and the reader says so at the end (see the export's docs).
    assert_eq!(
        reader.finish().map_err(|e| e.kind),
        Err(lumisorb::session::ReadErrorKind::NoReads)
    );
    out
}

#[test]
fn session_export_reads_back_exactly() {
    let entries = entries();
    let mut store = store_with(&entries);
    let mut meta = Metadata::new(65_535);
    meta.path_mm = Some(10.0);
    let mut text = String::new();
    let summary = export_session(&mut store, &mut text, &meta).unwrap();
    assert_eq!(summary.exported, 3);
    assert_eq!(summary.unreadable, 0);
    assert!(text.starts_with("# lumisorb-session: 1\n# full_scale: 65535\n# path_mm: 10\n"));
    assert!(text.contains(
        "\n# lumisorb-result t=1700000000 id=BROOK-7 ch=1 method=12/2 A=0.4321 sd=0.0012 c=1.25 lo=1.2 hi=1.3 flags=below_loq,unstable\n"
    ));
    // The all-flags entry needed the continuation line.
    assert!(text.contains(&format!("\n# {RESULT_FLAGS_COMMENT} saturated,")));
    assert_eq!(parse_session(&text), entries);
}

#[test]
fn csv_export_reads_back_exactly() {
    let entries = entries();
    let mut store = store_with(&entries);
    let mut text = String::new();
    export_csv(&mut store, &mut text).unwrap();
    let mut rows = text.lines();
    assert_eq!(rows.next(), Some(CSV_HEADER));
    let back: Vec<ResultEntry> = rows
        .map(|row| {
            let f: Vec<&str> = row.split(',').collect();
            assert_eq!(f.len(), 11, "{row}");
            ResultEntry {
                time_s: f[0].parse().unwrap(),
                sample: SampleId::new(f[1]).unwrap(),
                channel: f[2].parse().unwrap(),
                method: MethodId {
                    id: f[3].parse().unwrap(),
                    version: f[4].parse().unwrap(),
                },
                absorbance: Absorbance::new(f[5].parse().unwrap()).unwrap(),
                absorbance_sd: f[6].parse().unwrap(),
                concentration: opt(f[7]).map(|value| ConcentrationInterval {
                    value,
                    low: opt(f[8]).unwrap(),
                    high: opt(f[9]).unwrap(),
                }),
                flags: flags(f[10], ' '),
            }
        })
        .collect();
    assert_eq!(back, entries);
}

#[test]
fn an_output_that_fails_is_a_typed_error() {
    struct Full(usize);
    impl core::fmt::Write for Full {
        fn write_str(&mut self, s: &str) -> core::fmt::Result {
            self.0 = self.0.checked_sub(s.len()).ok_or(core::fmt::Error)?;
            Ok(())
        }
    }
    let mut store = store_with(&entries());
    assert!(export_csv(&mut store, &mut Full(150)).is_err());
    assert!(export_session(&mut store, Full(150), &Metadata::new(4095)).is_err());
}
