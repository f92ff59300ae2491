//! Property tests of the record encodings: round trips, and every damage a decoder can meet.

use lumisorb::calibration::{Calibration, CalibrationSet, Model, SigmaSource, Standard, Weighting};
use lumisorb::persistence::{
    CalibrationRecord, ConcentrationInterval, DecodeError, MethodId, MethodSettings, ResultEntry,
    SampleId, MAX_STANDARDS,
};
use lumisorb::{Absorbance, Flag, Flags};
use proptest::prelude::*;

fn method_id() -> impl Strategy<Value = MethodId> {
    (any::<u16>(), any::<u16>()).prop_map(|(id, version)| MethodId { id, version })
}

fn settings() -> impl Strategy<Value = MethodSettings> {
    (
        any::<u8>(),
        method_id(),
        100u16..=2500,
        0.01f32..=1000.0,
        1u16..,
        any::<u16>(),
        0.0f32..0.999,
        any::<bool>(),
        1.0f32..=1.0e6,
        any::<u32>(),
    )
        .prop_map(
            |(channel, method, nm, path, lit, dark, stray, reference, dilution, age)| {
                MethodSettings {
                    channel,
                    method,
                    wavelength_nm: nm,
                    path_length_mm: path,
                    lit_reads: lit,
                    dark_reads: dark,
                    stray_fraction: stray,
                    use_reference: reference,
                    dilution_factor: dilution,
                    max_calibration_age_s: age,
                }
            },
        )
}

fn sample_id() -> impl Strategy<Value = SampleId> {
    "[A-Za-z0-9][A-Za-z0-9_.:/#-]{0,15}".prop_map(|s| SampleId::new(&s).unwrap())
}

fn flags() -> impl Strategy<Value = Flags> {
    proptest::collection::vec(proptest::sample::select(Flag::ALL.to_vec()), 0..4)
        .prop_map(|v| v.into_iter().fold(Flags::NONE, |s, f| s.with(f)))
}

fn entry() -> impl Strategy<Value = ResultEntry> {
    (
        any::<u32>(),
        sample_id(),
        any::<u8>(),
        method_id(),
        -1.0f32..6.0,
        0.0f32..1.0,
        proptest::option::of((-10.0f32..1.0e4, 0.0f32..100.0, 0.0f32..100.0)),
        flags(),
    )
        .prop_map(
            |(time_s, sample, channel, method, a, sd, conc, flags)| ResultEntry {
                time_s,
                sample,
                channel,
                method,
                absorbance: Absorbance::new(a).unwrap(),
                absorbance_sd: sd,
                concentration: conc.map(|(value, below, above)| ConcentrationInterval {
                    value,
                    low: value - below,
                    high: value + above,
                }),
                flags,
            },
        )
}

fn calibration() -> impl Strategy<Value = CalibrationRecord> {
    let standard = (0.0f32..1.0e3, -0.5f32..5.0, 0.0f32..0.1, 1u16..10);
    (
        any::<u8>(),
        method_id(),
        0.1f32..100.0,
        any::<u32>(),
        any::<u32>(),
        proptest::sample::select(Model::ALL.to_vec()),
        proptest::sample::select(Weighting::ALL.to_vec()),
        proptest::option::of((1.0e-4f32..0.1, 2u16..20)),
        proptest::collection::vec(standard, 1..=MAX_STANDARDS),
    )
        .prop_filter_map(
            "standards that cannot be fitted",
            |(channel, method, path, created_s, sequence, model, weighting, blank, stds)| {
                let mut set = CalibrationSet::new();
                for (c, a, sd, n) in stds {
                    set.push(Standard::with_replicates(c, Absorbance::new(a).ok()?, sd, n).ok()?)
                        .ok()?;
                }
                let sigma = match blank {
                    None => SigmaSource::ResidualSd,
                    Some((sd, replicates)) => SigmaSource::Blank { sd, replicates },
                };
                let calibration =
                    Calibration::fit_with_sigma(&set, model, weighting, sigma).ok()?;
                Some(CalibrationRecord {
                    channel,
                    method,
                    path_length_mm: path,
                    created_s,
                    sequence,
                    calibration,
                })
            },
        )
}

