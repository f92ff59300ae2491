//! Streaming reader of version-1 session files: one line in, one [`Event`] out.
//!
//! The reader holds only the metadata and the key of the current measurement (a few hundred
//! bytes, no heap). It checks every line completely before it hands anything out, so a [`Row`]
//! it returns is valid, and a malformed line gives a [`ReadError`] with the line's number.
//!
//! ```
//! use lumisorb::session::{lines, Event, SessionReader};
//!
//! let file = b"# lumisorb-session: 1\n# full_scale: 4095\n\
//!              t_ms,channel,nm,led,role,id,conc,signal,reference\n\
//!              0,red,630,off,blank,B1,,12,\n\
//!              4,red,630,on,blank,B1,,3900,\n";
//! let mut reader = SessionReader::new();
//! let mut lit = 0;
//! for line in lines(file) {
//!     if let Event::Row(row) = reader.feed(line)? {
//!         lit += u32::from(row.led == lumisorb::session::Led::On);
//!     }
//! }
//! reader.finish()?;
//! assert_eq!(lit, 1);
//! assert_eq!(reader.metadata().map(|m| m.full_scale), Some(4095));
//! # Ok::<(), lumisorb::session::ReadError>(())
//! ```

use heapless::String;

use super::error::{Field, NumberError, ReadError, ReadErrorKind};
use super::metadata::{Metadata, MetadataKey, Model};
use super::row::{Led, Role, Row};
use super::{COLUMNS, FORMAT_VERSION, HEADER, MAX_FULL_SCALE, MAX_NAME_LEN};

