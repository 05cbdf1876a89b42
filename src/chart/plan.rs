//! The stock chart of one planned series: the projected closing stock as
//! columns coloured by where they stand against the minimum and maximum
//! (drawn as thin stepped lines), arrivals as stems (on order and
//! proposed), months an order is placed on the axis, and the months of
//! projected stockout as a red strip along the axis.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::palette::*;
use super::product::{month_chart, nice_top, titled};
use super::{draw_legend, render_png, render_svg, Drawn, Glyph, OrMessage, FONT};
use crate::calendar::YearMonth;
use crate::error::Result;

/// One month of the stock chart.
#[derive(Debug, Clone, PartialEq)]
pub struct StockMonth {
    /// The month.
    pub month: YearMonth,
    /// Closing stock.
    pub closing: f64,
    /// Quantity short (projected stockout when above 0 or closing is 0).
    pub short: f64,
    /// Stockout flagged.
    pub stockout: bool,
    /// Above the maximum.
    pub above_max: bool,
    /// Minimum stock in base units (min months × AMC).
    pub min_qty: f64,
    /// Maximum stock in base units (max months × AMC).
    pub max_qty: f64,
    /// Emergency point in base units, when set.
    pub emergency_qty: Option<f64>,
    /// Arrivals of shipments on order.
    pub on_order: f64,
    /// Arrivals of proposed orders.
    pub planned: f64,
    /// A proposed order is placed this month.
    pub order_placed: bool,
}

/// Everything the stock chart shows.
#[derive(Debug, Clone, PartialEq)]
pub struct StockChart {
    /// Title (product, and site).
    pub title: String,
    /// One line under the title.
    pub subtitle: String,
    /// Stock on hand at the count, drawn at `count_month`.
    pub stock_on_hand: f64,
    /// Month of the count.
    pub count_month: YearMonth,
    /// Projected months, in order.
    pub months: Vec<StockMonth>,
}

const WIDTH: u32 = 1200;
const HEIGHT: u32 = 520;

/// Draws the stock chart as an SVG document.
pub fn stock_svg(chart: &StockChart) -> Result<String> {
    render_svg(&chart.title, (WIDTH, HEIGHT), |root| draw(root, chart))
}

