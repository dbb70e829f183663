//! A plotters drawing backend that emits printpdf operations, so charts in PDF reports are
//! true vector graphics drawn by the same code as the SVG charts in HTML reports.
//!
//! plotters works in integer pixels with the origin at the top left; the backend maps a
//! `width × height` pixel canvas onto a page rectangle with a uniform scale. Text is placed
//! exactly as plotters' SVG backend places it (same anchors, same baseline shifts, same em size)
//! and measured with the same font metrics, so both outputs lay out alike.
//!
//! Translucent fills use named graphics states `/GAnnn` (nnn = opacity in percent); the PDF
//! writer registers the ones a page uses (see [`alpha_state_name`]).

use plotters_backend::text_anchor::{HPos, VPos};
use plotters_backend::{
    BackendColor, BackendCoord, BackendStyle, BackendTextStyle, DrawingBackend, DrawingErrorKind,
    FontTransform,
};
use printpdf::{
    Color, ExtendedGraphicsStateId, FontId, Line, LineCapStyle, LineJoinStyle, LinePoint, Op,
    PaintMode, PdfFontHandle, Point, Polygon, PolygonRing, Pt, Rect, Rgb, TextItem, TextMatrix,
    WindingOrder,
};

use super::chart;
use super::font;

/// The backend never fails; plotters still wants an error type.
#[derive(Debug)]
pub(crate) struct PdfChartError;

impl std::fmt::Display for PdfChartError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("PDF chart backend error")
    }
}

impl std::error::Error for PdfChartError {}

/// Name of the graphics state that sets fill and stroke opacity to `alpha` (rounded to 1 %).
pub(crate) fn alpha_state_name(alpha: f64) -> String {
    format!("GA{:03}", alpha_percent(alpha))
}

fn alpha_percent(alpha: f64) -> u32 {
    (alpha.clamp(0.0, 1.0) * 100.0).round() as u32
}

/// Rounds a page coordinate to 1/100 pt: far below what any printer shows, and it keeps the
/// content streams short.
pub(crate) fn r2(v: f32) -> f32 {
    (v * 100.0).round() / 100.0
}

/// Appends printpdf operations for one chart placed on a page.
pub(crate) struct PdfChartBackend<'a> {
    size: (u32, u32),
    scale: f32,
    left: f32,
    top: f32,
    ops: &'a mut Vec<Op>,
}

impl<'a> PdfChartBackend<'a> {
    /// A canvas of `size` chart pixels whose top-left corner sits at page point (`left`, `top`)
    /// (PDF coordinates, y up), drawn `scale` points per pixel. Operations are appended to `ops`
    /// inside a saved graphics state, which the caller restores afterwards ([`draw_chart`]).
    pub(crate) fn new(
        ops: &'a mut Vec<Op>,
        size: (u32, u32),
        left: f32,
        top: f32,
        scale: f32,
    ) -> Self {
        let (w, h) = (size.0 as f32 * scale, size.1 as f32 * scale);
        ops.extend([
            Op::SaveGraphicsState,
            // Clip to the chart box so nothing strays into the text around it.
            Op::DrawRectangle {
                rectangle: Rect {
                    x: Pt(r2(left)),
                    y: Pt(r2(top - h)),
                    width: Pt(r2(w)),
                    height: Pt(r2(h)),
                    mode: Some(PaintMode::Clip),
                    winding_order: Some(WindingOrder::NonZero),
                },
            },
            Op::SetLineJoinStyle {
                join: LineJoinStyle::Round,
            },
            Op::SetLineCapStyle {
                cap: LineCapStyle::Round,
            },
        ]);
        PdfChartBackend {
            size,
            scale,
            left,
            top,
            ops,
        }
    }

    fn pt(&self, (x, y): BackendCoord) -> Point {
        Point {
            x: Pt(r2(self.left + x as f32 * self.scale)),
            y: Pt(r2(self.top - y as f32 * self.scale)),
        }
    }

    fn lp(&self, c: BackendCoord, bezier: bool) -> LinePoint {
        LinePoint {
            p: self.pt(c),
            bezier,
        }
    }

    fn rgb(color: BackendColor) -> Color {
        let (r, g, b) = color.rgb;
        Color::Rgb(Rgb::new(
            f32::from(r) / 255.0,
            f32::from(g) / 255.0,
            f32::from(b) / 255.0,
            None,
        ))
    }

