//! Switching objects in the review window, headless: select the next object,
//! prepare its plot data (smoothing, band, model, markers, close-ups) and run
//! and tessellate one egui frame of the whole window. Target: ≤ 16 ms (one
//! frame at 60 Hz) for the demo's 4000-pixel spectra.
use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use zvet::ui::action::Action;
use zvet::ui::{LogPlace, Session, ZvetApp};

fn switch_and_draw(c: &mut Criterion) {
    let survey = zvet::demo::generate_n(zvet::demo::DEFAULT_SEED, 8);
    let engine = zvet::ui::default_engine().expect("engine on the built-in templates");
    let objects: Vec<_> = survey
        .objects
        .into_iter()
        .map(|mut o| {
            o.fit = engine.fit(&o.spectrum).ok();
            o
        })
        .collect();
    assert_eq!(objects[0].spectrum.len(), zvet::demo::N_PIX);
    let dir = tempfile::tempdir().expect("temp dir");
    let mut app = ZvetApp::new(Session {
        title: "bench".into(),
        objects,
        fitter: engine,
        log_place: LogPlace::File(dir.path().join("bench.jsonl")),
        inspector: Some("bench".into()),
        name_file: None,
    });
    let ctx = egui::Context::default();
    let input = || egui::RawInput {
        screen_rect: Some(egui::Rect::from_min_size(
            egui::Pos2::ZERO,
            egui::vec2(1560.0, 960.0),
        )),
        ..Default::default()
    };
    // Warm up fonts and layout caches.
    for _ in 0..3 {
        let _ = ctx.run_ui(input(), |ui| app.show(ui));
    }
    let n = app.state.objects.len();
    let mut k = 0usize;
    c.bench_function("switch object, prepare and draw one frame (4000 px)", |b| {
        b.iter(|| {
            k = (k + 1) % n;
            app.apply(Action::Select(k));
            let out = ctx.run_ui(input(), |ui| app.show(ui));
            let prims = ctx.tessellate(out.shapes, out.pixels_per_point);
            black_box(prims.len())
        })
    });
    // The same with a template overlay fitted at the shown z, the catalogue
    // photometry and the sky spectrum drawn.
    let star = app
        .state
        .tools
        .templates
        .iter()
        .find(|t| t.class == zvet::ObjectClass::Star)
        .cloned();
    app.apply(Action::Tool(zvet::ui::tools::ToolAction::SetOverlay(star)));
    app.state.tools.show_sky = true;
    app.state.tools.show_photometry = true;
    c.bench_function(
        "switch object, prepare and draw with overlay, photometry and sky",
        |b| {
            b.iter(|| {
                k = (k + 1) % n;
                app.apply(Action::Select(k));
                let out = ctx.run_ui(input(), |ui| app.show(ui));
                let prims = ctx.tessellate(out.shapes, out.pixels_per_point);
                black_box(prims.len())
            })
        },
    );
}

criterion_group!(benches, switch_and_draw);
criterion_main!(benches);
