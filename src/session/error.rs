//! Errors of the session reader: one kind per way a line can be malformed, with its line number.

use core::fmt;

use super::metadata::MetadataKey;

/// Why a number field could not be read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum NumberError {
    /// The field is empty.
    Empty,
    /// The field starts with a minus sign.
    Negative,
    /// The field holds something other than decimal digits.
    NotInteger,
    /// The value does not fit (`u32`, or `u16` for `nm`).
    TooLarge,
    /// The value is outside the field's range (for example `nm` = 0).
    OutOfRange,
}

impl NumberError {
    const fn describe(self) -> &'static str {
        match self {
            NumberError::Empty => "is empty",
            NumberError::Negative => "is negative",
            NumberError::NotInteger => "is not an integer",
            NumberError::TooLarge => "is too large",
            NumberError::OutOfRange => "is out of range",
        }
    }
}

/// A text field with a length limit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Field {
    /// The `channel` column.
    Channel,
    /// The `id` column.
    Id,
    /// The `# unit:` metadata.
    Unit,
    /// The `# analyte:` metadata.
    Analyte,
}

impl Field {
    const fn name(self) -> &'static str {
        match self {
            Field::Channel => "channel",
            Field::Id => "id",
            Field::Unit => "unit",
            Field::Analyte => "analyte",
        }
    }
}

/// What is wrong with a line of a session file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ReadErrorKind {
    /// The line is not valid UTF-8.
    NotUtf8,
    /// The header came before any `# lumisorb-session:` line.
    MissingVersion,
    /// `# lumisorb-session:` names a version this crate does not read.
    UnknownVersion {
        /// The version found.
        found: u32,
    },
    /// `# lumisorb-session:` is not followed by an integer.
    BadVersion,
    /// The header came before any `# full_scale:` line.
    MissingFullScale,
    /// `# full_scale:` is not an integer in 1..=16 777 215.
    BadFullScale,
    /// A metadata key appeared twice.
    DuplicateMetadata {
        /// The repeated key.
        key: MetadataKey,
    },
    /// `# model:` is not `linear`, `origin` or `quadratic`.
    UnknownModel,
    /// `# path_mm:` is not a finite number greater than zero.
    BadPathLength,
    /// A text field is longer than this implementation stores.
    TextTooLong {
        /// Which field.
        field: Field,
        /// Its limit in bytes.
        max: u16,
    },
    /// A text field holds a control character (a stray carriage return, a NUL, ...).
    ControlCharacter {
        /// Which field.
        field: Field,
    },
    /// A metadata line came after the header (it would change the meaning of earlier rows).
    MetadataAfterHeader {
        /// The key found.
        key: MetadataKey,
    },
    /// The first non-comment line is not `t_ms,channel,nm,led,role,id,conc,signal,reference`.
    BadHeader,
    /// The file ended before the header row.
    MissingHeader,
    /// The file holds a header but no data row.
    NoReads,
    /// A data row does not have 9 columns.
    WrongColumnCount {
        /// Columns found (saturating at 65 535).
        found: u16,
    },
    /// `t_ms` is not a non-negative integer.
    BadTime(NumberError),
    /// `t_ms` is smaller than on the row before.
    TimeDecreasing {
        /// `t_ms` of the row before.
        previous: u32,
        /// `t_ms` of this row.
        found: u32,
    },
    /// `channel` is empty.
    EmptyChannel,
    /// `nm` is neither empty nor an integer in 1..=65 535.
    BadWavelength(NumberError),
    /// `nm` differs between rows of the same measurement.
    WavelengthChanged,
    /// `led` is neither `on` nor `off`.
    BadLed,
    /// `role` is not `blank`, `standard`, `sample` or `check`.
    BadRole,
    /// `id` is empty.
    EmptyId,
    /// A `standard` or `check` row has no `conc`.
    MissingConcentration,
    /// A `blank` or `sample` row has a `conc`.
    UnexpectedConcentration,
    /// `conc` is not a finite decimal number.
    BadConcentration,
    /// `conc` is negative.
    NegativeConcentration,
    /// `conc` differs between rows of the same measurement.
    ConcentrationChanged,
    /// `signal` is not a non-negative integer.
    BadSignal(NumberError),
    /// `signal` is above the declared full scale.
    SignalAboveFullScale {
        /// The read.
        signal: u32,
        /// The declared full scale.
        full_scale: u32,
    },
    /// `reference` is neither empty nor a non-negative integer.
    BadReference(NumberError),
    /// `reference` is above the declared full scale.
    ReferenceAboveFullScale {
        /// The read.
        reference: u32,
        /// The declared full scale.
        full_scale: u32,
    },
    /// Earlier rows of this measurement had a reference read, this one has none.
    ReferenceVanished,
    /// Earlier rows of this measurement had no reference read, this one has one.
    ReferenceAppeared,
    /// A data row came after [`crate::session::SessionReader::finish`] or the line counter overflowed.
    Finished,
}

