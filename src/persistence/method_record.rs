//! A channel's method settings, as stored in flash.
//!
//! Payload of format version 1 (after the frame header, see [`record`](super::record)),
//! 28 bytes, all little-endian:
//!
//! | bytes | field | type | allowed |
//! |---|---|---|---|
//! | 0 | `channel` | u8 | any |
//! | 1..3 | `method.id` | u16 | any |
//! | 3..5 | `method.version` | u16 | any |
//! | 5..7 | `wavelength_nm` | u16 | 100..=2500 |
//! | 7..11 | `path_length_mm` | f32 | finite, > 0, <= 1000 |
//! | 11..13 | `lit_reads` | u16 | >= 1 |
//! | 13..15 | `dark_reads` | u16 | any |
//! | 15..19 | `stray_fraction` | f32 | finite, 0 <= s < 1 |
//! | 19 | `use_reference` | u8 | 0 or 1 |
//! | 20..24 | `dilution_factor` | f32 | finite, 1 <= f <= 1e6 |
//! | 24..28 | `max_calibration_age_s` | u32 | any (0: no age limit) |

use super::codec::{Reader, Writer};
use super::record::{self, DecodeError, EncodeError, Record, RecordKind, FRAME_OVERHEAD};
use super::store::{load_channel_record, LoadError, RecordKey, RecordMap, StoreError};

/// Which analytical method a calibration or setting belongs to, and which revision of it.
///
/// The numbering is the user's or the firmware's own; lumisorb only compares it. A calibration
/// made under another `version` of the same method is stale (see
/// [`Staleness`](super::Staleness)).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MethodId {
    /// Method number.
    pub id: u16,
    /// Revision of the method (reagent lot, procedure change, ...).
    pub version: u16,
}

/// How a channel measures: what a firmware needs to repeat a measurement the same way.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MethodSettings {
    /// LED/detector channel the settings belong to.
    pub channel: u8,
    /// The method and its revision.
    pub method: MethodId,
    /// Nominal LED peak wavelength, nm (100..=2500).
    pub wavelength_nm: u16,
    /// Cuvette optical path length, mm (> 0, <= 1000).
    pub path_length_mm: f32,
    /// Lit reads per measurement (>= 1).
    pub lit_reads: u16,
    /// Dark reads per measurement (0: no dark correction).
    pub dark_reads: u16,
    /// Stray-light fraction used by the photometry (0 <= s < 1).
    pub stray_fraction: f32,
    /// Whether the reference detector corrects LED drift.
    pub use_reference: bool,
    /// Dilution factor applied to reported concentrations (1 <= f <= 1e6).
    pub dilution_factor: f32,
    /// A calibration older than this many seconds is stale; 0 means no age limit.
    pub max_calibration_age_s: u32,
}

impl MethodSettings {
    /// Bytes of the version-1 payload.
    pub const PAYLOAD_LEN: usize = 28;
    /// Bytes of an encoded record, framing included.
    pub const ENCODED_LEN: usize = FRAME_OVERHEAD + Self::PAYLOAD_LEN;

    /// Checks every field against its allowed range; the name of the first bad field otherwise.
    pub fn validate(&self) -> Result<(), &'static str> {
        if !(100..=2500).contains(&self.wavelength_nm) {
            return Err("wavelength_nm");
        }
        if !(self.path_length_mm > 0.0 && self.path_length_mm <= 1000.0) {
            return Err("path_length_mm");
        }
        if self.lit_reads == 0 {
            return Err("lit_reads");
        }
        if !(self.stray_fraction >= 0.0 && self.stray_fraction < 1.0) {
            return Err("stray_fraction");
        }
        if !(1.0..=1.0e6).contains(&self.dilution_factor) {
            return Err("dilution_factor");
        }
        Ok(())
    }

    /// Encodes the settings as a framed record into `buf`; returns the bytes used
    /// ([`MethodSettings::ENCODED_LEN`]).
    pub fn encode(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        record::encode(self, buf)
    }

    /// Decodes a framed record (exactly `bytes`).
    pub fn decode(bytes: &[u8]) -> Result<Self, DecodeError> {
        record::decode(bytes)
    }

    /// The map key of a channel's settings.
    pub const fn key(channel: u8) -> RecordKey {
        RecordKey {
            kind: RecordKind::MethodSettings,
            channel,
        }
    }

    /// Stores the settings under their channel, replacing the previous ones.
    pub fn save<M: RecordMap>(&self, map: &mut M) -> Result<(), StoreError> {
        map.store_record(Self::key(self.channel), self)
    }

    /// The settings stored for `channel`, `None` if there are none.
    ///
    /// A record that is damaged, of an unknown version, or that names another channel than its
    /// key is a [`LoadError::Record`], never returned as settings.
    pub fn load<M: RecordMap>(map: &mut M, channel: u8) -> Result<Option<Self>, LoadError> {
        load_channel_record(map, Self::key(channel), Self::decode, |r| r.channel)
    }
}

