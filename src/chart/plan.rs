//! The stock chart of one planned series: the projected closing stock as
//! columns coloured by where they stand against the minimum and maximum
//! (drawn as thin stepped lines), arrivals as stems (on order and
//! proposed), months an order is placed on the axis, the months of
//! projected stockout as a shaded month with a rule along the axis and the
//! quantity short written in it, and stock expected to expire as the top of
//! its column.

use std::path::Path;

use plotters::coord::Shift;
use plotters::prelude::*;

use super::palette::*;
use super::product::{month_chart, nice_top, titled_with};
use super::{draw_legend, fmt_quantity, render_png, render_svg, Drawn, Glyph, OrMessage, FONT};
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
    /// Quantity expected to expire before use (above AMC × shelf life;
    /// 0 when none), drawn as the top of the month's column.
    pub expiring: f64,
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
    /// The unit the product is counted in; `None`: base units.
    pub units: Option<String>,
}

const WIDTH: u32 = 1200;
// A head of three legend lines: a plan can show a dozen kinds of mark.
const HEIGHT: u32 = 540;
const HEAD: u32 = 126;

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

/// Projected stockout months: a pale band over the whole month and a
/// thick rule along the axis (no height, so it cannot read as stock held).
const STOCKOUT: RGBColor = RGBColor(0xa5, 0x0f, 0x15);
/// Stock expected to expire before use (Okabe–Ito reddish purple).
const EXPIRING: RGBColor = FILLED;

