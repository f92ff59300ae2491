//! The result log: every reported result, appended to a ring in flash, exported as CSV.
//!
//! Payload of a [`ResultEntry`], format version 1 (after the frame header, see
//! [`record`](super::record)), 22 to 49 bytes, little-endian:
//!
//! | bytes | field | type | allowed |
//! |---|---|---|---|
//! | 4 | `time_s` | u32 | any |
//! | 1 + n | `sample` | u8 length n, then n ASCII bytes | see [`SampleId`] |
//! | 1 | `channel` | u8 | any |
//! | 2 + 2 | `method.id`, `method.version` | u16, u16 | any |
//! | 4 | `absorbance` | f32 | finite |
//! | 4 | `absorbance_sd` | f32 | finite, >= 0 |
//! | 1 | concentration present | u8 | 0 or 1 |
//! | 0 or 12 | `value`, `low`, `high` | 3 x f32 | finite, low <= value <= high |
//! | 2 | `flags` | u16 | bits of the [`Flag`](crate::Flag) vocabulary only |

use core::fmt;

use super::codec::{Reader, Writer};
use super::record::{self, DecodeError, EncodeError, Record, RecordKind, FRAME_OVERHEAD};
use super::store::{RecordRing, StoreError};
use super::MethodId;
use crate::{Absorbance, Flags};

/// Identifier of a sample as typed or scanned by the user: 1 to 16 ASCII characters, letters,
/// digits and `-_.:/#`, starting with a letter or digit.
///
/// The restricted set keeps the id safe in CSV and JSON without quoting and keeps a spreadsheet
/// from reading it as a formula (no leading `=`, `+`, `-`, `@`).
#[derive(Clone, Copy, PartialEq, Eq, Hash)]
pub struct SampleId {
    len: u8,
    bytes: [u8; SampleId::MAX_LEN],
}

/// Why a text is not a valid [`SampleId`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SampleIdError {
    /// Empty text.
    Empty,
    /// More than [`SampleId::MAX_LEN`] bytes.
    TooLong,
    /// A character outside the allowed set, or a first character that is not a letter or digit.
    BadCharacter {
        /// Byte offset of the character.
        at: usize,
    },
}

impl fmt::Display for SampleIdError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SampleIdError::Empty => f.write_str("sample id is empty"),
            SampleIdError::TooLong => write!(f, "sample id longer than {}", SampleId::MAX_LEN),
            SampleIdError::BadCharacter { at } => {
                write!(f, "sample id: character at {at} not allowed")
            }
        }
    }
}

impl core::error::Error for SampleIdError {}

impl SampleId {
    /// Longest id, in bytes.
    pub const MAX_LEN: usize = 16;

    /// Checks and copies `text`.
    pub fn new(text: &str) -> Result<SampleId, SampleIdError> {
        Self::from_bytes(text.as_bytes())
    }

    fn from_bytes(text: &[u8]) -> Result<SampleId, SampleIdError> {
        if text.is_empty() {
            return Err(SampleIdError::Empty);
        }
        if text.len() > Self::MAX_LEN {
            return Err(SampleIdError::TooLong);
        }
        for (at, &b) in text.iter().enumerate() {
            let ok = b.is_ascii_alphanumeric() || (at > 0 && b"-_.:/#".contains(&b));
            if !ok {
                return Err(SampleIdError::BadCharacter { at });
            }
        }
        let mut bytes = [0u8; Self::MAX_LEN];
        bytes
            .get_mut(..text.len())
            .ok_or(SampleIdError::TooLong)?
            .copy_from_slice(text);
        Ok(SampleId {
            len: u8::try_from(text.len()).map_err(|_| SampleIdError::TooLong)?,
            bytes,
        })
    }

    /// The id as text.
    pub fn as_str(&self) -> &str {
        let bytes = self.bytes.get(..usize::from(self.len)).unwrap_or(&[]);
        core::str::from_utf8(bytes).unwrap_or("")
    }
}

