//! Charts drawn with plotters, to SVG strings and PNG files.
//!
//! Text is drawn with the DejaVu Sans font embedded in the binary
//! (`assets/fonts`, Bitstream Vera licence), so PNG charts look the same on
//! a fresh machine with no fonts installed. SVG charts name the same font
//! first and fall back to the viewer's sans-serif.
//!
//! The chart functions take plain values ([`ProductChart`], [`ScoreBar`]),
//! so any command can draw them: `forecast` and `report` from a forecast's
//! outputs, a later review from a saved forecast and new actuals.

mod crosscheck;
mod overview;
mod plan;
mod product;
mod text;

use std::path::Path;

use plotters::prelude::*;

pub use crosscheck::{crosscheck_png, crosscheck_svg, CrossCheckChart, EstimateBar};
pub use overview::{overview_png, overview_svg, ScoreBar};
pub use plan::{stock_png, stock_svg, StockChart, StockMonth};
pub use product::{
    changed_by_cleaning, outlier_marks, product_png, product_svg, typical_change, BacktestPanel,
    BacktestPath, HistoryMonth, ProductChart, ProjectedMonth, MARKED_CHANGE,
};

use crate::calendar::YearMonth;
use crate::error::{Error, Result};

/// The font family name charts are drawn with (registered with plotters,
/// and written into SVG text, where viewers without it use sans-serif).
pub const FONT: &str = "DejaVu Sans, sans-serif";

static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Registers the embedded font with plotters once per process.
fn register_font() -> Result<()> {
    static ONCE: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    let ok = *ONCE.get_or_init(|| {
        plotters::style::register_font(FONT, FontStyle::Normal, FONT_BYTES).is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(Error::Chart {
            what: "any product".into(),
            message: "the embedded font could not be read".into(),
        })
    }
}

/// A warning for names drawn into PNG chart titles that hold characters
/// the embedded font (DejaVu Sans: Latin, Greek, Cyrillic, Arabic, Hebrew
/// and more, but no Chinese, Japanese or Korean) has no glyph for: in the
/// PNG files they show as empty boxes, while SVG files and the HTML
/// reports, drawn by the viewer's fonts, show them. `None` when every
/// name is drawn whole.
pub fn png_names_warning<'a>(names: impl IntoIterator<Item = &'a str>) -> Option<String> {
    let mut count = 0usize;
    let mut first: Option<(&str, String)> = None;
    let names: std::collections::BTreeSet<&str> = names.into_iter().collect();
    for name in names {
        let missing = text::undrawable(name);
        if missing.is_empty() {
            continue;
        }
        count += 1;
        first.get_or_insert_with(|| (name, missing.into_iter().collect()));
    }
    let (name, chars) = first?;
    Some(format!(
        "{count} name(s) drawn in PNG chart titles hold characters the charts' font (DejaVu Sans) cannot draw, shown there as empty boxes (first: '{name}', characters {chars}); the SVG files and the HTML report show them in full"
    ))
}

/// Colours of the charts; data in blues, forecasts in teal, marks in
/// colours from the Okabe–Ito palette (distinguishable with the common
/// colour-vision deficiencies).
pub(crate) mod palette {
    use plotters::style::RGBColor;
    /// Text and axes.
    pub const INK: RGBColor = RGBColor(0x1f, 0x29, 0x33);
    /// Secondary text.
    pub const MUTED: RGBColor = RGBColor(0x5f, 0x6b, 0x7a);
    /// Grid lines.
    pub const GRID: RGBColor = RGBColor(0xe4, 0xe7, 0xeb);
    /// Reported consumption (before cleaning).
    pub const REPORTED: RGBColor = RGBColor(0x9a, 0xa0, 0xa6);
    /// Cleaned series.
    pub const CLEANED: RGBColor = RGBColor(0x1b, 0x5e, 0x8c);
    /// Adjusted months (Okabe–Ito orange).
    pub const ADJUSTED: RGBColor = RGBColor(0xe6, 0x9f, 0x00);
    /// Filled (imputed) months (Okabe–Ito reddish purple).
    pub const FILLED: RGBColor = RGBColor(0xcc, 0x79, 0xa7);
    /// Outliers (Okabe–Ito vermilion).
    pub const OUTLIER: RGBColor = RGBColor(0xd5, 0x5e, 0x00);
    /// Forecasts and their ranges (Okabe–Ito bluish green, darker).
    pub const FORECAST: RGBColor = RGBColor(0x00, 0x7a, 0x5e);
    /// Over-forecast bias.
    pub const OVER: RGBColor = RGBColor(0x56, 0xb4, 0xe9);
    /// Under-forecast bias.
    pub const UNDER: RGBColor = RGBColor(0xe6, 0x9f, 0x00);
}

