/*!
The spectrum: smoothed flux with its 1σ band, the model of the shown solution,
masked pixels as shaded runs, emission (solid) and absorption (dashed) line
markers labelled at the shown z, sky lines dotted; observed or rest-frame axis;
mouse zoom/pan from the plot, key zoom/pan from [`PlotMove`].
*/
use egui::{Align2, RichText};
use egui_plot::{
    FilledArea, Legend, Line, LineStyle, MarkerShape, Plot, PlotPoint, Points, Span, Text, VLine,
};

use crate::lines::LineKind;
use crate::ui::action::Action;
use crate::ui::state::{AppState, PlotMove};
use crate::ui::view::Prepared;

/// Lines weaker than this get no marker at all.
const MARK_STRENGTH: f64 = 0.3;
/// Lines weaker than this get a marker but no label (keeps labels readable).
const LABEL_STRENGTH: f64 = 0.5;
/// A label closer than this fraction of λ to the previous one is dropped
/// (doublet members and their centroid would print on top of each other).
const LABEL_GAP: f64 = 0.006;

/// Draw the spectrum panel, `height` points tall.
pub fn ui(
    ui: &mut egui::Ui,
    state: &mut AppState,
    prepared: Option<&Prepared>,
    height: f32,
    out: &mut Vec<Action>,
) {
    ui.horizontal(|ui| {
        ui.label(RichText::new("Spectrum").strong());
        let mut rest = state.view.rest_frame;
        if ui.checkbox(&mut rest, "rest frame (O)").changed() {
            out.push(Action::ToggleRestFrame);
        }
        ui.label(format!("smoothing {} px", state.view.smoothing));
        if ui.small_button("−").on_hover_text("less smoothing ([)").clicked() {
            out.push(Action::Smooth(-1));
        }
        if ui.small_button("+").on_hover_text("more smoothing (])").clicked() {
            out.push(Action::Smooth(1));
        }
        ui.checkbox(&mut state.view.show_model, "model");
        ui.checkbox(&mut state.view.show_sky, "sky lines");
    });
    ui.horizontal(|ui| super::overlay::controls(ui, state, out));
    super::overlay::notes(ui, state);
    let Some(p) = prepared else {
        ui.allocate_space(egui::vec2(ui.available_width(), height));
        return;
    };
    let rest = state.view.rest_frame;
    let plot_move = state.plot_move.take();
    let x_label = if rest {
        "rest-frame λ (Å)"
    } else {
        "observed λ (Å)"
    };
    let (y0, y1) = p.y_range;
    let plot = Plot::new(("zvet-spectrum", state.selection_serial, rest))
        .height(height)
        .legend(Legend::default())
        .x_axis_label(x_label)
        .y_axis_label("flux")
        .default_x_bounds(p.x_range.0, p.x_range.1)
        .default_y_bounds(y0, y1)
        .label_formatter(|pos| {
            let q = match pos {
                egui_plot::HoverPosition::NearDataPoint { position, .. } => position,
                egui_plot::HoverPosition::Elsewhere { position } => position,
            };
            Some(format!("λ = {:.1} Å\nflux = {:.3}", q.x, q.y))
        });
    plot.show(ui, |pui| {
        if let Some(m) = plot_move {
            let b = pui.plot_bounds();
            let (lo, hi) = (b.min()[0], b.max()[0]);
            let w = hi - lo;
            match m {
                PlotMove::Zoom(f) => {
                    let c = 0.5 * (lo + hi);
                    let half = 0.5 * w / f as f64;
                    pui.set_plot_bounds_x(c - half..=c + half);
                }
                PlotMove::Pan(frac) => {
                    let d = w * frac as f64;
                    pui.set_plot_bounds_x(lo + d..=hi + d);
                }
                PlotMove::Reset => {
                    pui.set_plot_bounds_x(p.x_range.0..=p.x_range.1);
                    pui.set_plot_bounds_y(y0..=y1);
                }
            }
        }
        for &(a, b) in &p.masked {
            pui.span(
                Span::new("masked", a..=b)
                    .fill(egui::Color32::from_rgba_unmultiplied(200, 60, 60, 40))
                    .border_width(0.0),
            );
        }
        if state.view.show_sky && !p.sky.is_empty() {
            // Sky lines: a faint dotted line and a tick along the bottom.
            for &x in &p.sky {
                pui.vline(
                    VLine::new("sky lines", x)
                        .color(super::SKY.gamma_multiply(0.6))
                        .width(1.0)
                        .style(LineStyle::dotted_loose()),
                );
            }
            let ticks: Vec<[f64; 2]> = p.sky.iter().map(|&x| [x, y0 + 0.03 * (y1 - y0)]).collect();
            pui.points(
                Points::new("sky lines", ticks)
                    .shape(MarkerShape::Up)
                    .radius(4.0)
                    .color(super::SKY),
            );
        }
        super::overlay::draw_under(pui, state, (y0, y1));
        pui.add(FilledArea::new("1σ", &p.x, &p.lo, &p.hi).fill_color(super::FLUX.gamma_multiply(0.22)));
        let pts: Vec<[f64; 2]> = p.x.iter().zip(&p.flux).map(|(x, y)| [*x, *y]).collect();
        pui.line(Line::new("flux", pts).color(super::FLUX).width(1.0));
        if !p.model.is_empty() {
            pui.line(Line::new("model", p.model.clone()).color(super::MODEL).width(1.6));
        }
        super::overlay::draw_over(pui, state);
        let top = y1 - 0.02 * (y1 - y0);
        let mut labelled = 0usize;
        let mut last_label = f64::NEG_INFINITY;
        for m in p.lines.iter().filter(|m| m.strength >= MARK_STRENGTH) {
            let (name, colour, style) = match m.kind {
                LineKind::Emission => ("emission lines", super::EMISSION, LineStyle::Solid),
                _ => ("absorption lines", super::ABSORPTION, LineStyle::dashed_dense()),
            };
            pui.vline(
                VLine::new(name, m.x)
                    .color(colour.gamma_multiply(0.55))
                    .width(1.0)
                    .style(style),
            );
            if m.strength >= LABEL_STRENGTH && (m.x - last_label) > LABEL_GAP * m.x {
                last_label = m.x;
                // Stagger labels on three heights so neighbours do not overlap.
                let y = top - (labelled % 3) as f64 * 0.06 * (y1 - y0);
                labelled += 1;
                pui.text(
                    Text::new(name, PlotPoint::new(m.x, y), RichText::new(m.label).size(11.0))
                        .color(colour)
                        .anchor(Align2::LEFT_TOP),
                );
            }
        }
    });
}
