//! Record framing: how one calibration, one method setting or one logged result is laid out in
//! bytes, and the typed errors of decoding it.
//!
//! ```text
//! offset  0      2      3        4          6                 6+len             10+len
//!         ┌──────┬──────┬────────┬──────────┬─────────────────┬─────────────────┐
//!         │ "LS" │ kind │version │ len (LE) │ payload (len B) │ CRC-32 (LE)     │
//!         └──────┴──────┴────────┴──────────┴─────────────────┴─────────────────┘
//! ```
//!
//! - magic `b"LS"`, then the [`RecordKind`] byte and the format version of that kind;
//! - `len`: payload length in bytes, `u16` little-endian;
//! - the payload: fields in a fixed order, integers little-endian, floats as IEEE 754
//!   binary32/binary64 bit patterns little-endian (each record type documents its fields);
//! - the checksum: **CRC-32/ISO-HDLC** (the CRC-32 of HDLC, Ethernet and zip: polynomial
//!   0x04C11DB7 reflected, init and final XOR 0xFFFFFFFF, check value 0xCBF43926), from the `crc`
//!   crate's catalogue, over every byte before it, stored little-endian. It is computed bitwise
//!   (`crc::NoTable`): no 1 KiB table in flash, and records are short.
//!
//! The flash library below already checks its own item CRC; this one travels with the bytes
//! wherever they go (an export, a host tool, another store) and also catches a record written by
//! other code under the same key.
//!
//! Decoding checks, in this order: enough bytes for a header, the magic, enough bytes for the
//! declared length (no more, no less), the CRC, the kind, the version, then every field (ranges,
//! finiteness, consistency; a calibration is also refitted). A corrupted version byte therefore shows as a bad CRC; an
//! [`DecodeError::UnknownVersion`] means an intact record of a format this firmware does not know.

use super::codec::{Reader, Writer};
use crate::calibration::CalibrationError;

/// The two bytes every record starts with.
pub const MAGIC: [u8; 2] = *b"LS";
/// Bytes before the payload: magic, kind, version, length.
pub const HEADER_LEN: usize = 6;
/// Bytes of the trailing CRC.
pub const CRC_LEN: usize = 4;
/// Framing bytes added to every payload.
pub const FRAME_OVERHEAD: usize = HEADER_LEN + CRC_LEN;

const RECORD_CRC: crc::Crc<u32, crc::NoTable> =
    crc::Crc::<u32, crc::NoTable>::new(&crc::CRC_32_ISO_HDLC);

/// The record checksum, CRC-32/ISO-HDLC of `bytes`.
pub fn checksum(bytes: &[u8]) -> u32 {
    RECORD_CRC.checksum(bytes)
}

/// What a record holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum RecordKind {
    /// A channel's calibration ([`CalibrationRecord`](super::CalibrationRecord)).
    Calibration = 1,
    /// A channel's method settings ([`MethodSettings`](super::MethodSettings)).
    MethodSettings = 2,
    /// One logged result ([`ResultEntry`](super::ResultEntry)).
    Result = 3,
}

impl RecordKind {
    /// The kind for a kind byte, if known.
    pub const fn from_byte(byte: u8) -> Option<RecordKind> {
        match byte {
            1 => Some(RecordKind::Calibration),
            2 => Some(RecordKind::MethodSettings),
            3 => Some(RecordKind::Result),
            _ => None,
        }
    }
}

/// Why bytes are not a valid record.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum DecodeError {
    /// Fewer bytes than the header or than the length it declares (a half-written record).
    Truncated,
    /// The bytes do not start with [`MAGIC`].
    BadMagic,
    /// More bytes than the header declares, or a payload with bytes left after its last field.
    TrailingBytes,
    /// The CRC does not match the contents: the bytes were damaged.
    BadCrc {
        /// CRC stored in the record.
        stored: u32,
        /// CRC computed over the record.
        computed: u32,
    },
    /// An intact record of another kind than the one asked for.
    WrongKind {
        /// Kind byte found.
        found: u8,
    },
    /// An intact record in a format version this firmware cannot read.
    UnknownVersion {
        /// Version byte found.
        found: u8,
    },
    /// A field holds a value outside its allowed range.
    OutOfRange {
        /// Name of the field.
        field: &'static str,
    },
    /// A floating-point field is NaN or infinite.
    NonFinite {
        /// Name of the field.
        field: &'static str,
    },
    /// A stored calibration's standards could not be fitted again.
    RefitFailed(CalibrationError),
    /// A stored calibration's statistics differ from those of the refit of its standards.
    RefitMismatch {
        /// The first statistic that differs.
        field: &'static str,
    },
}