/// The unit a product's quantities are counted in, plural, for axis titles
/// and captions: "tests" for a product configured with `units = "test"`,
/// "base units" when none is configured. A single English-looking word (or
/// the last word of a phrase: "blister pack" → "blister packs") gets the
/// regular plural; anything else is left as written ("ml", "IU", "10 ml
/// vial x5", a name already ending in s), as a wrong plural reads worse than
/// none.
pub fn units_plural(units: Option<&str>) -> String {
    let Some(u) = units.map(str::trim).filter(|u| !u.is_empty()) else {
        return "base units".to_string();
    };
    let last = u.rsplit(char::is_whitespace).next().unwrap_or(u);
    let word = last.len() >= 3
        && last.chars().all(|c| c.is_ascii_alphabetic())
        && last.chars().skip(1).all(|c| c.is_ascii_lowercase())
        && !matches!(last, "mcg" | "mmol");
    if !word || last.ends_with('s') {
        return u.to_string();
    }
    let stem = &u[..u.len() - 1];
    let before_y = last.chars().rev().nth(1).unwrap_or('a');
    if last.ends_with('y') && !"aeiou".contains(before_y) {
        format!("{stem}ies")
    } else if ["x", "z", "ch", "sh"].iter().any(|e| last.ends_with(e)) {
        format!("{u}es")
    } else {
        format!("{u}s")
    }
}

/// Short month label: "Jan 2024".
pub fn month_label(m: YearMonth) -> String {
    const NAMES: [&str; 12] = [
        "Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec",
    ];
    let name = NAMES
        .get(m.month().saturating_sub(1) as usize)
        .copied()
        .unwrap_or("?");
    format!("{name} {}", m.year())
}

/// A signed number with one decimal, rounded first and signed after: "+2.3",
/// "-0.4", and "0.0" for anything that rounds to zero (never "-0.0" or
/// "+0.0", which would claim a direction that is not there).
pub fn fmt_signed(v: f64) -> String {
    let s = format!("{v:+.1}");
    if s[1..].chars().all(|c| c == '0' || c == '.') {
        "0.0".to_string()
    } else {
        s
    }
}

/// An axis label: [`fmt_quantity`] below a million, then millions ("45M",
/// "2.5M") and billions ("1.2bn"), so that national volumes fit beside the
/// axis title instead of running into it.
pub fn fmt_axis(v: f64) -> String {
    let a = v.abs();
    let (scaled, unit) = if a >= 1e9 {
        (v / 1e9, "bn")
    } else if a >= 1e6 {
        (v / 1e6, "M")
    } else {
        return fmt_quantity(v);
    };
    let s = format!("{scaled:.2}");
    format!("{}{unit}", s.trim_end_matches('0').trim_end_matches('.'))
}

