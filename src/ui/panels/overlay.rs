/*!
What the tools draw over the spectrum: the chosen template fitted at the
shown z (dashed), the catalogue photometry at each band's pivot wavelength
(diamonds with 1σ bars), and the sky spectrum scaled into the lower third of
the plot, drawn first so it lies under the flux. Plus their switches in the
spectrum panel's header.
*/
use egui::{Color32, ComboBox, RichText};
use egui_plot::{Line, LineStyle, MarkerShape, PlotPoint, PlotUi, Points, Text};

use crate::ui::action::Action;
use crate::ui::state::AppState;
use crate::ui::tools::ToolAction;

/// Colour of the template overlay.
pub const OVERLAY: Color32 = Color32::from_rgb(120, 220, 90);
/// Colour of the photometry points.
pub const PHOTOMETRY: Color32 = Color32::from_rgb(255, 90, 200);
/// Colour of the sky spectrum.
pub const SKY_SPECTRUM: Color32 = Color32::from_rgb(120, 140, 190);

/// The switches, drawn in the spectrum panel's header row.
pub fn controls(ui: &mut egui::Ui, state: &AppState, out: &mut Vec<Action>) {
    let mut auto = state.tools.auto_smoothing;
    if ui
        .checkbox(&mut auto, "auto")
        .on_hover_text("smoothing from the median S/N: w = (5 / S/N)², odd, 1–15 px (\\)")
        .changed()
    {
        out.push(Action::Tool(ToolAction::AutoSmoothing(auto)));
    }
    let t = &state.tools;
    let current = t
        .overlay
        .as_ref()
        .map_or("no template".to_string(), |o| o.label.clone());
    let mut chosen = t.overlay.clone();
    ComboBox::from_id_salt("zvet-overlay")
        .selected_text(
            RichText::new(format!("overlay: {current}")).color(if t.overlay.is_some() {
                OVERLAY
            } else {
                ui.visuals().text_color()
            }),
        )
        .show_ui(ui, |ui| {
            ui.selectable_value(&mut chosen, None, "no template");
            for o in &t.templates {
                ui.selectable_value(&mut chosen, Some(o.clone()), format!("{} · {}", o.class, o.label));
            }
        })
        .response
        .on_hover_text(
            "lay a template over the spectrum at the shown z (M / Shift+M); the verdict does not change",
        );
    if chosen != t.overlay {
        out.push(Action::Tool(ToolAction::SetOverlay(chosen)));
    }
    let mut phot = t.show_photometry;
    if ui.checkbox(&mut phot, "photometry (I)").changed() {
        out.push(Action::Tool(ToolAction::TogglePhotometry));
    }
    let has_sky = state.current().is_some_and(|o| o.spectrum.sky().is_some());
    let mut sky = t.show_sky;
    if ui
        .add_enabled(has_sky, egui::Checkbox::new(&mut sky, "sky (K)"))
        .on_disabled_hover_text("this file carries no sky spectrum")
        .changed()
    {
        out.push(Action::Tool(ToolAction::ToggleSky));
    }
}

/// Notes under the header (why something asked for is not drawn).
pub fn notes(ui: &mut egui::Ui, state: &AppState) {
    let p = &state.tools.prepared;
    let mut notes = Vec::new();
    if let Some(e) = &p.overlay_error {
        notes.push(format!("overlay: {e}"));
    }
    if let Some(n) = &p.phot_note {
        notes.push(format!("photometry: {n}"));
    }
    if !notes.is_empty() {
        ui.weak(notes.join("   "));
    }
}

/// Draw inside the spectrum plot, before the flux (`y`: the plot's y range).
pub fn draw_under(pui: &mut PlotUi, state: &AppState, y: (f64, f64)) {
    let p = &state.tools.prepared;
    if p.sky.is_empty() {
        return;
    }
    let max = p.sky.iter().map(|q| q[1]).fold(0.0f64, f64::max);
    if max <= 0.0 {
        return;
    }
    let scale = 0.3 * (y.1 - y.0) / max;
    let pts: Vec<[f64; 2]> = p
        .sky
        .iter()
        .map(|q| [q[0], y.0 + q[1].max(0.0) * scale])
        .collect();
    pui.line(
        Line::new("sky (scaled to the lower third)", pts)
            .color(SKY_SPECTRUM)
            .width(1.0)
            .fill(y.0 as f32),
    );
}

/// Draw inside the spectrum plot, after the flux and model.
pub fn draw_over(pui: &mut PlotUi, state: &AppState) {
    let p = &state.tools.prepared;
    if !p.overlay.is_empty() {
        let name = state
            .tools
            .overlay
            .as_ref()
            .map_or("template".to_string(), |o| format!("overlay: {}", o.label));
        pui.line(
            Line::new(name, p.overlay.clone())
                .color(OVERLAY)
                .width(1.4)
                .style(LineStyle::dashed_loose()),
        );
    }
    if !p.phot.is_empty() {
        for q in &p.phot {
            if let Some(e) = q.flux_err {
                pui.line(
                    Line::new("photometry", vec![[q.wave, q.flux - e], [q.wave, q.flux + e]])
                        .color(PHOTOMETRY)
                        .width(2.0),
                );
            }
            pui.text(
                Text::new(
                    "photometry",
                    PlotPoint::new(q.wave, q.flux),
                    RichText::new(format!("  {}", q.band)).size(12.0).strong(),
                )
                .color(PHOTOMETRY)
                .anchor(egui::Align2::LEFT_BOTTOM),
            );
        }
        let pts: Vec<[f64; 2]> = p.phot.iter().map(|q| [q.wave, q.flux]).collect();
        pui.points(
            Points::new("photometry", pts)
                .shape(MarkerShape::Diamond)
                .radius(6.0)
                .filled(true)
                .color(PHOTOMETRY),
        );
    }
}
