//! A channel's calibration, as stored in flash: its inputs, refitted and verified on load.
//!
//! A [`Calibration`] is stored as what it was fitted from (the standards, the model, the
//! weighting, the σ source of the limits) together with what the fit gave (coefficients,
//! s_y/x, R², LOD, LOQ) and the conditions it was made under (method and revision, path length,
//! creation time and counter). On load the standards are refitted with the same code; the
//! stored results must agree with the refit (relative difference at most 1e-9 for the f64
//! statistics, 1e-5 for the f32 limits), otherwise the load fails with
//! [`DecodeError::RefitMismatch`]. The fit is deterministic, so on the same firmware the refit
//! reproduces the stored bits; the tolerance only forgives rounding-level changes of a future
//! fit implementation, while a changed model, weighting or algorithm is caught.
//!
//! Payload of format version 1 (after the frame header, see [`record`](super::record)),
//! `69 + 14 n` bytes for `n` standards (plus 6 with a blank σ), little-endian:
//!
//! | bytes | field | type | allowed |
//! |---|---|---|---|
//! | 1 | `channel` | u8 | any |
//! | 2 + 2 | `method.id`, `method.version` | u16, u16 | any |
//! | 4 | `path_length_mm` | f32 | finite, > 0, <= 1000 |
//! | 4 | `created_s` | u32 | any |
//! | 4 | `sequence` | u32 | any |
//! | 1 | model | u8 | 0 origin, 1 linear, 2 quadratic |
//! | 1 | weighting | u8 | 0 none, 1 inverse variance, 2 inverse concentration squared |
//! | 1 (+ 6) | σ source | u8 | 0 s_y/x; 1 blank, then sd f32 and reads u16 |
//! | 1 | `n` | u8 | 1..=16 |
//! | 14 n | standards: concentration f32, absorbance f32, absorbance_sd f32, replicates u16 | | as [`Standard::validate`] |
//! | 24 | coefficients c0, c1, c2 | 3 x f64 | finite, = refit |
//! | 8 + 8 | s_y/x, R² | f64, f64 | finite, = refit |
//! | 4 + 4 | LOD, LOQ | f32, f32 | finite, = refit |

use super::codec::{Reader, Writer};
use super::record::{self, DecodeError, EncodeError, Record, RecordKind, FRAME_OVERHEAD};
use super::store::{load_channel_record, LoadError, RecordKey, RecordMap, StoreError};
use super::MethodId;
use crate::calibration::{Calibration, CalibrationSet, Model, SigmaSource, Standard, Weighting};
use crate::Absorbance;

/// Most standards a stored calibration holds (the default capacity of a [`CalibrationSet`]).
pub const MAX_STANDARDS: usize = 16;

/// Relative agreement required between stored and refitted f64 statistics.
pub const REFIT_TOLERANCE_F64: f64 = 1.0e-9;
/// Relative agreement required between stored and refitted LOD and LOQ (f32).
pub const REFIT_TOLERANCE_F32: f32 = 1.0e-5;

/// A channel's calibration with the conditions it was made under.
#[derive(Clone, Debug, PartialEq)]
pub struct CalibrationRecord {
    /// Channel calibrated.
    pub channel: u8,
    /// Method and revision the standards were read under.
    pub method: MethodId,
    /// Cuvette path length the standards were read with, mm (> 0, <= 1000).
    pub path_length_mm: f32,
    /// When the calibration was made, seconds on the instrument's clock.
    pub created_s: u32,
    /// Creation counter: by convention one more than the calibration it replaced, so that a
    /// report can tell calibrations apart even without a clock.
    pub sequence: u32,
    /// The fitted calibration.
    pub calibration: Calibration<MAX_STANDARDS>,
}

const fn model_code(model: Model) -> u8 {
    match model {
        Model::Origin => 0,
        Model::Linear => 1,
        Model::Quadratic => 2,
    }
}

const fn weighting_code(weighting: Weighting) -> u8 {
    match weighting {
        Weighting::None => 0,
        Weighting::InverseVariance => 1,
        Weighting::InverseConcentrationSquared => 2,
    }
}

fn close_f64(stored: f64, refit: f64) -> bool {
    (stored - refit).abs() <= REFIT_TOLERANCE_F64 * stored.abs().max(refit.abs())
}

fn close_f32(stored: f32, refit: f32) -> bool {
    (stored - refit).abs() <= REFIT_TOLERANCE_F32 * stored.abs().max(refit.abs())
}

impl CalibrationRecord {
    /// Largest encoded size (framing included): 16 standards and a blank σ.
    pub const MAX_ENCODED_LEN: usize = FRAME_OVERHEAD + 69 + 6 + 14 * MAX_STANDARDS;

