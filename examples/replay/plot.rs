//! The `--plot` SVG: per channel, the calibration curve with its 95 % confidence band, the
//! standards with 95 % uncertainty bars, LOD and LOQ, the unknowns placed on the curve with their
//! concentration intervals, and a residual panel (plotters, SVG backend only).

use lumisorb::calibration::Calibration;
use lumisorb::session::{Measurement, Metadata, Role};
use lumisorb::Flag;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor;

use crate::{HostReplay, STANDARDS};

const WIDTH: u32 = 1000;
const PANEL_HEIGHT: u32 = 760;

const CURVE: RGBColor = RGBColor(31, 90, 160);
const BAND: RGBColor = RGBColor(120, 165, 215);
const STANDARD: RGBColor = RGBColor(20, 20, 20);
const SAMPLE: RGBColor = RGBColor(214, 110, 20);
const CHECK: RGBColor = RGBColor(40, 150, 70);
const WARN: RGBColor = RGBColor(200, 30, 40);
const LIMIT: RGBColor = RGBColor(120, 120, 120);

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Writes the plot of every channel to `path` (one panel per channel, stacked).
pub fn write_svg(path: &str, meta: &Metadata, r: &HostReplay) -> Result<(), String> {
    let channels = r.channels().len().max(1) as u32;
    let root = SVGBackend::new(path, (WIDTH, PANEL_HEIGHT * channels)).into_drawing_area();
    root.fill(&WHITE).map_err(|e| e.to_string())?;
    let panels = root.split_evenly((channels as usize, 1));
    for (i, (channel, area)) in r.channels().iter().zip(panels.iter()).enumerate() {
        let title = format!(
            "channel {}{}",
            channel.name,
            channel.nm.map_or(String::new(), |n| format!(" ({n} nm)"))
        );
        let measured: Vec<&Measurement> =
            r.measurements().iter().filter(|m| m.channel == i).collect();
        match &channel.calibration {
            Ok(cal) => {
                panel(area, &title, meta.unit_str(), cal, &measured).map_err(|e| e.to_string())?
            }
            Err(e) => {
                area.draw(&Text::new(
                    format!("{title}: no calibration ({e})"),
                    (40, 40),
                    ("sans-serif", 22).into_font().color(&WARN),
                ))
                .map_err(|e| e.to_string())?;
            }
        }
    }
    root.present().map_err(|e| e.to_string())
}

/// Three significant digits with the unit.
fn sig3(x: f64, unit: &str) -> String {
    let decimals = if x.abs() >= 100.0 {
        0
    } else if x.abs() >= 10.0 {
        1
    } else if x.abs() >= 1.0 {
        2
    } else {
        3
    };
    if unit.is_empty() {
        format!("{x:.decimals$}")
    } else {
        format!("{x:.decimals$} {unit}")
    }
}

