//! Stable-Rust fuzz loop for the session reader (CI runs it in release mode; the cargo-fuzz target
//! in `fuzz/` explores deeper on nightly).
//!
//! It mutates a small corpus of valid session files (byte flips, inserted format tokens, deleted
//! and duplicated spans, swapped lines, truncation) with a fixed-seed xorshift generator, feeds
//! every input to `SessionReader`, and checks:
//! - no panic, and every error's line number lies within the input (or one past its end);
//! - every file the reader accepts is rewritten row by row through `SessionWriter`, and reading
//!   the rewrite gives back the same metadata and the same rows (reader and writer agree).
//!
//! Usage: `cargo run --release --example fuzz_session_reader -- [INPUTS] [SEED]`
//! (default 1 000 000 inputs, seed 1). Prints the count it ran and exits non-zero on a failure.

use std::process::ExitCode;

use lumisorb::session::{lines, Event, Metadata, ReadError, SessionReader, SessionWriter};

/// xorshift64* (Vigna 2016): tiny, deterministic, good enough to drive mutations.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: usize) -> usize {
        if n == 0 {
            0
        } else {
            (self.next() % n as u64) as usize
        }
    }
}

const TOKENS: &[&[u8]] = &[
    b",",
    b"\n",
    b"\r\n",
    b"#",
    b"# ",
    b":",
    b"-",
    b".",
    b"0",
    b"1",
    b"9",
    b"4095",
    b"4096",
    b"16777215",
    b"4294967296",
    b"on",
    b"off",
    b"blank",
    b"standard",
    b"sample",
    b"check",
    b"e",
    b"1e400",
    b"NaN",
    b"inf",
    b" ",
    b"\xff",
    b"\xc3",
    b"\xef\xbb\xbf",
    b"lumisorb-session",
    b"full_scale",
    b"unit",
    b"path_mm",
    b"model",
    b"quadratic",
    b"analyte",
    b"t_ms,channel,nm,led,role,id,conc,signal,reference",
];

fn seeds() -> Vec<Vec<u8>> {
    let mut a = String::from(
        "# lumisorb-session: 1\n# full_scale: 4095\n# unit: mg/L\n# path_mm: 10\n# model: linear\n\
         t_ms,channel,nm,led,role,id,conc,signal,reference\n",
    );
    let mut t = 0;
    for (role, id, conc, lit) in [
        ("blank", "B1", "", 3900),
        ("standard", "S1", "0.5", 3000),
        ("standard", "S2", "1", 2300),
        ("sample", "X1", "", 2700),
        ("check", "C1", "0.75", 2600),
    ] {
        for k in 0..3 {
            a += &format!("{t},red,630,off,{role},{id},{conc},{},\n", 10 + k);
            t += 3;
            a += &format!("{t},red,630,on,{role},{id},{conc},{},\n", lit + k);
            t += 3;
        }
    }
    let b = "\u{feff}# lumisorb-session: 1\r\n# analyte: dye\r\n# full_scale: 65535\r\n# note\r\n\
             t_ms,channel,nm,led,role,id,conc,signal,reference\r\n\
             0,ir,880,off,blank,b,,100,200\r\n5,ir,880,on,blank,b,,60000,50000\r\n\
             9,ir,880,on,sample,s,,30000,50010\r\n\r\n# comment: after\r\n9,g,,on,sample,s,,3,";
    vec![a.into_bytes(), b.as_bytes().to_vec()]
}

fn mutate(rng: &mut Rng, input: &mut Vec<u8>) {
    // One mutation most of the time keeps many inputs valid enough to reach the writer check.
    let rounds = if rng.below(2) == 0 {
        1
    } else {
        2 + rng.below(3)
    };
    for _ in 0..rounds {
        let len = input.len();
        match rng.below(7) {
            0 if len > 0 => {
                let i = rng.below(len);
                input[i] ^= 1 << rng.below(8);
            }
            1 => {
                let tok = TOKENS[rng.below(TOKENS.len())];
                let i = rng.below(len + 1);
                input.splice(i..i, tok.iter().copied());
            }
            2 if len > 0 => {
                let i = rng.below(len);
                let j = (i + 1 + rng.below(16)).min(len);
                input.drain(i..j);
            }
            3 if len > 0 => {
                let i = rng.below(len);
                let j = (i + 1 + rng.below(40)).min(len);
                let span: Vec<u8> = input[i..j].to_vec();
                let k = rng.below(len + 1);
                input.splice(k..k, span);
            }
            4 => {
                let mut ls: Vec<Vec<u8>> =
                    input.split(|&b| b == b'\n').map(<[u8]>::to_vec).collect();
                if ls.len() > 1 {
                    let (i, j) = (rng.below(ls.len()), rng.below(ls.len()));
                    ls.swap(i, j);
                    *input = ls.join(&b'\n');
                }
            }
            5 if len > 0 => input.truncate(rng.below(len)),
            _ if len > 0 => {
                let i = rng.below(len);
                input[i] = rng.next() as u8;
            }
            _ => input.push(rng.next() as u8),
        }
    }
}

