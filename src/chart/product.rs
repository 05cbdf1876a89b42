//! The chart of one product: its history (reported and cleaned, with the
//! months cleaning changed markedly, filled and outlier months marked), the projection with its 80%
//! and 95% ranges, and optionally a backtest panel beneath.

use std::path::Path;

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

use super::palette::*;
use super::{
    cut, draw_legend, month_label, render_png, render_svg, Drawn, Glyph, KeyAxis, OrMessage, FONT,
};
use crate::calendar::YearMonth;
use crate::clean::MonthStatus;
use crate::error::Result;

/// One month of history.
#[derive(Debug, Clone, PartialEq)]
pub struct HistoryMonth {
    /// The month.
    pub month: YearMonth,
    /// Consumption as reported (summed over sites); `None` when not reported.
    pub reported: Option<f64>,
    /// The cleaned (or actual) value; `None` when there is none.
    pub cleaned: Option<f64>,
    /// Where the cleaned value comes from.
    pub status: MonthStatus,
    /// Flagged as an outlier.
    pub outlier: bool,
}

/// One projected month with its ranges.
#[derive(Debug, Clone, PartialEq)]
pub struct ProjectedMonth {
    /// The month.
    pub month: YearMonth,
    /// Point forecast.
    pub point: f64,
    /// 80% range (lower, upper), when known.
    pub range80: Option<(f64, f64)>,
    /// 95% range (lower, upper), when known.
    pub range95: Option<(f64, f64)>,
    /// Bridged: forecast between the product's last month and the common
    /// projection start (drawn as open circles).
    pub bridged: bool,
}

/// The forecasts one model made from one backtest origin.
#[derive(Debug, Clone, PartialEq)]
pub struct BacktestPath {
    /// The last month the model saw.
    pub origin: YearMonth,
    /// (target month, forecast), in month order.
    pub points: Vec<(YearMonth, f64)>,
}

/// The backtest panel: a model's forecasts from each origin against what
/// was then observed.
#[derive(Debug, Clone, PartialEq)]
pub struct BacktestPanel {
    /// The model backtested.
    pub model: String,
    /// One path per origin.
    pub paths: Vec<BacktestPath>,
}

/// How far, in points of the reported value, a month's change by cleaning
/// must stand from the product's typical change to be marked on the chart
/// (our choice: below it the month moved with the rest, mostly the routine
/// scaling for incomplete reporting, which the grey and blue lines show).
pub const MARKED_CHANGE: f64 = 0.10;

/// The product's typical change by cleaning: the median of cleaned ÷
/// reported − 1 over the months with both (reported above zero); `None`
/// when there is no such month. On data with reporting rates below 100%
/// this is mostly the reporting-rate uplift.
pub fn typical_change(history: &[HistoryMonth]) -> Option<f64> {
    let mut r: Vec<f64> = history
        .iter()
        .filter_map(|h| match (h.reported, h.cleaned) {
            (Some(rep), Some(c)) if rep > 0.0 && c.is_finite() => Some(c / rep - 1.0),
            _ => None,
        })
        .collect();
    if r.is_empty() {
        return None;
    }
    r.sort_by(f64::total_cmp);
    let n = r.len();
    Some(if n % 2 == 1 {
        r[n / 2]
    } else {
        (r[n / 2 - 1] + r[n / 2]) / 2.0
    })
}

/// Which months were **changed by cleaning** materially, for the dot on the
/// chart: months of status `adjusted` whose cleaned ÷ reported − 1 is more
/// than [`MARKED_CHANGE`] away from the product's [`typical_change`] (a
/// reported zero made non-zero counts as changed). Filled and imputed
/// months have marks of their own and are not included.
pub fn changed_by_cleaning(history: &[HistoryMonth]) -> Vec<bool> {
    let typical = typical_change(history).unwrap_or(0.0);
    history
        .iter()
        .map(|h| {
            h.status == MonthStatus::Adjusted
                && match (h.reported, h.cleaned) {
                    (Some(rep), Some(c)) if rep > 0.0 => {
                        (c / rep - 1.0 - typical).abs() > MARKED_CHANGE
                    }
                    (Some(_), Some(c)) => c > 0.0,
                    _ => false,
                }
        })
        .collect()
}

