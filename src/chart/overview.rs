//! The overview chart: every product's backtest MAPE and bias side by side,
//! worst MAPE first, so the products to look at are at the top.

use std::path::Path;

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

use super::palette::*;
use super::{cut, draw_legend, render_png, render_svg, Drawn, Glyph, KeyAxis, OrMessage, FONT};
use crate::error::Result;

/// One product's scores for the overview.
#[derive(Debug, Clone, PartialEq)]
pub struct ScoreBar {
    /// Product name.
    pub product: String,
    /// Backtest MAPE of the chosen model, in %.
    pub mape: Option<f64>,
    /// Backtest bias of the chosen model, in % (positive = over-forecast).
    pub bias: Option<f64>,
}

/// At most this many products are drawn (the worst by MAPE); the title says
/// when some are left out.
pub const MAX_BARS: usize = 60;
const ROW: u32 = 26;
const HEAD: u32 = 96;
const FOOT: u32 = 44;
const WIDTH: u32 = 1200;

fn rows(bars: &[ScoreBar]) -> Vec<&ScoreBar> {
    let mut v: Vec<&ScoreBar> = bars.iter().collect();
    v.sort_by(|a, b| {
        b.mape
            .unwrap_or(f64::NEG_INFINITY)
            .total_cmp(&a.mape.unwrap_or(f64::NEG_INFINITY))
            .then_with(|| a.product.cmp(&b.product))
    });
    v.truncate(MAX_BARS);
    v
}

fn size(n: usize) -> (u32, u32) {
    (WIDTH, HEAD + FOOT + ROW * n.max(1) as u32)
}

/// Draws the overview as an SVG document.
pub fn overview_svg(bars: &[ScoreBar]) -> Result<String> {
    let r = rows(bars);
    render_svg("the overview", size(r.len()), |root| {
        draw(root, &r, bars.len())
    })
}

/// Draws the overview into a PNG file (written atomically).
pub fn overview_png(path: &Path, bars: &[ScoreBar]) -> Result<()> {
    let r = rows(bars);
    render_png(path, "the overview", size(r.len()), |root| {
        draw(root, &r, bars.len())
    })
}

fn row_axis(n: usize) -> KeyAxis {
    KeyAxis {
        lo: 0.0,
        hi: n.max(1) as f64,
        bold: (0..n).map(|i| i as f64 + 0.5).collect(),
        light: Vec::new(),
    }
}

type Label<'f> = &'f dyn Fn(&f64) -> String;

/// Horizontal bars, one row per product, with the grid and axes drawn.
/// `(left margin, name area width)`; `(x labels, x label format)`.
fn bar_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    (margin_left, name_area): (u32, u32),
    x: std::ops::Range<f64>,
    n: usize,
    (x_labels, x_format): (usize, Label<'_>),
    y_format: Label<'_>,
    x_desc: &str,
) -> std::result::Result<ChartContext<'a, DB, Cartesian2d<RangedCoordf64, KeyAxis>>, String> {
    let mut chart = ChartBuilder::on(area)
        .margin_left(margin_left)
        .margin_right(if name_area > 0 { 16 } else { 28 })
        .x_label_area_size(FOOT)
        .y_label_area_size(name_area)
        .build_cartesian_2d(x, row_axis(n))
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
        .x_labels(x_labels)
        .x_label_formatter(x_format)
        .y_label_formatter(y_format)
        .x_desc(x_desc)
        .draw()
        .msg()?;
    Ok(chart)
}

fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    rows: &[&ScoreBar],
    total: usize,
) -> Drawn {
    root.fill(&WHITE).msg()?;
    let (head, body) = root.split_vertically(HEAD);
    let title = if total > rows.len() {
        format!(
            "Backtest accuracy of the chosen models: the {} products with the highest MAPE, of {total}",
            rows.len()
        )
    } else {
        format!("Backtest accuracy of the chosen models, {total} products, highest MAPE first")
    };
    head.draw(&Text::new(
        title,
        (16, 10),
        (FONT, 25).into_font().color(&INK),
    ))
    .msg()?;
    head.draw(&Text::new(
        "MAPE: mean absolute percentage error over every origin and horizon. Bias: total over- or under-forecast, in % of the actual total.",
        (16, 40),
        (FONT, 16).into_font().color(&MUTED),
    ))
    .msg()?;
    draw_legend(
        &head,
        &[
            (Glyph::Band(CLEANED, 0.85), "MAPE".to_string()),
            (
                Glyph::Band(OVER, 1.0),
                "over-forecast (bias > 0)".to_string(),
            ),
            (
                Glyph::Band(UNDER, 1.0),
                "under-forecast (bias < 0)".to_string(),
            ),
        ],
        (16, 66),
        WIDTH as i32 - 32,
    )?;
    let n = rows.len();
    let y = |i: usize| (n - i) as f64 - 0.5;
    let (left, right) = body.split_horizontally(760);

    let max_mape = rows
        .iter()
        .filter_map(|r| r.mape)
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max)
        .max(5.0)
        * 1.18;
    let name = |v: &f64| {
        let i = n as f64 - 0.5 - v;
        rows.get(i.round().max(0.0) as usize)
            .map(|r| cut(&r.product, 40))
            .unwrap_or_default()
    };
    let mut chart = bar_chart(
        &left,
        (12, 310),
        0.0..max_mape,
        n,
        (6, &|v| format!("{v:.0}%")),
        &name,
        "MAPE of the chosen model (%)",
    )?;
    let label_font = (FONT, 14).into_font().color(&INK);
    for (i, r) in rows.iter().enumerate() {
        match r.mape.filter(|v| v.is_finite()) {
            Some(m) => {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(0.0, y(i) - 0.34), (m, y(i) + 0.34)],
                        CLEANED.mix(0.85).filled(),
                    )))
                    .msg()?;
                let (px, py) = chart.backend_coord(&(m, y(i)));
                let (ox, oy) = left.get_base_pixel();
                left.draw(&Text::new(
                    format!("{m:.1}%"),
                    (px - ox + 5, py - oy - 6),
                    label_font.clone(),
                ))
                .msg()?;
            }
            None => {
                let (px, py) = chart.backend_coord(&(0.0, y(i)));
                let (ox, oy) = left.get_base_pixel();
                left.draw(&Text::new(
                    "no MAPE (not backtested, or zero actuals)",
                    (px - ox + 5, py - oy - 6),
                    (FONT, 14).into_font().color(&MUTED),
                ))
                .msg()?;
            }
        }
    }

    let max_bias = rows
        .iter()
        .filter_map(|r| r.bias)
        .filter(|v| v.is_finite())
        .fold(0.0, |a: f64, b| a.max(b.abs()))
        .max(5.0)
        * 1.3;
    let mut chart = bar_chart(
        &right,
        (4, 0),
        -max_bias..max_bias,
        n,
        (5, &|v| format!("{v:+.0}%")),
        &|_| String::new(),
        "bias of the chosen model (%)",
    )?;
    chart
        .draw_series(LineSeries::new(
            vec![(0.0, 0.0), (0.0, n.max(1) as f64)],
            MUTED.stroke_width(1),
        ))
        .msg()?;
    for (i, r) in rows.iter().enumerate() {
        let Some(b) = r.bias.filter(|v| v.is_finite()) else {
            continue;
        };
        let colour = if b >= 0.0 { OVER } else { UNDER };
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(0.0, y(i) - 0.34), (b, y(i) + 0.34)],
                colour.filled(),
            )))
            .msg()?;
        let (px, py) = chart.backend_coord(&(b, y(i)));
        let (ox, oy) = right.get_base_pixel();
        // "-0.0%" reads as a sign that is not there.
        let text = format!("{}%", super::fmt_signed(b));
        let (tw, _) = right.estimate_text_size(&text, &label_font).msg()?;
        let tx = if b >= 0.0 {
            px - ox + 5
        } else {
            px - ox - 5 - tw as i32
        };
        right
            .draw(&Text::new(text, (tx, py - oy - 6), label_font.clone()))
            .msg()?;
    }
    Ok(())
}