/// Reads a file; returns metadata and rows (Debug strings) or the error.
fn read(bytes: &[u8]) -> Result<(Metadata, Vec<String>, usize), ReadError> {
    let mut r = SessionReader::new();
    let mut rows = Vec::new();
    let mut n = 0usize;
    for line in lines(bytes) {
        n += 1;
        if let Event::Row(row) = r.feed(line)? {
            rows.push(format!("{row:?}"));
        }
    }
    r.finish()?;
    let meta = r.metadata().cloned().ok_or(ReadError {
        line: 0,
        kind: lumisorb::session::ReadErrorKind::MissingHeader,
    })?;
    Ok((meta, rows, n))
}

/// Checks one input; `Err` describes a failure of the reader or writer.
fn check(bytes: &[u8], stats: &mut [u64; 2]) -> Result<(), String> {
    let line_count = lines(bytes).count();
    match read(bytes) {
        Err(e) => {
            stats[1] += 1;
            if e.line == 0 || e.line as usize > line_count + 1 {
                return Err(format!("error {e} outside 1..={}", line_count + 1));
            }
            Ok(())
        }
        Ok((meta, rows, _)) => {
            stats[0] += 1;
            let mut out = String::new();
            let mut w = SessionWriter::new(&mut out, &meta)
                .map_err(|e| format!("writer refused metadata: {e}"))?;
            let mut r = SessionReader::new();
            for line in lines(bytes) {
                if let Ok(Event::Row(row)) = r.feed(line) {
                    w.row(&row).map_err(|e| {
                        format!("writer refused a row the reader accepted: {e} ({row:?})")
                    })?;
                }
            }
            let (meta2, rows2, _) =
                read(out.as_bytes()).map_err(|e| format!("rewrite does not read: {e}"))?;
            if meta2 != meta || rows2 != rows {
                return Err("rewrite reads back differently".into());
            }
            Ok(())
        }
    }
}

fn main() -> ExitCode {
    let mut args = std::env::args().skip(1);
    let total: u64 = args
        .next()
        .and_then(|a| a.parse().ok())
        .unwrap_or(1_000_000);
    let seed: u64 = args.next().and_then(|a| a.parse().ok()).unwrap_or(1);
    let mut rng = Rng(seed.max(1).wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1);
    let corpus = seeds();
    let mut stats = [0u64; 2];
    let start = std::time::Instant::now();
    let mut input = Vec::new();
    for n in 0..total {
        // Mostly fresh mutants of a seed; sometimes keep mutating the previous input.
        if n % 4 != 3 || input.is_empty() {
            input.clone_from(&corpus[rng.below(corpus.len())]);
        }
        mutate(&mut rng, &mut input);
        let result =
            std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| check(&input, &mut stats)));
        match result {
            Ok(Ok(())) => {}
            Ok(Err(msg)) => {
                eprintln!(
                    "FAIL after {n} inputs: {msg}\ninput: {:?}",
                    String::from_utf8_lossy(&input)
                );
                return ExitCode::FAILURE;
            }
            Err(_) => {
                eprintln!(
                    "PANIC after {n} inputs\ninput: {:?}",
                    String::from_utf8_lossy(&input)
                );
                return ExitCode::FAILURE;
            }
        }
    }
    println!(
        "fuzz_session_reader: {total} inputs run clean in {:.1} s (seed {seed}): {} accepted, {} rejected with a typed error",
        start.elapsed().as_secs_f64(),
        stats[0],
        stats[1]
    );
    ExitCode::SUCCESS
}