/// Everything the chart of one product shows. Quantities are per month, in
/// the product's unit ([`ProductChart::units`]).
#[derive(Debug, Clone, PartialEq)]
pub struct ProductChart {
    /// Title (the product name; cut to fit).
    pub title: String,
    /// One line under the title (model, score...).
    pub subtitle: String,
    /// Legend label of the history line, e.g. "cleaned consumption".
    pub history_label: String,
    /// Legend label of the projection line, e.g. "projection (ets-holt)".
    pub projection_label: String,
    /// The history, in month order.
    pub history: Vec<HistoryMonth>,
    /// The projection, in month order (may be empty).
    pub projection: Vec<ProjectedMonth>,
    /// The backtest panel, when there is one.
    pub backtest: Option<BacktestPanel>,
    /// The adjusted forecast (known changes applied), month by month; empty
    /// when the run had no changes file. Drawn dashed over the projection.
    pub adjusted: Vec<(YearMonth, f64)>,
    /// The unit the product is counted in (`units` of the run
    /// configuration, as `forecast.csv` gives it); `None`: base units.
    pub units: Option<String>,
}

impl ProductChart {
    /// The value axis' title: "consumption (tests per month)".
    fn axis_title(&self) -> String {
        format!(
            "consumption ({} per month)",
            super::units_plural(self.units.as_deref())
        )
    }
}

/// Where the outlier crosses go: at the reported value, which is what was
/// judged an outlier (the cleaned value of a replaced outlier is the
/// expected one, and its month carries the cleaning's own mark), or at the
/// cleaned value when nothing was reported.
pub fn outlier_marks(history: &[HistoryMonth]) -> Vec<(YearMonth, f64)> {
    history
        .iter()
        .filter(|h| h.outlier)
        .filter_map(|h| h.reported.or(h.cleaned).map(|v| (h.month, v)))
        .collect()
}

const WIDTH: u32 = 1200;
const TOP_HEIGHT: u32 = 470;
const BOTTOM_HEIGHT: u32 = 300;

impl ProductChart {
    /// Size in pixels (width, height).
    pub fn size(&self) -> (u32, u32) {
        match self.backtest {
            Some(_) => (WIDTH, TOP_HEIGHT + BOTTOM_HEIGHT),
            None => (WIDTH, TOP_HEIGHT),
        }
    }
}

/// Draws the chart as an SVG document.
pub fn product_svg(chart: &ProductChart) -> Result<String> {
    render_svg(&chart.title, chart.size(), |root| draw(root, chart))
}

/// Draws the chart into a PNG file (written atomically).
pub fn product_png(path: &Path, chart: &ProductChart) -> Result<()> {
    render_png(path, &chart.title, chart.size(), |root| draw(root, chart))
}

fn draw<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, c: &ProductChart) -> Drawn {
    root.fill(&WHITE).msg()?;
    let (top, bottom) = root.split_vertically(TOP_HEIGHT);
    draw_main(&top, c)?;
    if let Some(bt) = &c.backtest {
        draw_backtest(&bottom, c, bt)?;
    }
    Ok(())
}

/// The adjusted forecast (known changes applied) as a thick dashed line in
/// a colour of its own, so it reads apart from the statistical projection.
fn draw_adjusted<DB: DrawingBackend>(
    chart: &mut ChartContext<'_, DB, Cartesian2d<KeyAxis, RangedCoordf64>>,
    c: &ProductChart,
    x: &dyn Fn(YearMonth) -> f64,
    items: &mut Vec<(Glyph, String)>,
) -> Drawn {
    if c.adjusted.is_empty() {
        return Ok(());
    }
    let line: Vec<(f64, f64)> = c.adjusted.iter().map(|(m, v)| (x(*m), *v)).collect();
    chart
        .draw_series(DashedLineSeries::new(line, 10, 5, OUTLIER.stroke_width(3)))
        .msg()?;
    items.push((
        Glyph::Line(OUTLIER, 3),
        "adjusted forecast (known changes)".to_string(),
    ));
    Ok(())
}

/// Month axis: x is months after `base`; bold ticks at each January (and
/// July on short spans), light lines at each quarter.
pub(super) fn month_axis(base: YearMonth, first: i64, last: i64) -> KeyAxis {
    let span = last - first;
    let mut bold = Vec::new();
    let mut light = Vec::new();
    for t in first..=last {
        let m = base.plus(t).month();
        let is_bold = m == 1 || (span <= 36 && m == 7) || (span <= 15 && (m - 1) % 3 == 0);
        if is_bold {
            bold.push(t as f64);
        } else if (m - 1) % 3 == 0 {
            light.push(t as f64);
        }
    }
    KeyAxis {
        lo: first as f64 - 0.5,
        hi: last as f64 + 0.5,
        bold,
        light,
    }
}