impl Record for MethodSettings {
    const KIND: RecordKind = RecordKind::MethodSettings;
    const VERSION: u8 = 1;

    fn encode_payload(&self, w: &mut Writer<'_>) -> Result<(), EncodeError> {
        w.u8(self.channel)?;
        w.u16(self.method.id)?;
        w.u16(self.method.version)?;
        w.u16(self.wavelength_nm)?;
        w.f32(self.path_length_mm, "path_length_mm")?;
        w.u16(self.lit_reads)?;
        w.u16(self.dark_reads)?;
        w.f32(self.stray_fraction, "stray_fraction")?;
        w.u8(u8::from(self.use_reference))?;
        w.f32(self.dilution_factor, "dilution_factor")?;
        w.u32(self.max_calibration_age_s)?;
        self.validate()
            .map_err(|field| EncodeError::OutOfRange { field })
    }

    fn decode_payload(_version: u8, r: &mut Reader<'_>) -> Result<Self, DecodeError> {
        let settings = MethodSettings {
            channel: r.u8()?,
            method: MethodId {
                id: r.u16()?,
                version: r.u16()?,
            },
            wavelength_nm: r.u16()?,
            path_length_mm: r.f32("path_length_mm")?,
            lit_reads: r.u16()?,
            dark_reads: r.u16()?,
            stray_fraction: r.f32("stray_fraction")?,
            use_reference: r.bool("use_reference")?,
            dilution_factor: r.f32("dilution_factor")?,
            max_calibration_age_s: r.u32()?,
        };
        settings
            .validate()
            .map_err(|field| DecodeError::OutOfRange { field })?;
        Ok(settings)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn example() -> MethodSettings {
        MethodSettings {
            channel: 2,
            method: MethodId { id: 41, version: 3 },
            wavelength_nm: 630,
            path_length_mm: 10.0,
            lit_reads: 32,
            dark_reads: 8,
            stray_fraction: 0.001,
            use_reference: true,
            dilution_factor: 1.0,
            max_calibration_age_s: 7 * 24 * 3600,
        }
    }

    #[test]
    fn round_trip_and_length() {
        let mut buf = [0u8; 64];
        let n = example().encode(&mut buf).unwrap();
        assert_eq!(n, MethodSettings::ENCODED_LEN);
        assert_eq!(MethodSettings::decode(&buf[..n]), Ok(example()));
    }

    #[test]
    fn out_of_range_fields_are_refused_both_ways() {
        let mut buf = [0u8; 64];
        let mut bad = example();
        bad.path_length_mm = 0.0;
        assert_eq!(
            bad.encode(&mut buf),
            Err(EncodeError::OutOfRange {
                field: "path_length_mm"
            })
        );
        // A record sealed with a valid CRC but an out-of-range field still fails to decode.
        let n = example().encode(&mut buf).unwrap();
        buf[6 + 11..6 + 13].copy_from_slice(&0u16.to_le_bytes()); // lit_reads = 0
        let crc = record::checksum(&buf[..n - 4]).to_le_bytes();
        buf[n - 4..n].copy_from_slice(&crc);
        assert_eq!(
            MethodSettings::decode(&buf[..n]),
            Err(DecodeError::OutOfRange { field: "lit_reads" })
        );
    }
}