    /// Runs `draw` with the colour's opacity in effect. Returns early for invisible colours.
    fn with_alpha(&mut self, color: BackendColor, draw: impl FnOnce(&mut Self)) {
        let pct = alpha_percent(color.alpha);
        if pct == 0 {
            return;
        }
        if pct < 100 {
            self.ops.push(Op::SaveGraphicsState);
            self.ops.push(Op::LoadGraphicsState {
                gs: ExtendedGraphicsStateId(alpha_state_name(color.alpha)),
            });
            draw(self);
            self.ops.push(Op::RestoreGraphicsState);
        } else {
            draw(self);
        }
    }

    fn stroke_setup(&mut self, color: BackendColor, width: u32) {
        self.ops.push(Op::SetOutlineColor {
            col: Self::rgb(color),
        });
        self.ops.push(Op::SetOutlineThickness {
            pt: Pt(r2(width.max(1) as f32 * self.scale)),
        });
    }
}

impl DrawingBackend for PdfChartBackend<'_> {
    type ErrorType = PdfChartError;

    fn get_size(&self) -> (u32, u32) {
        self.size
    }

    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<PdfChartError>> {
        Ok(())
    }

    fn present(&mut self) -> Result<(), DrawingErrorKind<PdfChartError>> {
        Ok(())
    }

    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        self.draw_rect(point, (point.0 + 1, point.1 + 1), &color, true)
    }

    fn draw_line<S: BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        self.draw_path([from, to], style)
    }

    fn draw_rect<S: BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        let color = style.color();
        let width = style.stroke_width();
        self.with_alpha(color, |b| {
            let (tl, br) = (b.pt(upper_left), b.pt(bottom_right));
            if fill {
                b.ops.push(Op::SetFillColor {
                    col: Self::rgb(color),
                });
            } else {
                b.stroke_setup(color, width);
            }
            b.ops.push(Op::DrawRectangle {
                rectangle: Rect {
                    x: tl.x,
                    y: br.y,
                    width: Pt(r2(br.x.0 - tl.x.0)),
                    height: Pt(r2(tl.y.0 - br.y.0)),
                    mode: Some(if fill {
                        PaintMode::Fill
                    } else {
                        PaintMode::Stroke
                    }),
                    winding_order: None,
                },
            });
        });
        Ok(())
    }

    fn draw_path<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        let points: Vec<BackendCoord> = path.into_iter().collect();
        if points.len() < 2 {
            return Ok(());
        }
        let color = style.color();
        let width = style.stroke_width();
        self.with_alpha(color, |b| {
            b.stroke_setup(color, width);
            let points = points.iter().map(|&c| b.lp(c, false)).collect();
            b.ops.push(Op::DrawLine {
                line: Line {
                    points,
                    is_closed: false,
                },
            });
        });
        Ok(())
    }

    fn draw_circle<S: BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        let color = style.color();
        let width = style.stroke_width();
        self.with_alpha(color, |b| {
            let c = b.pt(center);
            let r = radius as f32 * b.scale;
            // Four cubic Béziers; 0.5523 r is the usual control distance for a circle.
            let k = 0.5523 * r;
            let p = |x: f32, y: f32, bezier: bool| LinePoint {
                p: Point {
                    x: Pt(r2(c.x.0 + x)),
                    y: Pt(r2(c.y.0 + y)),
                },
                bezier,
            };
            let points = vec![
                p(r, 0.0, false),
                p(r, k, true),
                p(k, r, true),
                p(0.0, r, false),
                p(-k, r, true),
                p(-r, k, true),
                p(-r, 0.0, false),
                p(-r, -k, true),
                p(-k, -r, true),
                p(0.0, -r, false),
                p(k, -r, true),
                p(r, -k, true),
                p(r, 0.0, false),
            ];
            if fill {
                b.ops.push(Op::SetFillColor {
                    col: Self::rgb(color),
                });
            } else {
                b.stroke_setup(color, width);
            }
            b.ops.push(Op::DrawPolygon {
                polygon: Polygon {
                    rings: vec![PolygonRing { points }],
                    mode: if fill {
                        PaintMode::Fill
                    } else {
                        PaintMode::Stroke
                    },
                    winding_order: WindingOrder::NonZero,
                },
            });
        });
        Ok(())
    }

    fn fill_polygon<S: BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        let vert: Vec<BackendCoord> = vert.into_iter().collect();
        if vert.len() < 3 {
            return Ok(());
        }
        let color = style.color();
        self.with_alpha(color, |b| {
            b.ops.push(Op::SetFillColor {
                col: Self::rgb(color),
            });
            let points = vert.iter().map(|&c| b.lp(c, false)).collect();
            b.ops.push(Op::DrawPolygon {
                polygon: Polygon {
                    rings: vec![PolygonRing { points }],
                    mode: PaintMode::Fill,
                    winding_order: WindingOrder::NonZero,
                },
            });
        });
        Ok(())
    }

    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<PdfChartError>> {
        let text = &*super::neutralise(text);
        if text.is_empty() {
            return Ok(());
        }
        let face = chart::style_face(style);
        let em = chart::em_size(style) * self.scale;
        let width = font::text_width(face, text, em);
        // Same placement as plotters' SVG backend: text-anchor start/middle/end and a baseline
        // shift of 0.76 em (top), 0.5 ex (centre) or −0.5 ex (bottom). DejaVu Sans x-height is
        // 1120/2048 em (OS/2 sxHeight), so 0.5 ex ≈ 0.273 em.
        let half_ex = 0.273 * em;
        let dx = match style.anchor().h_pos {
            HPos::Left => 0.0,
            HPos::Center => -width / 2.0,
            HPos::Right => -width,
        };
        let dy = match style.anchor().v_pos {
            VPos::Top => 0.76 * em,
            VPos::Center => half_ex,
            VPos::Bottom => -half_ex,
        };
        // SVG rotates clockwise on a y-down canvas; on the y-up page that is the negative angle.
        let (cos, sin) = match style.transform() {
            FontTransform::Rotate90 => (0.0f32, -1.0f32),
            FontTransform::Rotate180 => (-1.0, 0.0),
            FontTransform::Rotate270 => (0.0, 1.0),
            _ => (1.0, 0.0),
        };
        let anchor = self.pt(pos);
        // dx runs along the text direction, dy "down" across it.
        let x = anchor.x.0 + dx * cos + dy * sin;
        let y = anchor.y.0 + dx * sin - dy * cos;
        let matrix = if sin == 0.0 && cos == 1.0 {
            TextMatrix::Translate(Pt(r2(x)), Pt(r2(y)))
        } else {
            TextMatrix::Raw([cos, sin, -sin, cos, r2(x), r2(y)])
        };
        let color = style.color();
        self.with_alpha(color, |b| {
            b.ops.extend([
                Op::StartTextSection,
                Op::SetFont {
                    font: PdfFontHandle::External(FontId(face.resource_name().to_string())),
                    size: Pt(r2(em)),
                },
                Op::SetFillColor {
                    col: Self::rgb(color),
                },
                Op::SetTextMatrix { matrix },
                Op::ShowText {
                    items: vec![TextItem::Text(text.to_string())],
                },
                Op::EndTextSection,
            ]);
        });
        Ok(())
    }

    fn estimate_text_size<S: BackendTextStyle>(
        &self,
        text: &str,
        style: &S,
    ) -> Result<(u32, u32), DrawingErrorKind<PdfChartError>> {
        Ok(chart::estimate_text_size(text, style))
    }
}

