//! Replay: grouping the rows of a session into measurements, and measurements into blanks,
//! calibrations and quantified results — in the crate, so a device can replay its own log.
//!
//! Rules (session format, version 1):
//! * consecutive rows with the same (role, id, channel) form one measurement; its `off` rows
//!   are dark reads and its `on` rows lit reads, fed to a [`DarkLitSeries`];
//! * a `blank` sets the 100 % T level of its channel for every later measurement of that channel
//!   until the next blank; a measurement before any blank of its channel is reported with
//!   `no_blank` and no absorbance;
//! * every `standard` of a channel (with a blank, not `saturated` and not `low_signal`) joins
//!   the channel's calibration, fitted with the session's model once all rows are read; the
//!   standards' own concentrations are back-calculated from the curve (without `above_range`:
//!   a standard of the fit is inside the calibrated range by definition);
//! * `sample` and `check` measurements are quantified against their channel's calibration
//!   (`no_calibration` where there is none); with `low_signal` the absorbance is only a lower
//!   bound and no concentration is given; above the highest standard (`above_range`) the
//!   extrapolated concentration is given without an interval.
//!
//! Capacities are const generics: `C` channels, `S` standards per channel, `M` reported
//! measurements (standards, samples and checks), `N` reads per robust buffer. Exceeding one is
//! a typed [`ReplayErrorKind`], never a silent drop.
//!
//! ```
//! use lumisorb::session::{replay_bytes, Replay};
//!
//! let file = b"# lumisorb-session: 1\n# full_scale: 4095\n\
//!     t_ms,channel,nm,led,role,id,conc,signal,reference\n\
//!     0,red,630,off,blank,B,,100,\n1,red,630,on,blank,B,,3100,\n\
//!     2,red,630,off,sample,X,,100,\n3,red,630,on,sample,X,,400,\n";
//! let mut replay: Replay<2, 8, 16> = Replay::new();
//! replay_bytes(file, &mut replay)?;
//! let x = &replay.measurements()[0];
//! assert!((x.absorbance().unwrap() - 1.0).abs() < 1e-3); // 300 of 3000 counts: A = 1
//! assert!(x.flags.contains(lumisorb::Flag::NoCalibration));
//! # Ok::<(), lumisorb::session::SessionError>(())
//! ```

use core::fmt;

use heapless::{String, Vec};

use crate::calibration::{
    Calibration, CalibrationError, CalibrationSet, Model, SetError, Standard, Weighting,
};
use crate::counts::FullScale;
use crate::flags::{Flag, Flags};
use crate::net_signal::{DarkLitSeries, NetSignal, NetSignalError, SeriesConfig};
use crate::photometry::{photometric_result, PhotometricResult, PhotometryConfig, PhotometryError};
use crate::quantification::{Dilution, Quantified, QuantifyError};

use super::reader::{lines, Event, SessionReader};
use super::{Led, Metadata, ReadError, Role, Row, MAX_NAME_LEN};

/// Settings of a replay.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct ReplayConfig {
    /// Stability checks of each measurement's reads.
    pub series: SeriesConfig,
    /// Photometric evaluation (stray light, reference detector, low-signal threshold).
    pub photometry: PhotometryConfig,
}

/// Why a replay stopped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ReplayErrorKind {
    /// The session's full scale is not a valid detector full scale.
    InvalidFullScale,
    /// The replay was already finished.
    Finished,
    /// A row came before [`Replay::start`].
    NotStarted,
    /// The reads of a measurement could not be combined (no lit read, too many reads, ...).
    Series(NetSignalError),
    /// A measurement could not be compared with its blank (blank not above dark, reference
    /// detector on one and not the other, ...).
    Photometry(PhotometryError),
    /// More channels than the replay's capacity `C`.
    TooManyChannels {
        /// The capacity.
        capacity: u16,
    },
    /// More standards on one channel than the capacity `S`.
    TooManyStandards {
        /// The capacity.
        capacity: u16,
    },
    /// More standard, sample and check measurements than the capacity `M`.
    TooManyMeasurements {
        /// The capacity.
        capacity: u16,
    },
    /// A channel's `nm` differs from the one its first measurement gave.
    ChannelWavelengthChanged,
    /// A standard's concentration cannot be stored (not finite in f32).
    BadStandard,
    /// A measurement could not be quantified (an absurd absorbance overflowed).
    Quantify(QuantifyError),
}

