//! The cross-check chart of one product: the consumption forecast's
//! 12-month total with its 80% ranges, and each other estimate (services,
//! morbidity, demographic) as a bar beside it, against the band of
//! agreement (consumption ± the threshold).

use std::path::Path;

use plotters::prelude::*;

use super::palette::*;
use super::{
    cut, draw_legend, fmt_quantity, render_png, render_svg, Drawn, Glyph, KeyAxis, OrMessage, FONT,
};
use crate::error::Result;

/// One other estimate: label, annual quantity (`None` when it could not be
/// computed), ratio to consumption and flag name (`agrees`, `above`,
/// `below`, `no-comparison`).
#[derive(Debug, Clone, PartialEq)]
pub struct EstimateBar {
    /// Method name ("services", "morbidity", "demographic").
    pub label: String,
    /// Annual quantity.
    pub quantity: Option<f64>,
    /// Ratio to the consumption forecast.
    pub ratio: Option<f64>,
    /// Flag name.
    pub flag: String,
}

/// Everything the cross-check chart of one product shows.
#[derive(Debug, Clone, PartialEq)]
pub struct CrossCheckChart {
    /// Product.
    pub title: String,
    /// Period and threshold in words.
    pub subtitle: String,
    /// Consumption forecast total, its 80% range with months independent,
    /// and the sum of the monthly 80% bounds.
    pub consumption: Option<crate::crosscheck::AnnualConsumption>,
    /// The forecast compared with, named in the labels (`None`: "consumption
    /// forecast", for a cross-check that did not record it).
    pub forecast_used: Option<crate::crosscheck::ForecastUsed>,
    /// The other estimates.
    pub estimates: Vec<EstimateBar>,
    /// Agreement threshold (0.25 = ±25%).
    pub threshold: f64,
    /// The unit the product is counted in; `None`: base units.
    pub units: Option<String>,
}

const WIDTH: u32 = 1100;
const HEAD: u32 = 118;
const ROW: u32 = 64;
const FOOT: u32 = 52;

fn size(c: &CrossCheckChart) -> (u32, u32) {
    (WIDTH, HEAD + FOOT + ROW * (c.estimates.len() as u32 + 1))
}

/// Draws the chart as an SVG document.
pub fn crosscheck_svg(chart: &CrossCheckChart) -> Result<String> {
    render_svg(&chart.title, size(chart), |root| draw(root, chart))
}

