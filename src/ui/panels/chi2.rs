/*!
χ²(z) for each class (one small plot per class) with the candidates marked,
and the candidate list. What is drawn is said on the panel: the lines are the
χ² of the coarse grid scan, one per template, relative to the lowest point of
any drawn curve (so no curve dips below zero); each candidate's diamond sits
on its template's curve at its redshift; a ring marks the lowest point of
each curve, so a dip without a candidate is visible as such. The candidates
are ranked by their refined χ² (finer z, the engine's constraints), which the
list below gives as Δχ². Clicking a
candidate's marker (or its "show" button) previews it — model, markers and
close-ups move; clicking elsewhere in a plot asks for a refit near that z;
"accept" records a candidate.
*/
use egui::RichText;
use egui_plot::{Line, MarkerShape, Plot, Points};

use crate::fit::FitResult;
use crate::ui::action::Action;
use crate::ui::state::AppState;
use crate::ObjectClass;

/// Draw the χ²(z) plots (`height` points tall) and, below, the candidate list.
pub fn ui(ui: &mut egui::Ui, state: &AppState, height: f32, out: &mut Vec<Action>) {
    ui.horizontal_wrapped(|ui| {
        ui.label(RichText::new("χ²(z)").strong());
        ui.weak(
            "lines: grid-scan χ² per template, relative to the lowest curve point · diamonds: \
             candidates, on their curve (ranked by refined χ², listed below) · rings: lowest point \
             of a curve · click a diamond to preview, elsewhere to refit near that z",
        );
        if state.refit.is_some() {
            ui.colored_label(super::WARN, "showing a refit");
        }
    });
    let Some(fit) = state.listed_fit() else {
        ui.weak("no fit yet");
        return;
    };
    let best = curves_floor(fit);
    let classes: Vec<ObjectClass> = ObjectClass::ALL
        .into_iter()
        .filter(|c| fit.curves.iter().any(|k| k.class == *c))
        .collect();
    let h = height.max(80.0);
    let n = classes.len().max(1) as f32;
    let w = (ui.available_width() - ui.spacing().item_spacing.x * (n - 1.0)) / n;
    ui.horizontal(|ui| {
        for class in &classes {
            class_plot(ui, state, fit, *class, best, w, h, out);
        }
    });
    candidates(ui, state, fit, out);
}

#[allow(clippy::too_many_arguments)]
fn class_plot(
    ui: &mut egui::Ui,
    state: &AppState,
    fit: &FitResult,
    class: ObjectClass,
    best: f64,
    w: f32,
    h: f32,
    out: &mut Vec<Action>,
) {
    let colour = super::object_colour(class);
    let resp = Plot::new(("zvet-chi2", class, state.selection_serial, state.refit.is_some()))
        .width(w)
        .height(h)
        .x_axis_label(format!("z ({class})"))
        .y_axis_label("Δχ²")
        .allow_drag(false)
        .allow_boxed_zoom(false)
        .show(ui, |pui| {
            for curve in fit.curves.iter().filter(|c| c.class == class) {
                let pts: Vec<[f64; 2]> = curve
                    .z
                    .iter()
                    .zip(&curve.chi2)
                    .filter(|(_, c)| c.is_finite())
                    .map(|(z, c)| [*z, c - best])
                    .collect();
                pui.line(Line::new(curve.template.clone(), pts).color(colour).width(1.0));
            }
            let pts: Vec<[f64; 2]> = fit
                .candidates
                .iter()
                .filter(|c| c.class == class)
                .map(|c| [c.z, on_curve(fit, c).unwrap_or(c.chi2) - best])
                .collect();
            pui.points(
                Points::new("candidates", pts)
                    .shape(MarkerShape::Diamond)
                    .radius(5.0)
                    .color(super::WARN),
            );
            let minima: Vec<[f64; 2]> = fit
                .curves
                .iter()
                .filter(|c| c.class == class)
                .filter_map(curve_minimum)
                .map(|(z, x)| [z, x - best])
                .collect();
            pui.points(
                Points::new("curve minima", minima)
                    .shape(MarkerShape::Circle)
                    .filled(false)
                    .radius(6.0)
                    .color(colour),
            );
            if let Some(s) = state.shown.as_ref().filter(|s| s.class() == class) {
                pui.vline(egui_plot::VLine::new("shown", s.z()).color(super::MODEL));
            }
            (pui.pointer_coordinate(), pui.plot_bounds().width())
        });
    if resp.response.clicked() {
        if let (Some(p), width) = resp.inner {
            // A click on (or next to) a candidate's marker previews it;
            // anywhere else asks for a refit near the clicked z.
            let near = fit
                .candidates
                .iter()
                .enumerate()
                .filter(|(_, c)| c.class == class)
                .map(|(k, c)| (k, (c.z - p.x).abs()))
                .filter(|(_, d)| *d <= 0.015 * width)
                .min_by(|a, b| a.1.total_cmp(&b.1));
            match near {
                Some((k, _)) => out.push(Action::Preview(k)),
                None => out.push(Action::RefitNear {
                    z: p.x,
                    class: Some(class),
                }),
            }
        }
    }
}

