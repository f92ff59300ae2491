//! Photometry: from blank and sample levels to transmittance and absorbance.
//!
//! # Quantities
//! With P the net (dark-corrected) level behind the sample and P0 the net level behind the
//! blank on the same channel, transmittance is T = P / P0 and decadic absorbance is
//! A = -log10(T) (IUPAC Gold Book, "absorbance", doi:10.1351/goldbook.A00028). A sample clearer
//! than its blank gives T > 1 and A < 0: a valid result, not an error.
//!
//! # Reference detector
//! Where a reference detector watches the LED before the cuvette, each level is replaced by the
//! ratio of the measuring detector's net level to the reference's, r = S / R, and
//! T = r_sample / r_blank. A change of LED output by any factor k between (or during) the blank
//! and the sample multiplies S and R alike and cancels.
//!
//! # Stray light
//! Light that reaches the detector without passing the sample (a fraction s of the blank level)
//! makes the apparent transmittance T_app = (T + s) / (1 + s), so that
//! A_app = -log10((T + s)/(1 + s)) (the usual textbook relation, e.g. D. Harvey, *Analytical
//! Chemistry 2.1*, ch. 10, quoted from memory). With a configured s > 0 the correction
//! T = T_app·(1 + s) - s is applied.
//!
//! # Uncertainty
//! The standard uncertainty of A is propagated to first order from the standard errors of the
//! four (or eight) read means: sample lit and dark, blank lit and dark (and the same for the
//! reference detector). With u_rel(X) = u(X)/X for a net level X, and u(X) = sqrt(u(lit)² +
//! u(dark)²) from [`crate::net_signal`]:
//!
//! ```text
//! u_rel(T_app)² = u_rel(S_sample)² + u_rel(S_blank)² [+ u_rel(R_sample)² + u_rel(R_blank)²]
//! u(A) = (1 + s) · T_app / T · u_rel(T_app) / ln 10
//! ```
//!
//! (with s = 0: u(A) = u_rel(T) / ln 10, the textbook propagation through -log10). Sample and
//! blank reads are independent, so no covariance terms appear.
//!
//! # Low signal
//! When the sample's net level is not clearly above its dark level (below
//! [`PhotometryConfig::low_signal_k`] standard errors), or the corrected transmittance falls
//! below [`PhotometryConfig::min_transmittance`], the result carries [`Flag::LowSignal`]: the
//! absorbance is too high to measure and the sample should be diluted. The reported
//! transmittance is then the larger of the measured value and the detection floor
//! (k·u(S_sample)/S_blank, at least `min_transmittance`), so the reported absorbance is a lower
//! bound rather than a NaN or infinity.
//!
//! # Precision contract
//! On the f32 path with libm, [`photometric_result`] agrees with an f64 evaluation of the same
//! formulas on the same inputs within 1e-5 in absorbance for 0 <= A <= 3
//! (`tests/precision_contract.rs`). With the `fast-math` feature (micromath's approximate
//! log10), the measured bound is given in DEVELOPERS.md ("Precision"): choose `fast-math` only
//! where flash is tight and the absorbance noise is already far above that bound.

use core::fmt;

use crate::flags::{Flag, Flags};
use crate::math;
use crate::net_signal::{Level, NetSignal};

/// Error building a photometric quantity from a number.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum QuantityError {
    /// The value was NaN or infinite.
    NotFinite,
    /// A transmittance was zero or negative (its absorbance would be infinite or undefined).
    NotPositive,
}

impl fmt::Display for QuantityError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            QuantityError::NotFinite => "value is not a finite number",
            QuantityError::NotPositive => "transmittance must be greater than zero",
        })
    }
}

impl core::error::Error for QuantityError {}

/// Transmittance T = P / P0, the fraction of the blank's light that passes the sample.
///
/// Always finite and greater than zero. It may exceed 1 (a sample clearer than its blank),
/// which gives a negative absorbance: a valid result.
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Transmittance(f32);

impl Transmittance {
    /// A transmittance from a ratio; finite and > 0, else an error.
    pub fn new(ratio: f32) -> Result<Transmittance, QuantityError> {
        if !ratio.is_finite() {
            Err(QuantityError::NotFinite)
        } else if ratio <= 0.0 {
            Err(QuantityError::NotPositive)
        } else {
            Ok(Transmittance(ratio))
        }
    }

    /// The ratio P / P0 (1.0 = 100 % T).
    pub const fn ratio(self) -> f32 {
        self.0
    }

    /// The transmittance in percent.
    pub fn percent(self) -> f32 {
        self.0 * 100.0
    }

    /// Decadic absorbance A = -log10(T) (IUPAC Gold Book, "absorbance").
    pub fn absorbance(self) -> Absorbance {
        Absorbance(-math::log10f(self.0))
    }
}