impl fmt::Display for ReplayErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use ReplayErrorKind as K;
        match self {
            K::InvalidFullScale => f.write_str("full scale is not a valid detector full scale"),
            K::Finished => f.write_str("replay already finished"),
            K::NotStarted => f.write_str("row before the replay was started"),
            K::Series(e) => write!(f, "reads of the measurement: {e}"),
            K::Photometry(e) => write!(f, "measurement against its blank: {e}"),
            K::TooManyChannels { capacity } => write!(f, "more than {capacity} channels"),
            K::TooManyStandards { capacity } => {
                write!(f, "more than {capacity} standards on a channel")
            }
            K::TooManyMeasurements { capacity } => write!(f, "more than {capacity} measurements"),
            K::ChannelWavelengthChanged => {
                f.write_str("channel's nm differs from its earlier measurements")
            }
            K::BadStandard => f.write_str("standard concentration cannot be stored"),
            K::Quantify(e) => write!(f, "quantification: {e}"),
        }
    }
}

/// A replay error with the line of the measurement's first row.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ReplayError {
    /// 1-based line number of the first row of the measurement concerned (0 if none).
    pub line: u32,
    /// What went wrong.
    pub kind: ReplayErrorKind,
}

impl fmt::Display for ReplayError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "line {}: {}", self.line, self.kind)
    }
}

impl core::error::Error for ReplayError {}

/// A malformed line or a replay failure.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SessionError {
    /// The file is malformed.
    Read(ReadError),
    /// The file is well-formed but cannot be replayed.
    Replay(ReplayError),
}

impl SessionError {
    /// The line number the error refers to.
    pub fn line(&self) -> u32 {
        match self {
            SessionError::Read(e) => e.line,
            SessionError::Replay(e) => e.line,
        }
    }
}

impl fmt::Display for SessionError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SessionError::Read(e) => e.fmt(f),
            SessionError::Replay(e) => e.fmt(f),
        }
    }
}

impl core::error::Error for SessionError {}

impl From<ReadError> for SessionError {
    fn from(e: ReadError) -> Self {
        SessionError::Read(e)
    }
}

impl From<ReplayError> for SessionError {
    fn from(e: ReplayError) -> Self {
        SessionError::Replay(e)
    }
}

/// One LED channel of a session.
#[derive(Clone, Debug)]
pub struct Channel<const S: usize> {
    /// Channel name.
    pub name: String<MAX_NAME_LEN>,
    /// Nominal LED wavelength, if recorded.
    pub nm: Option<u16>,
    /// Blank measurements seen.
    pub blanks: u32,
    /// The standards that entered the calibration, in measurement order.
    pub standards: CalibrationSet<S>,
    /// The calibration (unweighted fit of the session's model), once [`Replay::finish`] ran;
    /// `Err` says why there is none.
    pub calibration: Result<Calibration<S>, CalibrationError>,
    blank: Option<NetSignal>,
}

/// One reported measurement (a standard, sample or check).
#[derive(Clone, Debug)]
pub struct Measurement {
    /// Identifier.
    pub id: String<MAX_NAME_LEN>,
    /// Role (`standard`, `sample` or `check`).
    pub role: Role,
    /// Index of the channel in [`Replay::channels`].
    pub channel: usize,
    /// `t_ms` of the measurement's first row.
    pub t_ms: u32,
    /// Line of the measurement's first row.
    pub line: u32,
    /// Known concentration (standards and checks).
    pub known: Option<f64>,
    /// Lit reads.
    pub lit_reads: u32,
    /// Dark reads.
    pub dark_reads: u32,
    /// Transmittance and absorbance against the channel's blank (`None` without a blank).
    pub photometric: Option<PhotometricResult>,
    /// Concentration with its interval (after [`Replay::finish`]; `None` without a blank, a
    /// calibration, with `low_signal`, or beyond the top of a quadratic curve).
    pub quantified: Option<Quantified>,
    /// Every flag of the measurement.
    pub flags: Flags,
    /// Whether the measurement entered its channel's calibration (standards only).
    pub in_calibration: bool,
}

