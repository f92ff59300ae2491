//! Replays a recorded session through the library, exactly as the device computes it.
//!
//! ```text
//! cargo run --release --example replay -- <session.csv> [--json] [--csv] [--plot FILE.svg]
//! ```
//!
//! Default output is a report for a person: per channel the calibration (model, coefficients,
//! R², s_y/x, LOD, LOQ, range, lack-of-fit verdict), then one line per standard, sample and check
//! with absorbance ± sd, concentration with its 95 % interval, and flags in words with advice.
//! `--json` prints the `lumisorb-replay-1` object of the session format, `--csv` one row per
//! measurement, `--plot FILE.svg` draws the calibration of every channel. An invalid file gives a
//! message with its line number and exit code 2; bad arguments exit with 64.

mod plot;

use std::fmt::Write as _;
use std::process::ExitCode;

use lumisorb::calibration::LackOfFit;
use lumisorb::session::{replay_bytes, Channel, Measurement, Metadata, Replay, Role};

/// Capacities of the host replay: channels, standards per channel, measurements.
pub const CHANNELS: usize = 16;
/// Standards per channel.
pub const STANDARDS: usize = 64;
/// Reported measurements.
pub const MEASUREMENTS: usize = 8192;

/// The replay type the host tool uses.
pub type HostReplay = Replay<CHANNELS, STANDARDS, MEASUREMENTS>;

struct Args {
    path: String,
    json: bool,
    csv: bool,
    plot: Option<String>,
}

const USAGE: &str = "usage: replay <session.csv> [--json] [--csv] [--plot FILE.svg]";

fn parse_args() -> Result<Args, String> {
    let mut path = None;
    let (mut json, mut csv, mut plot) = (false, false, None);
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        match a.as_str() {
            "--json" => json = true,
            "--csv" => csv = true,
            "--plot" => plot = Some(it.next().ok_or("--plot needs a file name")?),
            "-h" | "--help" => return Err(String::new()),
            s if s.starts_with("--") => return Err(format!("unknown option {s}")),
            s => {
                if path.replace(s.to_string()).is_some() {
                    return Err("give one session file".into());
                }
            }
        }
    }
    if json && csv {
        return Err("--json and --csv each print the whole result: choose one".into());
    }
    Ok(Args {
        path: path.ok_or("no session file given")?,
        json,
        csv,
        plot,
    })
}

fn main() -> ExitCode {
    let args = match parse_args() {
        Ok(a) => a,
        Err(msg) => {
            if !msg.is_empty() {
                eprintln!("replay: {msg}");
            }
            eprintln!("{USAGE}");
            return ExitCode::from(64);
        }
    };
    let bytes = match std::fs::read(&args.path) {
        Ok(b) => b,
        Err(e) => {
            eprintln!("replay: cannot read {}: {e}", args.path);
            return ExitCode::from(66);
        }
    };
    let mut replay: Box<HostReplay> = Box::new(Replay::new());
    let meta = match replay_bytes(&bytes, &mut replay) {
        Ok(m) => m,
        Err(e) => {
            eprintln!("replay: {}: invalid session: {e}", args.path);
            return ExitCode::from(2);
        }
    };
    let out = if args.json {
        json(&replay)
    } else if args.csv {
        csv(&replay)
    } else {
        report(&args.path, &meta, &replay)
    };
    print!("{out}");
    if let Some(svg) = &args.plot {
        if let Err(e) = plot::write_svg(svg, &meta, &replay) {
            eprintln!("replay: cannot write plot {svg}: {e}");
            return ExitCode::FAILURE;
        }
        if !args.json && !args.csv {
            println!("plot written to {svg}");
        }
    }
    ExitCode::SUCCESS
}

/// The `lumisorb-replay-1` JSON object of the session format (written by the library).
pub fn json(r: &HostReplay) -> String {
    let mut out = String::new();
    let _ = lumisorb::session::write_json(&mut out, r);
    out
}

/// One CSV row per measurement (written by the library).
pub fn csv(r: &HostReplay) -> String {
    let mut out = String::new();
    let _ = lumisorb::session::write_csv(&mut out, r);
    out
}

/// Significant-digit formatting for reports.
fn sig(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return "-".into();
    }
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    let decimals = (digits as i32 - 1 - mag).max(0) as usize;
    if mag.abs() > 5 {
        format!("{:.*e}", digits.saturating_sub(1), x)
    } else {
        format!("{x:.decimals$}")
    }
}

fn curve(coeffs: [f64; 3], model: lumisorb::calibration::Model) -> String {
    let [c0, c1, c2] = coeffs;
    let term = |c: f64, s: &str| {
        let sign = if c < 0.0 { "-" } else { "+" };
        format!(" {sign} {}{s}", sig(c.abs(), 5))
    };
    match model {
        lumisorb::calibration::Model::Origin => format!("A = {}·x", sig(c1, 5)),
        lumisorb::calibration::Model::Linear => format!("A = {}{}", sig(c0, 4), term(c1, "·x")),
        lumisorb::calibration::Model::Quadratic => {
            format!("A = {}{}{}", sig(c0, 4), term(c1, "·x"), term(c2, "·x²"))
        }
    }
}