/// Draws the stock chart into a PNG file (written atomically).
pub fn stock_png(path: &Path, chart: &StockChart) -> Result<()> {
    render_png(path, &chart.title, (WIDTH, HEIGHT), |root| {
        draw(root, chart)
    })
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, c: &StockChart) -> Drawn {
    root.fill(&WHITE).msg()?;
    let [head, plot] = titled(root, &c.title, &c.subtitle)?;
    let base = c.count_month;
    let Some(last) = c.months.last().map(|m| m.month) else {
        plot.draw(&Text::new(
            "no projected month",
            (16, 20),
            (FONT, 19).into_font().color(&MUTED),
        ))
        .msg()?;
        return Ok(());
    };
    let x = |m: YearMonth| base.months_until(m) as f64;
    let mut ymax = c.stock_on_hand;
    for m in &c.months {
        ymax = ymax
            .max(m.closing + m.on_order + m.planned)
            .max(m.max_qty)
            .max(m.closing);
    }
    let ymax = nice_top(ymax);
    let mut chart = month_chart(
        &plot,
        base,
        base.months_until(last),
        ymax,
        6,
        "stock (base units)",
    )?;
    let mut items: Vec<(Glyph, String)> = Vec::new();

    // The stock held: one column per month up to its closing stock,
    // coloured by where it stands against the policy (within the limits,
    // below the minimum, above the maximum); the count as a grey column.
    let status = |m: &StockMonth| {
        if m.above_max {
            OVER
        } else if m.closing < m.min_qty {
            ADJUSTED
        } else {
            CLEANED
        }
    };
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(-0.42, 0.0), (0.42, c.stock_on_hand)],
            REPORTED.mix(0.45).filled(),
        )))
        .msg()?;
    chart
        .draw_series(c.months.iter().filter(|m| m.closing > 0.0).map(|m| {
            Rectangle::new(
                [(x(m.month) - 0.42, 0.0), (x(m.month) + 0.42, m.closing)],
                status(m).mix(0.42).filled(),
            )
        }))
        .msg()?;
    items.push((
        Glyph::Square(CLEANED),
        "closing stock, within min and max".into(),
    ));
    if c.months
        .iter()
        .any(|m| !m.above_max && m.closing > 0.0 && m.closing < m.min_qty)
    {
        items.push((Glyph::Square(ADJUSTED), "below minimum".into()));
    }
    if c.months.iter().any(|m| m.above_max) {
        items.push((Glyph::Square(OVER), "above maximum".into()));
    }
    items.push((Glyph::Square(REPORTED), "stock counted".into()));

    // The minimum and maximum as thin stepped lines (not a band), and the
    // emergency point dotted.
    let steps = |pick: &dyn Fn(&StockMonth) -> f64| {
        let mut pts = Vec::with_capacity(c.months.len() * 2);
        for m in &c.months {
            pts.push((x(m.month) - 0.5, pick(m)));
            pts.push((x(m.month) + 0.5, pick(m)));
        }
        pts
    };
    chart
        .draw_series(LineSeries::new(steps(&|m| m.max_qty), INK.stroke_width(1)))
        .msg()?;
    chart
        .draw_series(DashedLineSeries::new(
            steps(&|m| m.min_qty),
            7,
            4,
            INK.stroke_width(2),
        ))
        .msg()?;
    items.push((
        Glyph::Line(INK, 1),
        "maximum (solid), minimum (dashed)".into(),
    ));
    if c.months.iter().any(|m| m.emergency_qty.is_some()) {
        let pts: Vec<(f64, f64)> = c
            .months
            .iter()
            .filter_map(|m| m.emergency_qty.map(|e| (x(m.month), e)))
            .collect();
        chart
            .draw_series(DashedLineSeries::new(pts, 2, 4, OUTLIER.stroke_width(2)))
            .msg()?;
        items.push((Glyph::Line(OUTLIER, 2), "emergency point (dotted)".into()));
    }

    // Arrivals as stems with a diamond head at the quantity, beside the
    // month's column: shipments on order grey, proposed orders green.
    for (pick, off, colour, label) in [
        (
            (|m: &StockMonth| m.on_order) as fn(&StockMonth) -> f64,
            -0.3,
            REPORTED,
            "arrival on order (stem)",
        ),
        (
            |m: &StockMonth| m.planned,
            0.3,
            FORECAST,
            "arrival of a proposed order (stem)",
        ),
    ] {
        let pts: Vec<(f64, f64)> = c
            .months
            .iter()
            .filter(|m| pick(m) > 0.0)
            .map(|m| (x(m.month) + off, pick(m)))
            .collect();
        if pts.is_empty() {
            continue;
        }
        for &(px, v) in &pts {
            chart
                .draw_series(LineSeries::new(
                    vec![(px, 0.0), (px, v)],
                    colour.stroke_width(2),
                ))
                .msg()?;
        }
        chart
            .draw_series(pts.iter().map(|&p| {
                EmptyElement::at(p)
                    + Polygon::new(vec![(0, -6), (6, 0), (0, 6), (-6, 0)], colour.filled())
            }))
            .msg()?;
        items.push((Glyph::Dot(colour), label.into()));
    }

    // Stockout months: a red strip along the axis and a cross, so the
    // empty months stand out without covering the chart.
    let out: Vec<&StockMonth> = c.months.iter().filter(|m| m.stockout).collect();
    if !out.is_empty() {
        chart
            .draw_series(out.iter().map(|m| {
                Rectangle::new(
                    [(x(m.month) - 0.5, 0.0), (x(m.month) + 0.5, ymax * 0.03)],
                    OUTLIER.filled(),
                )
            }))
            .msg()?;
        chart
            .draw_series(
                out.iter()
                    .map(|m| Cross::new((x(m.month), ymax * 0.08), 7, OUTLIER.stroke_width(3))),
            )
            .msg()?;
        items.push((
            Glyph::Cross(OUTLIER),
            "projected stockout (red strip)".into(),
        ));
    }

    // Months an order is placed: a small open square on the axis.
    let placed: Vec<f64> = c
        .months
        .iter()
        .filter(|m| m.order_placed)
        .map(|m| x(m.month))
        .collect();
    if !placed.is_empty() {
        chart
            .draw_series(placed.iter().map(|&px| {
                EmptyElement::at((px, 0.0))
                    + Rectangle::new([(-5, -5), (5, 5)], FORECAST.stroke_width(2))
            }))
            .msg()?;
        items.push((
            Glyph::Square(FORECAST),
            "order placed (open square on the axis)".into(),
        ));
    }
    draw_legend(&head, &items, (16, 62), WIDTH as i32 - 32)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stock_chart_draws_marks_present_only() {
        let base = YearMonth::new(2026, 10).unwrap();
        let month = |k: i64, closing: f64, stockout: bool| StockMonth {
            month: base.plus(k),
            closing,
            short: if stockout { 50.0 } else { 0.0 },
            stockout,
            above_max: closing > 600.0,
            min_qty: 300.0,
            max_qty: 600.0,
            emergency_qty: None,
            on_order: 0.0,
            planned: if k == 3 { 500.0 } else { 0.0 },
            order_placed: k == 1,
        };
        let mut c = StockChart {
            title: "Test product".into(),
            subtitle: "stock on hand 250".into(),
            stock_on_hand: 250.0,
            count_month: base,
            months: vec![
                month(1, 150.0, false),
                month(2, 0.0, true),
                month(3, 400.0, false),
            ],
        };
        let svg = stock_svg(&c).unwrap();
        assert!(svg.contains("projected stockout"));
        assert!(svg.contains("arrival of a proposed order"));
        assert!(svg.contains("order placed"));
        assert!(svg.contains("below minimum"));
        assert!(!svg.contains("above maximum"));
        assert!(!svg.contains("arrival on order"));
        assert!(!svg.contains("emergency point"));
        c.months.clear();
        assert!(stock_svg(&c).unwrap().contains("no projected month"));
    }
}
