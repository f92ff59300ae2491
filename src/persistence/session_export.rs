//! Export of the result log as a recorded-session file (format version 1).
//!
//! The log keeps results, not the raw reads a session's data rows hold, so the export is the
//! session format's preamble (the metadata given by the caller, the header row) followed by one
//! comment line per result and no data rows. Every line passes the session reader; because
//! there are no reads, [`SessionReader::finish`](crate::session::SessionReader::finish) ends
//! such a file with `NoReads`: it documents results next to recorded sessions (same metadata,
//! same tools), it is not something to replay. A result comment looks like this:
//!
//! ```text
//! # lumisorb-result t=1700000000 id=BROOK-7 ch=1 method=12/2 A=0.4321 sd=0.0012 c=1.25 lo=1.2 hi=1.3 flags=below_loq,unstable
//! ```
//!
//! `t` is `time_s`; `c`, `lo`, `hi` are the concentration and its 95 % interval, `-` when
//! there is none; `flags` lists vocabulary words separated by commas, `-` for none. Numbers are
//! shortest round-trip decimals (exponent notation below 1e-4 and from 1e9 on), so every value
//! reads back to the same `f32`. A line that would exceed the writer's line limit (only with
//! most flags set at once) ends at `flags=+` and the flags follow on a
//! `# lumisorb-result-flags <words>` line.

use core::fmt::{self, Write};

use heapless::String;

use super::result_log::{for_each_entry, ExportSummary, ResultEntry};
use super::store::{RecordRing, StoreError};
use crate::session::{Metadata, SessionWriter, WriteError};
use crate::Flags;

/// The word that starts a result comment.
pub const RESULT_COMMENT: &str = "lumisorb-result";
/// The word that starts a continuation comment holding a result's flags.
pub const RESULT_FLAGS_COMMENT: &str = "lumisorb-result-flags";

/// Longest comment text the export writes on one line (the session writer's limit minus `# `).
const MAX_COMMENT: usize = 254;

/// Why a session export stopped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SessionExportError {
    /// Reading the log failed.
    Store(StoreError),
    /// The session writer refused a line, or the output failed.
    Write(WriteError),
}

impl fmt::Display for SessionExportError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SessionExportError::Store(e) => write!(f, "reading the log: {e}"),
            SessionExportError::Write(e) => write!(f, "writing the session: {e}"),
        }
    }
}

impl core::error::Error for SessionExportError {}

/// A number that reads back to the same `f32`, in plain decimals for ordinary magnitudes.
struct Num(f32);

impl fmt::Display for Num {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let a = self.0.abs();
        if a == 0.0 || (1.0e-4..1.0e9).contains(&a) {
            write!(f, "{}", self.0)
        } else {
            write!(f, "{:e}", self.0)
        }
    }
}

fn write_flags<W: Write>(out: &mut W, flags: Flags) -> fmt::Result {
    if flags.is_empty() {
        return out.write_str("-");
    }
    for (k, flag) in flags.iter().enumerate() {
        if k > 0 {
            out.write_char(',')?;
        }
        out.write_str(flag.name())?;
    }
    Ok(())
}

/// The comment text of one result, without flags (they are appended by the caller).
fn head(entry: &ResultEntry) -> Result<String<MAX_COMMENT>, fmt::Error> {
    let mut line = String::new();
    write!(
        line,
        "{RESULT_COMMENT} t={} id={} ch={} method={}/{} A={} sd={} ",
        entry.time_s,
        entry.sample,
        entry.channel,
        entry.method.id,
        entry.method.version,
        Num(entry.absorbance.value()),
        Num(entry.absorbance_sd),
    )?;
    match entry.concentration {
        Some(c) => write!(
            line,
            "c={} lo={} hi={} flags=",
            Num(c.value),
            Num(c.low),
            Num(c.high)
        )?,
        None => line.write_str("c=- lo=- hi=- flags=")?,
    }
    Ok(line)
}

/// Writes one result as its session comment line(s).
pub fn write_result_comment<W: Write>(
    session: &mut SessionWriter<W>,
    entry: &ResultEntry,
) -> Result<(), WriteError> {
    let mut line = head(entry).map_err(|_| WriteError::NotRepresentable)?;
    let mark = line.len();
    if write_flags(&mut line, entry.flags).is_ok() {
        return session.comment(&line);
    }
    // Too long with its flags: flags on a continuation line.
    line.truncate(mark);
    line.push('+').map_err(|_| WriteError::NotRepresentable)?;
    session.comment(&line)?;
    let mut more: String<MAX_COMMENT> = String::new();
    write!(more, "{RESULT_FLAGS_COMMENT} ").map_err(|_| WriteError::NotRepresentable)?;
    write_flags(&mut more, entry.flags).map_err(|_| WriteError::NotRepresentable)?;
    session.comment(&more)
}

/// Writes the whole log, oldest first, as a session file with `meta` to `out`.
///
/// Entries that do not decode are not written but counted in
/// [`ExportSummary::unreadable`]: the caller must show that count.
pub fn export_session<R: RecordRing, W: Write>(
    log: &mut R,
    out: W,
    meta: &Metadata,
) -> Result<ExportSummary, SessionExportError> {
    let mut session = SessionWriter::new(out, meta).map_err(SessionExportError::Write)?;
    let mut failed = None;
    let summary = for_each_entry(log, |entry| {
        match write_result_comment(&mut session, entry) {
            Ok(()) => core::ops::ControlFlow::Continue(()),
            Err(e) => {
                failed = Some(e);
                core::ops::ControlFlow::Break(())
            }
        }
    })
    .map_err(SessionExportError::Store)?;
    match failed {
        Some(e) => Err(SessionExportError::Write(e)),
        None => Ok(summary),
    }
}
