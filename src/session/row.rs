//! One data row of a session: one raw read.

use core::fmt;

/// Whether the LED was lit during the read (`off` rows are dark reads).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Led {
    /// `on`: a lit read.
    On,
    /// `off`: a dark read.
    Off,
}

impl Led {
    /// The word in the format.
    pub const fn name(self) -> &'static str {
        match self {
            Led::On => "on",
            Led::Off => "off",
        }
    }

    /// Parses the word.
    pub fn from_name(name: &str) -> Option<Led> {
        match name.as_bytes() {
            [b'o', b'n'] => Some(Led::On),
            [b'o', b'f', b'f'] => Some(Led::Off),
            _ => None,
        }
    }
}

/// What was in the cuvette.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Role {
    /// The 100 % transmittance reference of its channel.
    Blank,
    /// A standard of known concentration (part of the channel's calibration).
    Standard,
    /// An unknown.
    Sample,
    /// A sample of known concentration, quantified like a sample (recovery check).
    Check,
}

impl Role {
    /// The word in the format.
    pub const fn name(self) -> &'static str {
        match self {
            Role::Blank => "blank",
            Role::Standard => "standard",
            Role::Sample => "sample",
            Role::Check => "check",
        }
    }

    /// Parses the word.
    pub fn from_name(name: &str) -> Option<Role> {
        // Dispatch on the length first: one short comparison per row on the hot path.
        let (role, word) = match name.len() {
            5 if name.as_bytes().first() == Some(&b'b') => (Role::Blank, "blank"),
            5 => (Role::Check, "check"),
            6 => (Role::Sample, "sample"),
            8 => (Role::Standard, "standard"),
            _ => return None,
        };
        (name == word).then_some(role)
    }

    /// Whether rows of this role carry a known concentration (`standard`, `check`).
    pub const fn has_concentration(self) -> bool {
        matches!(self, Role::Standard | Role::Check)
    }
}

impl fmt::Display for Role {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl fmt::Display for Led {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// One raw read, borrowing its text fields from the line it was read from.
///
/// A `Row` that the reader returns is valid: texts are non-empty, without commas and at most
/// [`super::MAX_NAME_LEN`] bytes, `conc` is present exactly for standards and checks, finite and
/// non-negative, and `signal`/`reference` are within the session's full scale.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Row<'a> {
    /// Milliseconds since session start.
    pub t_ms: u32,
    /// LED channel name.
    pub channel: &'a str,
    /// Nominal LED peak wavelength in nm, if recorded.
    pub nm: Option<u16>,
    /// LED on (lit read) or off (dark read).
    pub led: Led,
    /// What was in the cuvette.
    pub role: Role,
    /// Identifier of the blank, standard or sample.
    pub id: &'a str,
    /// Known concentration (standards and checks only).
    pub conc: Option<f64>,
    /// Raw count of the measuring detector.
    pub signal: u32,
    /// Raw count of the reference detector, if there is one.
    pub reference: Option<u32>,
}

impl Row<'_> {
    /// Whether `other` belongs to the same measurement (same role, id and channel).
    pub fn same_measurement(&self, other: &Row<'_>) -> bool {
        self.role == other.role && self.id == other.id && self.channel == other.channel
    }
}
