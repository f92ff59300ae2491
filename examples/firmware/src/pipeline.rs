//! The whole lumisorb pipeline on the simulated photometer, shared word for word by the
//! firmware (`main.rs`, on an emulated Cortex-M) and the host check
//! (`examples/firmware_pipeline.rs` of the library), so their printed results can be compared.
//!
//! Sequencer (auto-exposure, warm-up, blank, standards, samples) on [`SimRig`], photometry,
//! a calibration with standards, concentrations with 95 % intervals, and checks. Every number
//! is printed through [`Fixed`] (integer formatting only: no float formatting is linked).
//! All data are simulated and invented: the analyte, the sample names and the instrument.

use core::cell::RefCell;
use core::fmt::{self, Write};

use lumisorb::calibration::{Calibration, CalibrationSet, Model, Standard, Weighting};
use lumisorb::instrument::{
    BlankMeasurement, ExposureReport, NeverCancel, SampleMeasurement, SequenceConfig, Sequencer,
    WarmUpReport,
};
use lumisorb::quantification::{Dilution, Quantified};
use lumisorb::sim::{SimBench, SimConfig, SimRig, SimSample};
use lumisorb::Flag;

/// Seed of the simulated noise.
pub const SEED: u64 = 0x1A5E_50B5;

/// Concentrations of the calibration standards (invented unit "u", demo dye).
pub const STANDARDS: [f32; 6] = [0.0, 1.0, 2.0, 4.0, 6.0, 8.0];

/// A sample of the demo: name, what is in the cuvette, known concentration (check samples).
pub struct DemoSample {
    /// Invented name.
    pub name: &'static str,
    /// What the simulator puts in the cuvette.
    pub sample: SimSample,
    /// Known concentration of a check sample.
    pub known: Option<f32>,
}

/// The samples of the demo.
pub const SAMPLES: [DemoSample; 4] = [
    DemoSample {
        name: "check-low",
        sample: SimSample::with_concentration(1.5),
        known: Some(1.5),
    },
    DemoSample {
        name: "check-high",
        sample: SimSample::with_concentration(5.0),
        known: Some(5.0),
    },
    DemoSample {
        name: "cloudy-brook",
        sample: SimSample {
            concentration: 3.0,
            background_absorbance: 0.03,
        },
        known: None,
    },
    DemoSample {
        name: "dense-vat",
        sample: SimSample::with_concentration(40.0),
        known: None,
    },
];

/// Standards in a calibration.
pub const CAL_N: usize = 8;

/// Everything the pipeline measured and computed.
pub struct Outcome {
    /// Auto-exposure.
    pub exposure: ExposureReport,
    /// LED warm-up.
    pub warm_up: WarmUpReport,
    /// The blank.
    pub blank: BlankMeasurement,
    /// The standards' measurements.
    pub standards: [Option<SampleMeasurement>; STANDARDS.len()],
    /// The calibration.
    pub calibration: Calibration<CAL_N>,
    /// The samples' measurements and concentrations.
    pub samples: [Option<(SampleMeasurement, Quantified)>; SAMPLES.len()],
    /// Detector reads taken.
    pub reads: u32,
    /// Simulated time used (ms).
    pub sim_ms: u64,
}

/// Where the pipeline stopped.
#[derive(Clone, Copy, Debug)]
pub enum Failure {
    /// Simulator configuration.
    Sim,
    /// A sequencer procedure (which one).
    Sequence(&'static str),
    /// A standard or the standards set.
    Standards,
    /// The calibration fit.
    Calibration,
    /// Quantification.
    Quantify,
}

impl Failure {
    /// A word for the report.
    pub fn describe(self) -> &'static str {
        match self {
            Failure::Sim => "simulator configuration",
            Failure::Sequence(step) => step,
            Failure::Standards => "standards",
            Failure::Calibration => "calibration fit",
            Failure::Quantify => "quantification",
        }
    }
}

/// A fresh simulated photometer (power-up state, the demo seed).
pub fn new_rig() -> Result<SimRig, Failure> {
    let bench = SimBench::new(SimConfig::GREEN_DEMO, SEED).map_err(|_| Failure::Sim)?;
    Ok(SimRig::new(bench))
}

/// Puts `rig` back into its power-up state. Never inlined: the fresh simulator (a few hundred
/// bytes) is built in this frame, beside the measurement's, not inside it, so the stack
/// figures count the measurement and not the simulator's construction.
#[inline(never)]
pub fn reset(rig: &RefCell<SimRig>) -> Result<(), Failure> {
    *rig.try_borrow_mut().map_err(|_| Failure::Sim)? = new_rig()?;
    Ok(())
}