impl fmt::Debug for SampleId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "SampleId({:?})", self.as_str())
    }
}

impl fmt::Display for SampleId {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

#[cfg(feature = "defmt")]
impl defmt::Format for SampleId {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "{=str}", self.as_str())
    }
}

/// A concentration with its 95 % confidence interval, in the method's unit.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ConcentrationInterval {
    /// The estimate.
    pub value: f32,
    /// Lower end of the 95 % confidence interval.
    pub low: f32,
    /// Upper end of the 95 % confidence interval.
    pub high: f32,
}

/// One reported result, as kept in the log.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ResultEntry {
    /// When the result was reported: seconds on the instrument's clock (Unix time when it has
    /// a real-time clock). lumisorb never reads a clock; the firmware hands the time in.
    pub time_s: u32,
    /// The sample.
    pub sample: SampleId,
    /// The channel measured.
    pub channel: u8,
    /// The method the result was computed under.
    pub method: MethodId,
    /// Decadic absorbance.
    pub absorbance: Absorbance,
    /// Standard deviation of the absorbance (>= 0).
    pub absorbance_sd: f32,
    /// Concentration with its interval; `None` when it could not be computed (flags say why).
    pub concentration: Option<ConcentrationInterval>,
    /// Quality flags of the result.
    pub flags: Flags,
}

impl ResultEntry {
    /// Largest encoded size (framing included): 16-character id, with a concentration.
    pub const MAX_ENCODED_LEN: usize = FRAME_OVERHEAD + 21 + SampleId::MAX_LEN + 12;
    /// Smallest encoded size (framing included): 1-character id, no concentration.
    pub const MIN_ENCODED_LEN: usize = FRAME_OVERHEAD + 21 + 1;

    /// Checks the fields that the types do not already guarantee.
    pub fn validate(&self) -> Result<(), &'static str> {
        if !(self.absorbance_sd >= 0.0 && self.absorbance_sd.is_finite()) {
            return Err("absorbance_sd");
        }
        if let Some(c) = self.concentration {
            if !(c.value.is_finite() && c.low.is_finite() && c.high.is_finite()) {
                return Err("concentration");
            }
            if !(c.low <= c.value && c.value <= c.high) {
                return Err("concentration");
            }
        }
        Ok(())
    }

    /// Encodes the entry as a framed record into `buf`; returns the bytes used.
    pub fn encode(&self, buf: &mut [u8]) -> Result<usize, EncodeError> {
        record::encode(self, buf)
    }

    /// Decodes a framed record (exactly `bytes`).
    pub fn decode(bytes: &[u8]) -> Result<Self, DecodeError> {
        record::decode(bytes)
    }

    /// Appends the entry to the log; when the log is full its oldest page of entries is dropped.
    pub fn append<R: RecordRing>(&self, log: &mut R) -> Result<(), StoreError> {
        log.append_record(self)
    }
}

/// What an export did.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ExportSummary {
    /// Entries written.
    pub exported: u32,
    /// Stored entries that did not decode (damaged, or of a newer format) and were not written.
    pub unreadable: u32,
}

/// Why an export stopped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ExportError {
    /// Reading the log failed.
    Store(StoreError),
    /// The output refused a write (`core::fmt::Error`).
    Write,
}

impl fmt::Display for ExportError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ExportError::Store(e) => write!(f, "reading the log: {e}"),
            ExportError::Write => f.write_str("output refused a write"),
        }
    }
}

impl core::error::Error for ExportError {}

/// Visits every decodable entry of `log`, oldest first; returns how many did and did not decode.
pub fn for_each_entry<R: RecordRing>(
    log: &mut R,
    mut visit: impl FnMut(&ResultEntry) -> core::ops::ControlFlow<()>,
) -> Result<ExportSummary, StoreError> {
    let mut summary = ExportSummary::default();
    log.visit_records(|bytes| match ResultEntry::decode(bytes) {
        Ok(entry) => {
            summary.exported = summary.exported.saturating_add(1);
            visit(&entry)
        }
        Err(_) => {
            summary.unreadable = summary.unreadable.saturating_add(1);
            core::ops::ControlFlow::Continue(())
        }
    })?;
    Ok(summary)
}

