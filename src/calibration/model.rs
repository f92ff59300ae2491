//! The calibration models and the weightings of their least-squares fits.

use core::fmt;

/// The shape of a calibration curve, absorbance A as a function of concentration c.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Model {
    /// Straight line through the origin, A = k·c (Beer–Lambert with a perfect blank).
    Origin,
    /// Straight line, A = a + b·c.
    Linear,
    /// Quadratic, A = a + b·c + q·c² (for the negative deviation from Beer–Lambert at high
    /// absorbance: stray light, polychromatic LED light).
    Quadratic,
}

impl Model {
    /// Every model, simplest first.
    pub const ALL: [Model; 3] = [Model::Origin, Model::Linear, Model::Quadratic];

    /// Number of fitted coefficients (1, 2 or 3).
    pub const fn parameters(self) -> usize {
        match self {
            Model::Origin => 1,
            Model::Linear => 2,
            Model::Quadratic => 3,
        }
    }

    /// Whether the model has an intercept (a fitted blank absorbance).
    pub const fn has_intercept(self) -> bool {
        !matches!(self, Model::Origin)
    }

    /// The next more flexible model, suggested when a lack-of-fit test rejects this one.
    pub const fn next(self) -> Option<Model> {
        match self {
            Model::Origin => Some(Model::Linear),
            Model::Linear => Some(Model::Quadratic),
            Model::Quadratic => None,
        }
    }

    /// A short lower-case name (`origin`, `linear`, `quadratic`), stable for persistence and reports.
    pub const fn name(self) -> &'static str {
        match self {
            Model::Origin => "origin",
            Model::Linear => "linear",
            Model::Quadratic => "quadratic",
        }
    }

    /// Parses a name given by [`Model::name`].
    pub fn from_name(name: &str) -> Option<Model> {
        Model::ALL.into_iter().find(|m| m.name() == name)
    }
}

impl fmt::Display for Model {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// How the standards are weighted in the least-squares fit.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Weighting {
    /// Every standard counts once (ordinary least squares).
    #[default]
    None,
    /// Weight = replicates / absorbance_sd², the inverse variance of the standard's mean
    /// absorbance. Every standard needs an absorbance standard deviation > 0.
    InverseVariance,
    /// Weight = 1 / c² (relative error constant across the range; common practice for wide
    /// ranges). Every standard needs a concentration > 0.
    InverseConcentrationSquared,
}

impl Weighting {
    /// Every weighting.
    pub const ALL: [Weighting; 3] = [
        Weighting::None,
        Weighting::InverseVariance,
        Weighting::InverseConcentrationSquared,
    ];

    /// A short lower-case name (`none`, `inverse_variance`, `inverse_concentration_squared`).
    pub const fn name(self) -> &'static str {
        match self {
            Weighting::None => "none",
            Weighting::InverseVariance => "inverse_variance",
            Weighting::InverseConcentrationSquared => "inverse_concentration_squared",
        }
    }

    /// Parses a name given by [`Weighting::name`].
    pub fn from_name(name: &str) -> Option<Weighting> {
        Weighting::ALL.into_iter().find(|w| w.name() == name)
    }
}

impl fmt::Display for Weighting {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_round_trip() {
        for m in Model::ALL {
            assert_eq!(Model::from_name(m.name()), Some(m));
        }
        for w in Weighting::ALL {
            assert_eq!(Weighting::from_name(w.name()), Some(w));
        }
        assert_eq!(Model::from_name("cubic"), None);
    }
}