impl core::fmt::Display for DecodeError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            DecodeError::Truncated => f.write_str("record truncated"),
            DecodeError::BadMagic => f.write_str("not a record (bad magic)"),
            DecodeError::TrailingBytes => f.write_str("record longer than declared"),
            DecodeError::BadCrc { stored, computed } => write!(
                f,
                "record damaged: CRC {stored:#010x} stored, {computed:#010x} computed"
            ),
            DecodeError::WrongKind { found } => write!(f, "record of another kind ({found})"),
            DecodeError::UnknownVersion { found } => {
                write!(f, "record format version {found} not supported")
            }
            DecodeError::OutOfRange { field } => write!(f, "field `{field}` out of range"),
            DecodeError::NonFinite { field } => write!(f, "field `{field}` not finite"),
            DecodeError::RefitFailed(e) => write!(f, "stored standards do not refit: {e}"),
            DecodeError::RefitMismatch { field } => {
                write!(
                    f,
                    "stored `{field}` differs from the refit of the standards"
                )
            }
        }
    }
}

impl core::error::Error for DecodeError {}

/// Why a value cannot be encoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EncodeError {
    /// The output buffer is too small for the record.
    BufferTooSmall,
    /// The payload would exceed 65 535 bytes.
    TooLarge,
    /// A floating-point field is NaN or infinite.
    NonFinite {
        /// Name of the field.
        field: &'static str,
    },
    /// A field holds a value outside its allowed range.
    OutOfRange {
        /// Name of the field.
        field: &'static str,
    },
}

impl core::fmt::Display for EncodeError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            EncodeError::BufferTooSmall => f.write_str("buffer too small for the record"),
            EncodeError::TooLarge => f.write_str("record payload over 65535 bytes"),
            EncodeError::NonFinite { field } => write!(f, "field `{field}` not finite"),
            EncodeError::OutOfRange { field } => write!(f, "field `{field}` out of range"),
        }
    }
}

impl core::error::Error for EncodeError {}

