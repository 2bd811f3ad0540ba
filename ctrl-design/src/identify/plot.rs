//! SVG plot of measured speed against the fitted model, one panel per log.

use plotters::prelude::*;

use super::{speed_curves, Identification, Log};

/// Thins a curve to at most `max` points (every k-th point) so large logs give small files.
fn thin(c: &[f64], max: usize) -> impl Iterator<Item = (usize, f64)> + '_ {
    let step = c.len().div_ceil(max.max(1)).max(1);
    c.iter().copied().enumerate().step_by(step)
}

/// Draws measured speed (points) and the model speed (line) for every log into an SVG file.
/// `logs` must be the logs `id` was computed from, in the same order. Errors are returned as
/// text (an unwritable file, a drawing failure).
pub fn plot_svg(path: &std::path::Path, logs: &[Log], id: &Identification) -> Result<(), String> {
    let n = logs.len().min(id.per_log.len());
    if n == 0 {
        return Err("nothing to plot".into());
    }
    let cols = if n == 1 { 1 } else { 2 };
    let rows = n.div_ceil(cols);
    let (w, h) = (600 * cols as u32, 320 * rows as u32 + 40);
    let root = SVGBackend::new(path, (w, h)).into_drawing_area();
    let err = |e: &dyn std::fmt::Display| format!("{}: cannot draw: {e}", path.display());
    root.fill(&WHITE).map_err(|e| err(&e))?;
    let title = format!(
        "speed: measured (dots) and model (line); K = {:.4} {u}/s per V, T = {:.4} s, bias = {:.3} V",
        id.plant.gain,
        id.plant.time_constant_s,
        id.plant.bias_volts,
        u = id.unit
    );
    let root = root
        .titled(&title, ("sans-serif", 16))
        .map_err(|e| err(&e))?;
    let panels = root.split_evenly((rows, cols));
    for (j, area) in panels.iter().enumerate().take(n) {
        let c = speed_curves(&logs[j], &id.per_log[j], &id.plant);
        if c.time_s.is_empty() {
            continue;
        }
        let t0 = c.time_s[0];
        let t1 = c.time_s[c.time_s.len() - 1].max(t0 + 1e-9);
        let (lo, hi) = c
            .measured
            .iter()
            .chain(&c.model)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                (a.min(v), b.max(v))
            });
        let pad = ((hi - lo) * 0.05).max(1e-9);
        let name = std::path::Path::new(&logs[j].name)
            .file_name()
            .map(|s| s.to_string_lossy().to_string())
            .unwrap_or_else(|| logs[j].name.clone());
        let mut chart = ChartBuilder::on(area)
            .caption(
                format!("{name}  (R² {:.4})", id.per_log[j].r_squared),
                ("sans-serif", 14),
            )
            .margin(8)
            .x_label_area_size(30)
            .y_label_area_size(60)
            .build_cartesian_2d(t0..t1, (lo - pad)..(hi + pad))
            .map_err(|e| err(&e))?;
        chart
            .configure_mesh()
            .x_desc("time, s")
            .y_desc(format!("speed, {}/s", id.unit))
            .draw()
            .map_err(|e| err(&e))?;
        let ts = &c.time_s;
        chart
            .draw_series(
                thin(&c.measured, 3000).map(|(i, v)| Circle::new((ts[i], v), 1, BLUE.filled())),
            )
            .map_err(|e| err(&e))?;
        chart
            .draw_series(LineSeries::new(
                thin(&c.model, 3000).map(|(i, v)| (ts[i], v)),
                RED.stroke_width(2),
            ))
            .map_err(|e| err(&e))?;
    }
    root.present().map_err(|e| err(&e))?;
    Ok(())
}