/// Runs the whole pipeline on `rig`, reset to its power-up state first. The caller owns the
/// rig's storage (the firmware keeps it in a static, so the stack figures count the
/// measurement, not the simulator's state).
#[inline(never)] // its frame must lie below the caller's stack pointer for the stack figure
pub fn measure(rig: &RefCell<SimRig>) -> Result<Outcome, Failure> {
    reset(rig)?;
    let mut seq = Sequencer::new(SimRig::hardware(rig), SequenceConfig::default())
        .map_err(|_| Failure::Sequence("sequencer configuration"))?;
    let cancel = &mut NeverCancel;

    let exposure = seq
        .auto_expose(cancel)
        .map_err(|_| Failure::Sequence("auto-exposure"))?;
    let warm_up = seq
        .warm_up(cancel)
        .map_err(|_| Failure::Sequence("warm-up"))?;
    let blank = seq
        .measure_blank(cancel)
        .map_err(|_| Failure::Sequence("blank"))?;

    let mut standards = [None; STANDARDS.len()];
    let mut set = CalibrationSet::<CAL_N>::from_standards(&[]).map_err(|_| Failure::Standards)?;
    for (slot, &c) in standards.iter_mut().zip(STANDARDS.iter()) {
        rig.borrow_mut()
            .set_sample(SimSample::with_concentration(c));
        let m = seq
            .measure_sample(&blank, cancel)
            .map_err(|_| Failure::Sequence("standard"))?;
        let standard = Standard::with_replicates(c, m.result.absorbance, m.result.absorbance_sd, 1)
            .map_err(|_| Failure::Standards)?;
        set.push(standard).map_err(|_| Failure::Standards)?;
        *slot = Some(m);
    }
    // Band-limited LED light and stray light bend the curve: a quadratic fits it.
    let calibration = Calibration::fit(&set, Model::Quadratic, Weighting::None)
        .map_err(|_| Failure::Calibration)?;

    let mut samples = [None; SAMPLES.len()];
    for (slot, s) in samples.iter_mut().zip(SAMPLES.iter()) {
        rig.borrow_mut().set_sample(s.sample);
        let m = seq
            .measure_sample(&blank, cancel)
            .map_err(|_| Failure::Sequence("sample"))?;
        let q = calibration
            .quantify(m.result.absorbance, 1, Dilution::NONE, m.result.flags)
            .map_err(|_| Failure::Quantify)?;
        *slot = Some((m, q));
    }
    let r = rig.borrow();
    Ok(Outcome {
        exposure,
        warm_up,
        blank,
        standards,
        calibration,
        samples,
        reads: r.reads(),
        sim_ms: r.now_ms_total(),
    })
}

/// A number printed with a fixed count of decimals through integer formatting only
/// (round half away from zero of `value · 10^decimals` in f64, then integer digits).
pub struct Fixed(pub f64, pub u8);

impl fmt::Display for Fixed {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let Fixed(v, d) = *self;
        if !v.is_finite() {
            return f.write_str(if v.is_nan() {
                "nan"
            } else if v > 0.0 {
                "inf"
            } else {
                "-inf"
            });
        }
        let mut scale = 1u64;
        for _ in 0..d {
            scale *= 10;
        }
        let scaled = v * scale as f64;
        let rounded = if scaled >= 0.0 {
            scaled + 0.5
        } else {
            scaled - 0.5
        };
        // The cast saturates; demo values stay far inside i64.
        let n = rounded as i64;
        let sign = if n < 0 { "-" } else { "" };
        let a = n.unsigned_abs();
        if d == 0 {
            write!(f, "{sign}{a}")
        } else {
            write!(
                f,
                "{sign}{}.{:0width$}",
                a / scale,
                a % scale,
                width = usize::from(d)
            )
        }
    }
}

fn f(v: f32, d: u8) -> Fixed {
    Fixed(f64::from(v), d)
}

