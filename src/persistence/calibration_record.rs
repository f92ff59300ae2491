//! A channel's calibration, as stored in flash.
//!
//! DRAFT: plain fields until the calibration engine lands; the refit check follows.
//!
//! Payload of format version 1 (after the frame header, see [`record`](super::record)),
//! `60 + 14 n` bytes for `n` standards (1..=16), little-endian:
//!
//! | bytes | field | type | allowed |
//! |---|---|---|---|
//! | 1 | `channel` | u8 | any |
//! | 2 + 2 | `method.id`, `method.version` | u16, u16 | any |
//! | 4 | `path_length_mm` | f32 | finite, > 0, <= 1000 |
//! | 4 | `created_s` | u32 | any |
//! | 4 | `sequence` | u32 | any |
//! | 1 | `model` | u8 | 0 origin, 1 linear, 2 quadratic |
//! | 1 | `weighting` | u8 | 0 none, 1 inverse variance, 2 inverse concentration squared |
//! | 1 | `n` | u8 | 1..=16 |
//! | 14 n | standards: concentration f32, absorbance f32, absorbance_sd f32, replicates u16 | | finite, conc >= 0, sd >= 0, replicates >= 1 |
//! | 24 | `coefficients` | 3 x f64 | finite |
//! | 8 | `residual_sd` | f64 | finite, >= 0 |
//! | 8 | `r_squared` | f64 | finite |

use super::codec::{Reader, Writer};
use super::record::{self, DecodeError, EncodeError, Record, RecordKind, FRAME_OVERHEAD};
use super::store::{LoadError, RecordKey, RecordMap, StoreError};
use super::MethodId;

/// Most standards a stored calibration holds.
pub const MAX_STANDARDS: usize = 16;

/// One calibration standard as stored.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StoredStandard {
    /// Known concentration (>= 0).
    pub concentration: f32,
    /// Measured absorbance.
    pub absorbance: f32,
    /// Standard deviation of the absorbance (>= 0).
    pub absorbance_sd: f32,
    /// Replicate reads averaged (>= 1).
    pub replicates: u16,
}

/// A channel's calibration with what it was made under.
#[derive(Clone, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CalibrationRecord {
    /// Channel calibrated.
    pub channel: u8,
    /// Method and revision the standards were read under.
    pub method: MethodId,
    /// Cuvette path length the standards were read with, mm.
    pub path_length_mm: f32,
    /// When the calibration was made, seconds on the instrument's clock.
    pub created_s: u32,
    /// Creation counter: one more than the calibration it replaced.
    pub sequence: u32,
    /// Model code.
    pub model: u8,
    /// Weighting code.
    pub weighting: u8,
    /// The standards.
    pub standards: heapless::Vec<StoredStandard, MAX_STANDARDS>,
    /// Fitted coefficients c0, c1, c2 of A = c0 + c1 x + c2 x^2.
    pub coefficients: [f64; 3],
    /// Residual standard deviation s_y/x.
    pub residual_sd: f64,
    /// Coefficient of determination.
    pub r_squared: f64,
}

impl CalibrationRecord {
    /// Largest encoded size (framing included).
    pub const MAX_ENCODED_LEN: usize = FRAME_OVERHEAD + 60 + 14 * MAX_STANDARDS;

