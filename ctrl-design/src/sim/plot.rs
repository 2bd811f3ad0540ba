//! SVG plot of a traced run: position and speed against the setpoint, and the voltage
//! split into feedforward and feedback.

use super::Trace;
use plotters::prelude::*;
use std::path::Path;

fn range(series: &[&[f64]]) -> (f64, f64) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for s in series {
        for &v in s.iter().filter(|v| v.is_finite()) {
            lo = lo.min(v);
            hi = hi.max(v);
        }
    }
    if !(lo.is_finite() && hi.is_finite()) {
        return (-1.0, 1.0);
    }
    let pad = ((hi - lo) * 0.05).max(1e-9);
    (lo - pad, hi + pad)
}

type PlotResult = Result<(), Box<dyn std::error::Error>>;

fn panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    title: &str,
    y_label: &str,
    t: &[f64],
    lines: &[(&str, &[f64], RGBColor)],
) -> PlotResult
where
    DB::ErrorType: 'static,
{
    let t_end = t.last().copied().unwrap_or(1.0).max(1e-9);
    let all: Vec<&[f64]> = lines.iter().map(|l| l.1).collect();
    let (lo, hi) = range(&all);
    let mut chart = ChartBuilder::on(area)
        .caption(title, ("sans-serif", 18))
        .margin(8)
        .x_label_area_size(30)
        .y_label_area_size(60)
        .build_cartesian_2d(0.0..t_end, lo..hi)?;
    chart
        .configure_mesh()
        .x_desc("time (s)")
        .y_desc(y_label)
        .draw()?;
    for (name, ys, color) in lines {
        let c = *color;
        chart
            .draw_series(LineSeries::new(
                t.iter().copied().zip(ys.iter().copied()),
                c.stroke_width(2),
            ))?
            .label(*name)
            .legend(move |(x, y)| PathElement::new([(x, y), (x + 18, y)], c.stroke_width(2)));
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()?;
    Ok(())
}

/// Writes `trace` as an SVG of three panels to `path`: position and setpoint, speed and
/// setpoint speed, and the voltage (feedforward, feedback, applied). `unit` names the
/// distance unit in the axis labels (e.g. `"mm"`).
pub fn plot_svg(trace: &Trace, unit: &str, title: &str, path: &Path) -> PlotResult {
    let root = SVGBackend::new(path, (900, 960)).into_drawing_area();
    root.fill(&WHITE)?;
    let (top, rest) = root.split_vertically(40);
    top.titled(title, ("sans-serif", 22))?;
    let panels = rest.split_evenly((3, 1));
    let t = &trace.time_s;
    let blue = RGBColor(31, 119, 180);
    let orange = RGBColor(230, 120, 20);
    let green = RGBColor(40, 150, 60);
    let grey = RGBColor(110, 110, 110);
    panel(
        &panels[0],
        "position",
        unit,
        t,
        &[
            ("setpoint", &trace.setpoint_position, grey),
            ("position", &trace.position, blue),
        ],
    )?;
    panel(
        &panels[1],
        "speed",
        &format!("{unit}/s"),
        t,
        &[
            ("setpoint", &trace.setpoint_speed, grey),
            ("speed", &trace.speed, blue),
        ],
    )?;
    panel(
        &panels[2],
        "voltage",
        "V",
        t,
        &[
            ("feedforward", &trace.feedforward_volts, green),
            ("feedback", &trace.feedback_volts, orange),
            ("applied", &trace.applied_volts, blue),
        ],
    )?;
    root.present()?;
    Ok(())
}
