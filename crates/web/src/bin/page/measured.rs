//! A plotters backend for the page's canvas that measures text with the canvas itself.
//!
//! plotters' own text measuring in the browser adds a `<span>` with an inline `style`
//! attribute to the page, which the page's Content-Security-Policy (no 'unsafe-inline')
//! blocks and reports as an error. This backend draws through plotters-canvas and answers
//! text sizes from `measureText` instead; the charts crate asks the backend, never the font.

use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingBackend, DrawingErrorKind,
};
use plotters_canvas::CanvasBackend;
use wasm_bindgen::JsCast;
use web_sys::{CanvasRenderingContext2d, HtmlCanvasElement};

pub struct MeasuredCanvas {
    inner: CanvasBackend,
    context: CanvasRenderingContext2d,
}

impl MeasuredCanvas {
    /// `None` when the canvas has no 2D context.
    pub fn new(canvas: HtmlCanvasElement) -> Option<Self> {
        let context = canvas
            .get_context("2d")
            .ok()??
            .dyn_into::<CanvasRenderingContext2d>()
            .ok()?;
        Some(MeasuredCanvas {
            inner: CanvasBackend::with_canvas_object(canvas)?,
            context,
        })
    }
}

/// A chart's drawing on an area of the page's canvas, at a pixel ratio.
pub type Drawing<'a> = &'a dyn Fn(
    &plotters::drawing::DrawingArea<MeasuredCanvas, plotters::coord::Shift>,
    f64,
) -> Result<(), String>;

/// Sizes `canvas` to its CSS width (640 px when it has none yet) and `aspect` times that
/// high, at the screen's pixel density, and draws on it; a failure goes to the console.
pub fn draw_on(canvas: &HtmlCanvasElement, aspect: f64, draw: Drawing<'_>) {
    use plotters::prelude::IntoDrawingArea;
    let ratio = web_sys::window()
        .map_or(1.0, |w| w.device_pixel_ratio())
        .max(1.0);
    let css_width = match canvas.client_width() {
        w if w > 0 => w as f64,
        _ => 640.0,
    };
    canvas.set_width((css_width * ratio).round() as u32);
    canvas.set_height((css_width * aspect * ratio).round() as u32);
    let Some(backend) = MeasuredCanvas::new(canvas.clone()) else {
        web_sys::console::error_1(&"the chart canvas has no 2D context".into());
        return;
    };
    if let Err(e) = draw(&backend.into_drawing_area(), ratio) {
        web_sys::console::error_1(&format!("the chart could not be drawn: {e}").into());
    }
}

type Failure = DrawingErrorKind<<CanvasBackend as DrawingBackend>::ErrorType>;

impl DrawingBackend for MeasuredCanvas {
    type ErrorType = <CanvasBackend as DrawingBackend>::ErrorType;

    fn get_size(&self) -> (u32, u32) {
        self.inner.get_size()
    }
    fn ensure_prepared(&mut self) -> Result<(), Failure> {
        self.inner.ensure_prepared()
    }
    fn present(&mut self) -> Result<(), Failure> {
        self.inner.present()
    }
    fn draw_pixel(&mut self, point: BackendCoord, color: BackendColor) -> Result<(), Failure> {
        self.inner.draw_pixel(point, color)
    }
    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), Failure> {
        self.inner.draw_line(from, to, style)
    }
    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), Failure> {
        self.inner.draw_rect(upper_left, bottom_right, style, fill)
    }
    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), Failure> {
        self.inner.draw_path(path, style)
    }
    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), Failure> {
        self.inner.draw_circle(center, radius, style, fill)
    }
    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), Failure> {
        self.inner.fill_polygon(vert, style)
    }
    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), Failure> {
        self.inner.draw_text(text, style, pos)
    }
    fn estimate_text_size<S: BackendTextStyle>(
        &self,
        text: &str,
        style: &S,
    ) -> Result<(u32, u32), Failure> {
        let size = style.size();
        self.context.set_font(&format!(
            "{} {}px {}",
            style.style().as_str(),
            size,
            style.family().as_str()
        ));
        let width = match self.context.measure_text(text) {
            Ok(m) => m.width(),
            // A rough width rather than no chart.
            Err(_) => text.chars().count() as f64 * size * 0.55,
        };
        Ok((width.ceil() as u32, (size * 1.2).ceil() as u32))
    }
}