/// Writes the whole log as CSV ([`CSV_HEADER`], then one [`write_csv_row`] per entry, oldest
/// first) to `out`.
///
/// Entries that do not decode are not written but counted in
/// [`ExportSummary::unreadable`]: the caller must show that count (nothing is lost silently).
pub fn export_csv<R: RecordRing, W: fmt::Write>(
    log: &mut R,
    out: &mut W,
) -> Result<ExportSummary, ExportError> {
    write_csv_header(out).map_err(|_| ExportError::Write)?;
    let mut failed = false;
    let summary = for_each_entry(log, |entry| {
        if write_csv_row(out, entry).is_err() {
            failed = true;
            core::ops::ControlFlow::Break(())
        } else {
            core::ops::ControlFlow::Continue(())
        }
    })
    .map_err(ExportError::Store)?;
    if failed {
        return Err(ExportError::Write);
    }
    Ok(summary)
}

impl Record for ResultEntry {
    const KIND: RecordKind = RecordKind::Result;
    const VERSION: u8 = 1;

    fn encode_payload(&self, w: &mut Writer<'_>) -> Result<(), EncodeError> {
        self.validate()
            .map_err(|field| EncodeError::OutOfRange { field })?;
        w.u32(self.time_s)?;
        w.u8(self.sample.len)?;
        w.bytes(self.sample.as_str().as_bytes())?;
        w.u8(self.channel)?;
        w.u16(self.method.id)?;
        w.u16(self.method.version)?;
        w.f32(self.absorbance.value(), "absorbance")?;
        w.f32(self.absorbance_sd, "absorbance_sd")?;
        match self.concentration {
            None => w.u8(0)?,
            Some(c) => {
                w.u8(1)?;
                w.f32(c.value, "concentration")?;
                w.f32(c.low, "conc_low")?;
                w.f32(c.high, "conc_high")?;
            }
        }
        w.u16(self.flags.bits())
    }

    fn decode_payload(_version: u8, r: &mut Reader<'_>) -> Result<Self, DecodeError> {
        let time_s = r.u32()?;
        let len = r.u8()?;
        let sample = SampleId::from_bytes(r.slice(usize::from(len))?)
            .map_err(|_| DecodeError::OutOfRange { field: "sample" })?;
        let channel = r.u8()?;
        let method = MethodId {
            id: r.u16()?,
            version: r.u16()?,
        };
        let absorbance =
            Absorbance::new(r.f32("absorbance")?).map_err(|_| DecodeError::NonFinite {
                field: "absorbance",
            })?;
        let absorbance_sd = r.f32("absorbance_sd")?;
        let concentration = if r.bool("concentration")? {
            Some(ConcentrationInterval {
                value: r.f32("concentration")?,
                low: r.f32("conc_low")?,
                high: r.f32("conc_high")?,
            })
        } else {
            None
        };
        let flags = Flags::from_bits(r.u16()?).ok_or(DecodeError::OutOfRange { field: "flags" })?;
        let entry = ResultEntry {
            time_s,
            sample,
            channel,
            method,
            absorbance,
            absorbance_sd,
            concentration,
            flags,
        };
        entry
            .validate()
            .map_err(|field| DecodeError::OutOfRange { field })?;
        Ok(entry)
    }
}

/// The CSV header line written by [`write_csv_header`] (without line end).
pub const CSV_HEADER: &str = "time_s,sample,channel,method,method_version,absorbance,absorbance_sd,concentration,conc_low,conc_high,flags";