/// A quantity for an axis or a label: thousands grouped with commas,
/// decimals only for small numbers ("12,500", "85", "2.5").
pub fn fmt_quantity(v: f64) -> String {
    if !v.is_finite() {
        return String::new();
    }
    let a = v.abs();
    if a < 10.0 && a.fract().abs() > 1e-9 {
        let s = format!("{v:.2}");
        return s.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    if a >= 1e15 {
        // Beyond any real quantity, and near where a whole number stops
        // fitting: written with its power of ten, never clipped.
        return format!("{v:.3e}");
    }
    let r = v.round() as i64;
    let digits = r.unsigned_abs().to_string();
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    if r < 0 {
        format!("-{out}")
    } else {
        out
    }
}

/// A figure as an explanation writes it (a population, a share, units per
/// service): thousands grouped with commas like [`fmt_quantity`], but
/// exact to four decimals, without trailing zeros ("1,500,000", "0.55",
/// "4", "0.0083").
pub fn fmt_figure(v: f64) -> String {
    let s = crate::output::fmt_num(v);
    let (sign, rest) = match s.strip_prefix('-') {
        Some(r) => ("-", r),
        None => ("", s.as_str()),
    };
    let (int, frac) = match rest.split_once('.') {
        Some((i, f)) => (i, Some(f)),
        None => (rest, None),
    };
    let mut out = String::from(sign);
    for (i, c) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(c);
    }
    if let Some(f) = frac {
        out.push('.');
        out.push_str(f);
    }
    out
}

/// "unit" or "units" after the figure `count` as [`fmt_figure`] writes it:
/// singular for exactly 1.
pub fn units_word(count: &str) -> &'static str {
    if count == "1" {
        "unit"
    } else {
        "units"
    }
}

/// A file name stem for a product's charts: lowercase ASCII letters, digits
/// and hyphens only (so no path separator, no `..`, nothing hidden), at most
/// 48 characters, then a hyphen and 8 hex digits of the SHA-256 of the full
/// name, so two names that read alike after cleaning still get two files.
pub fn file_stem(product: &str) -> String {
    let mut s = String::new();
    for c in product.chars() {
        if c.is_ascii_alphanumeric() {
            s.push(c.to_ascii_lowercase());
        } else if !s.ends_with('-') {
            s.push('-');
        }
    }
    let mut s: String = s.trim_matches('-').chars().take(48).collect();
    while s.ends_with('-') {
        s.pop();
    }
    if s.is_empty() {
        s.push_str("product");
    }
    let hash = crate::output::sha256_hex(product.as_bytes());
    format!("{s}-{}", &hash[..8])
}

/// File name stems for a list of products, unique even if two hashes
/// collided (a counter is then added).
pub fn file_stems(products: &[&str]) -> Vec<String> {
    let mut seen = std::collections::HashSet::new();
    products
        .iter()
        .map(|p| {
            let base = file_stem(p);
            let mut stem = base.clone();
            let mut k = 2;
            while !seen.insert(stem.clone()) {
                stem = format!("{base}-{k}");
                k += 1;
            }
            stem
        })
        .collect()
}

/// A linear axis over `f64` with the tick positions given: bold ticks
/// (labelled, with grid lines) and light grid lines.
#[derive(Debug, Clone)]
struct KeyAxis {
    lo: f64,
    hi: f64,
    bold: Vec<f64>,
    light: Vec<f64>,
}

impl plotters::coord::ranged1d::Ranged for KeyAxis {
    type FormatOption = plotters::coord::ranged1d::DefaultFormatting;
    type ValueType = f64;

    fn map(&self, v: &f64, limit: (i32, i32)) -> i32 {
        if self.hi <= self.lo {
            return (limit.0 + limit.1) / 2;
        }
        let share = (v - self.lo) / (self.hi - self.lo);
        limit.0 + (share * f64::from(limit.1 - limit.0) + 1e-3).floor() as i32
    }

    fn key_points<H: plotters::coord::ranged1d::KeyPointHint>(&self, hint: H) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            self.light.clone()
        } else {
            self.bold.clone()
        }
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.lo..self.hi
    }
}

/// Turns any displayable drawing error into a message.
trait OrMessage<T> {
    fn msg(self) -> std::result::Result<T, String>;
}

impl<T, E: std::fmt::Display> OrMessage<T> for std::result::Result<T, E> {
    fn msg(self) -> std::result::Result<T, String> {
        self.map_err(|e| e.to_string())
    }
}