fn channel_report(out: &mut String, ch: &Channel<STANDARDS>, unit: &str) {
    let nm = ch.nm.map_or(String::new(), |n| format!(" ({n} nm)"));
    let _ = writeln!(
        out,
        "channel {}{nm}: {} blank measurement(s), {} standard(s) used",
        ch.name,
        ch.blanks,
        ch.standards.len()
    );
    match &ch.calibration {
        Err(e) => {
            let _ = writeln!(out, "  no calibration: {e}");
        }
        Ok(cal) => {
            let _ = writeln!(
                out,
                "  calibration  {} model: {}",
                cal.model().name(),
                curve(cal.coefficients(), cal.model())
            );
            let _ = writeln!(
                out,
                "               R² = {:.5}, s_y/x = {} (absorbance), {} standards from {} to {} {unit}",
                cal.r_squared(),
                sig(cal.residual_sd(), 3),
                cal.points().len(),
                sig(f64::from(cal.range().0), 4),
                sig(f64::from(cal.range().1), 4)
            );
            let _ = writeln!(out, "               LOD = {} {unit}, LOQ = {} {unit} (ICH Q2(R1): 3.3 and 10 s_y/x / slope)", sig(f64::from(cal.lod()), 3), sig(f64::from(cal.loq()), 3));
            let verdict = match cal.lack_of_fit() {
                LackOfFit::NotTestable => "not testable (needs replicated standards)".to_string(),
                LackOfFit::Adequate(t) => format!(
                    "adequate (F = {:.2}, p = {:.3}, df {}/{})",
                    t.f, t.p_value, t.df_lack_of_fit, t.df_pure_error
                ),
                LackOfFit::Inadequate {
                    test: t,
                    suggestion,
                } => format!(
                    "model rejected (F = {:.2}, p = {:.4}){}",
                    t.f,
                    t.p_value,
                    suggestion.map_or(String::new(), |m| format!(": try the {} model", m.name()))
                ),
            };
            let _ = writeln!(out, "               lack of fit: {verdict}");
            if let Some(i) = cal.suspicious_standard() {
                if let Some(s) = cal.points().get(i) {
                    let _ = writeln!(out, "               suspicious standard: the one at {} {unit} (large studentized residual): check it", s.concentration);
                }
            }
        }
    }
}

fn measurement_line(out: &mut String, m: &Measurement, unit: &str) {
    let a = match (m.absorbance(), m.absorbance_sd()) {
        (Some(a), Some(sd)) => format!("{a:>7.4} ± {sd:.4}"),
        _ => format!("{:>16}", "-"),
    };
    let conc = match (m.concentration().map(f64::from), m.interval()) {
        (Some(c), Some([lo, hi])) => {
            format!(
                "{} {unit} [{}, {}]",
                sig(c, 3),
                sig(f64::from(lo), 3),
                sig(f64::from(hi), 3)
            )
        }
        (Some(c), None) => format!("{} {unit}", sig(c, 3)),
        _ => "-".into(),
    };
    let known = match (m.role, m.known, m.concentration().map(f64::from)) {
        (Role::Check, Some(k), Some(c)) if k > 0.0 => format!(
            "  known {} {unit}, recovery {:.1} %",
            sig(k, 3),
            100.0 * c / k
        ),
        (Role::Standard | Role::Check, Some(k), _) => format!("  known {} {unit}", sig(k, 3)),
        _ => String::new(),
    };
    let used = if m.role == Role::Standard && !m.in_calibration {
        "  (not used in the fit)"
    } else {
        ""
    };
    let _ = writeln!(
        out,
        "  {:<8} {:<26} A {a}   c {conc}{known}{used}",
        m.role.name(),
        m.id.as_str()
    );
    for f in m.flags.iter() {
        let _ = writeln!(out, "           ! {}: {}", f.name(), f.advice());
    }
}

/// The report a person reads.
pub fn report(path: &str, meta: &Metadata, r: &HostReplay) -> String {
    let mut out = String::new();
    let unit = meta.unit_str();
    let _ = writeln!(out, "lumisorb replay of {path}");
    let analyte = meta.analyte.as_deref().unwrap_or("(analyte not given)");
    let path_mm = meta
        .path_mm
        .map_or(String::from("not given"), |p| format!("{p} mm"));
    let _ = writeln!(
        out,
        "analyte: {analyte}; unit: {}; path: {path_mm}; model: {}; full scale {} counts",
        if unit.is_empty() { "(none)" } else { unit },
        r.model().name(),
        meta.full_scale
    );
    let _ = writeln!(
        out,
        "{} raw reads, {} channel(s), {} standard/sample/check measurement(s)",
        r.reads(),
        r.channels().len(),
        r.measurements().len()
    );
    for (i, ch) in r.channels().iter().enumerate() {
        let _ = writeln!(out);
        channel_report(&mut out, ch, unit);
        let _ = writeln!(out);
        for m in r.measurements().iter().filter(|m| m.channel == i) {
            measurement_line(&mut out, m, unit);
        }
    }
    let flagged = r
        .measurements()
        .iter()
        .filter(|m| !m.flags.is_empty())
        .count();
    let _ = writeln!(
        out,
        "\n{flagged} of {} measurement(s) carry flags (see the lines marked !).",
        r.measurements().len()
    );
    let _ = writeln!(
        out,
        "Screening results only: compare with an accredited laboratory before acting on them."
    );
    out
}