/// A chart of quantities (0 to `ymax`) over the months `base` to
/// `base + last`, with its grid and labelled axes drawn.
pub(super) fn month_chart<'a, DB: DrawingBackend>(
    area: &'a DrawingArea<DB, Shift>,
    base: YearMonth,
    last: i64,
    ymax: f64,
    y_labels: usize,
    y_desc: &str,
) -> std::result::Result<ChartContext<'a, DB, Cartesian2d<KeyAxis, RangedCoordf64>>, String> {
    let mut chart = ChartBuilder::on(area)
        .margin_left(12)
        .margin_right(28)
        .margin_bottom(8)
        .x_label_area_size(30)
        .y_label_area_size(86)
        .build_cartesian_2d(month_axis(base, 0, last), 0.0..ymax)
        .msg()?;
    chart
        .configure_mesh()
        .bold_line_style(GRID.stroke_width(1))
        .light_line_style(GRID.mix(0.45).stroke_width(1))
        .y_max_light_lines(0)
        .axis_style(MUTED.stroke_width(1))
        .label_style((FONT, 15).into_font().color(&INK))
        .axis_desc_style((FONT, 16).into_font().color(&MUTED))
        .x_label_formatter(&|v| month_label(base.plus(v.round() as i64)))
        .y_label_formatter(&|v| super::fmt_axis(*v))
        .y_labels(y_labels)
        .y_desc(y_desc)
        .draw()
        .msg()?;
    Ok(chart)
}

pub(super) fn nice_top(v: f64) -> f64 {
    if v.is_finite() && v > 0.0 {
        v * 1.06
    } else {
        1.0
    }
}

/// Splits a sequence of optional points into runs without gaps.
fn runs(points: impl Iterator<Item = (f64, Option<f64>)>) -> Vec<Vec<(f64, f64)>> {
    let mut out = vec![Vec::new()];
    for (x, y) in points {
        match y.filter(|v| v.is_finite()) {
            Some(v) => out.last_mut().map(|r| r.push((x, v))).unwrap_or(()),
            None => {
                if out.last().is_some_and(|r| !r.is_empty()) {
                    out.push(Vec::new());
                }
            }
        }
    }
    out.retain(|r| !r.is_empty());
    out
}

/// Splits off the head of a chart (104 pixels: title, subtitle and two
/// legend lines) and draws the title and subtitle in it; returns [head,
/// plot area].
pub(super) fn titled<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    title: &str,
    subtitle: &str,
) -> std::result::Result<[DrawingArea<DB, Shift>; 2], String> {
    titled_with(area, title, subtitle, 104)
}

/// [`titled`] with a head of `height` pixels (each legend line takes 20).
pub(super) fn titled_with<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    title: &str,
    subtitle: &str,
    height: u32,
) -> std::result::Result<[DrawingArea<DB, Shift>; 2], String> {
    let (head, plot) = area.split_vertically(height);
    head.draw(&Text::new(
        cut(title, 90),
        (16, 10),
        (FONT, 27).into_font().color(&INK),
    ))
    .msg()?;
    head.draw(&Text::new(
        cut(subtitle, 150),
        (16, 38),
        (FONT, 16).into_font().color(&MUTED),
    ))
    .msg()?;
    Ok([head, plot])
}

