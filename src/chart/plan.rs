//! The stock chart of one planned series: projected closing stock against
//! the min–max band, arrivals (on order and proposed), and the months of
//! projected stockout marked.

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

    // Stockout months: a band over the whole height.
    let out: Vec<&StockMonth> = c.months.iter().filter(|m| m.stockout).collect();
    if !out.is_empty() {
        chart
            .draw_series(out.iter().map(|m| {
                Rectangle::new(
                    [(x(m.month) - 0.5, 0.0), (x(m.month) + 0.5, ymax)],
                    OUTLIER.mix(0.16).filled(),
                )
            }))
            .msg()?;
        items.push((Glyph::Band(OUTLIER, 0.3), "projected stockout".into()));
    }

    // The min–max band, as steps month by month.
    let mut band: Vec<(f64, f64)> = Vec::new();
    for m in &c.months {
        band.push((x(m.month) - 0.5, m.max_qty));
        band.push((x(m.month) + 0.5, m.max_qty));
    }
    for m in c.months.iter().rev() {
        band.push((x(m.month) + 0.5, m.min_qty));
        band.push((x(m.month) - 0.5, m.min_qty));
    }
    chart
        .draw_series(std::iter::once(Polygon::new(
            band,
            FORECAST.mix(0.14).filled(),
        )))
        .msg()?;
    items.push((Glyph::Band(FORECAST, 0.2), "min–max band".into()));
    if c.months.iter().any(|m| m.emergency_qty.is_some()) {
        let pts: Vec<(f64, f64)> = c
            .months
            .iter()
            .filter_map(|m| m.emergency_qty.map(|e| (x(m.month), e)))
            .collect();
        chart
            .draw_series(DashedLineSeries::new(pts, 5, 4, OUTLIER.stroke_width(1)))
            .msg()?;
        items.push((Glyph::Line(OUTLIER, 1), "emergency point".into()));
    }

    // Arrivals as bars: on order (grey), proposed (teal), side by side.
    let bars = |pick: fn(&StockMonth) -> f64, off: f64| {
        c.months
            .iter()
            .filter(move |m| pick(m) > 0.0)
            .map(move |m| (x(m.month) + off, pick(m)))
            .collect::<Vec<_>>()
    };
    let oo = bars(|m| m.on_order, -0.2);
    if !oo.is_empty() {
        chart
            .draw_series(oo.iter().map(|&(px, v)| {
                Rectangle::new(
                    [(px - 0.17, 0.0), (px + 0.17, v)],
                    REPORTED.mix(0.7).filled(),
                )
            }))
            .msg()?;
        items.push((Glyph::Band(REPORTED, 0.7), "arrival on order".into()));
    }
    let pl = bars(|m| m.planned, 0.2);
    if !pl.is_empty() {
        chart
            .draw_series(pl.iter().map(|&(px, v)| {
                Rectangle::new(
                    [(px - 0.17, 0.0), (px + 0.17, v)],
                    FORECAST.mix(0.55).filled(),
                )
            }))
            .msg()?;
        items.push((
            Glyph::Band(FORECAST, 0.55),
            "arrival of proposed order".into(),
        ));
    }

    // Closing stock, from the count on.
    let mut line = vec![(0.0, c.stock_on_hand)];
    line.extend(c.months.iter().map(|m| (x(m.month), m.closing)));
    chart
        .draw_series(LineSeries::new(line.clone(), CLEANED.stroke_width(3)))
        .msg()?;
    chart
        .draw_series(line.iter().map(|&p| Circle::new(p, 3, CLEANED.filled())))
        .msg()?;
    items.insert(
        0,
        (Glyph::Line(CLEANED, 3), "projected closing stock".into()),
    );
    let over: Vec<(f64, f64)> = c
        .months
        .iter()
        .filter(|m| m.above_max)
        .map(|m| (x(m.month), m.closing))
        .collect();
    if !over.is_empty() {
        chart
            .draw_series(
                over.iter()
                    .map(|&p| Circle::new(p, 5, ADJUSTED.stroke_width(2))),
            )
            .msg()?;
        items.push((Glyph::Ring(ADJUSTED), "above maximum".into()));
    }
    if !out.is_empty() {
        chart
            .draw_series(
                out.iter()
                    .map(|m| Cross::new((x(m.month), 0.0), 6, OUTLIER.stroke_width(2))),
            )
            .msg()?;
    }
    let placed: Vec<f64> = c
        .months
        .iter()
        .filter(|m| m.order_placed)
        .map(|m| x(m.month))
        .collect();
    if !placed.is_empty() {
        chart
            .draw_series(placed.iter().map(|&px| {
                EmptyElement::at((px, ymax))
                    + Polygon::new(vec![(-6, 2), (6, 2), (0, 12)], FORECAST.filled())
            }))
            .msg()?;
        items.push((
            Glyph::Dot(FORECAST),
            "order placed (triangle at top)".into(),
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
        assert!(svg.contains("arrival of proposed order"));
        assert!(!svg.contains("above maximum"));
        assert!(!svg.contains("emergency point"));
        c.months.clear();
        assert!(stock_svg(&c).unwrap().contains("no projected month"));
    }
}
