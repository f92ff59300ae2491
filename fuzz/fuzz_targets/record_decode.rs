//! cargo-fuzz target for the persistence record decoders: `cargo +nightly fuzz run record_decode`.
//!
//! Any bytes go through every decoder (calibration, method settings, result entry); none may
//! panic, and a record a decoder accepts must re-encode to exactly the input bytes (so accepted
//! records are canonical and fully validated, calibrations refitted).
#![no_main]

use libfuzzer_sys::fuzz_target;
use lumisorb::persistence::{record, CalibrationRecord, MethodSettings, ResultEntry};

fuzz_target!(|data: &[u8]| {
    // Also try the bytes as a payload inside a valid frame, so the field decoders are reached.
    let mut framed = Vec::with_capacity(data.len() + record::FRAME_OVERHEAD);
    if data.len() >= 2 && data.len() - 2 <= usize::from(u16::MAX) {
        framed.extend_from_slice(&record::MAGIC);
        framed.push(1 + data[0] % 3);
        framed.push(if data[1] < 240 { 1 } else { data[1] });
        framed.extend_from_slice(&((data.len() - 2) as u16).to_le_bytes());
        framed.extend_from_slice(&data[2..]);
        let crc = record::checksum(&framed);
        framed.extend_from_slice(&crc.to_le_bytes());
    }
    for bytes in [data, &framed[..]] {
        let mut out = vec![0u8; bytes.len().max(512)];
        if let Ok(c) = CalibrationRecord::decode(bytes) {
            let n = c.encode(&mut out).expect("accepted calibration re-encodes");
            assert_eq!(&out[..n], bytes);
        }
        if let Ok(s) = MethodSettings::decode(bytes) {
            let n = s.encode(&mut out).expect("accepted settings re-encode");
            assert_eq!(&out[..n], bytes);
        }
        if let Ok(e) = ResultEntry::decode(bytes) {
            let n = e.encode(&mut out).expect("accepted entry re-encodes");
            assert_eq!(&out[..n], bytes);
        }
    }
});