/// The lowest finite χ² of any curve (or of any candidate, when lower or
/// when there are no curves): the zero of the plots.
pub fn curves_floor(fit: &FitResult) -> f64 {
    fit.curves
        .iter()
        .flat_map(|c| c.chi2.iter().copied())
        .chain(fit.candidates.iter().map(|c| c.chi2))
        .filter(|x| x.is_finite())
        .fold(f64::INFINITY, f64::min)
        .min(f64::MAX)
}

/// (z, χ²) of the lowest finite point of `curve`.
pub fn curve_minimum(curve: &crate::fit::Chi2Curve) -> Option<(f64, f64)> {
    curve
        .z
        .iter()
        .zip(&curve.chi2)
        .filter(|(z, x)| z.is_finite() && x.is_finite())
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map(|(z, x)| (*z, *x))
}

/// The grid-scan χ² of candidate `c`'s template curve at `c.z` (linear
/// between grid points), so its marker sits on the drawn line.
pub fn on_curve(fit: &FitResult, c: &crate::fit::Candidate) -> Option<f64> {
    let curve = fit
        .curves
        .iter()
        .find(|k| k.class == c.class && k.template == c.template)
        .or_else(|| fit.curves.iter().find(|k| k.class == c.class))?;
    let i = curve.z.partition_point(|z| *z < c.z);
    if i == 0 || i >= curve.z.len() {
        return None;
    }
    let (z0, z1, x0, x1) = (curve.z[i - 1], curve.z[i], curve.chi2[i - 1], curve.chi2[i]);
    if !(x0.is_finite() && x1.is_finite()) || z1 <= z0 {
        return None;
    }
    Some(x0 + (x1 - x0) * (c.z - z0) / (z1 - z0))
}

fn candidates(ui: &mut egui::Ui, state: &AppState, fit: &FitResult, out: &mut Vec<Action>) {
    let shown_rank = state.shown.as_ref().and_then(|s| s.rank);
    egui::ScrollArea::vertical()
        .id_salt("zvet-candidates")
        .show(ui, |ui| {
            egui::Grid::new("zvet-cands").striped(true).show(ui, |ui| {
                for (k, c) in fit.candidates.iter().enumerate() {
                    let text = RichText::new(format!(
                        "#{} {} z = {:.5} ± {:.5}   Δχ²(refined) = {:.1}   {}",
                        k + 1,
                        c.class,
                        c.z,
                        c.z_err,
                        c.chi2 - fit.candidates[0].chi2,
                        c.template
                    ))
                    .color(super::object_colour(c.class));
                    let text = if shown_rank == Some(k) {
                        text.strong()
                    } else {
                        text
                    };
                    ui.label(text);
                    if ui.small_button(format!("show #{}", k + 1)).clicked() {
                        out.push(Action::Preview(k));
                    }
                    if ui.small_button(format!("accept #{}", k + 1)).clicked() {
                        out.push(Action::AcceptCandidate(k));
                    }
                    ui.end_row();
                }
            });
        });
}