type Drawn = std::result::Result<(), String>;

/// Draws onto an SVG string of the given size.
fn render_svg<F>(what: &str, size: (u32, u32), draw: F) -> Result<String>
where
    F: FnOnce(&DrawingArea<SVGBackend<'_>, plotters::coord::Shift>) -> Drawn,
{
    register_font()?;
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
        draw(&root).map_err(|message| Error::Chart {
            what: what.to_string(),
            message,
        })?;
        root.present().map_err(|e| Error::Chart {
            what: what.to_string(),
            message: e.to_string(),
        })?;
    }
    Ok(out)
}

/// Draws onto an RGB bitmap and writes it as a PNG file (atomically).
fn render_png<F>(path: &Path, what: &str, size: (u32, u32), draw: F) -> Result<()>
where
    F: FnOnce(&DrawingArea<text::PngCanvas<'_>, plotters::coord::Shift>) -> Drawn,
{
    register_font()?;
    let mut buf = vec![255u8; size.0 as usize * size.1 as usize * 3];
    {
        let root = text::PngCanvas(BitMapBackend::with_buffer(&mut buf, size)).into_drawing_area();
        draw(&root).map_err(|message| Error::Chart {
            what: what.to_string(),
            message,
        })?;
        root.present().map_err(|e| Error::Chart {
            what: what.to_string(),
            message: e.to_string(),
        })?;
    }
    crate::output::write_atomic(path, |w| {
        let mut enc = png::Encoder::new(w, size.0, size.1);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        enc.set_compression(png::Compression::Default);
        let mut writer = enc.write_header().map_err(std::io::Error::other)?;
        writer
            .write_image_data(&buf)
            .map_err(std::io::Error::other)?;
        writer.finish().map_err(std::io::Error::other)
    })
}

/// A legend entry's sample.
#[derive(Clone, Copy)]
enum Glyph {
    Line(RGBColor, u32),
    Band(RGBColor, f64),
    Dot(RGBColor),
    Ring(RGBColor),
    Square(RGBColor),
    Cross(RGBColor),
}

/// Draws a one-line legend starting at `(x, y)` (pixels of `area`); wraps
/// to a second line when the items do not fit in `width`.
fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    items: &[(Glyph, String)],
    (x0, y0): (i32, i32),
    width: i32,
) -> Drawn {
    const SIZE: f64 = 16.0;
    let font = (FONT, SIZE).into_font().color(&palette::INK);
    let (mut x, mut y) = (x0, y0);
    for (glyph, label) in items {
        let w = 26 + text::measure(label, SIZE) + 18;
        if x > x0 && x + w > x0 + width {
            x = x0;
            y += 20;
        }
        let cy = y + 7;
        match *glyph {
            Glyph::Line(c, wd) => {
                area.draw(&PathElement::new(
                    vec![(x, cy), (x + 20, cy)],
                    c.stroke_width(wd),
                ))
                .msg()?;
            }
            Glyph::Band(c, a) => {
                area.draw(&Rectangle::new(
                    [(x, cy - 6), (x + 20, cy + 6)],
                    c.mix(a).filled(),
                ))
                .msg()?;
            }
            Glyph::Dot(c) => {
                area.draw(&Circle::new((x + 10, cy), 3, c.filled())).msg()?;
            }
            Glyph::Ring(c) => {
                area.draw(&Circle::new((x + 10, cy), 4, c.stroke_width(2)))
                    .msg()?;
            }
            Glyph::Square(c) => {
                area.draw(&Rectangle::new(
                    [(x + 6, cy - 4), (x + 14, cy + 4)],
                    c.stroke_width(2),
                ))
                .msg()?;
            }
            Glyph::Cross(c) => {
                area.draw(&Cross::new((x + 10, cy), 5, c.stroke_width(2)))
                    .msg()?;
            }
        }
        area.draw(&Text::new(label.clone(), (x + 26, y), font.clone()))
            .msg()?;
        x += w;
    }
    Ok(())
}