/// A type stored as a framed record (crate-internal: the public API is each type's
/// `encode`/`decode`).
pub(crate) trait Record: Sized {
    const KIND: RecordKind;
    /// The version this firmware writes.
    const VERSION: u8;
    fn encode_payload(&self, w: &mut Writer<'_>) -> Result<(), EncodeError>;
    /// Decodes a payload of format `version` (already checked to be supported).
    fn decode_payload(version: u8, r: &mut Reader<'_>) -> Result<Self, DecodeError>;
    /// Whether this firmware reads `version`.
    fn reads_version(version: u8) -> bool {
        version == Self::VERSION
    }
}

/// Encodes `record` into `buf`; returns the number of bytes used.
pub(crate) fn encode<R: Record>(record: &R, buf: &mut [u8]) -> Result<usize, EncodeError> {
    let (header, rest) = buf
        .split_at_mut_checked(HEADER_LEN)
        .ok_or(EncodeError::BufferTooSmall)?;
    let mut w = Writer::new(rest);
    record.encode_payload(&mut w)?;
    let payload_len = w.len();
    let len = u16::try_from(payload_len).map_err(|_| EncodeError::TooLarge)?;
    header.copy_from_slice(&[
        MAGIC[0],
        MAGIC[1],
        R::KIND as u8,
        R::VERSION,
        len.to_le_bytes()[0],
        len.to_le_bytes()[1],
    ]);
    let crc_at = HEADER_LEN
        .checked_add(payload_len)
        .ok_or(EncodeError::TooLarge)?;
    let end = crc_at.checked_add(CRC_LEN).ok_or(EncodeError::TooLarge)?;
    let crc = checksum(buf.get(..crc_at).ok_or(EncodeError::BufferTooSmall)?);
    buf.get_mut(crc_at..end)
        .ok_or(EncodeError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    Ok(end)
}

/// Decodes exactly `bytes` as a record of type `R`.
pub(crate) fn decode<R: Record>(bytes: &[u8]) -> Result<R, DecodeError> {
    let frame = Frame::parse(bytes)?;
    if frame.kind != R::KIND as u8 {
        return Err(DecodeError::WrongKind { found: frame.kind });
    }
    if !R::reads_version(frame.version) {
        return Err(DecodeError::UnknownVersion {
            found: frame.version,
        });
    }
    let mut r = Reader::new(frame.payload);
    let record = R::decode_payload(frame.version, &mut r)?;
    r.finish()?;
    Ok(record)
}

/// A checked view of a frame: magic, length and CRC verified, payload not yet interpreted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Frame<'a> {
    /// The kind byte (see [`RecordKind::from_byte`]).
    pub kind: u8,
    /// The format version byte.
    pub version: u8,
    /// The payload bytes.
    pub payload: &'a [u8],
}

impl<'a> Frame<'a> {
    /// Checks magic, declared length and CRC of `bytes` (exactly one record).
    pub fn parse(bytes: &'a [u8]) -> Result<Frame<'a>, DecodeError> {
        let mut r = Reader::new(bytes);
        let header: [u8; HEADER_LEN] = r.take().map_err(|_| DecodeError::Truncated)?;
        if header[..2] != MAGIC {
            return Err(DecodeError::BadMagic);
        }
        let len = usize::from(u16::from_le_bytes([header[4], header[5]]));
        let payload = r.slice(len)?;
        let stored = u32::from_le_bytes(r.take()?);
        r.finish()?;
        let covered = bytes
            .get(..HEADER_LEN.saturating_add(len))
            .ok_or(DecodeError::Truncated)?;
        let computed = checksum(covered);
        if stored != computed {
            return Err(DecodeError::BadCrc { stored, computed });
        }
        Ok(Frame {
            kind: header[2],
            version: header[3],
            payload,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[derive(Debug, PartialEq)]
    struct Pair(u16, f32);

    impl Record for Pair {
        const KIND: RecordKind = RecordKind::Result;
        const VERSION: u8 = 1;
        fn encode_payload(&self, w: &mut Writer<'_>) -> Result<(), EncodeError> {
            w.u16(self.0)?;
            w.f32(self.1, "b")
        }
        fn decode_payload(_: u8, r: &mut Reader<'_>) -> Result<Self, DecodeError> {
            Ok(Pair(r.u16()?, r.f32("b")?))
        }
    }

    #[test]
    fn crc_is_crc32_iso_hdlc() {
        // Check value of CRC-32/ISO-HDLC over the ASCII string "123456789": 0xCBF43926
        // (Greg Cook, "Catalogue of parametrised CRC algorithms", entry CRC-32/ISO-HDLC; from
        // memory) and, independently, the `check` field of the crc-catalog crate.
        assert_eq!(checksum(b"123456789"), 0xCBF4_3926);
        assert_eq!(checksum(b"123456789"), crc::CRC_32_ISO_HDLC.check);
    }

    #[test]
    fn frame_layout_and_round_trip() {
        let mut buf = [0u8; 32];
        let n = encode(&Pair(0x0102, 1.0), &mut buf).unwrap();
        assert_eq!(n, FRAME_OVERHEAD + 6);
        assert_eq!(buf[..6], [b'L', b'S', 3, 1, 6, 0]);
        assert_eq!(buf[6..12], [0x02, 0x01, 0x00, 0x00, 0x80, 0x3F]);
        let crc = checksum(&buf[..12]).to_le_bytes();
        assert_eq!(buf[12..16], crc);
        assert_eq!(decode::<Pair>(&buf[..n]), Ok(Pair(0x0102, 1.0)));
    }

    #[test]
    fn every_kind_of_damage_is_named() {
        let mut buf = [0u8; 32];
        let n = encode(&Pair(7, 2.5), &mut buf).unwrap();
        let good = buf;
        assert_eq!(decode::<Pair>(&good[..3]), Err(DecodeError::Truncated));
        assert_eq!(decode::<Pair>(&good[..n - 1]), Err(DecodeError::Truncated));
        assert_eq!(
            decode::<Pair>(&good[..n + 1]),
            Err(DecodeError::TrailingBytes)
        );
        let mut bad = good;
        bad[0] = b'X';
        assert_eq!(decode::<Pair>(&bad[..n]), Err(DecodeError::BadMagic));
        let mut bad = good;
        bad[8] ^= 0x10;
        assert!(matches!(
            decode::<Pair>(&bad[..n]),
            Err(DecodeError::BadCrc { .. })
        ));
        // An intact record of another version / kind: re-seal the CRC after the change.
        let reseal = |mut b: [u8; 32], at: usize, v: u8| {
            b[at] = v;
            let crc = checksum(&b[..n - 4]).to_le_bytes();
            b[n - 4..n].copy_from_slice(&crc);
            b
        };
        assert_eq!(
            decode::<Pair>(&reseal(good, 3, 9)[..n]),
            Err(DecodeError::UnknownVersion { found: 9 })
        );
        assert_eq!(
            decode::<Pair>(&reseal(good, 2, 1)[..n]),
            Err(DecodeError::WrongKind { found: 1 })
        );
        let mut nan = good;
        nan[8..12].copy_from_slice(&f32::INFINITY.to_le_bytes());
        assert_eq!(
            decode::<Pair>(&reseal(nan, 8, nan[8])[..n]),
            Err(DecodeError::NonFinite { field: "b" })
        );
    }

    #[test]
    fn encode_reports_small_buffer_and_bad_values() {
        let mut small = [0u8; 12];
        assert_eq!(
            encode(&Pair(1, 1.0), &mut small),
            Err(EncodeError::BufferTooSmall)
        );
        let mut buf = [0u8; 32];
        assert_eq!(
            encode(&Pair(1, f32::NAN), &mut buf),
            Err(EncodeError::NonFinite { field: "b" })
        );
    }
}
