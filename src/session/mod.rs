//! Recorded sessions: the version-1 CSV log of raw detector reads, its streaming reader and writer,
//! and the replay that groups reads into measurements and quantifies them.
//!
//! A session file is what a device logs (to a UART or an SD card) while it measures: one row per
//! raw read of the measuring detector (and of the reference detector, if there is one), tagged with
//! the LED channel, whether the LED was on, and what was in the cuvette (a blank, a standard of
//! known concentration, a sample or a check). Replaying the file on a PC runs exactly the code the
//! device runs, so recorded counts in give the same results out.
//!
//! ```text
//! # lumisorb-session: 1
//! # full_scale: 65535
//! # unit: mg/L
//! t_ms,channel,nm,led,role,id,conc,signal,reference
//! 0,red,630,off,blank,B1,,812,
//! 5,red,630,on,blank,B1,,51234,
//! ```
//!
//! - [`reader`]: [`SessionReader`] takes one line at a time (bytes, so invalid UTF-8 is a typed
//!   error too) and yields [`Event`]s: metadata, comments, the header and borrowed [`Row`]s. It
//!   never allocates, never panics, and every malformed line gives a [`ReadError`] carrying its
//!   line number and a [`ReadErrorKind`].
//! - [`writer`]: [`SessionWriter`] writes metadata, header and rows through any
//!   [`core::fmt::Write`], refusing rows the reader would reject.
//! - [`replay`]: [`Replay`] groups rows into measurements (dark and lit reads, the blank of each
//!   channel, standards forming the calibration) and quantifies standards, samples and checks
//!   with the spec's fields and flags; [`replay_bytes`] runs reader and replay over a buffer.
//!
//! # Throughput
//!
//! Replaying a recorded session (line splitting, UTF-8 check, parsing and validation of every
//! field, grouping, dark/lit accumulation with robust buffers and drift check, photometry,
//! calibration, quantification) runs at **9.4 million raw reads per second** on one core of the
//! development machine in release mode (budget: 5 million): `examples/replay_bench.rs` on a
//! generated 10-million-read, 437 MB session (not committed; written to a temporary directory).
//! Measured with other builds sharing the machine, so a quiet machine does at least as well.
//!
//! Implementation limits (typed errors, never silent truncation): channel names and ids at most
//! [`MAX_NAME_LEN`] bytes, the unit at most [`MAX_UNIT_LEN`], the analyte at most
//! [`MAX_ANALYTE_LEN`]; `t_ms`, `signal` and `reference` fit in `u32`.
//!
//! The format itself (the contract between firmware logs, demo data and the host tool) is
//! specified in `session-format.md` of the project's shared specification; its names are kept
//! here exactly.

mod error;
mod metadata;
pub mod output;
pub mod reader;
pub mod replay;
mod row;
pub mod writer;

pub use error::{Field, NumberError, ReadError, ReadErrorKind};
pub use metadata::{Metadata, MetadataKey, Model};
pub use output::{write_csv, write_json};
pub use reader::{lines, Event, SessionReader};
pub use replay::{
    replay_bytes, Channel, Measurement, Replay, ReplayConfig, ReplayError, ReplayErrorKind,
    SessionError,
};
pub use row::{Led, Role, Row};
pub use writer::{SessionWriter, WriteError};

/// The format version this crate reads and writes (`# lumisorb-session: 1`).
pub const FORMAT_VERSION: u32 = 1;

/// The header row of version 1, exactly.
pub const HEADER: &str = "t_ms,channel,nm,led,role,id,conc,signal,reference";

/// Number of columns of a data row.
pub const COLUMNS: usize = 9;

/// Longest channel name or id, in bytes.
pub const MAX_NAME_LEN: usize = 32;

/// Longest concentration unit text, in bytes.
pub const MAX_UNIT_LEN: usize = 16;

/// Longest analyte text, in bytes.
pub const MAX_ANALYTE_LEN: usize = 64;

/// Largest raw count a session may declare as full scale (24-bit reads).
pub const MAX_FULL_SCALE: u32 = 0x00FF_FFFF;