/// What one line of a session file was.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Event<'a> {
    /// An empty (or whitespace-only) line; ignored by the format.
    Empty,
    /// A metadata line; its value is now in [`SessionReader::metadata_so_far`].
    Metadata(MetadataKey),
    /// A `#` line that is not metadata: the text after `#`, with surrounding spaces removed.
    Comment(&'a str),
    /// The header row; [`SessionReader::metadata`] is now available.
    Header,
    /// A data row (one raw read).
    Row(Row<'a>),
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Phase {
    Preamble,
    Rows,
    Finished,
}

/// The key and invariants of the measurement the last row belonged to.
#[derive(Clone, Debug)]
struct Current {
    role: Role,
    channel: String<MAX_NAME_LEN>,
    id: String<MAX_NAME_LEN>,
    nm: Option<u16>,
    conc: Option<f64>,
    has_reference: bool,
}

/// Streaming, heap-free reader of a session file. Feed it every line in order, then call
/// [`SessionReader::finish`].
#[derive(Clone, Debug)]
pub struct SessionReader {
    line: u32,
    phase: Phase,
    seen: u8,
    meta: Metadata,
    last_t: u32,
    rows: u64,
    current: Option<Current>,
    started: bool,
}

impl Default for SessionReader {
    fn default() -> Self {
        SessionReader::new()
    }
}

impl SessionReader {
    /// A reader at the start of a file.
    pub const fn new() -> SessionReader {
        SessionReader {
            line: 0,
            phase: Phase::Preamble,
            seen: 0,
            meta: Metadata {
                version: 0,
                full_scale: 0,
                unit: None,
                path_mm: None,
                analyte: None,
                model: None,
            },
            last_t: 0,
            rows: 0,
            current: None,
            started: false,
        }
    }

    /// Number of lines fed so far (the number of the last line).
    pub const fn line_number(&self) -> u32 {
        self.line
    }

    /// Whether the last row returned started a new measurement (its role, id or channel
    /// differs from the row before; the first row always does).
    pub const fn row_started_measurement(&self) -> bool {
        self.started
    }

    /// Number of valid data rows read so far.
    pub const fn rows_read(&self) -> u64 {
        self.rows
    }

    /// The session's metadata, once the header has been read.
    pub fn metadata(&self) -> Option<&Metadata> {
        match self.phase {
            Phase::Preamble => None,
            Phase::Rows | Phase::Finished => Some(&self.meta),
        }
    }

    /// The metadata read so far (fields not yet seen hold their defaults: version and full
    /// scale 0, options `None`).
    pub const fn metadata_so_far(&self) -> &Metadata {
        &self.meta
    }

    /// Reads one line (without its `\n`; a trailing `\r` is removed, as is a UTF-8 byte-order
    /// mark on line 1).
    pub fn feed<'a>(&mut self, line: &'a [u8]) -> Result<Event<'a>, ReadError> {
        self.line = match self.line.checked_add(1) {
            Some(n) => n,
            None => return Err(self.error(ReadErrorKind::Finished)),
        };
        let line = match line.split_last() {
            Some((b'\r', rest)) => rest,
            _ => line,
        };
        let text = match core::str::from_utf8(line) {
            Ok(t) => t,
            Err(_) => return Err(self.error(ReadErrorKind::NotUtf8)),
        };
        let text = if self.line == 1 {
            text.strip_prefix('\u{FEFF}').unwrap_or(text)
        } else {
            text
        };
        self.feed_text(text).map_err(|kind| self.error(kind))
    }

    /// Reads one line given as text (see [`SessionReader::feed`]).
    pub fn feed_str<'a>(&mut self, line: &'a str) -> Result<Event<'a>, ReadError> {
        self.feed(line.as_bytes())
    }

    /// Ends the file: errors if the header or every data row is missing.
    pub fn finish(&mut self) -> Result<(), ReadError> {
        let at_end = ReadError {
            line: self.line.saturating_add(1),
            kind: ReadErrorKind::MissingHeader,
        };
        match self.phase {
            Phase::Preamble => Err(at_end),
            Phase::Rows | Phase::Finished if self.rows == 0 => Err(ReadError {
                kind: ReadErrorKind::NoReads,
                ..at_end
            }),
            Phase::Rows | Phase::Finished => {
                self.phase = Phase::Finished;
                Ok(())
            }
        }
    }

    fn error(&self, kind: ReadErrorKind) -> ReadError {
        ReadError {
            line: self.line,
            kind,
        }
    }

    fn feed_text<'a>(&mut self, text: &'a str) -> Result<Event<'a>, ReadErrorKind> {
        if self.phase == Phase::Finished {
            return Err(ReadErrorKind::Finished);
        }
        if text.trim().is_empty() {
            return Ok(Event::Empty);
        }
        if let Some(rest) = text.strip_prefix('#') {
            return self.hash_line(rest);
        }
        match self.phase {
            Phase::Preamble => self.header(text),
            Phase::Rows | Phase::Finished => self.row(text).map(Event::Row),
        }
    }

    fn hash_line<'a>(&mut self, rest: &'a str) -> Result<Event<'a>, ReadErrorKind> {
        let comment = rest.trim();
        let Some((key, value)) = comment.split_once(':') else {
            return Ok(Event::Comment(comment));
        };
        let Some(key) = MetadataKey::from_name(key.trim()) else {
            return Ok(Event::Comment(comment));
        };
        if self.phase != Phase::Preamble {
            return Err(ReadErrorKind::MetadataAfterHeader { key });
        }
        if self.seen & key.bit() != 0 {
            return Err(ReadErrorKind::DuplicateMetadata { key });
        }
        let value = value.trim();
        match key {
            MetadataKey::Version => {
                let v = parse_u32(value).map_err(|_| ReadErrorKind::BadVersion)?;
                if v != FORMAT_VERSION {
                    return Err(ReadErrorKind::UnknownVersion { found: v });
                }
                self.meta.version = v;
            }
            MetadataKey::FullScale => {
                let v = parse_u32(value).map_err(|_| ReadErrorKind::BadFullScale)?;
                if v == 0 || v > MAX_FULL_SCALE {
                    return Err(ReadErrorKind::BadFullScale);
                }
                self.meta.full_scale = v;
            }
            MetadataKey::Unit => self.meta.unit = Some(bounded(value, Field::Unit)?),
            MetadataKey::Analyte => self.meta.analyte = Some(bounded(value, Field::Analyte)?),
            MetadataKey::PathMm => {
                let v = parse_decimal(value)
                    .and_then(|v| {
                        // An f32 path: the value must survive the narrowing finite and > 0.
                        let p = v as f32;
                        (p.is_finite() && p > 0.0).then_some(p)
                    })
                    .ok_or(ReadErrorKind::BadPathLength)?;
                self.meta.path_mm = Some(v);
            }
            MetadataKey::Model => {
                self.meta.model = Some(Model::from_name(value).ok_or(ReadErrorKind::UnknownModel)?);
            }
        }
        self.seen |= key.bit();
        Ok(Event::Metadata(key))
    }

    fn header<'a>(&mut self, text: &str) -> Result<Event<'a>, ReadErrorKind> {
        if self.seen & MetadataKey::Version.bit() == 0 {
            return Err(ReadErrorKind::MissingVersion);
        }
        if self.seen & MetadataKey::FullScale.bit() == 0 {
            return Err(ReadErrorKind::MissingFullScale);
        }
        if text != HEADER {
            return Err(ReadErrorKind::BadHeader);
        }
        self.phase = Phase::Rows;
        Ok(Event::Header)
    }

    fn row<'a>(&mut self, text: &'a str) -> Result<Row<'a>, ReadErrorKind> {
        let f = split_columns(text)?;
        let full_scale = self.meta.full_scale;
        let t_ms = parse_u32(f[0]).map_err(ReadErrorKind::BadTime)?;
        if t_ms < self.last_t {
            return Err(ReadErrorKind::TimeDecreasing {
                previous: self.last_t,
                found: t_ms,
            });
        }
        let channel = name(f[1], Field::Channel, ReadErrorKind::EmptyChannel)?;
        let nm = if f[2].is_empty() {
            None
        } else {
            let v = parse_u32(f[2]).map_err(ReadErrorKind::BadWavelength)?;
            let v = u16::try_from(v)
                .map_err(|_| ReadErrorKind::BadWavelength(NumberError::TooLarge))?;
            if v == 0 {
                return Err(ReadErrorKind::BadWavelength(NumberError::OutOfRange));
            }
            Some(v)
        };
        let led = Led::from_name(f[3]).ok_or(ReadErrorKind::BadLed)?;
        let role = Role::from_name(f[4]).ok_or(ReadErrorKind::BadRole)?;
        let id = name(f[5], Field::Id, ReadErrorKind::EmptyId)?;
        let conc = match (role.has_concentration(), f[6].is_empty()) {
            (true, true) => return Err(ReadErrorKind::MissingConcentration),
            (false, false) => return Err(ReadErrorKind::UnexpectedConcentration),
            (false, true) => None,
            (true, false) => {
                let c = parse_decimal(f[6]).ok_or(ReadErrorKind::BadConcentration)?;
                if c < 0.0 {
                    return Err(ReadErrorKind::NegativeConcentration);
                }
                Some(c)
            }
        };
        let signal = parse_u32(f[7]).map_err(ReadErrorKind::BadSignal)?;
        if signal > full_scale {
            return Err(ReadErrorKind::SignalAboveFullScale { signal, full_scale });
        }
        let reference = if f[8].is_empty() {
            None
        } else {
            let r = parse_u32(f[8]).map_err(ReadErrorKind::BadReference)?;
            if r > full_scale {
                return Err(ReadErrorKind::ReferenceAboveFullScale {
                    reference: r,
                    full_scale,
                });
            }
            Some(r)
        };
        let row = Row {
            t_ms,
            channel,
            nm,
            led,
            role,
            id,
            conc,
            signal,
            reference,
        };
        self.track_measurement(&row)?;
        self.last_t = t_ms;
        self.rows = self.rows.saturating_add(1);
        Ok(row)
    }

    fn track_measurement(&mut self, row: &Row<'_>) -> Result<(), ReadErrorKind> {
        if let Some(cur) = &self.current {
            if cur.role == row.role && cur.id == row.id && cur.channel == row.channel {
                if cur.nm != row.nm {
                    return Err(ReadErrorKind::WavelengthChanged);
                }
                if cur.conc != row.conc {
                    return Err(ReadErrorKind::ConcentrationChanged);
                }
                return match (cur.has_reference, row.reference.is_some()) {
                    (true, false) => Err(ReadErrorKind::ReferenceVanished),
                    (false, true) => Err(ReadErrorKind::ReferenceAppeared),
                    _ => {
                        self.started = false;
                        Ok(())
                    }
                };
            }
        }
        self.current = Some(Current {
            role: row.role,
            channel: bounded(row.channel, Field::Channel)?,
            id: bounded(row.id, Field::Id)?,
            nm: row.nm,
            conc: row.conc,
            has_reference: row.reference.is_some(),
        });
        self.started = true;
        Ok(())
    }
}

