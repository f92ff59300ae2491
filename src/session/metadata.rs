//! Session metadata (`# key: value` lines before the header).

use core::fmt;

use heapless::String;

use super::{MAX_ANALYTE_LEN, MAX_UNIT_LEN};

/// The calibration model a session asks for (`# model:`; default [`Model::Linear`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Model {
    /// Straight line A = c0 + c1*x.
    #[default]
    Linear,
    /// Through the origin (Beer-Lambert) A = c1*x.
    Origin,
    /// Quadratic A = c0 + c1*x + c2*x^2.
    Quadratic,
}

impl Model {
    /// The model's word in the format (`linear`, `origin`, `quadratic`).
    pub const fn name(self) -> &'static str {
        match self {
            Model::Linear => "linear",
            Model::Origin => "origin",
            Model::Quadratic => "quadratic",
        }
    }

    /// Parses the model's word.
    pub fn from_name(name: &str) -> Option<Model> {
        match name {
            "linear" => Some(Model::Linear),
            "origin" => Some(Model::Origin),
            "quadratic" => Some(Model::Quadratic),
            _ => None,
        }
    }
}

impl fmt::Display for Model {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

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
    /// Calibration model, if given (see [`Metadata::model`]).
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

    /// The calibration model to use: the one given, else [`Model::Linear`].
    pub fn model(&self) -> Model {
        self.model.unwrap_or_default()
    }

    /// The unit text, or `""`.
    pub fn unit_str(&self) -> &str {
        self.unit.as_ref().map_or("", |u| u.as_str())
    }
}