fn draw_main<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, c: &ProductChart) -> Drawn {
    let [head, plot] = titled(area, &c.title, &c.subtitle)?;

    let base = c
        .history
        .first()
        .map(|h| h.month)
        .or_else(|| c.projection.first().map(|p| p.month));
    let Some(base) = base else {
        plot.draw(&Text::new(
            "no data to draw",
            (16, 20),
            (FONT, 19).into_font().color(&MUTED),
        ))
        .msg()?;
        return Ok(());
    };
    let x = |m: YearMonth| base.months_until(m) as f64;
    let last = c
        .projection
        .last()
        .map(|p| p.month)
        .into_iter()
        .chain(c.history.last().map(|h| h.month))
        .max()
        .unwrap_or(base);
    let mut ymax: f64 = 0.0;
    for h in &c.history {
        ymax = ymax.max(h.reported.unwrap_or(0.0));
        ymax = ymax.max(h.cleaned.unwrap_or(0.0));
    }
    for (_, v) in &c.adjusted {
        ymax = ymax.max(*v);
    }
    for p in &c.projection {
        ymax = ymax.max(p.point);
        if let Some((_, u)) = p.range95.or(p.range80) {
            ymax = ymax.max(u);
        }
    }
    let ymax = nice_top(ymax);

    let mut chart = month_chart(
        &plot,
        base,
        base.months_until(last),
        ymax,
        6,
        &c.axis_title(),
    )?;

    let mut legend: Vec<(Glyph, String)> = Vec::new();

    // Ranges first, so lines are drawn over them.
    for (alpha, pick, label) in [
        (
            0.16,
            (|p: &ProjectedMonth| p.range95) as fn(&ProjectedMonth) -> Option<(f64, f64)>,
            "95% range",
        ),
        (0.32, |p: &ProjectedMonth| p.range80, "80% range"),
    ] {
        let pts: Vec<(f64, (f64, f64))> = c
            .projection
            .iter()
            .filter_map(|p| pick(p).map(|r| (x(p.month), r)))
            .collect();
        if pts.is_empty() {
            continue;
        }
        let mut poly: Vec<(f64, f64)> = pts.iter().map(|(x, (_, u))| (*x, *u)).collect();
        poly.extend(pts.iter().rev().map(|(x, (l, _))| (*x, *l)));
        chart
            .draw_series(std::iter::once(Polygon::new(
                poly,
                FORECAST.mix(alpha).filled(),
            )))
            .msg()?;
        legend.push((Glyph::Band(FORECAST, alpha), label.to_string()));
    }
    legend.reverse();

    let mut items: Vec<(Glyph, String)> = Vec::new();
    let reported = runs(c.history.iter().map(|h| (x(h.month), h.reported)));
    if !reported.is_empty() {
        for r in reported {
            chart
                .draw_series(LineSeries::new(r, REPORTED.stroke_width(1)))
                .msg()?;
        }
        items.push((Glyph::Line(REPORTED, 1), "reported".to_string()));
    }
    let cleaned = runs(c.history.iter().map(|h| (x(h.month), h.cleaned)));
    if !cleaned.is_empty() {
        for r in cleaned {
            chart
                .draw_series(LineSeries::new(r, CLEANED.stroke_width(2)))
                .msg()?;
        }
        items.push((Glyph::Line(CLEANED, 2), c.history_label.clone()));
    }
    let marked = |status: MonthStatus| {
        c.history
            .iter()
            .filter(move |h| h.status == status)
            .filter_map(move |h| h.cleaned.map(|v| (x(h.month), v)))
    };
    let changed: Vec<(f64, f64)> = c
        .history
        .iter()
        .zip(changed_by_cleaning(&c.history))
        .filter(|(_, on)| *on)
        .filter_map(|(h, _)| h.cleaned.map(|v| (x(h.month), v)))
        .collect();
    if !changed.is_empty() {
        chart
            .draw_series(
                changed
                    .iter()
                    .map(|&p| Circle::new(p, 3, ADJUSTED.filled())),
            )
            .msg()?;
        items.push((
            Glyph::Dot(ADJUSTED),
            "changed by cleaning (beyond the usual)".to_string(),
        ));
    }
    if marked(MonthStatus::PartlyFilled).next().is_some() {
        chart
            .draw_series(
                marked(MonthStatus::PartlyFilled)
                    .map(|p| Circle::new(p, 4, FILLED.stroke_width(2))),
            )
            .msg()?;
        items.push((
            Glyph::Ring(FILLED),
            "partly filled (some sites)".to_string(),
        ));
    }
    if marked(MonthStatus::Imputed).next().is_some() {
        chart
            .draw_series(marked(MonthStatus::Imputed).map(|p| {
                EmptyElement::at(p) + Rectangle::new([(-4, -4), (4, 4)], FILLED.stroke_width(2))
            }))
            .msg()?;
        items.push((Glyph::Square(FILLED), "imputed month".to_string()));
    }
    let outliers: Vec<(f64, f64)> = outlier_marks(&c.history)
        .into_iter()
        .map(|(m, v)| (x(m), v))
        .collect();
    if !outliers.is_empty() {
        chart
            .draw_series(
                outliers
                    .into_iter()
                    .map(|p| Cross::new(p, 6, OUTLIER.stroke_width(2))),
            )
            .msg()?;
        items.push((Glyph::Cross(OUTLIER), "outlier flagged".to_string()));
    }

    if let Some(first) = c.projection.first() {
        // Join the projection to the last history value, so the eye follows.
        let mut line: Vec<(f64, f64)> = Vec::new();
        if let Some((hm, hv)) = c
            .history
            .iter()
            .rev()
            .find_map(|h| h.cleaned.map(|v| (h.month, v)))
            .filter(|(m, _)| m.plus(1) == first.month)
        {
            line.push((x(hm), hv));
        }
        line.extend(c.projection.iter().map(|p| (x(p.month), p.point)));
        chart
            .draw_series(LineSeries::new(line, FORECAST.stroke_width(2)))
            .msg()?;
        items.push((Glyph::Line(FORECAST, 2), c.projection_label.clone()));
        draw_adjusted(&mut chart, c, &x, &mut items)?;
        let bridged: Vec<(f64, f64)> = c
            .projection
            .iter()
            .filter(|p| p.bridged)
            .map(|p| (x(p.month), p.point))
            .collect();
        if !bridged.is_empty() {
            chart
                .draw_series(
                    bridged
                        .into_iter()
                        .map(|p| Circle::new(p, 4, FORECAST.stroke_width(2))),
                )
                .msg()?;
            items.push((
                Glyph::Ring(FORECAST),
                "bridged month (not reported, before the common start)".to_string(),
            ));
        }
        items.extend(legend);

        // The mark is at the common start, after any bridged months.
        let first = c.projection.iter().find(|p| !p.bridged).unwrap_or(first);
        let xs = x(first.month) - 0.5;
        chart
            .draw_series(DashedLineSeries::new(
                vec![(xs, 0.0), (xs, ymax)],
                6,
                4,
                MUTED.stroke_width(1),
            ))
            .msg()?;
        let (px, py) = chart.backend_coord(&(xs, ymax));
        let (ox, oy) = plot.get_base_pixel();
        let label = format!("forecast from {}", month_label(first.month));
        plot.draw(&Text::new(
            label,
            (px - ox + 6, py - oy + 4),
            (FONT, 15).into_font().color(&MUTED),
        ))
        .msg()?;
    }
    draw_legend(&head, &items, (16, 62), WIDTH as i32 - 32)
}

