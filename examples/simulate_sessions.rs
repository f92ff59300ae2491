//! Writes the invented demo sessions of `demo-data/` with the shared physical simulator
//! (`lumisorb::sim`: LED band against the analyte's absorption band, stray light, shot and read
//! noise, dark drift, LED warm-up and ageing, optional reference detector).
//!
//! `cargo run --example simulate_sessions --features sim -- [OUT_DIR]` (default `demo-data`).
//! Every scenario, site, sample and analyte name here is invented; the numbers describe no real
//! instrument. The true concentration the simulator used for each sample and check is written
//! into the session as a comment line `# truth <channel> <id> <concentration>` (the id may hold
//! spaces: the channel is the first word, the concentration the last; the tests read it back to
//! check the replayed intervals).

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use lumisorb::session::{Led, Metadata, Model, Role, Row, SessionWriter};
use lumisorb::sim::{SimBench, SimConfig, SimRng, SimSample};

/// One measurement of the simulated round.
#[derive(Clone, Copy)]
enum Step {
    /// A measurement on channel `ch`: role, id, concentration in the cuvette.
    Measure(usize, Role, &'static str, f64),
    /// Time passes with the LEDs off (walking to the next site, swapping cuvettes).
    Wait(u32),
}

/// One LED channel of a scenario.
struct Channel {
    name: &'static str,
    nm: u16,
    config: SimConfig,
}

struct Scenario {
    dir: &'static str,
    meta: Metadata,
    channels: Vec<Channel>,
    /// Read pairs (dark + lit) per measurement.
    pairs: u32,
    /// Milliseconds between reads.
    read_ms: u32,
    /// Warm-up with the LED lit before each measurement (not logged).
    warm_up_ms: u32,
    steps: Vec<Step>,
    seed: u64,
    /// Relative standard deviation of preparing a standard (pipetting, weighing): the cuvette
    /// holds nominal × (1 + prep_error·z), z standard normal, while the row records the nominal.
    prep_error: f32,
}

fn meta(full_scale: u32, unit: &str, analyte: &str, model: Model) -> Metadata {
    let mut m = Metadata::new(full_scale);
    m.unit = Some(heapless::String::try_from(unit).expect("short unit"));
    m.analyte = Some(heapless::String::try_from(analyte).expect("short analyte"));
    m.path_mm = Some(10.0);
    m.model = Some(model);
    m
}

/// A volunteer stream-survey round: a blue phosphate-like complex read with an 880 nm LED,
/// standards in the morning, then sites along the brook, re-blanking at every site.
fn brook_round() -> Scenario {
    let mut c = SimConfig::GREEN_DEMO;
    c.led.spectrum.peak_nm = 880.0;
    c.led.spectrum.fwhm_nm = 45.0;
    c.led.photoelectrons_per_ms = 19_000.0;
    c.led.drift_per_hour = -0.01;
    c.optics.absorber.band.peak_nm = 870.0;
    c.optics.absorber.band.fwhm_nm = 260.0;
    // Absorbance per mg/L per cm at the band peak (invented).
    c.optics.absorber.absorptivity_per_cm = 0.52;
    c.optics.cuvette.stray_fraction = 0.003;
    c.signal.dark_drift_per_hour = 60.0;
    c.reference = None;
    use Role::*;
    use Step::*;
    let mut steps = vec![
        Measure(0, Blank, "reagent-blank", 0.0),
        Measure(0, Standard, "std-0.00", 0.0),
        Measure(0, Standard, "std-0.10", 0.10),
        Measure(0, Standard, "std-0.25", 0.25),
        Measure(0, Standard, "std-0.50", 0.50),
        Measure(0, Standard, "std-0.75", 0.75),
        Measure(0, Standard, "std-1.00", 1.00),
        Measure(0, Check, "check-0.40", 0.40),
    ];
    let sites: [(&str, &[f64]); 6] = [
        ("Otterbrook spring", &[0.031]),
        ("Hazel footbridge", &[0.082, 0.079]),
        ("Tannery weir", &[0.412]),
        ("Cressfield outfall", &[0.655, 0.640]),
        ("Kingfisher bend", &[0.218]),
        ("Lowmeadow ford", &[0.155]),
    ];
    // Leaked &'static names: the example runs once.
    for (i, (site, concs)) in sites.iter().enumerate() {
        steps.push(Wait(20 * 60_000));
        let blank: &'static str = Box::leak(format!("blank-site{}", i + 1).into_boxed_str());
        steps.push(Measure(0, Blank, blank, 0.0));
        for (k, &conc) in concs.iter().enumerate() {
            let id: &'static str = Box::leak(format!("{site} #{}", k + 1).into_boxed_str());
            steps.push(Measure(0, Sample, id, conc));
        }
    }
    steps.push(Wait(10 * 60_000));
    steps.push(Measure(0, Blank, "blank-end", 0.0));
    steps.push(Measure(0, Check, "check-0.40-end", 0.40));
    Scenario {
        dir: "stream-survey",
        meta: meta(
            65_535,
            "mg/L",
            "blue phosphate-like complex (simulated)",
            Model::Linear,
        ),
        channels: vec![Channel {
            name: "ir880",
            nm: 880,
            config: c,
        }],
        pairs: 12,
        read_ms: 25,
        warm_up_ms: 20_000,
        steps,
        seed: 880,
        prep_error: 0.004,
    }
}

/// A classroom food-colour series: a blue dye read with a 630 nm LED, a quadratic calibration up
/// to high absorbance (the band-limited LED and stray light bend the curve), an over-range drink
/// and its diluted rerun.
fn classroom_dye() -> Scenario {
    let mut c = SimConfig::GREEN_DEMO;
    c.led.spectrum.peak_nm = 630.0;
    c.led.spectrum.fwhm_nm = 20.0;
    c.optics.absorber.band.peak_nm = 629.0;
    c.optics.absorber.band.fwhm_nm = 55.0;
    c.optics.absorber.absorptivity_per_cm = 0.16;
    c.optics.cuvette.stray_fraction = 0.003;
    c.signal.full_scale = 4_095;
    c.signal.counts_per_electron = 0.016;
    c.signal.dark_offset = 40.0;
    c.signal.dark_drift_per_hour = 4.0;
    c.signal.read_noise = 1.2;
    c.reference = None;
    use Role::*;
    use Step::*;
    let steps = vec![
        Measure(0, Blank, "water", 0.0),
        // Two student groups each made the standard series: replicates for the lack-of-fit test.
        Measure(0, Standard, "dye 0 (group A)", 0.0),
        Measure(0, Standard, "dye 1 (group A)", 1.0),
        Measure(0, Standard, "dye 2 (group A)", 2.0),
        Measure(0, Standard, "dye 3 (group A)", 3.0),
        Measure(0, Standard, "dye 4 (group A)", 4.0),
        Measure(0, Standard, "dye 5 (group A)", 5.0),
        Measure(0, Standard, "dye 6 (group A)", 6.0),
        Measure(0, Standard, "dye 0 (group B)", 0.0),
        Measure(0, Standard, "dye 1 (group B)", 1.0),
        Measure(0, Standard, "dye 2 (group B)", 2.0),
        Measure(0, Standard, "dye 3 (group B)", 3.0),
        Measure(0, Standard, "dye 4 (group B)", 4.0),
        Measure(0, Standard, "dye 5 (group B)", 5.0),
        Measure(0, Standard, "dye 6 (group B)", 6.0),
        Wait(60_000),
        Measure(0, Sample, "Lagoon fizz", 3.1),
        Measure(0, Sample, "Mint slush syrup 1+9", 4.7),
        Measure(0, Sample, "Sports drink Zephyr", 18.0),
        Measure(0, Sample, "Sports drink Zephyr 1+3", 4.5),
        Measure(0, Sample, "Jelly sweet extract", 0.8),
        Measure(0, Check, "check dye 2.5", 2.5),
        Measure(0, Sample, "Tap water", 0.0),
    ];
    Scenario {
        dir: "classroom-blue-dye",
        meta: meta(4_095, "mg/L", "blue food dye (simulated)", Model::Quadratic),
        channels: vec![Channel {
            name: "red",
            nm: 630,
            config: c,
        }],
        pairs: 10,
        read_ms: 20,
        warm_up_ms: 20_000,
        steps,
        seed: 630,
        prep_error: 0.02,
    }
}

/// Two LEDs with reference detectors; the session is blanked only at the start while the LEDs
/// dim noticeably over the hour: the reference ratio corrects it.
fn twin_led_drift() -> Scenario {
    let mut green = SimConfig::GREEN_DEMO;
    green.led.drift_per_hour = -0.12;
    green.led.output_per_k = -0.006;
    green.optics.absorber.band.peak_nm = 545.0;
    green.optics.absorber.band.fwhm_nm = 110.0;
    green.optics.absorber.absorptivity_per_cm = 0.030;
    let mut amber = green;
    amber.led.spectrum.peak_nm = 590.0;
    amber.led.spectrum.fwhm_nm = 18.0;
    amber.led.drift_per_hour = -0.08;
    amber.led.photoelectrons_per_ms = 17_000.0;
    use Role::*;
    use Step::*;
    let mut steps = vec![
        Measure(0, Blank, "blank", 0.0),
        Measure(1, Blank, "blank", 0.0),
    ];
    for (id, conc) in [
        ("S0", 0.0),
        ("S5", 5.0),
        ("S10", 10.0),
        ("S20", 20.0),
        ("S30", 30.0),
        ("S40", 40.0),
    ] {
        steps.push(Measure(0, Standard, id, conc));
        steps.push(Measure(1, Standard, id, conc));
    }
    let samples = [
        ("Vat A", 12.5),
        ("Vat B", 27.0),
        ("Vat C", 3.2),
        ("Rinse 1", 1.1),
        ("Vat A again", 12.5),
        ("Vat D", 35.5),
        ("Check 20", 20.0),
        ("Vat E", 18.4),
    ];
    for (i, (id, conc)) in samples.into_iter().enumerate() {
        steps.push(Wait(6 * 60_000));
        let role = if id.starts_with("Check") {
            Check
        } else {
            Sample
        };
        steps.push(Measure(0, role, id, conc));
        steps.push(Measure(1, role, id, conc));
        let _ = i;
    }
    Scenario {
        dir: "twin-led-reference",
        meta: meta(
            65_535,
            "mg/L",
            "violet process tracer (simulated)",
            Model::Linear,
        ),
        channels: vec![
            Channel {
                name: "green",
                nm: 525,
                config: green,
            },
            Channel {
                name: "amber",
                nm: 590,
                config: amber,
            },
        ],
        pairs: 12,
        read_ms: 20,
        warm_up_ms: 20_000,
        steps,
        seed: 525,
        prep_error: 0.005,
    }
}

fn write_scenario(s: &Scenario, out: &Path) -> Result<PathBuf, String> {
    let mut benches: Vec<SimBench> = s
        .channels
        .iter()
        .enumerate()
        .map(|(i, ch)| SimBench::new(ch.config, s.seed + i as u64).map_err(|e| e.to_string()))
        .collect::<Result<_, _>>()?;
    let mut text = String::new();
    let mut w = SessionWriter::new(&mut text, &s.meta).map_err(|e| e.to_string())?;
    w.comment("invented demo data written by examples/simulate_sessions.rs (lumisorb::sim); no real site, sample or instrument")
        .map_err(|e| e.to_string())?;
    let mut prep_rng = SimRng::new(s.seed ^ 0x5eed);
    // Power-up: the first read only starts the LEDs' thermal clocks.
    for b in benches.iter_mut() {
        let _ = b.read(0, false, &SimSample::BLANK);
    }
    let mut t: u32 = 1_000;
    for step in &s.steps {
        match *step {
            Step::Wait(ms) => t += ms,
            Step::Measure(ch, role, id, conc) => {
                let channel = &s.channels[ch];
                let bench = &mut benches[ch];
                let actual = if role == Role::Standard {
                    conc as f32 * (1.0 + s.prep_error * prep_rng.gaussian())
                } else {
                    conc as f32
                };
                let sample = SimSample::with_concentration(actual);
                if matches!(role, Role::Sample | Role::Check) {
                    let mut line = String::new();
                    write!(line, "truth {} {} {}", channel.name, id, conc).unwrap();
                    w.comment(&line).map_err(|e| e.to_string())?;
                }
                // Unlogged warm-up: the LED lit for a while before the measurement.
                t += s.warm_up_ms;
                let _ = bench.read(t, true, &sample);
                for _ in 0..s.pairs {
                    for led in [Led::Off, Led::On] {
                        t += s.read_ms;
                        let r = bench.read(t, led == Led::On, &sample);
                        let row = Row {
                            t_ms: t,
                            channel: channel.name,
                            nm: Some(channel.nm),
                            led,
                            role,
                            id,
                            conc: role.has_concentration().then_some(conc),
                            signal: r.signal,
                            reference: r.reference,
                        };
                        w.row(&row).map_err(|e| format!("{e} at {row:?}"))?;
                    }
                }
                t += 15_000; // swap the cuvette
            }
        }
    }
    let dir = out.join(s.dir);
    std::fs::create_dir_all(&dir).map_err(|e| e.to_string())?;
    let path = dir.join("session.csv");
    std::fs::write(&path, text).map_err(|e| e.to_string())?;
    Ok(path)
}

fn main() -> std::process::ExitCode {
    let out = std::env::args()
        .nth(1)
        .unwrap_or_else(|| "demo-data".into());
    for s in [brook_round(), classroom_dye(), twin_led_drift()] {
        match write_scenario(&s, Path::new(&out)) {
            Ok(p) => println!(
                "wrote {} ({} bytes)",
                p.display(),
                std::fs::metadata(&p).map(|m| m.len()).unwrap_or(0)
            ),
            Err(e) => {
                eprintln!("{}: {e}", s.dir);
                return std::process::ExitCode::FAILURE;
            }
        }
    }
    std::process::ExitCode::SUCCESS
}