/// The highest value the chart draws: the count, each month's closing
/// stock, minimum, maximum and emergency point, and the arrival stems
/// (each stands from the axis to its own quantity, not on the column).
pub(crate) fn value_top(c: &StockChart) -> f64 {
    let mut top = c.stock_on_hand;
    for m in &c.months {
        top = top
            .max(m.closing)
            .max(m.min_qty)
            .max(m.max_qty)
            .max(m.emergency_qty.unwrap_or(0.0))
            .max(m.on_order)
            .max(m.planned);
    }
    top
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, c: &StockChart) -> Drawn {
    root.fill(&WHITE).msg()?;
    let [head, plot] = titled_with(root, &c.title, &c.subtitle, HEAD)?;
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
    let unit = super::units_plural(c.units.as_deref());
    let ymax = nice_top(value_top(c));
    let mut chart = month_chart(
        &plot,
        base,
        base.months_until(last),
        ymax,
        6,
        &format!("stock ({unit})"),
    )?;
    let mut items: Vec<(Glyph, String)> = Vec::new();

    // Stockout months first, as a pale band behind everything: the month
    // is marked over its whole height, and nothing of it has a height of
    // its own.
    let out: Vec<&StockMonth> = c.months.iter().filter(|m| m.stockout).collect();
    chart
        .draw_series(out.iter().map(|m| {
            Rectangle::new(
                [(x(m.month) - 0.5, 0.0), (x(m.month) + 0.5, ymax)],
                STOCKOUT.mix(0.10).filled(),
            )
        }))
        .msg()?;

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

    // The part of a column expected to expire before use (above AMC ×
    // shelf life), as the top of the column.
    let expiring: Vec<&StockMonth> = c
        .months
        .iter()
        .filter(|m| m.expiring > 0.0 && m.closing > 0.0)
        .collect();
    if !expiring.is_empty() {
        chart
            .draw_series(expiring.iter().map(|m| {
                Rectangle::new(
                    [
                        (x(m.month) - 0.42, m.closing - m.expiring.min(m.closing)),
                        (x(m.month) + 0.42, m.closing),
                    ],
                    EXPIRING.mix(0.6).filled(),
                )
            }))
            .msg()?;
        items.push((
            Glyph::Band(EXPIRING, 0.6),
            format!(
                "expected to expire before use (above shelf life): {} month(s)",
                expiring.len()
            ),
        ));
    }

    // The minimum and maximum as thin stepped lines (not a band), and the
    // emergency point dotted: the policy levels all in ink, so no colour
    // of the columns or marks is reused for them.
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
    if c.months.iter().any(|m| m.emergency_qty.is_some()) {
        let pts: Vec<(f64, f64)> = c
            .months
            .iter()
            .filter_map(|m| m.emergency_qty.map(|e| (x(m.month), e)))
            .collect();
        chart
            .draw_series(DashedLineSeries::new(pts, 2, 4, INK.stroke_width(2)))
            .msg()?;
        items.push((
            Glyph::Line(INK, 1),
            "maximum (solid), minimum (dashed), emergency (dotted)".into(),
        ));
    } else {
        items.push((
            Glyph::Line(INK, 1),
            "maximum (solid), minimum (dashed)".into(),
        ));
    }

    // Arrivals as stems with a diamond head at the quantity, beside the
    // month's column: shipments on order grey, proposed orders green.
    for (pick, off, colour, label) in [
        (
            (|m: &StockMonth| m.on_order) as fn(&StockMonth) -> f64,
            -0.3,
            REPORTED,
            "arrival on order",
        ),
        (
            |m: &StockMonth| m.planned,
            0.3,
            FORECAST,
            "arrival of a proposed order",
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

    // Stockout months, over the rest: a thick rule along the axis and the
    // quantity short written up the band.
    if !out.is_empty() {
        for m in &out {
            chart
                .draw_series(std::iter::once(PathElement::new(
                    vec![(x(m.month) - 0.5, 0.0), (x(m.month) + 0.5, 0.0)],
                    STOCKOUT.stroke_width(5),
                )))
                .msg()?;
        }
        let style = (FONT, 13)
            .into_font()
            .color(&STOCKOUT)
            .transform(FontTransform::Rotate270);
        let (_, axis_y) = chart.backend_coord(&(0.0, 0.0));
        let (ox, oy) = plot.get_base_pixel();
        for m in &out {
            let (px, _) = chart.backend_coord(&(x(m.month), 0.0));
            plot.draw(&Text::new(
                format!("stockout · short {}", fmt_quantity(m.short)),
                (px - ox - 7, axis_y - oy - 14),
                style.clone(),
            ))
            .msg()?;
        }
        let short: f64 = out.iter().map(|m| m.short).sum();
        items.push((
            Glyph::Band(STOCKOUT, 0.25),
            format!(
                "projected stockout (shaded month): {} month(s), {} {unit} short",
                out.len(),
                fmt_quantity(short)
            ),
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
            "order placed (square on the axis)".into(),
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
            expiring: 0.0,
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
            units: None,
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

    /// The demo's HIV rapid test kit around its first proposed order and its
    /// stockouts (plan.csv of the demo run, rounded).
    fn hiv_like() -> StockChart {
        let base = YearMonth::new(2026, 10).unwrap();
        let month = |k: i64, closing: f64, short: f64, planned: f64| StockMonth {
            month: base.plus(k),
            closing,
            short,
            stockout: closing == 0.0,
            above_max: false,
            min_qty: 63_000.0,
            max_qty: 126_000.0,
            emergency_qty: Some(21_000.0),
            on_order: if k == 3 { 20_000.0 } else { 0.0 },
            planned,
            order_placed: k == 1 || k == 4,
            expiring: 0.0,
        };
        StockChart {
            title: "HIV rapid test kit".into(),
            subtitle: String::new(),
            stock_on_hand: 18_000.0,
            count_month: base,
            months: vec![
                month(1, 2_364.0, 0.0, 0.0),
                month(2, 0.0, 13_432.0, 0.0),
                month(3, 2_955.0, 0.0, 0.0),
                month(4, 0.0, 15_237.0, 0.0),
                month(5, 107_457.0, 0.0, 126_700.0),
            ],
            units: Some("test".into()),
        }
    }

    #[test]
    fn axis_fits_what_is_drawn() {
        // The tester saw the HIV axis run to about 230,000 for data up to
        // about 132,000: the top added each arrival to the closing stock
        // it is already part of (107,457 + 126,700). A stem stands from the
        // axis to its own quantity, so the top is the largest value drawn.
        let c = hiv_like();
        assert_eq!(value_top(&c), 126_700.0);
        let mut c2 = c.clone();
        c2.months[4].max_qty = 140_000.0;
        assert_eq!(value_top(&c2), 140_000.0);
    }

    #[test]
    fn stockouts_are_marked_without_height_and_units_named() {
        // The tester saw a stockout month drawn as a coloured bar about
        // 7,500 tests high (3% of the axis), read as stock on hand, with a
        // legend calling it a "red strip", and the axis in "base units".
        let svg = stock_svg(&hiv_like()).unwrap();
        assert!(!svg.contains("red strip"), "{svg}");
        assert!(svg.contains("stockout · short 13,432"), "{svg}");
        assert!(svg.contains("stockout · short 15,237"), "{svg}");
        assert!(
            svg.contains("projected stockout (shaded month): 2 month(s), 28,669 tests short"),
            "{svg}"
        );
        assert!(svg.contains("stock (tests)"), "{svg}");
        assert!(!svg.contains("base units"));
        // One orange only (below the minimum): the emergency point is drawn
        // in ink like the other policy levels, stockouts in a deep red.
        assert!(!svg.to_uppercase().contains("#D55E00"), "{svg}");
        assert_ne!(STOCKOUT, ADJUSTED);
        assert_ne!(EXPIRING, ADJUSTED);
    }

    #[test]
    fn stock_expected_to_expire_is_drawn() {
        // Nevirapine's title said 24 months at expiry risk while nothing in
        // its chart showed it.
        let mut c = hiv_like();
        c.months[4].expiring = 40_000.0;
        c.months[4].above_max = true;
        let svg = stock_svg(&c).unwrap();
        assert!(
            svg.contains("expected to expire before use (above shelf life): 1 month(s)"),
            "{svg}"
        );
        assert!(!stock_svg(&hiv_like())
            .unwrap()
            .contains("expected to expire"));
    }
}