/// Decadic absorbance A = -log10(T) (IUPAC Gold Book, "absorbance", doi:10.1351/goldbook.A00028).
///
/// Always finite; may be negative (sample clearer than blank).
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Absorbance(f32);

impl Absorbance {
    /// An absorbance from a number; finite, else an error.
    pub fn new(value: f32) -> Result<Absorbance, QuantityError> {
        if value.is_finite() {
            Ok(Absorbance(value))
        } else {
            Err(QuantityError::NotFinite)
        }
    }

    /// The absorbance value (dimensionless, decadic).
    pub const fn value(self) -> f32 {
        self.0
    }

    /// The transmittance 10^(-A).
    ///
    /// Errors only if the absorbance is so negative or large that T leaves the f32 range.
    pub fn transmittance(self) -> Result<Transmittance, QuantityError> {
        Transmittance::new(math::exp10f(-self.0))
    }
}

impl fmt::Display for Absorbance {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:.4}", self.0)
    }
}

impl fmt::Display for Transmittance {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{:.2} %T", self.percent())
    }
}

/// Fraction of stray light s = P_stray / P0 (0 <= s < 1).
#[derive(Clone, Copy, Debug, PartialEq, PartialOrd, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StrayFraction(f32);

impl StrayFraction {
    /// No stray light correction.
    pub const NONE: StrayFraction = StrayFraction(0.0);

    /// A stray fraction; finite and in 0 ..= s < 1, else an error.
    pub fn new(s: f32) -> Result<StrayFraction, PhotometryError> {
        if s.is_finite() && (0.0..1.0).contains(&s) {
            Ok(StrayFraction(s))
        } else {
            Err(PhotometryError::InvalidStrayFraction)
        }
    }

    /// The fraction s.
    pub const fn value(self) -> f32 {
        self.0
    }

    /// Apparent transmittance a true transmittance shows with this stray light:
    /// (T + s) / (1 + s).
    pub fn apparent(self, true_t: Transmittance) -> Transmittance {
        Transmittance((true_t.0 + self.0) / (1.0 + self.0))
    }

    /// Removes the stray light from an apparent transmittance: T = T_app·(1 + s) - s.
    /// The result may be zero or negative when T_app is at or below the stray level.
    pub fn correct(self, apparent_ratio: f32) -> f32 {
        apparent_ratio * (1.0 + self.0) - self.0
    }
}

/// Settings of the photometric evaluation.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PhotometryConfig {
    /// Stray light fraction to correct for (default none).
    pub stray: StrayFraction,
    /// Use the reference detector's ratio where both measurements have one (default true).
    pub use_reference: bool,
    /// How many standard errors the sample's net level must stand above zero (default 3).
    pub low_signal_k: f32,
    /// Smallest transmittance reported as measured (default 0.001, A = 3).
    pub min_transmittance: f32,
}

impl Default for PhotometryConfig {
    fn default() -> Self {
        PhotometryConfig {
            stray: StrayFraction::NONE,
            use_reference: true,
            low_signal_k: 3.0,
            min_transmittance: 1e-3,
        }
    }
}

impl PhotometryConfig {
    /// Checks the settings are finite and in range.
    pub fn validate(&self) -> Result<(), PhotometryError> {
        StrayFraction::new(self.stray.0)?;
        let ok = self.low_signal_k.is_finite()
            && self.low_signal_k >= 0.0
            && self.min_transmittance.is_finite()
            && self.min_transmittance > 0.0
            && self.min_transmittance < 1.0;
        if ok {
            Ok(())
        } else {
            Err(PhotometryError::InvalidConfig)
        }
    }
}

/// Error of [`photometric_result`]: the inputs cannot give an absorbance.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PhotometryError {
    /// The blank's net level is at or below its dark level: no 100 % T level to compare with.
    BlankNotAboveDark,
    /// A reference detector's net level is zero or negative: the LED is off or unseen.
    ZeroReference,
    /// Reference correction is on and one measurement has a reference level, the other not.
    ReferenceMismatch,
    /// A net level or its standard error is not finite.
    NotFinite,
    /// The stray fraction is not finite or not in 0 <= s < 1.
    InvalidStrayFraction,
    /// A setting of [`PhotometryConfig`] is not finite or out of range.
    InvalidConfig,
}

impl fmt::Display for PhotometryError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            PhotometryError::BlankNotAboveDark => "blank level is not above its dark level",
            PhotometryError::ZeroReference => "reference detector level is zero or negative",
            PhotometryError::ReferenceMismatch => {
                "one measurement has a reference level and the other not"
            }
            PhotometryError::NotFinite => "a level is not a finite number",
            PhotometryError::InvalidStrayFraction => "stray fraction must be in 0 <= s < 1",
            PhotometryError::InvalidConfig => "photometry setting out of range",
        })
    }
}