/// Writes [`CSV_HEADER`] and a line end.
pub fn write_csv_header<W: fmt::Write>(out: &mut W) -> fmt::Result {
    out.write_str(CSV_HEADER)?;
    out.write_str("\n")
}

/// Writes one entry as a CSV row and a line end.
///
/// Numbers use Rust's shortest round-trip formatting (the row reads back to the same `f32`s);
/// a missing concentration leaves its three fields empty; flags are the vocabulary words
/// separated by spaces, empty when there are none. No field needs quoting.
pub fn write_csv_row<W: fmt::Write>(out: &mut W, entry: &ResultEntry) -> fmt::Result {
    write!(
        out,
        "{},{},{},{},{},{},{},",
        entry.time_s,
        entry.sample,
        entry.channel,
        entry.method.id,
        entry.method.version,
        entry.absorbance.value(),
        entry.absorbance_sd
    )?;
    match entry.concentration {
        Some(c) => write!(out, "{},{},{},", c.value, c.low, c.high)?,
        None => out.write_str(",,,")?,
    }
    let mut first = true;
    for flag in entry.flags.iter() {
        if !first {
            out.write_str(" ")?;
        }
        first = false;
        out.write_str(flag.name())?;
    }
    out.write_str("\n")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::Flag;

    pub(crate) fn example() -> ResultEntry {
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
        }
    }

    #[test]
    fn sample_id_rules() {
        assert_eq!(
            SampleId::new("A-1_b.2:c/3#").unwrap().as_str(),
            "A-1_b.2:c/3#"
        );
        assert_eq!(SampleId::new(""), Err(SampleIdError::Empty));
        assert_eq!(
            SampleId::new("0123456789abcdefg"),
            Err(SampleIdError::TooLong)
        );
        assert_eq!(
            SampleId::new("=SUM(A1)"),
            Err(SampleIdError::BadCharacter { at: 0 })
        );
        assert_eq!(
            SampleId::new("a,b"),
            Err(SampleIdError::BadCharacter { at: 1 })
        );
        assert_eq!(
            SampleId::new("é"),
            Err(SampleIdError::BadCharacter { at: 0 })
        );
    }

    #[test]
    fn round_trip_both_shapes() {
        let mut buf = [0u8; ResultEntry::MAX_ENCODED_LEN];
        let e = example();
        let n = e.encode(&mut buf).unwrap();
        assert_eq!(ResultEntry::decode(&buf[..n]), Ok(e));
        let none = ResultEntry {
            concentration: None,
            sample: SampleId::new("0123456789abcdef").unwrap(),
            ..e
        };
        let n = none.encode(&mut buf).unwrap();
        assert_eq!(ResultEntry::decode(&buf[..n]), Ok(none));
    }

    #[test]
    fn csv_row() {
        let mut s = std::string::String::new();
        write_csv_header(&mut s).unwrap();
        write_csv_row(&mut s, &example()).unwrap();
        write_csv_row(
            &mut s,
            &ResultEntry {
                concentration: None,
                flags: Flags::NONE,
                ..example()
            },
        )
        .unwrap();
        assert_eq!(
            s,
            "time_s,sample,channel,method,method_version,absorbance,absorbance_sd,concentration,conc_low,conc_high,flags\n\
             1700000000,BROOK-7,1,12,2,0.4321,0.0012,1.25,1.2,1.3,below_loq unstable\n\
             1700000000,BROOK-7,1,12,2,0.4321,0.0012,,,,\n"
        );
    }

    #[test]
    fn inverted_interval_is_refused() {
        let mut buf = [0u8; ResultEntry::MAX_ENCODED_LEN];
        let bad = ResultEntry {
            concentration: Some(ConcentrationInterval {
                value: 1.0,
                low: 2.0,
                high: 3.0,
            }),
            ..example()
        };
        assert_eq!(
            bad.encode(&mut buf),
            Err(EncodeError::OutOfRange {
                field: "concentration"
            })
        );
    }
}