/// Checks that every truncation and every single-byte change of a valid encoding is refused
/// with a typed error. CRC-32 detects every error burst of up to 32 bits (a property of any
/// CRC of degree 32: W. W. Peterson and D. T. Brown, "Cyclic Codes for Error Detection",
/// Proc. IRE 49 (1961)), so no single-byte change can pass.
fn damage_is_refused<T: core::fmt::Debug>(
    bytes: &[u8],
    decode: impl Fn(&[u8]) -> Result<T, DecodeError>,
    at: usize,
    xor: u8,
) -> Result<(), TestCaseError> {
    for len in 0..bytes.len() {
        prop_assert_eq!(decode(&bytes[..len]).err(), Some(DecodeError::Truncated));
    }
    let mut damaged = bytes.to_vec();
    let at = at % damaged.len();
    damaged[at] ^= xor;
    prop_assert!(
        decode(&damaged).is_err(),
        "byte {} ^ {:#x} accepted",
        at,
        xor
    );
    Ok(())
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    #[test]
    fn method_settings_round_trip(s in settings(), at in any::<usize>(), xor in 1u8..) {
        let mut buf = [0u8; MethodSettings::ENCODED_LEN];
        let n = s.encode(&mut buf).unwrap();
        prop_assert_eq!(MethodSettings::decode(&buf[..n]), Ok(s));
        damage_is_refused(&buf[..n], MethodSettings::decode, at, xor)?;
    }

    #[test]
    fn result_entry_round_trip(e in entry(), at in any::<usize>(), xor in 1u8..) {
        let mut buf = [0u8; ResultEntry::MAX_ENCODED_LEN];
        let n = e.encode(&mut buf).unwrap();
        prop_assert!(n >= ResultEntry::MIN_ENCODED_LEN);
        prop_assert_eq!(ResultEntry::decode(&buf[..n]), Ok(e));
        damage_is_refused(&buf[..n], ResultEntry::decode, at, xor)?;
    }

    #[test]
    fn calibration_round_trip(c in calibration(), at in any::<usize>(), xor in 1u8..) {
        let mut buf = [0u8; CalibrationRecord::MAX_ENCODED_LEN];
        let n = c.encode(&mut buf).unwrap();
        prop_assert_eq!(CalibrationRecord::decode(&buf[..n]), Ok(c.clone()));
        damage_is_refused(&buf[..n], CalibrationRecord::decode, at, xor)?;
    }

    #[test]
    fn arbitrary_bytes_decode_to_a_typed_error_or_a_valid_record(
        bytes in proptest::collection::vec(any::<u8>(), 0..400),
        framed in any::<bool>(),
    ) {
        // Half the cases get a correct frame (magic, length, CRC) around random payloads, so the
        // field decoders see garbage too.
        let bytes = if framed { frame(&bytes) } else { bytes };
        if let Ok(s) = MethodSettings::decode(&bytes) {
            prop_assert!(s.validate().is_ok());
        }
        if let Ok(e) = ResultEntry::decode(&bytes) {
            prop_assert!(e.validate().is_ok());
        }
        if let Ok(c) = CalibrationRecord::decode(&bytes) {
            prop_assert!(c.validate().is_ok());
            // Anything that decodes re-encodes to the same bytes.
            let mut again = vec![0u8; CalibrationRecord::MAX_ENCODED_LEN];
            let n = c.encode(&mut again).unwrap();
            prop_assert_eq!(&again[..n], &bytes[..]);
        }
    }
}

/// Wraps `payload` in a valid frame of a kind and version taken from its first bytes.
fn frame(payload: &[u8]) -> Vec<u8> {
    let kind = 1 + payload.first().copied().unwrap_or(0) % 3;
    let version = if payload.get(1).copied().unwrap_or(0) < 240 {
        1
    } else {
        2
    };
    let body = payload.get(2..).unwrap_or(&[]);
    let mut out = vec![b'L', b'S', kind, version];
    out.extend_from_slice(&(body.len() as u16).to_le_bytes());
    out.extend_from_slice(body);
    let crc = lumisorb::persistence::record::checksum(&out);
    out.extend_from_slice(&crc.to_le_bytes());
    out
}