    /// Checks every field against its allowed range; the name of the first bad field otherwise.
    pub fn validate(&self) -> Result<(), &'static str> {
        if !(self.path_length_mm > 0.0 && self.path_length_mm <= 1000.0) {
            return Err("path_length_mm");
        }
        if self.model > 2 {
            return Err("model");
        }
        if self.weighting > 2 {
            return Err("weighting");
        }
        if self.standards.is_empty() {
            return Err("standards");
        }
        for s in &self.standards {
            if !(s.concentration >= 0.0 && s.concentration.is_finite()) {
                return Err("concentration");
            }
            if !s.absorbance.is_finite() {
                return Err("absorbance");
            }
            if !(s.absorbance_sd >= 0.0 && s.absorbance_sd.is_finite()) {
                return Err("absorbance_sd");
            }
            if s.replicates == 0 {
                return Err("replicates");
            }
        }
        if !self.coefficients.iter().all(|c| c.is_finite()) {
            return Err("coefficients");
        }
        if !(self.residual_sd >= 0.0 && self.residual_sd.is_finite()) {
            return Err("residual_sd");
        }
        if !self.r_squared.is_finite() {
            return Err("r_squared");
        }
        Ok(())
    }

    /// Encodes the calibration as a framed record into `buf`; returns the bytes used.
    pub fn encode(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        record::encode(self, buf)
    }

    /// Decodes a framed record (exactly `bytes`).
    pub fn decode(bytes: &[u8]) -> Result<Self, DecodeError> {
        record::decode(bytes)
    }

    /// The map key of a channel's calibration.
    pub const fn key(channel: u8) -> RecordKey {
        RecordKey {
            kind: RecordKind::Calibration,
            channel,
        }
    }

    /// Stores the calibration under its channel, replacing the previous one.
    pub fn save<M: RecordMap>(&self, map: &mut M) -> Result<(), StoreError> {
        map.store_record(Self::key(self.channel), self)
    }

    /// The calibration stored for `channel`, `None` if there is none.
    pub fn load<M: RecordMap>(map: &mut M, channel: u8) -> Result<Option<Self>, LoadError> {
        match map.fetch_record(Self::key(channel), Self::decode)? {
            None => Ok(None),
            Some(Err(e)) => Err(LoadError::Record(e)),
            Some(Ok(c)) if c.channel != channel => {
                Err(LoadError::Record(DecodeError::OutOfRange {
                    field: "channel",
                }))
            }
            Some(Ok(c)) => Ok(Some(c)),
        }
    }
}

impl Record for CalibrationRecord {
    const KIND: RecordKind = RecordKind::Calibration;
    const VERSION: u8 = 1;

    fn encode_payload(&self, w: &mut Writer<'_>) -> Result<(), EncodeError> {
        self.validate()
            .map_err(|field| EncodeError::OutOfRange { field })?;
        w.u8(self.channel)?;
        w.u16(self.method.id)?;
        w.u16(self.method.version)?;
        w.f32(self.path_length_mm, "path_length_mm")?;
        w.u32(self.created_s)?;
        w.u32(self.sequence)?;
        w.u8(self.model)?;
        w.u8(self.weighting)?;
        let n = u8::try_from(self.standards.len())
            .map_err(|_| EncodeError::OutOfRange { field: "standards" })?;
        w.u8(n)?;
        for s in &self.standards {
            w.f32(s.concentration, "concentration")?;
            w.f32(s.absorbance, "absorbance")?;
            w.f32(s.absorbance_sd, "absorbance_sd")?;
            w.u16(s.replicates)?;
        }
        for c in self.coefficients {
            w.f64(c, "coefficients")?;
        }
        w.f64(self.residual_sd, "residual_sd")?;
        w.f64(self.r_squared, "r_squared")
    }

    fn decode_payload(_version: u8, r: &mut Reader<'_>) -> Result<Self, DecodeError> {
        let channel = r.u8()?;
        let method = MethodId {
            id: r.u16()?,
            version: r.u16()?,
        };
        let path_length_mm = r.f32("path_length_mm")?;
        let created_s = r.u32()?;
        let sequence = r.u32()?;
        let model = r.u8()?;
        let weighting = r.u8()?;
        let n = usize::from(r.u8()?);
        if n == 0 || n > MAX_STANDARDS {
            return Err(DecodeError::OutOfRange { field: "standards" });
        }
        let mut standards = heapless::Vec::new();
        for _ in 0..n {
            let s = StoredStandard {
                concentration: r.f32("concentration")?,
                absorbance: r.f32("absorbance")?,
                absorbance_sd: r.f32("absorbance_sd")?,
                replicates: r.u16()?,
            };
            standards
                .push(s)
                .map_err(|_| DecodeError::OutOfRange { field: "standards" })?;
        }
        let coefficients = [
            r.f64("coefficients")?,
            r.f64("coefficients")?,
            r.f64("coefficients")?,
        ];
        let record = CalibrationRecord {
            channel,
            method,
            path_length_mm,
            created_s,
            sequence,
            model,
            weighting,
            standards,
            coefficients,
            residual_sd: r.f64("residual_sd")?,
            r_squared: r.f64("r_squared")?,
        };
        record
            .validate()
            .map_err(|field| DecodeError::OutOfRange { field })?;
        Ok(record)
    }
}
