//! Session metadata (`# key: value` lines before the header).

use heapless::String;

pub use crate::calibration::Model;

use super::{MAX_ANALYTE_LEN, MAX_UNIT_LEN};

/// A metadata key the format defines. Other `# key: value` lines are comments.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum MetadataKey {
    /// `lumisorb-session` (format version, required).
    Version,
    /// `full_scale` (max raw count, required).
    FullScale,
    /// `unit` (concentration unit).
    Unit,
    /// `path_mm` (cuvette path length in mm).
    PathMm,
    /// `analyte` (free text).
    Analyte,
    /// `model` (calibration model).
    Model,
}

impl MetadataKey {
    /// Every key, in the order the writer writes them.
    pub const ALL: [MetadataKey; 6] = [
        MetadataKey::Version,
        MetadataKey::FullScale,
        MetadataKey::Unit,
        MetadataKey::PathMm,
        MetadataKey::Analyte,
        MetadataKey::Model,
    ];

    /// The key as written in the file.
    pub const fn name(self) -> &'static str {
        match self {
            MetadataKey::Version => "lumisorb-session",
            MetadataKey::FullScale => "full_scale",
            MetadataKey::Unit => "unit",
            MetadataKey::PathMm => "path_mm",
            MetadataKey::Analyte => "analyte",
            MetadataKey::Model => "model",
        }
    }

    /// The key for a name, if the format defines it.
    pub fn from_name(name: &str) -> Option<MetadataKey> {
        MetadataKey::ALL.into_iter().find(|k| k.name() == name)
    }

    pub(crate) const fn bit(self) -> u8 {
        1 << (self as u8)
    }
}

/// The metadata of a session.
#[derive(Clone, Debug, PartialEq)]
pub struct Metadata {
    /// Format version (always [`super::FORMAT_VERSION`] once read).
    pub version: u32,
    /// Largest raw count of the detectors (both measuring and reference), 1..=16 777 215.
    pub full_scale: u32,
    /// Concentration unit, if given.
    pub unit: Option<String<MAX_UNIT_LEN>>,
    /// Cuvette path length in mm, if given (finite, > 0).
    pub path_mm: Option<f32>,
    /// Analyte, if given.
    pub analyte: Option<String<MAX_ANALYTE_LEN>>,
    /// Calibration model (`linear`, `origin`, `quadratic`), if given (see [`Metadata::model`]).
    pub model: Option<Model>,
}

impl Metadata {
    /// Metadata with the required fields only.
    pub const fn new(full_scale: u32) -> Metadata {
        Metadata {
            version: super::FORMAT_VERSION,
            full_scale,
            unit: None,
            path_mm: None,
            analyte: None,
            model: None,
        }
    }

    /// The calibration model to use: the one given, else [`Model::Linear`] (the format's
    /// default).
    pub fn model(&self) -> Model {
        self.model.unwrap_or(Model::Linear)
    }

    /// The unit text, or `""`.
    pub fn unit_str(&self) -> &str {
        self.unit.as_ref().map_or("", |u| u.as_str())
    }
}