/// Splits a data row into exactly [`COLUMNS`] fields (one pass over the bytes; commas are
/// ASCII, so every split point is a character boundary).
fn split_columns(text: &str) -> Result<[&str; COLUMNS], ReadErrorKind> {
    let mut out = [""; COLUMNS];
    let mut found: usize = 0;
    let mut start = 0;
    for (i, &b) in text.as_bytes().iter().enumerate() {
        if b == b',' {
            if let (Some(slot), Some(field)) = (out.get_mut(found), text.get(start..i)) {
                *slot = field;
            }
            found = found.saturating_add(1);
            start = i.saturating_add(1);
        }
    }
    if let (Some(slot), Some(field)) = (out.get_mut(found), text.get(start..)) {
        *slot = field;
    }
    found = found.saturating_add(1);
    if found == COLUMNS {
        Ok(out)
    } else {
        Err(ReadErrorKind::WrongColumnCount {
            found: u16::try_from(found).unwrap_or(u16::MAX),
        })
    }
}

/// A channel name or id: non-empty and at most [`MAX_NAME_LEN`] bytes.
fn name(text: &str, field: Field, empty: ReadErrorKind) -> Result<&str, ReadErrorKind> {
    if text.is_empty() {
        Err(empty)
    } else if text.len() > MAX_NAME_LEN {
        Err(too_long(field, MAX_NAME_LEN))
    } else if has_control(text) {
        Err(ReadErrorKind::ControlCharacter { field })
    } else {
        Ok(text)
    }
}

