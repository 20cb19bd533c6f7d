/*!
The spectrum: smoothed flux with its 1σ band, the model of the shown solution,
masked pixels as shaded runs, emission (solid) and absorption (dashed) line
markers labelled at the shown z, sky lines dotted; observed or rest-frame axis.
The mouse works in wavelength: the wheel zooms around the pointer, a drag
pans, a right-button drag zooms to a box, a double click shows everything
again; keys do the same through [`PlotMove`]. The legend is a row above the
plot, so it never covers the spectrum.
*/
use egui::{Align2, RichText};
use egui_plot::{FilledArea, Line, LineStyle, MarkerShape, Plot, PlotPoint, Points, Span, Text, VLine};

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
    legend(ui, state);
    ui.horizontal(|ui| super::overlay::controls(ui, state, out));
    super::overlay::notes(ui, state);
    let Some(p) = prepared else {
        if let (Some(e), Some(i)) = (&state.load_error, state.selected) {
            let id = state.objects.id(i).unwrap_or("");
            ui.colored_label(
                ui.visuals().error_fg_color,
                format!("{id} could not be read, so it cannot be shown: {e}"),
            );
            ui.label("Nothing is lost: its review log and the other objects are untouched; step on with N or pick another object.");
        }
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
        // Wavelength only: the wheel is handled below (zoom about the
        // pointer), a drag pans in λ, box zoom and double-click reset stay.
        .allow_scroll(false)
        .allow_zoom(false)
        .allow_drag([true, false])
        .allow_boxed_zoom(true)
        .allow_double_click_reset(true)
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
    let shown = plot.show(ui, |pui| {
        if pui.response().hovered() {
            let (wheel, pinch) = pui
                .ctx()
                .input(|i| (i.smooth_scroll_delta.y + i.smooth_scroll_delta.x, i.zoom_delta()));
            let factor = (wheel as f64 / 200.0).exp() * pinch as f64;
            if (factor - 1.0).abs() > 1e-6 {
                if let Some(at) = pui.pointer_coordinate() {
                    let b = pui.plot_bounds();
                    let (lo, hi) = (b.min()[0], b.max()[0]);
                    let (a, c) = wheel_zoom(lo, hi, at.x, factor);
                    pui.set_plot_bounds_x(a..=c);
                }
            }
        }
        // Double click: the whole spectrum, as the `0` key.
        let plot_move = if pui.response().double_clicked() {
            Some(PlotMove::Reset)
        } else {
            plot_move
        };
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
        // Telluric bands (with the sky lines): faintly shaded, where the fit
        // weighs the pixels by the band's typical uncorrected depth; unnamed,
        // so that no label crowds the line markers along the top (the legend
        // row names them)
        for &(a, b) in &p.telluric {
            pui.span(
                Span::new("", a..=b)
                    .fill(super::SKY.gamma_multiply(0.12))
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
        // Flux and band per run of good pixels: never drawn across a masked gap.
        for seg in &p.segments {
            let r = seg.clone();
            if r.len() >= 2 {
                pui.add(
                    FilledArea::new("1σ", &p.x[r.clone()], &p.lo[r.clone()], &p.hi[r.clone()])
                        .fill_color(super::FLUX.gamma_multiply(0.22)),
                );
            }
            let pts: Vec<[f64; 2]> = p.x[r.clone()]
                .iter()
                .zip(&p.flux[r])
                .map(|(x, y)| [*x, *y])
                .collect();
            pui.line(Line::new("flux", pts).color(super::FLUX).width(1.0));
        }
        if !p.model.is_empty() {
            pui.line(Line::new("model", p.model.clone()).color(super::MODEL).width(1.6));
        }
        super::overlay::draw_over(pui, state);
        let top = y1 - 0.02 * (y1 - y0);
        // Labels near the red edge hang to the left of their line, so none is cut off.
        let vb = pui.plot_bounds();
        let red_edge = vb.max()[0] - 0.1 * vb.width();
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
                        .anchor(if m.x > red_edge {
                            Align2::RIGHT_TOP
                        } else {
                            Align2::LEFT_TOP
                        }),
                );
            }
        }
    });
    let b = shown.transform.bounds();
    state.spectrum_bounds = Some([b.min()[0], b.max()[0], b.min()[1], b.max()[1]]);
}

/// New x bounds after zooming `[lo, hi]` by `factor` (> 1 zooms in) about `at`.
pub fn wheel_zoom(lo: f64, hi: f64, at: f64, factor: f64) -> (f64, f64) {
    let f = factor.clamp(0.2, 5.0);
    (at - (at - lo) / f, at + (hi - at) / f)
}

/// The legend: one row of coloured words above the plot.
fn legend(ui: &mut egui::Ui, state: &AppState) {
    ui.horizontal_wrapped(|ui| {
        ui.spacing_mut().item_spacing.x = 10.0;
        let item = |ui: &mut egui::Ui, c: egui::Color32, t: &str| {
            ui.label(RichText::new(format!("— {t}")).color(c).small());
        };
        item(ui, super::FLUX, "flux ±1σ");
        if state.view.show_model {
            item(ui, super::MODEL, "model (smoothed alike)");
        }
        item(ui, super::EMISSION, "emission lines");
        item(ui, super::ABSORPTION, "absorption lines (dashed)");
        if state.view.show_sky {
            item(ui, super::SKY, "sky lines (dotted), telluric bands (shaded)");
        }
        if let Some(o) = &state.tools.overlay {
            item(
                ui,
                super::overlay::OVERLAY,
                &format!("overlay: {} (dashed)", o.label),
            );
        }
        item(ui, egui::Color32::from_rgb(200, 60, 60), "masked");
        ui.weak("wheel: zoom λ · drag: pan · right-drag: box · double-click: all");
    });
}

#[cfg(test)]
mod tests {
    use super::wheel_zoom;
    use approx::assert_relative_eq;

    #[test]
    fn the_wheel_zooms_about_the_pointer() {
        let (a, b) = wheel_zoom(4000.0, 8000.0, 5000.0, 2.0);
        assert_relative_eq!(a, 4500.0);
        assert_relative_eq!(b, 6500.0);
        // The wavelength under the pointer stays where it was.
        assert_relative_eq!((5000.0 - a) / (b - a), (5000.0 - 4000.0) / 4000.0);
    }
}