impl core::error::Error for PhotometryError {}

/// Transmittance and absorbance of a sample against its blank, with uncertainty and flags.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PhotometricResult {
    /// Transmittance (stray-light corrected where configured).
    pub transmittance: Transmittance,
    /// Decadic absorbance -log10(T).
    pub absorbance: Absorbance,
    /// Standard uncertainty of the absorbance (see the module docs for the formula).
    pub absorbance_sd: f32,
    /// Flags of the blank and sample reads, plus [`Flag::LowSignal`].
    pub flags: Flags,
}

#[inline(never)] // four uses: one copy
fn checked(level: &Level) -> Result<Level, PhotometryError> {
    if level.net.is_finite() && level.std_error.is_finite() && level.std_error >= 0.0 {
        Ok(*level)
    } else {
        Err(PhotometryError::NotFinite)
    }
}

/// Evaluates a sample measurement against the blank of its channel.
///
/// ```
/// use lumisorb::net_signal::{Level, NetSignal};
/// use lumisorb::photometry::{photometric_result, PhotometryConfig};
/// use lumisorb::Flags;
///
/// let level = |net| NetSignal {
///     signal: Level { net, std_error: 2.0 },
///     reference: None,
///     flags: Flags::NONE,
///     lit_reads: 16,
///     dark_reads: 16,
///     rejected_reads: 0,
/// };
/// // A sample passing 10 % of the blank's light has absorbance 1 (IUPAC Gold Book).
/// let r = photometric_result(&level(30_000.0), &level(3_000.0), &PhotometryConfig::default())?;
/// assert!((r.absorbance.value() - 1.0).abs() < 0.06); // 1e-6 with libm; 0.06 covers fast-math
/// assert!(r.absorbance_sd < 1e-3);
/// # Ok::<(), lumisorb::photometry::PhotometryError>(())
/// ```
pub fn photometric_result(
    blank: &NetSignal,
    sample: &NetSignal,
    config: &PhotometryConfig,
) -> Result<PhotometricResult, PhotometryError> {
    config.validate()?;
    let b = checked(&blank.signal)?;
    let smp = checked(&sample.signal)?;
    if b.net <= 0.0 {
        return Err(PhotometryError::BlankNotAboveDark);
    }
    let mut flags = blank.flags.union(sample.flags);

    // Ratio of sample to blank, with the reference ratio where it applies.
    let mut ratio = smp.net / b.net;
    let mut rel_var = square(b.std_error / b.net);
    let sample_rel = if smp.net != 0.0 {
        smp.std_error / math::absf(smp.net)
    } else {
        0.0
    };
    rel_var += square(sample_rel);
    let mut ref_factor = 1.0f32;
    if config.use_reference {
        match (blank.reference, sample.reference) {
            (None, None) => {}
            (Some(rb), Some(rs)) => {
                let rb = checked(&rb)?;
                let rs = checked(&rs)?;
                if rb.net <= 0.0 || rs.net <= 0.0 {
                    return Err(PhotometryError::ZeroReference);
                }
                ref_factor = rb.net / rs.net;
                ratio *= ref_factor;
                rel_var += square(rb.std_error / rb.net) + square(rs.std_error / rs.net);
            }
            _ => return Err(PhotometryError::ReferenceMismatch),
        }
    }

    let s = config.stray.value();
    let corrected = config.stray.correct(ratio);
    // Detection floor: k standard errors of the sample level, relative to the blank.
    let floor_ratio =
        (config.low_signal_k * smp.std_error / b.net * ref_factor).max(config.min_transmittance);
    let low_net = smp.net <= config.low_signal_k * smp.std_error;
    let low = low_net || corrected < config.min_transmittance;
    flags.set_if(Flag::LowSignal, low);
    let t = if low {
        corrected.max(floor_ratio)
    } else {
        corrected
    };
    let transmittance = Transmittance::new(t).map_err(|_| PhotometryError::NotFinite)?;
    let absorbance = transmittance.absorbance();
    // First-order propagation; the apparent-ratio term uses |ratio| so a floored result still
    // reports the uncertainty of what was measured.
    let sd = (1.0 + s) * math::absf(ratio) / t * math::sqrtf(rel_var) / core::f32::consts::LN_10;
    let absorbance_sd = if sd.is_finite() { sd } else { f32::MAX };
    Ok(PhotometricResult {
        transmittance,
        absorbance,
        absorbance_sd,
        flags,
    })
}