    /// Checks the fields that the types do not already guarantee; the name of the first bad
    /// field otherwise.
    pub fn validate(&self) -> Result<(), &'static str> {
        if !(self.path_length_mm > 0.0 && self.path_length_mm <= 1000.0) {
            return Err("path_length_mm");
        }
        Ok(())
    }

    /// Encodes the calibration as a framed record into `buf`; returns the bytes used.
    pub fn encode(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        record::encode(self, buf)
    }

    /// Decodes a framed record (exactly `bytes`), refits the standards and checks the stored
    /// statistics against the refit.
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

    /// Stores the calibration under its channel, replacing the previous one. After a power
    /// loss at any point the channel holds the old or the new calibration, whole.
    pub fn save<M: RecordMap>(&self, map: &mut M) -> Result<(), StoreError> {
        map.store_record(Self::key(self.channel), self)
    }

    /// The calibration stored for `channel`, refitted and verified; `None` if there is none.
    ///
    /// A damaged record, one of an unknown version, one that does not refit to its stored
    /// statistics, or one that names another channel than its key is a [`LoadError::Record`]:
    /// never returned as a calibration.
    pub fn load<M: RecordMap>(map: &mut M, channel: u8) -> Result<Option<Self>, LoadError> {
        load_channel_record(map, Self::key(channel), Self::decode, |r| r.channel)
    }
}

impl Record for CalibrationRecord {
    const KIND: RecordKind = RecordKind::Calibration;
    const VERSION: u8 = 1;