impl Measurement {
    /// Transmittance (ratio), if measured against a blank.
    pub fn transmittance(&self) -> Option<f32> {
        self.photometric.map(|p| p.transmittance.ratio())
    }

    /// Absorbance, if measured against a blank.
    pub fn absorbance(&self) -> Option<f32> {
        self.photometric.map(|p| p.absorbance.value())
    }

    /// Standard uncertainty of the absorbance, if measured against a blank.
    pub fn absorbance_sd(&self) -> Option<f32> {
        self.photometric.map(|p| p.absorbance_sd)
    }

    /// Concentration from the calibration curve, if it could be computed.
    pub fn concentration(&self) -> Option<f32> {
        self.quantified.map(|q| q.concentration)
    }

    /// The 95 % confidence interval [low, high] of the concentration. `None` where there is no
    /// concentration, and above the highest standard (`above_range`): an extrapolated curve
    /// gives no trustworthy interval.
    pub fn interval(&self) -> Option<[f32; 2]> {
        if self.flags.contains(Flag::AboveRange) {
            return None;
        }
        self.quantified.map(|q| [q.low, q.high])
    }
}

/// The measurement whose rows are being read.
#[derive(Clone, Debug)]
struct Open<const N: usize> {
    role: Role,
    channel: usize,
    id: String<MAX_NAME_LEN>,
    conc: Option<f64>,
    t_ms: u32,
    line: u32,
    series: DarkLitSeries<N>,
}

/// Groups rows into measurements and quantifies them: `C` channels, `S` standards per channel,
/// `M` reported measurements, robust buffers of `N` reads.
///
/// Memory is fixed: roughly `C·(100 + 16·S) + M·130 + 2·4·N` bytes plus the series state. On a
/// host, box a large replay (`Box::new(Replay::new())`) rather than keep it on the stack.
#[derive(Clone, Debug)]
pub struct Replay<const C: usize, const S: usize, const M: usize, const N: usize = 32> {
    config: ReplayConfig,
    full_scale: Option<FullScale>,
    model: Model,
    open: Option<Open<N>>,
    channels: Vec<Channel<S>, C>,
    measurements: Vec<Measurement, M>,
    reads: u64,
    finished: bool,
}

fn capacity(n: usize) -> u16 {
    u16::try_from(n).unwrap_or(u16::MAX)
}

impl<const C: usize, const S: usize, const M: usize, const N: usize> Replay<C, S, M, N> {
    /// An empty replay with default settings; call [`Replay::start`] with the session's
    /// metadata before the first row.
    pub fn new() -> Self {
        Self::with_config(ReplayConfig::default())
    }

    /// An empty replay with the given settings.
    #[must_use]
    pub fn with_config(config: ReplayConfig) -> Self {
        Replay {
            config,
            full_scale: None,
            model: Model::Linear,
            open: None,
            channels: Vec::new(),
            measurements: Vec::new(),
            reads: 0,
            finished: false,
        }
    }

    /// Takes the session's metadata (full scale and calibration model).
    pub fn start(&mut self, meta: &Metadata) -> Result<(), ReplayError> {
        let fs = FullScale::new(meta.full_scale).map_err(|_| ReplayError {
            line: 0,
            kind: ReplayErrorKind::InvalidFullScale,
        })?;
        self.full_scale = Some(fs);
        self.model = meta.model();
        Ok(())
    }

    /// Raw reads replayed so far.
    pub const fn reads(&self) -> u64 {
        self.reads
    }

    /// The channels, in order of first appearance.
    pub fn channels(&self) -> &[Channel<S>] {
        &self.channels
    }

    /// The reported measurements (standards, samples and checks) in file order.
    pub fn measurements(&self) -> &[Measurement] {
        &self.measurements
    }

    /// The calibration model used.
    pub const fn model(&self) -> Model {
        self.model
    }

