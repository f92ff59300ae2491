//! cargo-fuzz target for the session reader: `cargo +nightly fuzz run session_reader`.
//!
//! Any bytes, split into lines, go through `SessionReader`; it must never panic, every error must
//! name a line inside the input (or one past its end), and a file it accepts must survive a
//! rewrite through `SessionWriter` unchanged (the stable loop `examples/fuzz_session_reader.rs`
//! checks the same on CI).
#![no_main]

use libfuzzer_sys::fuzz_target;
use lumisorb::session::{lines, Event, SessionReader, SessionWriter};

fuzz_target!(|data: &[u8]| {
    let n = lines(data).count();
    let mut r = SessionReader::new();
    let mut rows = Vec::new();
    for line in lines(data) {
        match r.feed(line) {
            Ok(Event::Row(row)) => rows.push(format!("{row:?}")),
            Ok(_) => {}
            Err(e) => {
                assert!(e.line >= 1 && e.line as usize <= n);
                return;
            }
        }
    }
    if let Err(e) = r.finish() {
        assert!(e.line as usize <= n + 1);
        return;
    }
    let meta = r
        .metadata()
        .cloned()
        .expect("metadata after a finished read");
    let mut out = String::new();
    let mut w = SessionWriter::new(&mut out, &meta).expect("writer accepts read metadata");
    let mut again = SessionReader::new();
    for line in lines(data) {
        if let Ok(Event::Row(row)) = again.feed(line) {
            w.row(&row)
                .expect("writer accepts a row the reader accepted");
        }
    }
    let mut back = SessionReader::new();
    let mut rows2 = Vec::new();
    for line in lines(out.as_bytes()) {
        if let Event::Row(row) = back.feed(line).expect("rewrite reads") {
            rows2.push(format!("{row:?}"));
        }
    }
    back.finish().expect("rewrite finishes");
    assert_eq!(back.metadata(), Some(&meta));
    assert_eq!(rows, rows2);
});
