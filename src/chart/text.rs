//! PNG text drawn right: a bitmap backend whose text is laid out on the
//! font's baseline with each glyph's own bearing (plotters 0.3.7 places
//! each glyph by its bounding box, which lifts points and commas and
//! uneven spacing). Everything but text goes to plotters' bitmap backend.

use ab_glyph::{point, Font, FontRef, PxScale, ScaleFont};
use plotters::prelude::BitMapBackend;
use plotters_backend::text_anchor::{HPos, VPos};
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingBackend, DrawingErrorKind,
};

use super::FONT_BYTES;

type Error<'a> = DrawingErrorKind<<BitMapBackend<'a> as DrawingBackend>::ErrorType>;

/// The embedded font, parsed once.
fn font() -> Option<&'static FontRef<'static>> {
    static FONT: std::sync::OnceLock<Option<FontRef<'static>>> = std::sync::OnceLock::new();
    FONT.get_or_init(|| FontRef::try_from_slice(FONT_BYTES).ok())
        .as_ref()
}

/// Pixel scale of a plotters font size. The SVG backend writes a CSS
/// font-size of `size / 1.24`; the same em size is used here, so PNG and
/// SVG charts look alike.
fn scale(f: &FontRef<'static>, size: f64) -> PxScale {
    let em = (size / 1.24) as f32;
    // PxScale is the height ascent − descent in pixels.
    let height = f
        .units_per_em()
        .map(|u| f.height_unscaled() / u)
        .unwrap_or(1.0);
    PxScale::from(em * height)
}

/// Advance width of `text` in pixels.
fn width(f: &FontRef<'static>, s: PxScale, text: &str) -> f32 {
    let sf = f.as_scaled(s);
    let mut w = 0.0;
    let mut prev = None;
    for c in text.chars() {
        let g = sf.glyph_id(c);
        if let Some(p) = prev {
            w += sf.kern(p, g);
        }
        w += sf.h_advance(g);
        prev = Some(g);
    }
    w
}

/// Width in pixels of `text` drawn at plotters font size `size` with the
/// embedded font (the same in PNG and SVG charts).
pub(super) fn measure(text: &str, size: f64) -> i32 {
    match font() {
        Some(f) => width(f, scale(f, size), text).ceil() as i32,
        None => (text.chars().count() as f64 * size * 0.45) as i32,
    }
}

/// A bitmap backend with correct text.
pub(super) struct PngCanvas<'a>(pub BitMapBackend<'a>);

impl<'a> DrawingBackend for PngCanvas<'a> {
    type ErrorType = <BitMapBackend<'a> as DrawingBackend>::ErrorType;

    fn get_size(&self) -> (u32, u32) {
        self.0.get_size()
    }
    fn ensure_prepared(&mut self) -> Result<(), Error<'a>> {
        self.0.ensure_prepared()
    }
    fn present(&mut self) -> Result<(), Error<'a>> {
        self.0.present()
    }
    fn draw_pixel(&mut self, p: BackendCoord, c: BackendColor) -> Result<(), Error<'a>> {
        self.0.draw_pixel(p, c)
    }
    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), Error<'a>> {
        self.0.draw_line(from, to, style)
    }
    fn draw_rect<S: BackendStyle>(
        &mut self,
        a: BackendCoord,
        b: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), Error<'a>> {
        self.0.draw_rect(a, b, style, fill)
    }
    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), Error<'a>> {
        self.0.draw_path(path, style)
    }
    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), Error<'a>> {
        self.0.draw_circle(center, radius, style, fill)
    }
    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), Error<'a>> {
        self.0.fill_polygon(vert, style)
    }
    fn blit_bitmap(
        &mut self,
        pos: BackendCoord,
        size: (u32, u32),
        src: &[u8],
    ) -> Result<(), Error<'a>> {
        self.0.blit_bitmap(pos, size, src)
    }

    fn estimate_text_size<T: BackendTextStyle>(
        &self,
        text: &str,
        style: &T,
    ) -> Result<(u32, u32), Error<'a>> {
        let Some(f) = font() else {
            return self.0.estimate_text_size(text, style);
        };
        let s = scale(f, style.size());
        Ok((
            width(f, s, text).ceil() as u32,
            (style.size() / 1.24) as u32,
        ))
    }

    fn draw_text<T: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &T,
        pos: BackendCoord,
    ) -> Result<(), Error<'a>> {
        let color = style.color();
        let Some(f) = font() else {
            return self.0.draw_text(text, style, pos);
        };
        if color.alpha == 0.0 {
            return Ok(());
        }
        let s = scale(f, style.size());
        let sf = f.as_scaled(s);
        let em = (style.size() / 1.24) as f32;
        let w = width(f, s, text);
        let x0 = match style.anchor().h_pos {
            HPos::Left => 0.0,
            HPos::Center => -w / 2.0,
            HPos::Right => -w,
        };
        // Baseline offsets as the SVG backend's `dy` (0.76em, ±0.5ex).
        let ex = 0.55 * em;
        let baseline = match style.anchor().v_pos {
            VPos::Top => 0.76 * em,
            VPos::Center => 0.5 * ex,
            VPos::Bottom => -0.5 * ex,
        };
        let trans = style.transform();
        let mut pen = x0;
        let mut prev = None;
        for c in text.chars() {
            let id = sf.glyph_id(c);
            if let Some(p) = prev {
                pen += sf.kern(p, id);
            }
            prev = Some(id);
            let glyph = id.with_scale_and_position(s, point(pen, baseline));
            pen += sf.h_advance(id);
            let Some(outline) = f.outline_glyph(glyph) else {
                continue;
            };
            let b = outline.px_bounds();
            let mut result = Ok(());
            outline.draw(|gx, gy, cover| {
                if result.is_err() || cover <= 0.0 {
                    return;
                }
                let (dx, dy) =
                    trans.transform(b.min.x as i32 + gx as i32, b.min.y as i32 + gy as i32);
                let px = BackendColor {
                    alpha: color.alpha * f64::from(cover.min(1.0)),
                    rgb: color.rgb,
                };
                result = self.0.draw_pixel((pos.0 + dx, pos.1 + dy), px);
            });
            result?;
        }
        Ok(())
    }
}

/// The characters of `text` the embedded font has no glyph for (each
/// once, in order; white space and control characters are not drawn and
/// not counted). The PNG backend draws them as the font's empty box.
pub(super) fn undrawable(text: &str) -> Vec<char> {
    let Some(f) = font() else {
        return Vec::new();
    };
    let mut out: Vec<char> = Vec::new();
    for c in text.chars() {
        if !c.is_whitespace() && !c.is_control() && f.glyph_id(c).0 == 0 && !out.contains(&c) {
            out.push(c);
        }
    }
    out
}