    /// Feeds one row read from line `line` of the file.
    pub fn push_row(&mut self, row: &Row<'_>, line: u32) -> Result<(), ReplayError> {
        let same = self.open.as_ref().is_some_and(|o| {
            o.role == row.role
                && o.id.as_str() == row.id
                && self
                    .channels
                    .get(o.channel)
                    .is_some_and(|c| c.name.as_str() == row.channel)
        });
        self.push_grouped(row, line, !same)
    }

    /// Feeds a row whose grouping the caller already knows (a [`SessionReader`] tells it:
    /// [`SessionReader::row_started_measurement`]); saves comparing the key twice.
    fn push_grouped(&mut self, row: &Row<'_>, line: u32, starts: bool) -> Result<(), ReplayError> {
        if self.finished {
            return Err(ReplayError {
                line,
                kind: ReplayErrorKind::Finished,
            });
        }
        let Some(fs) = self.full_scale else {
            return Err(ReplayError {
                line,
                kind: ReplayErrorKind::NotStarted,
            });
        };
        if starts || self.open.is_none() {
            self.close()?;
            let channel = self.channel_index(row, line)?;
            let mut id = String::new();
            id.push_str(row.id).map_err(|_| ReplayError {
                line,
                kind: ReplayErrorKind::Series(NetSignalError::Full),
            })?;
            self.open = Some(Open {
                role: row.role,
                channel,
                id,
                conc: row.conc,
                t_ms: row.t_ms,
                line,
                series: DarkLitSeries::new(fs, row.reference.map(|_| fs)),
            });
        }
        if let Some(open) = self.open.as_mut() {
            let pushed = match row.led {
                Led::On => open.series.push_lit(row.signal, row.reference),
                Led::Off => open.series.push_dark(row.signal, row.reference),
            };
            pushed.map_err(|e| ReplayError {
                line,
                kind: ReplayErrorKind::Series(e),
            })?;
        }
        self.reads = self.reads.saturating_add(1);
        Ok(())
    }

    fn channel_index(&mut self, row: &Row<'_>, line: u32) -> Result<usize, ReplayError> {
        if let Some(i) = self
            .channels
            .iter()
            .position(|c| c.name.as_str() == row.channel)
        {
            let c = self.channels.get(i);
            if c.is_some_and(|c| c.nm != row.nm) {
                return Err(ReplayError {
                    line,
                    kind: ReplayErrorKind::ChannelWavelengthChanged,
                });
            }
            return Ok(i);
        }
        let too_many = ReplayError {
            line,
            kind: ReplayErrorKind::TooManyChannels {
                capacity: capacity(C),
            },
        };
        let mut name = String::new();
        name.push_str(row.channel).map_err(|_| too_many)?;
        self.channels
            .push(Channel {
                name,
                nm: row.nm,
                blanks: 0,
                standards: CalibrationSet::new(),
                calibration: Err(CalibrationError::TooFewPoints {
                    needed: self.model.parameters() + 1,
                    got: 0,
                }),
                blank: None,
            })
            .map_err(|_| too_many)?;
        Ok(self.channels.len().saturating_sub(1))
    }