fn too_long(field: Field, max: usize) -> ReadErrorKind {
    ReadErrorKind::TextTooLong {
        field,
        max: u16::try_from(max).unwrap_or(u16::MAX),
    }
}

fn has_control(text: &str) -> bool {
    text.bytes().any(|b| b < 0x20 && b != b'\t' || b == 0x7f)
}

fn bounded<const N: usize>(text: &str, field: Field) -> Result<String<N>, ReadErrorKind> {
    if has_control(text) {
        return Err(ReadErrorKind::ControlCharacter { field });
    }
    let mut s = String::new();
    s.push_str(text).map_err(|_| too_long(field, N))?;
    Ok(s)
}

/// Strict unsigned decimal integer: ASCII digits only, no sign, no spaces.
pub(crate) fn parse_u32(text: &str) -> Result<u32, NumberError> {
    let bytes = text.as_bytes();
    match bytes.first() {
        None => return Err(NumberError::Empty),
        Some(b'-') => return Err(NumberError::Negative),
        Some(_) => {}
    }
    let mut value: u32 = 0;
    let mut overflow = false;
    for &b in bytes {
        let digit = b.wrapping_sub(b'0');
        if digit > 9 {
            return Err(NumberError::NotInteger);
        }
        match value
            .checked_mul(10)
            .and_then(|v| v.checked_add(u32::from(digit)))
        {
            Some(v) => value = v,
            None => overflow = true,
        }
    }
    if overflow {
        Err(NumberError::TooLarge)
    } else {
        Ok(value)
    }
}