fn square(x: f32) -> f32 {
    x * x
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Absorbance tolerance of these checks: libm to 1e-6; micromath's log10 (fast-math) is
    /// only good to about 5e-2 (measured, see tests/precision_contract.rs).
    const A_TOL: f32 = if cfg!(feature = "fast-math") {
        6e-2
    } else {
        1e-6
    };

    fn level(net: f32, se: f32) -> NetSignal {
        NetSignal {
            signal: Level { net, std_error: se },
            reference: None,
            flags: Flags::NONE,
            lit_reads: 10,
            dark_reads: 10,
            rejected_reads: 0,
        }
    }

    #[test]
    fn gold_book_decades() {
        // IUPAC Gold Book, "absorbance" (decadic): T = 10 % gives A = 1, T = 1 % gives A = 2.
        let cfg = PhotometryConfig::default();
        let a1 = photometric_result(&level(50_000.0, 1.0), &level(5_000.0, 1.0), &cfg).unwrap();
        let a2 = photometric_result(&level(50_000.0, 1.0), &level(500.0, 1.0), &cfg).unwrap();
        assert!((a1.absorbance.value() - 1.0).abs() < A_TOL);
        assert!((a2.absorbance.value() - 2.0).abs() < A_TOL);
        assert!((Transmittance::new(0.1).unwrap().absorbance().value() - 1.0).abs() < A_TOL);
    }

    #[test]
    fn negative_absorbance_is_valid() {
        let r = photometric_result(
            &level(1000.0, 1.0),
            &level(1100.0, 1.0),
            &PhotometryConfig::default(),
        )
        .unwrap();
        assert!(r.absorbance.value() < 0.0);
        assert!(r.flags.is_empty());
    }

    #[test]
    fn blank_at_dark_is_an_error_and_dark_sample_is_low_signal() {
        let cfg = PhotometryConfig::default();
        assert_eq!(
            photometric_result(&level(0.0, 1.0), &level(10.0, 1.0), &cfg),
            Err(PhotometryError::BlankNotAboveDark)
        );
        let r = photometric_result(&level(10_000.0, 1.0), &level(-2.0, 1.0), &cfg).unwrap();
        assert!(r.flags.contains(Flag::LowSignal));
        assert!(r.absorbance.value().is_finite());
        assert!(r.absorbance.value() >= 3.0 - A_TOL);
    }

    #[test]
    fn stray_light_table() {
        // Textbook stray-light relation A_app = -log10((T + s)/(1 + s)) [Harvey, Analytical
        // Chemistry 2.1, ch. 10, from memory]; table values [calc] from
        // shared/reference-data/published-values.md §4.
        for (a_true, s, a_app) in [
            (0.5f32, 0.001f32, 0.4991f32),
            (1.0, 0.001, 0.9961),
            (2.0, 0.001, 1.9590),
            (3.0, 0.001, 2.6994),
            (0.5, 0.01, 0.4908),
            (1.0, 0.01, 0.9629),
            (2.0, 0.01, 1.7033),
            (3.0, 0.01, 1.9629),
        ] {
            let sf = StrayFraction::new(s).unwrap();
            let t = Transmittance::new(libm::powf(10.0, -a_true)).unwrap();
            let app = sf.apparent(t).absorbance().value();
            assert!(
                (app - a_app).abs() < 6e-5 + A_TOL,
                "A={a_true} s={s}: {app} vs {a_app}"
            );
            // Correcting recovers the true absorbance.
            let back = Transmittance::new(sf.correct(sf.apparent(t).ratio())).unwrap();
            assert!((back.absorbance().value() - a_true).abs() < 2e-3 + A_TOL);
        }
    }

    #[test]
    fn bad_configuration_is_refused() {
        assert_eq!(
            StrayFraction::new(1.0),
            Err(PhotometryError::InvalidStrayFraction)
        );
        assert_eq!(
            StrayFraction::new(-0.1),
            Err(PhotometryError::InvalidStrayFraction)
        );
        assert_eq!(
            StrayFraction::new(f32::NAN),
            Err(PhotometryError::InvalidStrayFraction)
        );
        let cfg = PhotometryConfig {
            min_transmittance: 0.0,
            ..PhotometryConfig::default()
        };
        assert_eq!(
            photometric_result(&level(1.0, 0.1), &level(1.0, 0.1), &cfg),
            Err(PhotometryError::InvalidConfig)
        );
        assert_eq!(
            photometric_result(
                &level(f32::NAN, 0.1),
                &level(1.0, 0.1),
                &PhotometryConfig::default()
            ),
            Err(PhotometryError::NotFinite)
        );
    }

    #[test]
    fn reference_mismatch_and_zero_reference() {
        let mut with_ref = level(1000.0, 1.0);
        with_ref.reference = Some(Level {
            net: 0.0,
            std_error: 1.0,
        });
        let cfg = PhotometryConfig::default();
        assert_eq!(
            photometric_result(&with_ref, &level(500.0, 1.0), &cfg),
            Err(PhotometryError::ReferenceMismatch)
        );
        assert_eq!(
            photometric_result(&with_ref, &with_ref, &cfg),
            Err(PhotometryError::ZeroReference)
        );
    }
}
