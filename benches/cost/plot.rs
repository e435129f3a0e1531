//! The cost curve: each measured quantity against the library size on log–log axes, with
//! the least-squares slope of log(cost) on log(size).
//!
//! Takes the [`SizeResult`]s of one run; gives the slopes and one SVG per quantity. It
//! fits nothing but a straight line: a slope of 1 is linear growth, 0 is constant.

use std::path::Path;

use plotters::prelude::*;

use crate::measure::SizeResult;

/// One quantity of the curve: its name, unit, and how to read it from a result.
pub struct Quantity {
    pub key: &'static str,
    pub title: &'static str,
    pub unit: &'static str,
    pub value: fn(&SizeResult) -> f64,
}

/// The quantities plotted and fitted.
pub const QUANTITIES: &[Quantity] = &[
    Quantity {
        key: "build_seconds",
        title: "quarry build, wall time",
        unit: "s",
        value: |r| r.build_seconds,
    },
    Quantity {
        key: "index_mib",
        title: "index size on disk",
        unit: "MiB",
        value: |r| r.index_bytes as f64 / (1u64 << 20) as f64,
    },
    Quantity {
        key: "serve_rss_mib",
        title: "quarry serve resident memory after warm-up",
        unit: "MiB",
        value: |r| r.serve_rss_bytes as f64 / (1u64 << 20) as f64,
    },
    Quantity {
        key: "rank_median_ms",
        title: "ranking latency, median",
        unit: "ms",
        value: |r| r.rank_median_ms,
    },
    Quantity {
        key: "rank_p99_ms",
        title: "ranking latency, p99",
        unit: "ms",
        value: |r| r.rank_p99_ms,
    },
];

/// The least-squares slope of `ln y` on `ln x` (`None` with fewer than two usable points).
pub fn log_log_slope(points: &[(f64, f64)]) -> Option<f64> {
    let logs: Vec<(f64, f64)> = points
        .iter()
        .filter(|(x, y)| *x > 0.0 && *y > 0.0 && x.is_finite() && y.is_finite())
        .map(|(x, y)| (x.ln(), y.ln()))
        .collect();
    if logs.len() < 2 {
        return None;
    }
    let n = logs.len() as f64;
    let mx = logs.iter().map(|p| p.0).sum::<f64>() / n;
    let my = logs.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = logs.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = logs.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    (sxx > 0.0).then(|| sxy / sxx)
}

/// Draws `quantity` against the declaration count into `path`.
pub fn plot_quantity(
    results: &[SizeResult],
    quantity: &Quantity,
    slope: Option<f64>,
    path: &Path,
) -> Result<(), String> {
    let points: Vec<(f64, f64)> = results
        .iter()
        .map(|r| (r.declarations as f64, (quantity.value)(r)))
        .filter(|(x, y)| *x > 0.0 && *y > 0.0)
        .collect();
    if points.is_empty() {
        return Err(format!("no positive values of {}", quantity.key));
    }
    let (xmin, xmax) = bounds(points.iter().map(|p| p.0));
    let (ymin, ymax) = bounds(points.iter().map(|p| p.1));
    let root = SVGBackend::new(path, (640, 420)).into_drawing_area();
    root.fill(&WHITE).map_err(|e| e.to_string())?;
    let caption = match slope {
        Some(s) => format!("{} (log–log slope {s:.2})", quantity.title),
        None => quantity.title.to_string(),
    };
    let mut chart = ChartBuilder::on(&root)
        .caption(caption, ("sans-serif", 18))
        .margin(16)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d(
            (xmin / 1.5..xmax * 1.5).log_scale(),
            (ymin / 1.5..ymax * 1.5).log_scale(),
        )
        .map_err(|e| e.to_string())?;
    chart
        .configure_mesh()
        .x_desc("declarations (log scale)")
        .y_desc(format!("{} (log scale)", quantity.unit))
        .draw()
        .map_err(|e| e.to_string())?;
    let colour = RGBColor(31, 119, 180);
    chart
        .draw_series(LineSeries::new(points.clone(), colour.stroke_width(2)))
        .map_err(|e| e.to_string())?;
    chart
        .draw_series(points.iter().map(|p| Circle::new(*p, 4, colour.filled())))
        .map_err(|e| e.to_string())?;
    root.present().map_err(|e| e.to_string())?;
    Ok(())
}

fn bounds(values: impl Iterator<Item = f64>) -> (f64, f64) {
    values.fold((f64::INFINITY, 0.0f64), |(lo, hi), v| {
        (lo.min(v), hi.max(v))
    })
}