/// Cuts a label to `n` characters with an ellipsis in the middle, control
/// characters shown as spaces (chart labels and terminal table cells).
///
/// The cut is in the middle, not at the end: names of one product in
/// several strengths or pack sizes differ at their ends ("… tablet x6",
/// "… tablet x24"), so the start and the end are both kept (about two
/// thirds of the room for the start, one third for the end).
pub fn cut(s: &str, n: usize) -> String {
    let clean: Vec<char> = s
        .chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect();
    if clean.len() <= n {
        return clean.into_iter().collect();
    }
    let room = n.saturating_sub(1);
    let tail = room / 3;
    let head = room - tail;
    let mut out: String = clean[..head]
        .iter()
        .collect::<String>()
        .trim_end()
        .to_string();
    out.push('…');
    let end: String = clean[clean.len() - tail..].iter().collect();
    out.push_str(end.trim_start());
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn units_are_named_in_plural_or_left_as_written() {
        // The demo's units (datasets/demo/run.toml); before, every chart
        // said "base units" whatever the product was counted in.
        for (u, want) in [
            ("test", "tests"),
            ("course", "courses"),
            ("piece", "pieces"),
            ("sachet", "sachets"),
            ("vial", "vials"),
            ("bottle", "bottles"),
            ("box", "boxes"),
            ("blister pack", "blister packs"),
            ("Ampoule", "Ampoules"),
            ("tablets", "tablets"),
            ("ml", "ml"),
            ("IU", "IU"),
            ("mcg", "mcg"),
            ("vial x10", "vial x10"),
            ("comprimé", "comprimé"),
        ] {
            assert_eq!(units_plural(Some(u)), want, "{u}");
        }
        assert_eq!(units_plural(None), "base units");
        assert_eq!(units_plural(Some("  ")), "base units");
    }

    #[test]
    fn png_titles_warn_only_for_scripts_the_font_lacks() {
        // DejaVu Sans covers Latin, Greek, Cyrillic, Arabic and Hebrew and
        // has no CJK ideographs (the DejaVu project's coverage tables; from
        // memory). The check reads the embedded font itself.
        assert_eq!(
            text::undrawable("Paracétamol Парацетамол αβ محلول"),
            Vec::<char>::new()
        );
        assert_eq!(
            text::undrawable("阿莫西林 250mg 阿"),
            vec!['阿', '莫', '西', '林']
        );
        assert!(png_names_warning(["ORS sachet", "Парацетамол"]).is_none());
        let w = png_names_warning(["ORS", "阿莫西林 250mg", "阿莫西林 500mg"]).unwrap();
        assert!(
            w.starts_with("2 name(s)") && w.contains("'阿莫西林 250mg'"),
            "{w}"
        );
    }

    #[test]
    fn axis_labels_shorten_millions_and_billions() {
        // SI-style short scale (common practice on charts: M = 10^6,
        // bn = 10^9).
        assert_eq!(fmt_axis(950_000.0), "950,000");
        assert_eq!(fmt_axis(50_000_000.0), "50M");
        assert_eq!(fmt_axis(2_500_000.0), "2.5M");
        assert_eq!(fmt_axis(1.25e11), "125bn");
        assert_eq!(fmt_axis(0.0), "0");
        // Never clipped to the largest whole number a computer counts.
        assert_eq!(fmt_quantity(1e31), "1.000e31");
        assert_eq!(fmt_quantity(999_999_999_999_999.0), "999,999,999,999,999");
    }

    #[test]
    fn signed_numbers_round_before_the_sign() {
        assert_eq!(fmt_signed(-0.04), "0.0");
        assert_eq!(fmt_signed(0.049), "0.0");
        assert_eq!(fmt_signed(-0.0), "0.0");
        assert_eq!(fmt_signed(-0.06), "-0.1");
        assert_eq!(fmt_signed(2.345), "+2.3");
        assert_eq!(fmt_signed(-13.27), "-13.3");
    }

    #[test]
    fn cut_keeps_both_ends_so_pack_sizes_stay_apart() {
        // Four pack sizes of one product (common practice: one product is
        // stocked in several pack sizes, named by a suffix).
        let names = [
            "Artemether-lumefantrine 20/120 mg tablet x6",
            "Artemether-lumefantrine 20/120 mg tablet x12",
            "Artemether-lumefantrine 20/120 mg tablet x18",
            "Artemether-lumefantrine 20/120 mg tablet x24",
        ];
        let cut_names: Vec<String> = names.iter().map(|n| cut(n, 40)).collect();
        for (i, a) in cut_names.iter().enumerate() {
            assert!(a.chars().count() <= 40, "{a}");
            assert!(a.contains('…'), "{a}");
            assert!(a.starts_with("Artemether-lumefantrine"), "{a}");
            for b in &cut_names[i + 1..] {
                assert_ne!(a, b, "two names cut to the same label");
            }
        }
        assert!(cut_names[3].ends_with("tablet x24"), "{}", cut_names[3]);
        // Short names and exact fits are kept whole; a tab becomes a space.
        assert_eq!(cut("Zinc\t20 mg", 40), "Zinc 20 mg");
        assert_eq!(cut("abcdef", 6), "abcdef");
        assert_eq!(cut("abcdefg", 4), "ab…g");
        assert_eq!(cut("abc", 0).chars().count(), 1);
    }

    #[test]
    fn stems_are_safe_and_unique() {
        let names = [
            "../../etc/passwd",
            "a/b",
            "a\\b",
            "a:b",
            "..",
            "",
            "Zinc 20 mg",
            "<script>alert(1)</script>",
            "Ünïcödé",
        ];
        let stems = file_stems(&names);
        let set: std::collections::HashSet<_> = stems.iter().collect();
        assert_eq!(set.len(), names.len(), "{stems:?}");
        for s in &stems {
            assert!(
                !s.contains('/') && !s.contains('\\') && !s.contains(".."),
                "{s}"
            );
            assert!(!s.starts_with('-') && !s.starts_with('.'), "{s}");
            assert!(s
                .chars()
                .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-'));
            assert!(s.len() <= 48 + 9);
        }
        assert!(stems[6].starts_with("zinc-20-mg-"));
        // Same name, same stem (charts of a rerun overwrite their own files).
        assert_eq!(file_stem("Zinc 20 mg"), stems[6]);
    }

    #[test]
    fn quantities_read_easily() {
        assert_eq!(fmt_quantity(12500.4), "12,500");
        assert_eq!(fmt_quantity(1_234_567.0), "1,234,567");
        assert_eq!(fmt_quantity(-4200.0), "-4,200");
        assert_eq!(fmt_quantity(85.0), "85");
        assert_eq!(fmt_quantity(2.5), "2.5");
        assert_eq!(fmt_quantity(0.0), "0");
    }

    #[test]
    fn figures_are_grouped_and_exact() {
        assert_eq!(fmt_figure(1_500_000.0), "1,500,000");
        assert_eq!(fmt_figure(0.55), "0.55");
        assert_eq!(fmt_figure(4.0), "4");
        assert_eq!(fmt_figure(1.0 / 120.0), "0.0083");
        assert_eq!(fmt_figure(12_345.675), "12,345.675");
        assert_eq!(fmt_figure(-1234.5), "-1,234.5");
        assert_eq!(fmt_figure(0.0), "0");
        assert_eq!(units_word(&fmt_figure(1.0)), "unit");
        assert_eq!(units_word(&fmt_figure(1.5)), "units");
    }

    #[test]
    fn month_labels() {
        assert_eq!(month_label(YearMonth::new(2024, 1).unwrap()), "Jan 2024");
        assert_eq!(month_label(YearMonth::new(2025, 12).unwrap()), "Dec 2025");
    }
}