/// Draws `chart` into a page rectangle whose top-left corner is (`left`, `top`) and whose width
/// is `width` points, appending to `ops`; the height follows the chart's aspect and is returned.
pub(crate) fn draw_chart(
    ops: &mut Vec<Op>,
    chart: &chart::Chart,
    left: f32,
    top: f32,
    width: f32,
) -> f32 {
    use plotters::prelude::IntoDrawingArea;
    let size = chart.pdf_canvas();
    let scale = width / size.0 as f32;
    {
        let root = PdfChartBackend::new(ops, size, left, top, scale).into_drawing_area();
        // This backend cannot fail; a plotters layout error leaves a partial chart, which is
        // still better than no report.
        let _ = chart::draw(chart, &root);
    }
    ops.push(Op::RestoreGraphicsState);
    size.1 as f32 * scale
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::chart::{Chart, LineChart, LineSeries, LineStyle, Span, SpanKind, to_svg};
    use chrono::NaiveDate;

    fn chart() -> Chart {
        let d = |i| NaiveDate::from_ymd_opt(2025, 3, 1).unwrap() + chrono::Duration::days(i);
        Chart::Line(LineChart {
            title: "Trend für Žofie".into(),
            y_label: "kg".into(),
            lines: vec![
                LineSeries {
                    label: "trend".into(),
                    points: (0..30).map(|i| (d(i), 80.0 - i as f64 * 0.1)).collect(),
                    style: LineStyle::Solid,
                },
                LineSeries {
                    label: "weigh-ins".into(),
                    points: (0..30)
                        .step_by(3)
                        .map(|i| (d(i), 80.2 - i as f64 * 0.1))
                        .collect(),
                    style: LineStyle::Dots,
                },
            ],
            spans: vec![Span {
                label: "plateau".into(),
                from: d(10),
                to: d(15),
                kind: SpanKind::Plateau,
            }],
            ..Default::default()
        })
    }

    /// Texts shown by the PDF operations, in drawing order.
    fn pdf_texts(ops: &[Op]) -> Vec<String> {
        ops.iter()
            .filter_map(|op| match op {
                Op::ShowText { items } => match items.as_slice() {
                    [TextItem::Text(t)] => Some(t.clone()),
                    _ => None,
                },
                _ => None,
            })
            .collect()
    }

    /// Texts of the `<text>` elements of an SVG, in document order.
    fn svg_texts(svg: &str) -> Vec<String> {
        svg.split("<text")
            .skip(1)
            .map(|t| {
                let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
                body.trim().to_string()
            })
            .collect()
    }

    #[test]
    fn pdf_and_svg_draw_the_same_labels_in_the_same_order() {
        let c = chart();
        let mut ops = Vec::new();
        let h = draw_chart(&mut ops, &c, 50.0, 700.0, 480.0);
        assert!((h - 480.0 * 340.0 / 720.0).abs() < 0.01);
        let pdf = pdf_texts(&ops);
        let svg = svg_texts(&to_svg(&c, 720, 340));
        assert_eq!(pdf, svg);
        assert!(pdf.contains(&"Trend für Žofie".to_string()));
        assert!(pdf.contains(&"plateau".to_string()));
    }

    #[test]
    fn chart_is_vector_graphics_inside_the_box_with_translucent_tints() {
        let mut ops = Vec::new();
        draw_chart(&mut ops, &chart(), 50.0, 700.0, 480.0);
        assert!(matches!(ops.first(), Some(Op::SaveGraphicsState)));
        assert!(matches!(ops.last(), Some(Op::RestoreGraphicsState)));
        let lines = ops
            .iter()
            .filter(|o| matches!(o, Op::DrawLine { .. }))
            .count();
        let polys = ops
            .iter()
            .filter(|o| matches!(o, Op::DrawPolygon { .. }))
            .count();
        assert!(lines > 5 && polys >= 10, "lines {lines}, polygons {polys}");
        // The plateau tint is 35 % opaque (span_fill), drawn through a named graphics state.
        assert!(
            ops.iter().any(
                |o| matches!(o, Op::LoadGraphicsState { gs } if gs.0 == alpha_state_name(0.35))
            )
        );
        // Every point lies within the chart box (50..530 × 473.3..700).
        for op in &ops {
            if let Op::DrawLine { line } = op {
                for p in &line.points {
                    assert!((49.9..=530.1).contains(&p.p.x.0), "{:?}", p.p);
                    assert!((473.2..=700.1).contains(&p.p.y.0), "{:?}", p.p);
                }
            }
        }
    }

    #[test]
    fn rotated_axis_label_runs_upwards() {
        let mut ops = Vec::new();
        draw_chart(&mut ops, &chart(), 0.0, 400.0, 720.0);
        let mut rotated = ops.iter().filter_map(|o| match o {
            Op::SetTextMatrix {
                matrix: TextMatrix::Raw(m),
            } => Some(*m),
            _ => None,
        });
        let m = rotated.next().expect("the y label is rotated");
        assert_eq!(&m[..4], &[0.0, 1.0, -1.0, 0.0]);
        assert!(rotated.next().is_none());
    }
}
