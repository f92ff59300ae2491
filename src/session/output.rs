//! Machine-readable replay output through any [`core::fmt::Write`]: the `lumisorb-replay-1`
//! JSON object of the session format, and CSV with one row per measurement. Heap-free, so a
//! device can print its results over a UART in the same form the host tool does.
//!
//! Flags are written with the words of the fixed vocabulary, [`Flag::name`](crate::Flag::name):
//! `saturated`, `low_signal`, `above_range`, `below_lod`, `below_loq`, `unstable`, `no_blank`,
//! `no_calibration`, `no_dark`, and `stale_calibration` (an addition of lumisorb to the session
//! format's list: a result quantified with a stored calibration that is too old or was made with
//! another path length or method revision, see [`crate::persistence::Staleness`]; a replay of a
//! recorded session fits its own calibration, so it never raises this flag).

use core::fmt::{self, Write};

use crate::calibration::Model;

use super::replay::{Measurement, Replay};

/// The `format` value of the JSON output.
pub const JSON_FORMAT: &str = "lumisorb-replay-1";

/// The CSV header of [`write_csv`].
pub const CSV_HEADER: &str =
    "id,role,channel,t_ms,transmittance,absorbance,absorbance_sd,concentration,conc_low,conc_high,flags";

/// A JSON number (shortest round-trip digits) or `null` when absent or not finite.
struct Num<T>(Option<T>);

impl<T: fmt::Display + Into<f64> + Copy> fmt::Display for Num<T> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(v) if v.into().is_finite() => write!(f, "{v}"),
            _ => f.write_str("null"),
        }
    }
}

/// A JSON string with the escapes JSON requires.
struct Str<'a>(&'a str);

impl fmt::Display for Str<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_char('"')?;
        for c in self.0.chars() {
            match c {
                '"' => f.write_str("\\\"")?,
                '\\' => f.write_str("\\\\")?,
                c if (c as u32) < 0x20 => write!(f, "\\u{:04x}", c as u32)?,
                c => f.write_char(c)?,
            }
        }
        f.write_char('"')
    }
}

/// An optional number for CSV: empty when absent or not finite.
struct Cell<T>(Option<T>);

impl<T: fmt::Display + Into<f64> + Copy> fmt::Display for Cell<T> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.0 {
            Some(v) if v.into().is_finite() => write!(f, "{v}"),
            _ => Ok(()),
        }
    }
}

fn channel_name<'a, const C: usize, const S: usize, const M: usize, const N: usize>(
    r: &'a Replay<C, S, M, N>,
    m: &Measurement,
) -> &'a str {
    r.channels().get(m.channel).map_or("", |c| c.name.as_str())
}

/// Writes the `lumisorb-replay-1` JSON object of a finished replay (one calibration object per
/// channel that has a calibration; every standard, sample and check measurement).
pub fn write_json<W: Write, const C: usize, const S: usize, const M: usize, const N: usize>(
    out: &mut W,
    r: &Replay<C, S, M, N>,
) -> fmt::Result {
    write!(
        out,
        "{{\"format\": {},\n \"calibrations\": [",
        Str(JSON_FORMAT)
    )?;
    let mut first = true;
    for ch in r.channels() {
        let Ok(cal) = &ch.calibration else { continue };
        if !first {
            out.write_str(",\n   ")?;
        }
        first = false;
        let [c0, c1, c2] = cal.coefficients();
        write!(
            out,
            "{{\"channel\": {}, \"model\": {}, \"coefficients\": [{}, {}",
            Str(&ch.name),
            Str(cal.model().name()),
            Num(Some(c0)),
            Num(Some(c1))
        )?;
        if cal.model() == Model::Quadratic {
            write!(out, ", {}", Num(Some(c2)))?;
        }
        let (lo, hi) = cal.range();
        write!(
            out,
            "], \"r_squared\": {}, \"residual_sd\": {}, \"lod\": {}, \"loq\": {}, \"range\": [{}, {}], \"points\": {}}}",
            Num(Some(cal.r_squared())),
            Num(Some(cal.residual_sd())),
            Num(Some(cal.lod())),
            Num(Some(cal.loq())),
            Num(Some(lo)),
            Num(Some(hi)),
            cal.points().len()
        )?;
    }
    out.write_str("],\n \"measurements\": [")?;
    for (i, m) in r.measurements().iter().enumerate() {
        out.write_str(if i == 0 { "\n  " } else { ",\n  " })?;
        let [lo, hi] = m
            .interval()
            .map_or([None, None], |[a, b]| [Some(a), Some(b)]);
        write!(
            out,
            "{{\"id\": {}, \"role\": {}, \"channel\": {}, \"t_ms\": {}, \"transmittance\": {}, \"absorbance\": {}, \"absorbance_sd\": {}, \"concentration\": {}, \"conc_low\": {}, \"conc_high\": {}, \"flags\": [",
            Str(&m.id),
            Str(m.role.name()),
            Str(channel_name(r, m)),
            m.t_ms,
            Num(m.transmittance()),
            Num(m.absorbance()),
            Num(m.absorbance_sd()),
            Num(m.concentration()),
            Num(lo),
            Num(hi)
        )?;
        for (k, flag) in m.flags.iter().enumerate() {
            if k > 0 {
                out.write_str(", ")?;
            }
            write!(out, "{}", Str(flag.name()))?;
        }
        out.write_str("]}")?;
    }
    out.write_str("]}\n")
}

/// Writes one CSV row per measurement under [`CSV_HEADER`] (flags space-separated; ids and
/// channel names never hold commas, the session format forbids them).
pub fn write_csv<W: Write, const C: usize, const S: usize, const M: usize, const N: usize>(
    out: &mut W,
    r: &Replay<C, S, M, N>,
) -> fmt::Result {
    out.write_str(CSV_HEADER)?;
    out.write_char('\n')?;
    for m in r.measurements() {
        let [lo, hi] = m
            .interval()
            .map_or([None, None], |[a, b]| [Some(a), Some(b)]);
        write!(
            out,
            "{},{},{},{},{},{},{},{},{},{},",
            m.id,
            m.role.name(),
            channel_name(r, m),
            m.t_ms,
            Cell(m.transmittance()),
            Cell(m.absorbance()),
            Cell(m.absorbance_sd()),
            Cell(m.concentration()),
            Cell(lo),
            Cell(hi),
        )?;
        for (k, flag) in m.flags.iter().enumerate() {
            if k > 0 {
                out.write_char(' ')?;
            }
            out.write_str(flag.name())?;
        }
        out.write_char('\n')?;
    }
    Ok(())
}