    fn encode_payload(&self, w: &mut Writer<'_>) -> Result<(), EncodeError> {
        self.validate()
            .map_err(|field| EncodeError::OutOfRange { field })?;
        let cal = &self.calibration;
        w.u8(self.channel)?;
        w.u16(self.method.id)?;
        w.u16(self.method.version)?;
        w.f32(self.path_length_mm, "path_length_mm")?;
        w.u32(self.created_s)?;
        w.u32(self.sequence)?;
        w.u8(model_code(cal.model()))?;
        w.u8(weighting_code(cal.weighting()))?;
        match cal.sigma_source() {
            SigmaSource::ResidualSd => w.u8(0)?,
            SigmaSource::Blank { sd, replicates } => {
                w.u8(1)?;
                w.f32(sd, "blank_sd")?;
                w.u16(replicates)?;
            }
        }
        let standards = cal.points();
        let n = u8::try_from(standards.len())
            .map_err(|_| EncodeError::OutOfRange { field: "standards" })?;
        w.u8(n)?;
        for s in standards {
            w.f32(s.concentration, "concentration")?;
            w.f32(s.absorbance.value(), "absorbance")?;
            w.f32(s.absorbance_sd, "absorbance_sd")?;
            w.u16(s.replicates)?;
        }
        for c in cal.coefficients() {
            w.f64(c, "coefficients")?;
        }
        w.f64(cal.residual_sd(), "residual_sd")?;
        w.f64(cal.r_squared(), "r_squared")?;
        w.f32(cal.lod(), "lod")?;
        w.f32(cal.loq(), "loq")
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
        let model = match r.u8()? {
            0 => Model::Origin,
            1 => Model::Linear,
            2 => Model::Quadratic,
            _ => return Err(DecodeError::OutOfRange { field: "model" }),
        };
        let weighting = match r.u8()? {
            0 => Weighting::None,
            1 => Weighting::InverseVariance,
            2 => Weighting::InverseConcentrationSquared,
            _ => return Err(DecodeError::OutOfRange { field: "weighting" }),
        };
        let sigma = match r.u8()? {
            0 => SigmaSource::ResidualSd,
            1 => SigmaSource::Blank {
                sd: r.f32("blank_sd")?,
                replicates: r.u16()?,
            },
            _ => return Err(DecodeError::OutOfRange { field: "sigma" }),
        };
        let n = usize::from(r.u8()?);
        if n == 0 || n > MAX_STANDARDS {
            return Err(DecodeError::OutOfRange { field: "standards" });
        }
        let mut set = CalibrationSet::<MAX_STANDARDS>::new();
        for _ in 0..n {
            let concentration = r.f32("concentration")?;
            let absorbance =
                Absorbance::new(r.f32("absorbance")?).map_err(|_| DecodeError::NonFinite {
                    field: "absorbance",
                })?;
            let absorbance_sd = r.f32("absorbance_sd")?;
            let replicates = r.u16()?;
            let standard =
                Standard::with_replicates(concentration, absorbance, absorbance_sd, replicates)
                    .map_err(|_| DecodeError::OutOfRange { field: "standard" })?;
            set.push(standard)
                .map_err(|_| DecodeError::OutOfRange { field: "standards" })?;
        }
        let coefficients = [
            r.f64("coefficients")?,
            r.f64("coefficients")?,
            r.f64("coefficients")?,
        ];
        let residual_sd = r.f64("residual_sd")?;
        let r_squared = r.f64("r_squared")?;
        let lod = r.f32("lod")?;
        let loq = r.f32("loq")?;

        let calibration = Calibration::fit_with_sigma(&set, model, weighting, sigma)
            .map_err(DecodeError::RefitFailed)?;
        let refit = calibration.coefficients();
        if !coefficients
            .iter()
            .zip(refit.iter())
            .all(|(s, f)| close_f64(*s, *f))
        {
            return Err(DecodeError::RefitMismatch {
                field: "coefficients",
            });
        }
        if !close_f64(residual_sd, calibration.residual_sd()) {
            return Err(DecodeError::RefitMismatch {
                field: "residual_sd",
            });
        }
        if !close_f64(r_squared, calibration.r_squared()) {
            return Err(DecodeError::RefitMismatch { field: "r_squared" });
        }
        if !close_f32(lod, calibration.lod()) {
            return Err(DecodeError::RefitMismatch { field: "lod" });
        }
        if !close_f32(loq, calibration.loq()) {
            return Err(DecodeError::RefitMismatch { field: "loq" });
        }
        let record = CalibrationRecord {
            channel,
            method,
            path_length_mm,
            created_s,
            sequence,
            calibration,
        };
        record
            .validate()
            .map_err(|field| DecodeError::OutOfRange { field })?;
        Ok(record)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Harvey, Modern Analytical Chemistry (2000), examples 5.10-5.12 (the standards of the
    /// calibration engine's worked example; signals used as "absorbances" here).
    pub(crate) fn harvey() -> CalibrationRecord {
        let x = [0.0f32, 0.1, 0.2, 0.3, 0.4, 0.5];
        let y = [0.0f32, 12.36, 24.83, 35.91, 48.79, 60.42];
        let mut set = CalibrationSet::new();
        for (c, a) in x.iter().zip(y.iter()) {
            set.push(Standard::new(*c, Absorbance::new(*a).unwrap()).unwrap())
                .unwrap();
        }
        CalibrationRecord {
            channel: 0,
            method: MethodId { id: 5, version: 1 },
            path_length_mm: 10.0,
            created_s: 100,
            sequence: 1,
            calibration: Calibration::fit(&set, Model::Linear, Weighting::None).unwrap(),
        }
    }

    fn reseal(buf: &mut [u8], n: usize) {
        let crc = record::checksum(&buf[..n - 4]).to_le_bytes();
        buf[n - 4..n].copy_from_slice(&crc);
    }

    #[test]
    fn round_trip_refits_to_the_same_bits() {
        let rec = harvey();
        let mut buf = [0u8; CalibrationRecord::MAX_ENCODED_LEN];
        let n = rec.encode(&mut buf).unwrap();
        assert_eq!(n, FRAME_OVERHEAD + 69 + 14 * 6);
        let back = CalibrationRecord::decode(&buf[..n]).unwrap();
        assert_eq!(back, rec);
        // Published slope and intercept of the example: b = 120.706, a = 0.209 (Harvey 2000,
        // example 5.10) survive the round trip.
        let [a, b, _] = back.calibration.coefficients();
        assert!(
            (b - 120.706).abs() < 5e-4 && (a - 0.209).abs() < 5e-4,
            "{a} {b}"
        );
    }

    #[test]
    fn stored_statistics_that_disagree_with_the_refit_are_refused() {
        let rec = harvey();
        let mut buf = [0u8; CalibrationRecord::MAX_ENCODED_LEN];
        let n = rec.encode(&mut buf).unwrap();
        // The slope c1 starts after the fixed head (21 bytes), the standards and c0.
        let c1_at = record::HEADER_LEN + 21 + 14 * 6 + 8;
        let mut bad = buf;
        let slope = f64::from_le_bytes(bad[c1_at..c1_at + 8].try_into().unwrap());
        assert!((slope - 120.706).abs() < 1e-3);
        bad[c1_at..c1_at + 8].copy_from_slice(&(slope * (1.0 + 1e-6)).to_le_bytes());
        reseal(&mut bad, n);
        assert_eq!(
            CalibrationRecord::decode(&bad[..n]),
            Err(DecodeError::RefitMismatch {
                field: "coefficients"
            })
        );
        // A model byte changed to quadratic: refit gives other coefficients.
        let model_at = record::HEADER_LEN + 17;
        let mut bad = buf;
        bad[model_at] = 2;
        reseal(&mut bad, n);
        assert!(matches!(
            CalibrationRecord::decode(&bad[..n]),
            Err(DecodeError::RefitMismatch { .. }) | Err(DecodeError::RefitFailed(_))
        ));
        // Standards that cannot be fitted (all one concentration) are a RefitFailed.
        let mut bad = buf;
        for i in 0..6 {
            let at = record::HEADER_LEN + 21 + 14 * i;
            bad[at..at + 4].copy_from_slice(&0.3f32.to_le_bytes());
        }
        reseal(&mut bad, n);
        assert!(matches!(
            CalibrationRecord::decode(&bad[..n]),
            Err(DecodeError::RefitFailed(_))
        ));
    }
}