fn panel(
    area: &Area<'_>,
    title: &str,
    unit: &str,
    cal: &Calibration<STANDARDS>,
    measured: &[&Measurement],
) -> Result<(), Box<dyn std::error::Error>> {
    let unit_label = if unit.is_empty() {
        String::new()
    } else {
        format!(" ({unit})")
    };
    let (lo, hi) = cal.range();
    let (lo, hi) = (f64::from(lo), f64::from(hi));
    // The axes cover the calibrated range and the unknowns inside it (or slightly above);
    // unknowns far above the top standard are drawn at the right edge with a note, so they do not
    // squeeze the curve into a corner.
    let x_cap = hi * 1.3;
    let x_max = measured
        .iter()
        .filter_map(|m| m.concentration().map(f64::from))
        .filter(|&c| c <= x_cap)
        .fold(hi, f64::max)
        * 1.06;
    let x_min = lo.min(0.0) - 0.03 * x_max;
    let a_top = cal.absorbance_at(x_max);
    let a_max = measured
        .iter()
        .filter_map(|m| m.absorbance().map(f64::from))
        .filter(|&a| a <= a_top * 1.05)
        .fold(a_top, f64::max)
        * 1.08;
    let a_min = measured
        .iter()
        .filter_map(|m| m.absorbance().map(f64::from))
        .fold(0.0, f64::min)
        - 0.04 * a_max;
    let t = cal.t_factor();
    let band = |x: f64| t * cal.least_squares().fitted_variance(x).max(0.0).sqrt();

    let (upper, lower) = area.split_vertically(PANEL_HEIGHT * 70 / 100);
    let stats = format!(
        "{} fit, R² = {:.5}, s_y/x = {:.2e}, LOD = {:.3}, LOQ = {:.3}{}",
        cal.model().name(),
        cal.r_squared(),
        cal.residual_sd(),
        cal.lod(),
        cal.loq(),
        if unit.is_empty() {
            String::new()
        } else {
            format!(" {unit}")
        }
    );
    let mut chart = ChartBuilder::on(&upper)
        .caption(format!("{title} — {stats}"), ("sans-serif", 18))
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(64)
        .build_cartesian_2d(x_min..x_max, a_min..a_max)?;
    chart
        .configure_mesh()
        .light_line_style(RGBColor(235, 235, 235))
        .x_desc(format!("concentration{unit_label}"))
        .y_desc("absorbance")
        .x_labels(10)
        .y_labels(8)
        .draw()?;

    // Confidence band of the curve (95 %), then the curve: solid inside the calibrated range,
    // dashed where it is extrapolated.
    let n = 200;
    let xs: Vec<f64> = (0..=n)
        .map(|k| lo + (x_max - lo) * k as f64 / n as f64)
        .collect();
    let upper_band: Vec<(f64, f64)> = xs
        .iter()
        .map(|&x| (x, cal.absorbance_at(x) + band(x)))
        .collect();
    let lower_band: Vec<(f64, f64)> = xs
        .iter()
        .rev()
        .map(|&x| (x, cal.absorbance_at(x) - band(x)))
        .collect();
    let polygon: Vec<(f64, f64)> = upper_band.into_iter().chain(lower_band).collect();
    chart
        .draw_series(std::iter::once(Polygon::new(
            polygon,
            BAND.mix(0.35).filled(),
        )))?
        .label("95 % confidence band of the curve")
        .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], BAND.mix(0.35).filled()));
    let inside: Vec<(f64, f64)> = xs
        .iter()
        .filter(|&&x| x <= hi)
        .map(|&x| (x, cal.absorbance_at(x)))
        .collect();
    chart
        .draw_series(LineSeries::new(inside, CURVE.stroke_width(2)))?
        .label(format!("fitted curve ({})", cal.model().name()))
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], CURVE.stroke_width(2)));
    let beyond: Vec<(f64, f64)> = xs
        .iter()
        .filter(|&&x| x >= hi)
        .map(|&x| (x, cal.absorbance_at(x)))
        .collect();
    if beyond.len() > 1 {
        chart.draw_series(DashedLineSeries::new(beyond, 6, 5, CURVE.stroke_width(2)))?;
    }

    // LOD and LOQ (labels on two heights: they are often close).
    for (k, (value, name)) in [(f64::from(cal.lod()), "LOD"), (f64::from(cal.loq()), "LOQ")]
        .into_iter()
        .enumerate()
    {
        if value > x_min && value < x_max {
            chart.draw_series(DashedLineSeries::new(
                vec![(value, a_min), (value, a_max)],
                4,
                4,
                LIMIT.stroke_width(1),
            ))?;
            chart.draw_series(std::iter::once(
                EmptyElement::at((value, a_max))
                    + Text::new(
                        name,
                        (4, 6 + 16 * k as i32),
                        ("sans-serif", 13).into_font().color(&LIMIT),
                    ),
            ))?;
        }
    }

    // Standards with 95 % bars of their measured absorbance (1.96 u(A)).
    let residuals: Vec<_> = cal.residuals().collect();
    let standards: Vec<&&Measurement> = measured
        .iter()
        .filter(|m| m.role == Role::Standard)
        .collect();
    for m in &standards {
        let (Some(known), Some(a), Some(sd)) = (m.known, m.absorbance(), m.absorbance_sd()) else {
            continue;
        };
        let (a, u) = (f64::from(a), 1.96 * f64::from(sd));
        let color = if m.in_calibration { STANDARD } else { LIMIT };
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(known, a - u), (known, a + u)],
            color.stroke_width(2),
        )))?;
        let w = 0.006 * (x_max - x_min);
        for y in [a - u, a + u] {
            chart.draw_series(std::iter::once(PathElement::new(
                vec![(known - w, y), (known + w, y)],
                color.stroke_width(1),
            )))?;
        }
    }
    chart
        .draw_series(standards.iter().filter_map(|m| {
            Some(Circle::new(
                (m.known?, f64::from(m.absorbance()?)),
                4,
                STANDARD.filled(),
            ))
        }))?
        .label("standards (bars: 95 % of the measured absorbance, see residuals)")
        .legend(|(x, y)| Circle::new((x + 9, y), 4, STANDARD.filled()));
    chart.draw_series(residuals.iter().filter(|r| r.suspicious).map(|r| {
        Circle::new(
            (f64::from(r.concentration), f64::from(r.absorbance)),
            9,
            WARN.stroke_width(2),
        )
    }))?;

    // Unknowns on the curve: concentration interval as a horizontal bar at their absorbance.
    // Labels alternate sides and heights so neighbours do not overwrite each other.
    let mut unknowns: Vec<&&Measurement> = measured
        .iter()
        .filter(|m| matches!(m.role, Role::Sample | Role::Check))
        .collect();
    unknowns.sort_by(|a, b| {
        a.absorbance()
            .partial_cmp(&b.absorbance())
            .unwrap_or(std::cmp::Ordering::Equal)
    });
    let mut beyond = Vec::new();
    for (k, m) in unknowns.iter().enumerate() {
        let (Some(c), Some(a)) = (
            m.concentration().map(f64::from),
            m.absorbance().map(f64::from),
        ) else {
            continue;
        };
        let color = if m.flags.contains(Flag::AboveRange) {
            WARN
        } else if m.role == Role::Check {
            CHECK
        } else {
            SAMPLE
        };
        if c > x_max || a > a_max {
            beyond.push((m.id.to_string(), c, a));
            continue;
        }
        if let Some([l, h]) = m.interval() {
            chart.draw_series(std::iter::once(PathElement::new(
                vec![(f64::from(l), a), (f64::from(h), a)],
                color.stroke_width(3),
            )))?;
        }
        chart.draw_series(std::iter::once(TriangleMarker::new(
            (c, a),
            6,
            color.filled(),
        )))?;
        let right = k % 2 == 0;
        let dy = [0, -11, 11][(k / 2) % 3];
        let style = ("sans-serif", 12).into_font().color(&color);
        let h = if right {
            text_anchor::HPos::Left
        } else {
            text_anchor::HPos::Right
        };
        let pos = style.pos(text_anchor::Pos::new(h, text_anchor::VPos::Center));
        let dx = if right { 9 } else { -9 };
        chart.draw_series(std::iter::once(
            EmptyElement::at((c, a)) + Text::new(m.id.to_string(), (dx, dy), pos),
        ))?;
    }
    // Unknowns beyond the plotted range: an arrow at the right edge and a note.
    for (k, (id, c, a)) in beyond.iter().enumerate() {
        let y = a_max - (0.06 + 0.05 * k as f64) * (a_max - a_min);
        let x = x_max - 0.01 * (x_max - x_min);
        chart.draw_series(std::iter::once(
            EmptyElement::at((x, y))
                + TriangleMarker::new((0, 0), 6, WARN.filled())
                + Text::new(
                    format!(
                        "{id}: A = {a:.3}, about {} by extrapolation: off scale, dilute",
                        sig3(*c, unit)
                    ),
                    (-10, 0),
                    ("sans-serif", 12)
                        .into_font()
                        .color(&WARN)
                        .pos(text_anchor::Pos::new(
                            text_anchor::HPos::Right,
                            text_anchor::VPos::Center,
                        )),
                ),
        ))?;
    }
    // Legend entries for the unknowns.
    chart
        .draw_series(std::iter::empty::<TriangleMarker<(f64, f64), i32>>())?
        .label("samples on the curve (bar: 95 % interval of the concentration)")
        .legend(|(x, y)| TriangleMarker::new((x + 9, y), 6, SAMPLE.filled()));
    chart
        .draw_series(std::iter::empty::<TriangleMarker<(f64, f64), i32>>())?
        .label("checks (known concentration)")
        .legend(|(x, y)| TriangleMarker::new((x + 9, y), 6, CHECK.filled()));
    if measured.iter().any(|m| m.flags.contains(Flag::AboveRange)) {
        chart
            .draw_series(std::iter::empty::<TriangleMarker<(f64, f64), i32>>())?
            .label("above the highest standard (extrapolated, no interval): dilute")
            .legend(|(x, y)| TriangleMarker::new((x + 9, y), 6, WARN.filled()));
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::LowerRight)
        .background_style(WHITE.mix(0.9))
        .border_style(RGBColor(200, 200, 200))
        .label_font(("sans-serif", 13))
        .draw()?;

    // Residual panel.
    let s = cal.residual_sd();
    let r_max = residuals
        .iter()
        .map(|r| r.residual.abs())
        .fold(2.5 * s, f64::max)
        * 1.15;
    let mut res = ChartBuilder::on(&lower)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(64)
        .build_cartesian_2d(x_min..x_max, -r_max..r_max)?;
    res.configure_mesh()
        .light_line_style(RGBColor(240, 240, 240))
        .x_desc(format!("concentration{unit_label}"))
        .y_desc("residual (A)")
        .x_labels(10)
        .y_labels(5)
        .y_label_formatter(&|v| {
            if v.abs() < r_max * 1e-6 {
                "0".into()
            } else {
                format!("{v:.1e}")
            }
        })
        .draw()?;
    res.draw_series(LineSeries::new(
        vec![(x_min, 0.0), (x_max, 0.0)],
        LIMIT.stroke_width(1),
    ))?;
    for k in [-2.0, 2.0] {
        res.draw_series(DashedLineSeries::new(
            vec![(x_min, k * s), (x_max, k * s)],
            4,
            4,
            LIMIT.stroke_width(1),
        ))?;
    }
    res.draw_series(std::iter::once(Text::new(
        "±2 s_y/x",
        (x_max - 0.12 * (x_max - x_min), 2.0 * s + 0.08 * r_max),
        ("sans-serif", 12).into_font().color(&LIMIT),
    )))?;
    // Residuals with the 95 % bars of each standard's measured absorbance.
    let w = 0.005 * (x_max - x_min);
    for r in &residuals {
        let x = f64::from(r.concentration);
        let sd = cal
            .points()
            .get(r.index)
            .map_or(0.0, |p| f64::from(p.absorbance_sd));
        let u = 1.96 * sd;
        let color = if r.suspicious { WARN } else { STANDARD };
        res.draw_series(std::iter::once(PathElement::new(
            vec![(x, r.residual - u), (x, r.residual + u)],
            color.stroke_width(1),
        )))?;
        for y in [r.residual - u, r.residual + u] {
            res.draw_series(std::iter::once(PathElement::new(
                vec![(x - w, y), (x + w, y)],
                color.stroke_width(1),
            )))?;
        }
    }
    res.draw_series(residuals.iter().map(|r| {
        let color = if r.suspicious { WARN } else { STANDARD };
        Circle::new((f64::from(r.concentration), r.residual), 4, color.filled())
    }))?;
    res.draw_series(std::iter::once(Text::new(
        "residuals of the standards (red: suspicious, large studentized residual)",
        (x_min + 0.01 * (x_max - x_min), -r_max * 0.82),
        ("sans-serif", 12).into_font().color(&LIMIT),
    )))?;
    Ok(())
}