impl fmt::Display for ReadErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ReadErrorKind as K;
        match *self {
            K::NotUtf8 => f.write_str("line is not valid UTF-8"),
            K::MissingVersion => f.write_str("missing `# lumisorb-session: 1` before the header"),
            K::UnknownVersion { found } => {
                write!(
                    f,
                    "unknown session format version {found} (this reader knows version 1)"
                )
            }
            K::BadVersion => f.write_str("`# lumisorb-session:` must be followed by an integer"),
            K::MissingFullScale => {
                f.write_str("missing `# full_scale: <max raw count>` before the header")
            }
            K::BadFullScale => f.write_str("`# full_scale:` must be an integer from 1 to 16777215"),
            K::DuplicateMetadata { key } => write!(f, "metadata `{}` given twice", key.name()),
            K::UnknownModel => f.write_str("`# model:` must be linear, origin or quadratic"),
            K::BadPathLength => f.write_str("`# path_mm:` must be a number greater than zero"),
            K::TextTooLong { field, max } => {
                write!(f, "{} is longer than {max} bytes", field.name())
            }
            K::ControlCharacter { field } => {
                write!(f, "{} holds a control character", field.name())
            }
            K::MetadataAfterHeader { key } => {
                write!(f, "metadata `{}` after the header row", key.name())
            }
            K::BadHeader => write!(f, "header row must be exactly `{}`", super::HEADER),
            K::MissingHeader => f.write_str("file ended before the header row"),
            K::NoReads => f.write_str("file has a header but no reads"),
            K::WrongColumnCount { found } => {
                write!(f, "row has {found} columns, expected {}", super::COLUMNS)
            }
            K::BadTime(e) => write!(f, "t_ms {}", e.describe()),
            K::TimeDecreasing { previous, found } => {
                write!(
                    f,
                    "t_ms {found} is smaller than {previous} on the row before"
                )
            }
            K::EmptyChannel => f.write_str("channel is empty"),
            K::BadWavelength(e) => write!(f, "nm {}", e.describe()),
            K::WavelengthChanged => f.write_str("nm changed inside a measurement"),
            K::BadLed => f.write_str("led must be `on` or `off`"),
            K::BadRole => f.write_str("role must be blank, standard, sample or check"),
            K::EmptyId => f.write_str("id is empty"),
            K::MissingConcentration => f.write_str("a standard or check row needs a conc"),
            K::UnexpectedConcentration => {
                f.write_str("a blank or sample row must leave conc empty")
            }
            K::BadConcentration => f.write_str("conc is not a finite decimal number"),
            K::NegativeConcentration => f.write_str("conc is negative"),
            K::ConcentrationChanged => f.write_str("conc changed inside a measurement"),
            K::BadSignal(e) => write!(f, "signal {}", e.describe()),
            K::SignalAboveFullScale { signal, full_scale } => {
                write!(f, "signal {signal} is above full scale {full_scale}")
            }
            K::BadReference(e) => write!(f, "reference {}", e.describe()),
            K::ReferenceAboveFullScale {
                reference,
                full_scale,
            } => {
                write!(f, "reference {reference} is above full scale {full_scale}")
            }
            K::ReferenceVanished => f.write_str(
                "reference missing on a row of a measurement whose earlier rows had one",
            ),
            K::ReferenceAppeared => f.write_str(
                "reference present on a row of a measurement whose earlier rows had none",
            ),
            K::Finished => f.write_str("reader already finished"),
        }
    }
}

/// A malformed line: its 1-based line number and what is wrong with it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReadError {
    /// 1-based line number (for errors found at the end of the file: the number of lines + 1).
    pub line: u32,
    /// What is wrong.
    pub kind: ReadErrorKind,
}

impl fmt::Display for ReadError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.kind)
    }
}

impl core::error::Error for ReadError {}