fn draw_backtest<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    c: &ProductChart,
    bt: &BacktestPanel,
) -> Drawn {
    let (head, plot) = area.split_vertically(56);
    head.draw(&Text::new(
        cut(
            &format!(
                "Backtest of {}: what it would have forecast from each of {} past months, against the cleaned series",
                bt.model,
                bt.paths.len()
            ),
            150,
        ),
        (16, 6),
        (FONT, 19).into_font().color(&INK),
    ))
    .msg()?;
    let Some(first_origin) = bt.paths.iter().map(|p| p.origin).min() else {
        head.draw(&Text::new(
            "no backtest: the series is too short for any origin",
            (16, 30),
            (FONT, 16).into_font().color(&MUTED),
        ))
        .msg()?;
        return Ok(());
    };
    let last_target = bt
        .paths
        .iter()
        .flat_map(|p| p.points.iter().map(|q| q.0))
        .chain(c.history.last().map(|h| h.month))
        .max()
        .unwrap_or(first_origin);
    let from = first_origin.plus(-6);
    let actual: Vec<(YearMonth, f64)> = c
        .history
        .iter()
        .filter(|h| h.month >= from && h.month <= last_target)
        .filter_map(|h| h.cleaned.map(|v| (h.month, v)))
        .collect();
    let base = from;
    let x = |m: YearMonth| base.months_until(m) as f64;
    let mut ymax: f64 = actual.iter().map(|a| a.1).fold(0.0, f64::max);
    for p in &bt.paths {
        for q in &p.points {
            if q.1.is_finite() {
                ymax = ymax.max(q.1);
            }
        }
    }
    let ymax = nice_top(ymax);
    let mut chart = month_chart(
        &plot,
        base,
        base.months_until(last_target),
        ymax,
        5,
        &format!("{} per month", super::units_plural(c.units.as_deref())),
    )?;
    let value_at = |m: YearMonth| actual.iter().find(|a| a.0 == m).map(|a| a.1);
    for p in &bt.paths {
        let mut line: Vec<(f64, f64)> = Vec::new();
        if let Some(v) = value_at(p.origin) {
            line.push((x(p.origin), v));
        }
        line.extend(
            p.points
                .iter()
                .filter(|q| q.1.is_finite())
                .map(|q| (x(q.0), q.1)),
        );
        chart
            .draw_series(LineSeries::new(line, FORECAST.mix(0.55).stroke_width(1)))
            .msg()?;
    }
    chart
        .draw_series(LineSeries::new(
            actual.iter().map(|a| (x(a.0), a.1)),
            INK.stroke_width(2),
        ))
        .msg()?;
    chart
        .draw_series(
            bt.paths
                .iter()
                .filter_map(|p| value_at(p.origin).map(|v| (x(p.origin), v)))
                .map(|p| Circle::new(p, 3, FORECAST.filled())),
        )
        .msg()?;
    let ahead = bt.paths.iter().map(|p| p.points.len()).max().unwrap_or(0);
    let items = vec![
        (Glyph::Line(INK, 2), "cleaned series".to_string()),
        (
            Glyph::Line(FORECAST, 1),
            format!("forecast made at one origin (1–{ahead} months ahead)"),
        ),
        (Glyph::Dot(FORECAST), "origin".to_string()),
    ];
    draw_legend(&head, &items, (16, 32), WIDTH as i32 - 32)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ym(y: i32, m: u32) -> YearMonth {
        YearMonth::new(y, m).unwrap()
    }

    fn chart(history: Vec<HistoryMonth>, projection: Vec<ProjectedMonth>) -> ProductChart {
        ProductChart {
            title: "Test product".into(),
            subtitle: String::new(),
            history_label: "cleaned".into(),
            projection_label: "projection (naive)".into(),
            history,
            projection,
            backtest: None,
            adjusted: Vec::new(),
            units: None,
        }
    }

    fn month(t: i64, v: Option<f64>, status: MonthStatus) -> HistoryMonth {
        HistoryMonth {
            month: ym(2024, 1).plus(t),
            reported: v,
            cleaned: v,
            status,
            outlier: false,
        }
    }

    #[test]
    fn odd_series_draw_without_error() {
        // Nothing at all.
        let svg = product_svg(&chart(vec![], vec![])).unwrap();
        assert!(svg.contains("no data to draw"));
        // All zeros, a gap, no projection: no forecast line or start mark.
        let h: Vec<_> = (0..18)
            .map(|t| month(t, (t != 5).then_some(0.0), MonthStatus::Reported))
            .collect();
        let svg = product_svg(&chart(h.clone(), vec![])).unwrap();
        assert!(svg.contains("Jan 2025"));
        assert!(!svg.contains("forecast from"));
        assert!(!svg.contains("80% range"));
        // A projection without ranges: the line and start, no range legend.
        let p = vec![ProjectedMonth {
            month: ym(2025, 7),
            point: 3.0,
            range80: None,
            range95: None,
            bridged: false,
        }];
        let svg = product_svg(&chart(h.clone(), p)).unwrap();
        assert!(svg.contains("forecast from Jul 2025"));
        assert!(!svg.contains("95% range"));
        assert!(!svg.contains("bridged month"));
        // Two bridged months: marked, and the start mark at the common start.
        let p: Vec<_> = (0..4)
            .map(|k| ProjectedMonth {
                month: ym(2025, 7).plus(k),
                point: 3.0,
                range80: None,
                range95: None,
                bridged: k < 2,
            })
            .collect();
        let svg = product_svg(&chart(h, p)).unwrap();
        assert!(svg.contains("bridged month"));
        assert!(svg.contains("forecast from Sep 2025"), "{svg}");
    }

    #[test]
    fn only_months_changed_beyond_the_usual_are_marked() {
        // Every month scaled up 20% (as for an 83% reporting rate), one
        // scaled 50% and one moved 25%: the usual uplift is not marked, the
        // two that stand more than 10 points from it are.
        let scaled = |t: i64, r: f64, c: f64| HistoryMonth {
            month: ym(2024, 1).plus(t),
            reported: Some(r),
            cleaned: Some(c),
            status: MonthStatus::Adjusted,
            outlier: false,
        };
        let mut h: Vec<_> = (0..10).map(|t| scaled(t, 100.0, 120.0)).collect();
        h.push(scaled(10, 100.0, 150.0));
        h.push(scaled(11, 100.0, 95.0));
        h.push(scaled(12, 100.0, 129.0));
        h.push(scaled(13, 0.0, 0.0));
        h.push(scaled(14, 0.0, 10.0));
        let t = typical_change(&h).unwrap();
        assert!((t - 0.2).abs() < 1e-12, "{t}");
        let marked: Vec<usize> = changed_by_cleaning(&h)
            .iter()
            .enumerate()
            .filter(|(_, m)| **m)
            .map(|(i, _)| i)
            .collect();
        assert_eq!(marked, vec![10, 11, 14]);
        // A partly filled month keeps its own mark, never the dot.
        let mut p = scaled(0, 100.0, 300.0);
        p.status = MonthStatus::PartlyFilled;
        assert_eq!(changed_by_cleaning(&[p]), vec![false]);
    }

    #[test]
    fn outliers_are_marked_at_the_reported_value_and_units_named() {
        // The demo's artemether-lumefantrine 2023-05: reported 13,975,
        // cleaned 6,620. The PNG put its cross on 6,620 while the report's
        // chart put it on 13,975; both now mark the reported value.
        let mut m = month(4, Some(13_975.0), MonthStatus::PartlyFilled);
        m.cleaned = Some(6_620.0);
        m.outlier = true;
        let mut h = vec![month(3, Some(6_000.0), MonthStatus::Reported), m];
        assert_eq!(outlier_marks(&h), vec![(ym(2024, 5), 13_975.0)]);
        h[1].reported = None;
        assert_eq!(outlier_marks(&h), vec![(ym(2024, 5), 6_620.0)]);
        // The axis said "base units per month" whatever the product was
        // counted in.
        let mut c = chart(h, vec![]);
        assert!(product_svg(&c)
            .unwrap()
            .contains("consumption (base units per month)"));
        c.units = Some("course".into());
        let svg = product_svg(&c).unwrap();
        assert!(svg.contains("consumption (courses per month)"), "{svg}");
        assert!(!svg.contains("base units"));
    }

    #[test]
    fn legend_names_only_the_marks_present() {
        let mut doubled = month(2, Some(7.0), MonthStatus::Adjusted);
        doubled.cleaned = Some(14.0);
        let h = vec![
            month(0, Some(5.0), MonthStatus::Reported),
            month(1, Some(6.0), MonthStatus::Imputed),
            doubled,
        ];
        let svg = product_svg(&chart(h, vec![])).unwrap();
        assert!(svg.contains("imputed month"));
        assert!(svg.contains("changed by cleaning"));
        assert!(!svg.contains("partly filled"));
        assert!(!svg.contains("outlier flagged"));
    }

    #[test]
    fn png_text_comes_from_the_embedded_font() {
        // The same chart twice gives the same bytes; another title changes
        // pixels in the title's place only, so text is drawn, and drawn
        // the same on any machine.
        let dir = tempfile::tempdir().unwrap();
        let h: Vec<_> = (0..12)
            .map(|t| month(t, Some(10.0 + t as f64), MonthStatus::Reported))
            .collect();
        let mut c = chart(h, vec![]);
        let draw = |c: &ProductChart, name: &str| {
            let p = dir.path().join(name);
            product_png(&p, c).unwrap();
            let mut r = png::Decoder::new(std::fs::File::open(&p).unwrap())
                .read_info()
                .unwrap();
            let mut buf = vec![0; r.output_buffer_size()];
            r.next_frame(&mut buf).unwrap();
            (std::fs::read(&p).unwrap(), buf)
        };
        let (a, pa) = draw(&c, "a.png");
        let (b, _) = draw(&c, "b.png");
        assert_eq!(a, b);
        c.title = "Another product".into();
        let (_, pc) = draw(&c, "c.png");
        let changed: Vec<usize> = pa
            .chunks(3)
            .zip(pc.chunks(3))
            .enumerate()
            .filter(|(_, (x, y))| x != y)
            .map(|(i, _)| i / WIDTH as usize)
            .collect();
        assert!(changed.len() > 100, "title pixels drawn: {}", changed.len());
        assert!(
            changed.iter().all(|row| *row < 40),
            "only the title row changes"
        );
    }
}
