//! Writer of version-1 session files through any [`core::fmt::Write`] (a UART, an SD-card file,
//! a `String` on a host).
//!
//! Every line is checked by a [`SessionReader`] before it is written and must read back to exactly
//! what was asked, so a writer never produces a file its reader rejects, and numbers round-trip
//! bit for bit (concentrations use Rust's shortest round-trip formatting).
//!
//! ```
//! use lumisorb::session::{Led, Metadata, Role, Row, SessionWriter};
//!
//! let mut log = String::new();
//! let mut w = SessionWriter::new(&mut log, &Metadata::new(4095))?;
//! w.row(&Row { t_ms: 0, channel: "red", nm: Some(630), led: Led::Off, role: Role::Blank,
//!              id: "B1", conc: None, signal: 12, reference: None })?;
//! assert!(log.ends_with("0,red,630,off,blank,B1,,12,\n"));
//! # Ok::<(), lumisorb::session::WriteError>(())
//! ```

use core::fmt::{self, Write};

use heapless::String;

use super::error::ReadErrorKind;
use super::metadata::{Metadata, MetadataKey};
use super::reader::{Event, SessionReader};
use super::row::Row;
use super::{FORMAT_VERSION, HEADER};

/// Longest line the writer formats (a row with two 32-byte names and long numbers fits).
const LINE_CAPACITY: usize = 256;

/// Why a line could not be written.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WriteError {
    /// The underlying writer failed.
    Fmt,
    /// The line would be rejected by the reader, for this reason.
    Invalid(ReadErrorKind),
    /// The value cannot be written so that it reads back the same (a line break in a text,
    /// surrounding spaces, a comment that reads as metadata, a line too long, or a metadata
    /// version other than 1).
    NotRepresentable,
}

impl fmt::Display for WriteError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WriteError::Fmt => f.write_str("output failed"),
            WriteError::Invalid(kind) => write!(f, "invalid line: {kind}"),
            WriteError::NotRepresentable => {
                f.write_str("value cannot be written so that it reads back the same")
            }
        }
    }
}

impl core::error::Error for WriteError {}

impl From<fmt::Error> for WriteError {
    fn from(_: fmt::Error) -> Self {
        WriteError::Fmt
    }
}

/// Writes a session: metadata and header on creation, then comments and rows.
#[derive(Debug)]
pub struct SessionWriter<W: Write> {
    out: W,
    check: SessionReader,
}

/// Formats a number so that it parses back to the same value (shortest round-trip digits),
/// in plain decimal notation for ordinary magnitudes and exponent notation otherwise.
struct Decimal(f64);

impl fmt::Display for Decimal {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let a = libm::fabs(self.0);
        if a == 0.0 || (1e-4..1e9).contains(&a) {
            write!(f, "{}", self.0)
        } else {
            write!(f, "{:e}", self.0)
        }
    }
}

impl<W: Write> SessionWriter<W> {
    /// Writes the metadata lines (version, full scale, then the optional keys that are set) and
    /// the header row.
    pub fn new(out: W, meta: &Metadata) -> Result<SessionWriter<W>, WriteError> {
        if meta.version != FORMAT_VERSION {
            return Err(WriteError::NotRepresentable);
        }
        let mut w = SessionWriter {
            out,
            check: SessionReader::new(),
        };
        for key in MetadataKey::ALL {
            let mut line: String<LINE_CAPACITY> = String::new();
            let given = match key {
                MetadataKey::Version => {
                    write!(line, "# {}: {}", key.name(), meta.version).map(|_| true)
                }
                MetadataKey::FullScale => {
                    write!(line, "# {}: {}", key.name(), meta.full_scale).map(|_| true)
                }
                MetadataKey::Unit => match &meta.unit {
                    Some(u) => write!(line, "# {}: {}", key.name(), u).map(|_| true),
                    None => Ok(false),
                },
                MetadataKey::PathMm => match meta.path_mm {
                    Some(p) => {
                        write!(line, "# {}: {}", key.name(), Decimal(f64::from(p))).map(|_| true)
                    }
                    None => Ok(false),
                },
                MetadataKey::Analyte => match &meta.analyte {
                    Some(a) => write!(line, "# {}: {}", key.name(), a).map(|_| true),
                    None => Ok(false),
                },
                MetadataKey::Model => match meta.model {
                    Some(m) => write!(line, "# {}: {}", key.name(), m.name()).map(|_| true),
                    None => Ok(false),
                },
            }
            .map_err(|_| WriteError::NotRepresentable)?;
            if given {
                match w.check_line(&line)? {
                    Event::Metadata(k) if k == key => {}
                    _ => return Err(WriteError::NotRepresentable),
                }
                w.emit(&line)?;
            }
        }
        if w.check.metadata_so_far() != meta {
            return Err(WriteError::NotRepresentable);
        }
        w.check_line(HEADER)?;
        w.emit(HEADER)?;
        Ok(w)
    }

    /// Writes `# text`. Refuses text with a line break, surrounding spaces, or that would read
    /// as a metadata line.
    pub fn comment(&mut self, text: &str) -> Result<(), WriteError> {
        let mut line: String<LINE_CAPACITY> = String::new();
        write!(line, "# {text}").map_err(|_| WriteError::NotRepresentable)?;
        match self.check_line(&line)? {
            Event::Comment(c) if c == text => {}
            _ => return Err(WriteError::NotRepresentable),
        }
        self.emit(&line)
    }

    /// Writes one data row.
    pub fn row(&mut self, row: &Row<'_>) -> Result<(), WriteError> {
        let mut line: String<LINE_CAPACITY> = String::new();
        let nm = OptU(row.nm.map(u32::from));
        let conc = OptD(row.conc);
        let reference = OptU(row.reference);
        write!(
            line,
            "{},{},{},{},{},{},{},{},{}",
            row.t_ms,
            row.channel,
            nm,
            row.led.name(),
            row.role.name(),
            row.id,
            conc,
            row.signal,
            reference
        )
        .map_err(|_| WriteError::NotRepresentable)?;
        match self.check_line(&line)? {
            Event::Row(back) if back == *row => {}
            _ => return Err(WriteError::NotRepresentable),
        }
        self.emit(&line)
    }

    /// The underlying writer.
    pub fn into_inner(self) -> W {
        self.out
    }

    fn check_line<'a>(&mut self, line: &'a str) -> Result<Event<'a>, WriteError> {
        if line.contains(['\n', '\r']) {
            return Err(WriteError::NotRepresentable);
        }
        // Validate on a copy so a refused line leaves the writer's state unchanged.
        let mut probe = self.check.clone();
        let event = probe
            .feed_str(line)
            .map_err(|e| WriteError::Invalid(e.kind))?;
        self.check = probe;
        Ok(event)
    }

    fn emit(&mut self, line: &str) -> Result<(), WriteError> {
        self.out.write_str(line)?;
        self.out.write_char('\n')?;
        Ok(())
    }
}

struct OptU(Option<u32>);

impl fmt::Display for OptU {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(v) => write!(f, "{v}"),
            None => Ok(()),
        }
    }
}

struct OptD(Option<f64>);

impl fmt::Display for OptD {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(v) => Decimal(v).fmt(f),
            None => Ok(()),
        }
    }
}