/// Prints the results, one line per item, in the form the CI compares.
pub fn report(outcome: &Result<Outcome, Failure>, out: &mut impl Write) -> fmt::Result {
    let o = match outcome {
        Ok(o) => o,
        Err(e) => return writeln!(out, "pipeline failed at: {}", e.describe()),
    };
    let e = &o.exposure;
    writeln!(
        out,
        "exposure step={} duty={} lit_fraction={} probes={}",
        e.exposure.step,
        e.exposure.duty,
        f(e.lit_fraction, 4),
        e.probes
    )?;
    let w = &o.warm_up;
    writeln!(
        out,
        "warm_up points={} elapsed_ms={} last_change={}",
        w.points,
        w.elapsed_ms,
        f(w.relative_change, 6)
    )?;
    let b = &o.blank.net;
    writeln!(
        out,
        "blank net={} se={} ref={} flags={}",
        f(b.signal.net, 1),
        f(b.signal.std_error, 2),
        f(b.reference.map_or(0.0, |r| r.net), 1),
        b.flags
    )?;
    for (m, c) in o.standards.iter().zip(STANDARDS.iter()) {
        if let Some(m) = m {
            writeln!(
                out,
                "standard c={} A={} sd={} flags={}",
                f(*c, 3),
                f(m.result.absorbance.value(), 5),
                f(m.result.absorbance_sd, 5),
                m.result.flags
            )?;
        }
    }
    let cal = &o.calibration;
    let [b0, b1, b2] = cal.coefficients();
    writeln!(
        out,
        "calibration model={} b0={} b1={} b2={} r2={} s_yx={} lod={} loq={}",
        cal.model(),
        Fixed(b0, 6),
        Fixed(b1, 6),
        Fixed(b2, 6),
        Fixed(cal.r_squared(), 6),
        Fixed(cal.residual_sd(), 6),
        f(cal.lod(), 4),
        f(cal.loq(), 4)
    )?;
    for (s, d) in o.samples.iter().zip(SAMPLES.iter()) {
        if let Some((m, q)) = s {
            writeln!(
                out,
                "sample {} A={} c={} ci95=[{},{}] flags={}",
                d.name,
                f(m.result.absorbance.value(), 5),
                f(q.concentration, 4),
                f(q.low, 4),
                f(q.high, 4),
                q.flags
            )?;
        }
    }
    writeln!(out, "reads={} simulated_ms={}", o.reads, o.sim_ms)
}

/// Number of checks [`checks`] makes.
pub const CHECKS: usize = 3 + SAMPLES.len();

/// The checks of the results against what the simulation must give: (name, passed).
pub fn checks(o: &Outcome) -> [(&'static str, bool); CHECKS] {
    let mut list = [("", false); CHECKS];
    // Auto-exposure put the blank inside its 60-85 % window.
    list[0] = (
        "exposure-window",
        (0.60..=0.85).contains(&o.exposure.lit_fraction),
    );
    list[1] = ("blank-clean", o.blank.net.flags.is_empty());
    list[2] = ("calibration-r2", o.calibration.r_squared() > 0.9995);
    for ((slot, s), d) in list[3..]
        .iter_mut()
        .zip(o.samples.iter())
        .zip(SAMPLES.iter())
    {
        let ok = match (s, d.known, d.sample.background_absorbance > 0.0) {
            (None, _, _) => false,
            // Check samples: recovery within 97-103 % and the known value inside the 95 % CI.
            (Some((_, q)), Some(known), _) => {
                let recovery = q.concentration / known;
                (0.97..=1.03).contains(&recovery) && q.low < known && known < q.high
            }
            // Turbidity adds to the absorbance: the cloudy sample reads high.
            (Some((_, q)), None, true) => q.concentration > d.sample.concentration,
            // Far beyond the standards: flagged, never silently reported.
            (Some((_, q)), None, false) => q.flags.contains(Flag::AboveRange),
        };
        *slot = (d.name, ok);
    }
    list
}

/// Prints one line per check and returns whether all passed (false when the pipeline failed).
pub fn check(outcome: &Result<Outcome, Failure>, out: &mut impl Write) -> bool {
    let o = match outcome {
        Ok(o) => o,
        Err(_) => {
            let _ = writeln!(out, "check pipeline FAIL");
            return false;
        }
    };
    let mut all = true;
    for (name, ok) in checks(o) {
        all &= ok;
        let _ = writeln!(out, "check {} {}", name, if ok { "ok" } else { "FAIL" });
    }
    all
}

/// One full measurement on its own (auto-exposure, blank, one sample) on `rig`, reset to its
/// power-up state first, for the stack figure: the sample's absorbance.
#[inline(never)] // its frame must lie below the caller's stack pointer for the stack figure
pub fn single_measurement(rig: &RefCell<SimRig>) -> Result<f32, Failure> {
    reset(rig)?;
    let mut seq = Sequencer::new(SimRig::hardware(rig), SequenceConfig::default())
        .map_err(|_| Failure::Sequence("sequencer configuration"))?;
    let blank = seq
        .measure_blank(&mut NeverCancel)
        .map_err(|_| Failure::Sequence("blank"))?;
    rig.borrow_mut()
        .set_sample(SimSample::with_concentration(2.0));
    let m = seq
        .measure_sample(&blank, &mut NeverCancel)
        .map_err(|_| Failure::Sequence("sample"))?;
    Ok(m.result.absorbance.value())
}