/// A finite decimal number (digits, `.`, an optional sign and exponent; no `inf`/`nan`).
pub(crate) fn parse_decimal(text: &str) -> Option<f64> {
    if text.is_empty()
        || !text
            .bytes()
            .all(|b| b.is_ascii_digit() || matches!(b, b'.' | b'e' | b'E' | b'+' | b'-'))
    {
        return None;
    }
    let v: f64 = text.parse().ok()?;
    v.is_finite().then_some(v)
}

/// Splits a byte buffer into lines at `\n` (the last line may lack its `\n`; a final empty
/// piece after a trailing `\n` is not a line). Carriage returns are left to [`SessionReader::feed`].
pub fn lines(bytes: &[u8]) -> Lines<'_> {
    Lines { rest: Some(bytes) }
}

/// Iterator returned by [`lines`].
#[derive(Clone, Debug)]
pub struct Lines<'a> {
    rest: Option<&'a [u8]>,
}

impl<'a> Iterator for Lines<'a> {
    type Item = &'a [u8];

    fn next(&mut self) -> Option<&'a [u8]> {
        let rest = self.rest?;
        match find_newline(rest) {
            Some(i) => {
                let (line, tail) = rest.split_at(i);
                self.rest = tail.get(1..);
                Some(line)
            }
            None => {
                self.rest = None;
                (!rest.is_empty()).then_some(rest)
            }
        }
    }
}

/// Index of the first `\n`, eight bytes at a time (the classic "has zero byte" bit trick on
/// `word ^ 0x0a0a...`: Hacker's Delight, 2nd ed., section 6-1).
fn find_newline(bytes: &[u8]) -> Option<usize> {
    const ONES: u64 = 0x0101_0101_0101_0101;
    const HIGHS: u64 = 0x8080_8080_8080_8080;
    const NL: u64 = ONES * b'\n' as u64;
    let mut chunks = bytes.chunks_exact(8);
    let mut offset = 0usize;
    for chunk in chunks.by_ref() {
        let mut word = [0u8; 8];
        word.copy_from_slice(chunk);
        let x = u64::from_le_bytes(word) ^ NL;
        if x.wrapping_sub(ONES) & !x & HIGHS != 0 {
            return chunk.iter().position(|&b| b == b'\n').map(|i| offset + i);
        }
        offset += 8;
    }
    chunks
        .remainder()
        .iter()
        .position(|&b| b == b'\n')
        .map(|i| offset + i)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integers_are_strict() {
        assert_eq!(parse_u32("0"), Ok(0));
        assert_eq!(parse_u32("4294967295"), Ok(u32::MAX));
        assert_eq!(parse_u32("4294967296"), Err(NumberError::TooLarge));
        assert_eq!(parse_u32(""), Err(NumberError::Empty));
        assert_eq!(parse_u32("-1"), Err(NumberError::Negative));
        assert_eq!(parse_u32("+1"), Err(NumberError::NotInteger));
        assert_eq!(parse_u32("1.0"), Err(NumberError::NotInteger));
        assert_eq!(parse_u32(" 1"), Err(NumberError::NotInteger));
    }

    #[test]
    fn decimals_refuse_words() {
        assert_eq!(parse_decimal("0.25"), Some(0.25));
        assert_eq!(parse_decimal("1e-3"), Some(1e-3));
        assert_eq!(parse_decimal("inf"), None);
        assert_eq!(parse_decimal("NaN"), None);
        assert_eq!(parse_decimal("1e999"), None);
        assert_eq!(parse_decimal("1..2"), None);
    }

    #[test]
    fn newline_search_agrees_with_a_plain_scan() {
        let text = b"0123456789abcdef\nxyz\n\n0123456\n";
        for start in 0..text.len() {
            for end in start..=text.len() {
                let s = &text[start..end];
                assert_eq!(find_newline(s), s.iter().position(|&b| b == b'\n'));
            }
        }
    }

    #[test]
    fn line_splitting() {
        let v: std::vec::Vec<&[u8]> = lines(b"a\nb\r\n\nc").collect();
        assert_eq!(v, [&b"a"[..], b"b\r", b"", b"c"]);
        assert_eq!(lines(b"a\n").count(), 1);
        assert_eq!(lines(b"").count(), 0);
    }
}