/// Draws the chart into a PNG file (written atomically).
pub fn crosscheck_png(path: &Path, chart: &CrossCheckChart) -> Result<()> {
    render_png(path, &chart.title, size(chart), |root| draw(root, chart))
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, plotters::coord::Shift>,
    c: &CrossCheckChart,
) -> Drawn {
    root.fill(&WHITE).msg()?;
    let (head, body) = root.split_vertically(HEAD);
    head.draw(&Text::new(
        format!("Cross-check: {}", cut(&c.title, 70)),
        (16, 10),
        (FONT, 25).into_font().color(&INK),
    ))
    .msg()?;
    head.draw(&Text::new(
        cut(&c.subtitle, 130),
        (16, 42),
        (FONT, 16).into_font().color(&MUTED),
    ))
    .msg()?;
    let pct = (c.threshold * 100.0).round();
    use crate::crosscheck::ForecastUsed;
    let (legend, row_label, ratio_of) = match c.forecast_used {
        Some(ForecastUsed::Adjusted) => (
            "consumption forecast, adjusted for known changes",
            "adjusted forecast",
            "adjusted forecast",
        ),
        Some(ForecastUsed::Statistical) => (
            "consumption forecast (statistical)",
            "statistical forecast",
            "consumption",
        ),
        None => (
            "consumption forecast",
            "consumption forecast",
            "consumption",
        ),
    };
    draw_legend(
        &head,
        &[
            (Glyph::Band(FORECAST, 0.85), legend.to_string()),
            (
                Glyph::Band(FORECAST, 0.18),
                "80% range: sum of monthly bounds (wide)".to_string(),
            ),
            (
                Glyph::Line(INK, 3),
                "80% range, months independent (narrow)".to_string(),
            ),
            (Glyph::Band(MUTED, 0.15), format!("within ±{pct}%")),
            (Glyph::Band(CLEANED, 0.85), "agrees".to_string()),
            (Glyph::Band(ADJUSTED, 1.0), "above".to_string()),
            (Glyph::Band(FILLED, 1.0), "below".to_string()),
        ],
        (16, 68),
        WIDTH as i32 - 32,
    )?;
    let n = c.estimates.len() + 1;
    let labels: Vec<String> = std::iter::once(row_label.to_string())
        .chain(c.estimates.iter().map(|e| format!("{} estimate", e.label)))
        .collect();
    let y = |i: usize| (n - i) as f64 - 0.5;
    let mut max = c
        .estimates
        .iter()
        .filter_map(|e| e.quantity)
        .fold(0.0, f64::max);
    if let Some(a) = c.consumption {
        max = max.max(a.total * (1.0 + c.threshold)).max(a.wide.1);
    }
    // Room on the right for the labels.
    let max = if max > 0.0 { max * 1.45 } else { 1.0 };
    let axis = KeyAxis {
        lo: 0.0,
        hi: n as f64,
        bold: (0..n).map(|i| i as f64 + 0.5).collect(),
        light: Vec::new(),
    };
    let name = |v: &f64| {
        let i = n as f64 - 0.5 - v;
        labels
            .get(i.round().max(0.0) as usize)
            .cloned()
            .unwrap_or_default()
    };
    let mut chart = ChartBuilder::on(&body)
        .margin_left(12)
        .margin_right(28)
        .x_label_area_size(FOOT)
        .y_label_area_size(230)
        .build_cartesian_2d(0.0..max, axis)
        .msg()?;
    chart
        .configure_mesh()
        .disable_y_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .light_line_style(GRID.mix(0.4))
        .x_max_light_lines(0)
        .axis_style(MUTED.stroke_width(1))
        .label_style((FONT, 15).into_font().color(&INK))
        .axis_desc_style((FONT, 16).into_font().color(&MUTED))
        .x_labels(6)
        .x_label_formatter(&|v| super::fmt_axis(*v))
        .y_label_formatter(&name)
        .x_desc(format!(
            "quantity over the 12 months, in {}",
            super::units_plural(c.units.as_deref())
        ))
        .draw()
        .msg()?;
    let label_font = (FONT, 15).into_font().color(&INK);
    let (ox, oy) = body.get_base_pixel();
    let label = |chart: &ChartContext<'_, DB, _>, x: f64, row: usize, text: String| -> Drawn {
        let (px, py) = chart.backend_coord(&(x, y(row)));
        body.draw(&Text::new(
            text,
            (px - ox + 6, py - oy - 8),
            label_font.clone(),
        ))
        .msg()
    };
    if let Some(crate::crosscheck::AnnualConsumption {
        total,
        narrow,
        wide,
    }) = c.consumption
    {
        let band = (total * (1.0 - c.threshold), total * (1.0 + c.threshold));
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(band.0.max(0.0), 0.0), (band.1, n as f64)],
                MUTED.mix(0.15).filled(),
            )))
            .msg()?;
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(wide.0, y(0) - 0.42), (wide.1, y(0) + 0.42)],
                FORECAST.mix(0.18).filled(),
            )))
            .msg()?;
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(0.0, y(0) - 0.22), (total, y(0) + 0.22)],
                FORECAST.mix(0.85).filled(),
            )))
            .msg()?;
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(narrow.0, y(0)), (narrow.1, y(0))],
                INK.stroke_width(3),
            )))
            .msg()?;
        for x in [narrow.0, narrow.1] {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(x, y(0) - 0.15), (x, y(0) + 0.15)],
                    INK.stroke_width(3),
                )))
                .msg()?;
        }
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(total, 0.0), (total, n as f64)],
                FORECAST.stroke_width(1),
            )))
            .msg()?;
        label(&chart, wide.1, 0, fmt_quantity(total))?;
    } else {
        label(
            &chart,
            0.0,
            0,
            "no consumption forecast for the period".into(),
        )?;
    }
    for (k, e) in c.estimates.iter().enumerate() {
        let row = k + 1;
        let Some(q) = e.quantity else {
            label(&chart, 0.0, row, "not computed (see crosscheck.csv)".into())?;
            continue;
        };
        let colour = match e.flag.as_str() {
            "above" => ADJUSTED.mix(1.0),
            "below" => FILLED.mix(1.0),
            "agrees" => CLEANED.mix(0.85),
            _ => REPORTED.mix(1.0),
        };
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(0.0, y(row) - 0.3), (q, y(row) + 0.3)],
                colour.filled(),
            )))
            .msg()?;
        let text = match e.ratio {
            Some(r) => format!(
                "{} · {} {ratio_of} · {}",
                fmt_quantity(q),
                crate::crosscheck::fmt_ratio(r),
                e.flag
            ),
            None => format!("{} (no comparison)", fmt_quantity(q)),
        };
        label(&chart, q, row, text)?;
    }
    Ok(())
}