    /// Closes the open measurement: a blank becomes its channel's 100 % T level, anything else
    /// is evaluated against that blank and recorded.
    fn close(&mut self) -> Result<(), ReplayError> {
        let Some(open) = self.open.take() else {
            return Ok(());
        };
        let line = open.line;
        let err = |kind| ReplayError { line, kind };
        let net = open
            .series
            .finish(&self.config.series)
            .map_err(|e| err(ReplayErrorKind::Series(e)))?;
        let Some(channel) = self.channels.get_mut(open.channel) else {
            return Err(err(ReplayErrorKind::NotStarted));
        };
        if open.role == Role::Blank {
            if net.signal.net.is_nan() || net.signal.net <= 0.0 {
                return Err(err(ReplayErrorKind::Photometry(
                    PhotometryError::BlankNotAboveDark,
                )));
            }
            channel.blank = Some(net);
            channel.blanks = channel.blanks.saturating_add(1);
            return Ok(());
        }
        let photometric = match &channel.blank {
            Some(blank) => Some(
                photometric_result(blank, &net, &self.config.photometry)
                    .map_err(|e| err(ReplayErrorKind::Photometry(e)))?,
            ),
            None => None,
        };
        let flags = photometric.map_or(net.flags.with(Flag::NoBlank), |p| p.flags);
        let mut in_calibration = false;
        if let (Role::Standard, Some(p), Some(conc)) = (open.role, photometric, open.conc) {
            if !p.flags.contains(Flag::Saturated) && !p.flags.contains(Flag::LowSignal) {
                let c = conc as f32;
                let standard = Standard::with_replicates(c, p.absorbance, p.absorbance_sd, 1)
                    .map_err(|_| err(ReplayErrorKind::BadStandard))?;
                channel.standards.push(standard).map_err(|e| match e {
                    SetError::Full { capacity: cap } => err(ReplayErrorKind::TooManyStandards {
                        capacity: capacity(cap),
                    }),
                    SetError::Invalid(_) => err(ReplayErrorKind::BadStandard),
                })?;
                in_calibration = true;
            }
        }
        self.measurements
            .push(Measurement {
                id: open.id,
                role: open.role,
                channel: open.channel,
                t_ms: open.t_ms,
                line,
                known: open.conc,
                lit_reads: net.lit_reads,
                dark_reads: net.dark_reads,
                photometric,
                quantified: None,
                flags,
                in_calibration,
            })
            .map_err(|_| {
                err(ReplayErrorKind::TooManyMeasurements {
                    capacity: capacity(M),
                })
            })
    }

    /// Ends the session: closes the last measurement, fits every channel's calibration and
    /// quantifies every standard, sample and check.
    pub fn finish(&mut self) -> Result<(), ReplayError> {
        if self.finished {
            return Err(ReplayError {
                line: 0,
                kind: ReplayErrorKind::Finished,
            });
        }
        self.close()?;
        self.finished = true;
        let model = self.model;
        for channel in self.channels.iter_mut() {
            channel.calibration = Calibration::fit(&channel.standards, model, Weighting::None);
        }
        for m in self.measurements.iter_mut() {
            let Some(channel) = self.channels.get(m.channel) else {
                continue;
            };
            let Some(p) = m.photometric else {
                continue;
            };
            match &channel.calibration {
                Err(_) => m.flags.insert(Flag::NoCalibration),
                // A low signal gives only a lower bound of the absorbance: no concentration.
                Ok(_) if p.flags.contains(Flag::LowSignal) => {}
                Ok(cal) => match cal.quantify(p.absorbance, 1, Dilution::NONE, m.flags) {
                    Ok(mut q) => {
                        if m.in_calibration {
                            // A standard of the fit lies in the calibrated range by definition;
                            // a back-calculated value a hair above the top is not extrapolation.
                            q.flags.remove(Flag::AboveRange);
                        }
                        m.flags = m.flags.union(q.flags);
                        m.quantified = Some(q);
                    }
                    // Beyond the top of a quadratic curve: no concentration gives this absorbance.
                    Err(QuantifyError::BeyondCurve) => m.flags.insert(Flag::AboveRange),
                    Err(e) => {
                        return Err(ReplayError {
                            line: m.line,
                            kind: ReplayErrorKind::Quantify(e),
                        })
                    }
                },
            }
        }
        Ok(())
    }
}

impl<const C: usize, const S: usize, const M: usize, const N: usize> Default
    for Replay<C, S, M, N>
{
    fn default() -> Self {
        Self::new()
    }
}

/// Reads a whole session held in memory and replays it into `replay` (which is then finished).
pub fn replay_bytes<const C: usize, const S: usize, const M: usize, const N: usize>(
    bytes: &[u8],
    replay: &mut Replay<C, S, M, N>,
) -> Result<Metadata, SessionError> {
    let mut reader = SessionReader::new();
    for line in lines(bytes) {
        match reader.feed(line)? {
            Event::Header => {
                if let Some(meta) = reader.metadata() {
                    replay.start(meta)?;
                }
            }
            Event::Row(row) => {
                replay.push_grouped(
                    &row,
                    reader.line_number(),
                    reader.row_started_measurement(),
                )?;
            }
            Event::Empty | Event::Metadata(_) | Event::Comment(_) => {}
        }
    }
    reader.finish()?;
    replay.finish()?;
    Ok(reader.metadata().cloned().unwrap_or(Metadata::new(0)))
}
