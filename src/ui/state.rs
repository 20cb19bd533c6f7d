/*!
What the review window knows, apart from how it is drawn: the objects and
their fits, the queue as displayed, the selection, the solution being shown
(automatic, a previewed candidate, a refit, a nudged z), the view settings and
the text being typed. No egui types live here, so the state can be built and
checked in tests without a window.
*/
use crate::campaign::SurveyObject;
use crate::fit::{Candidate, FitResult};
use crate::queue::{self, Filter, QueueItem, SortKey};
use crate::review::{Change, Verdict, ZSource};
use crate::store::ObjectStore;
use crate::ObjectClass;
use std::collections::{BTreeMap, HashMap};

/// The solution currently drawn over the spectrum (before or after it is accepted).
#[derive(Debug, Clone, PartialEq)]
pub struct Shown {
    /// The candidate whose class, template and coefficients are drawn
    /// (its `z` is the shown redshift).
    pub candidate: Candidate,
    /// Index into the fit's candidates, when it is one of them.
    pub rank: Option<usize>,
    /// Where the shown z comes from, should it be accepted.
    pub source: ZSource,
}

impl Shown {
    /// The automatic answer of `fit` (its best candidate).
    pub fn automatic(fit: &FitResult) -> Option<Shown> {
        fit.best().map(|c| Shown {
            candidate: c.clone(),
            rank: Some(0),
            source: ZSource::Automatic,
        })
    }

    /// The best solution of `class` in `fit`: its best candidate of that
    /// class, else the minimum of that class's χ²(z) curves (drawn without a
    /// model: the fit kept no amplitudes there).
    pub fn best_of_class(fit: &FitResult, class: ObjectClass) -> Option<Shown> {
        if let Some((k, c)) = fit.candidates.iter().enumerate().find(|(_, c)| c.class == class) {
            return Some(Shown {
                candidate: c.clone(),
                rank: Some(k),
                source: if k == 0 {
                    ZSource::Automatic
                } else {
                    ZSource::Candidate
                },
            });
        }
        let (z, template) = fit
            .curves
            .iter()
            .filter(|c| c.class == class)
            .flat_map(|c| c.z.iter().zip(&c.chi2).map(move |(z, x)| (*z, *x, &c.template)))
            .filter(|(z, x, _)| x.is_finite() && z.is_finite())
            .min_by(|a, b| a.1.total_cmp(&b.1))
            .map(|(z, _, t)| (z, t.clone()))?;
        Some(Shown {
            candidate: Candidate {
                class,
                template,
                z,
                z_err: f64::NAN,
                chi2: f64::NAN,
                coeffs: Vec::new(),
            },
            rank: None,
            source: ZSource::Candidate,
        })
    }

    /// `class` at redshift `z` from `source`: the candidate of `fit` at
    /// exactly that class and z when there is one, else that class's best
    /// template moved to `z` (so the model, markers and close-ups are of the
    /// chosen class).
    pub fn class_at(fit: Option<&FitResult>, class: ObjectClass, z: f64, source: ZSource) -> Shown {
        if let Some(f) = fit {
            if let Some((k, c)) = f
                .candidates
                .iter()
                .enumerate()
                .find(|(_, c)| c.class == class && (c.z - z).abs() <= 1e-9 * (1.0 + z.abs()))
            {
                return Shown {
                    candidate: c.clone(),
                    rank: Some(k),
                    source,
                };
            }
        }
        let mut candidate = fit
            .and_then(|f| Shown::best_of_class(f, class))
            .map(|s| s.candidate)
            .unwrap_or_else(|| Candidate {
                class,
                template: String::new(),
                z,
                z_err: f64::NAN,
                chi2: f64::NAN,
                coeffs: Vec::new(),
            });
        candidate.z = z;
        candidate.z_err = f64::NAN;
        Shown {
            candidate,
            rank: None,
            source,
        }
    }

    /// What to show for a recorded verdict: its class at its redshift (a
    /// typed z without a class yet: the fit's best class at that z; the
    /// automatic answer when it has no redshift, e.g. `unclear`).
    pub fn for_verdict(fit: Option<&FitResult>, v: &Verdict) -> Option<Shown> {
        let class = match v.class {
            Some(c) => c.object_class(),
            None => fit.and_then(|f| f.best()).map(|b| b.class),
        };
        match (class, v.z) {
            (Some(class), Some(z)) if z.is_finite() => {
                let mut s = Shown::class_at(fit, class, z, v.z_source.unwrap_or(ZSource::Typed));
                if let Some(e) = v.z_err {
                    s.candidate.z_err = e;
                }
                Some(s)
            }
            _ => fit.and_then(Shown::automatic),
        }
    }

    /// True when this is the verdict's class, redshift and source.
    pub fn is_recorded_in(&self, v: &Verdict) -> bool {
        v.class == Some(self.class().into())
            && v.z
                .is_some_and(|z| (z - self.z()).abs() <= 1e-12 * (1.0 + z.abs()))
            && v.z_source == Some(self.source)
    }

    /// The shown redshift.
    pub fn z(&self) -> f64 {
        self.candidate.z
    }

    /// The shown class.
    pub fn class(&self) -> ObjectClass {
        self.candidate.class
    }
}

/// A change that would replace a recorded verdict, waiting for the
/// inspector to confirm it (Space or Enter) or keep the old one (Esc).
#[derive(Debug, Clone, PartialEq)]
pub struct Pending {
    /// Object index it is for.
    pub index: usize,
    /// The change to record on confirmation.
    pub change: Change,
    /// What the prompt says.
    pub text: String,
}

/// How the spectrum is drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct ViewSettings {
    /// Boxcar smoothing width in pixels (1 = none).
    pub smoothing: usize,
    /// Rest-frame wavelength axis (λ / (1+z)) instead of observed.
    pub rest_frame: bool,
    /// Draw the model of the shown solution.
    pub show_model: bool,
    /// Draw the strong night-sky lines.
    pub show_sky: bool,
}

impl Default for ViewSettings {
    fn default() -> Self {
        ViewSettings {
            smoothing: 3,
            rest_frame: false,
            show_model: true,
            show_sky: true,
        }
    }
}

/// A keyboard request to move the spectrum view, applied inside the plot.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PlotMove {
    /// Zoom in (factor > 1) or out around the centre.
    Zoom(f32),
    /// Pan by this fraction of the visible width (negative = left).
    Pan(f32),
    /// Back to the whole spectrum.
    Reset,
}

/// A line in the message strip.
#[derive(Debug, Clone, PartialEq)]
pub struct Message {
    /// The text.
    pub text: String,
    /// Shown as an error.
    pub is_error: bool,
}

/// Which text field the keyboard asked to focus next frame.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FocusRequest {
    /// The typed-redshift field.
    Redshift,
    /// The note field.
    Note,
}

/// The window's state.
#[derive(Debug, Clone)]
pub struct AppState {
    /// Name of what is open (survey, campaign or folder).
    pub title: String,
    /// The objects: a summary of each in memory (id, catalogue row, S/N),
    /// spectra and full fits read when shown ([`crate::store`]).
    pub objects: ObjectStore,
    /// Summaries of the automatic fits (best candidate, Δχ², S/N, warnings;
    /// [`crate::campaign::fitcache::summary`]), by object index (filled by
    /// the background jobs). The selected object's full fit is in `shown_object`.
    pub fits: Vec<Option<FitResult>>,
    /// The selected object read whole (spectrum, catalogue row, full fit
    /// with its χ²(z) curves once computed), with its index.
    pub shown_object: Option<(usize, SurveyObject)>,
    /// Why the selected object could not be read (shown in the window).
    pub load_error: Option<String>,
    /// Fit failures, by object index.
    pub fit_errors: Vec<Option<String>>,
    /// Queue summaries, by object index.
    pub items: Vec<QueueItem>,
    /// The list as displayed: object indices, filtered and sorted.
    pub order: Vec<usize>,
    /// Filter of the list.
    pub filter: Filter,
    /// Sort key of the list.
    pub sort: SortKey,
    /// Selected object index.
    pub selected: Option<usize>,
    /// Bumped when the selection changes (plots reset their bounds).
    pub selection_serial: u64,
    /// The solution drawn over the spectrum.
    pub shown: Option<Shown>,
    /// A refit result for the selected object, when asked for.
    pub refit: Option<FitResult>,
    /// View settings.
    pub view: ViewSettings,
    /// Pending keyboard move of the spectrum view.
    pub plot_move: Option<PlotMove>,
    /// Text of the typed-redshift field.
    pub z_text: String,
    /// Text of the note field.
    pub note_text: String,
    /// A text field to focus on the next frame.
    pub focus: Option<FocusRequest>,
    /// `F` was pressed: the next digit toggles a flag.
    pub flag_chord: bool,
    /// Messages, newest last.
    pub messages: Vec<Message>,
    /// The help overlay is open.
    pub help_open: bool,
    /// The inspector-name dialog is open, with its text.
    pub name_prompt: Option<String>,
    /// Text of the "open a path" field.
    pub path_text: String,
    /// A refit is running for the selected object.
    pub refit_running: bool,
    /// A replacement of a recorded verdict waiting for confirmation.
    pub pending: Option<Pending>,
    /// Inspectors the open campaign knows (offered by the name dialog).
    pub known_inspectors: Vec<String>,
    /// Fits or verdicts arrived since the list was sorted: the order is kept
    /// (rows never move under the pointer) until the inspector re-sorts.
    pub order_stale: bool,
    /// The inspector asked to quit.
    pub quit_asked: bool,
    /// The spectrum plot's bounds as last drawn: [λ from, λ to, flux from, flux to].
    pub spectrum_bounds: Option<[f64; 4]>,
    /// Adjudication, jump, overlays and automatic smoothing.
    pub tools: super::tools::ToolsState,
    /// The open campaign's audit sample, for the "audit sample" and "vet
    /// next" orders (None: no campaign or no sample).
    pub audit: Option<AuditQueue>,
}

/// What the queue needs of an audit sample.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AuditQueue {
    /// Each member's position in the sample's random review order.
    pub order: BTreeMap<String, usize>,
    /// Width of the photometric accuracy interval of each object's stratum.
    pub width: HashMap<String, f64>,
}

impl AuditQueue {
    /// From a sample and the widths its analysis gave per stratum;
    /// `stratum_of` names each object's stratum.
    pub fn new(
        sample: &crate::audit::sample::AuditSample,
        widths: &BTreeMap<String, f64>,
        stratum_of: impl Fn(&str) -> Option<String>,
        ids: impl Iterator<Item = String>,
    ) -> Self {
        let order = sample
            .members
            .iter()
            .enumerate()
            .map(|(i, m)| (m.id.clone(), i))
            .collect();
        let width = ids
            .filter_map(|id| {
                let w = widths.get(&stratum_of(&id)?).copied()?;
                Some((id, w))
            })
            .collect();
        AuditQueue { order, width }
    }

    /// Members drawn.
    pub fn sampled(&self) -> usize {
        self.order.len()
    }
}

impl AppState {
    /// A state for `objects` with their fit summaries, nothing selected yet.
    pub fn new(title: String, objects: ObjectStore, fits: Vec<Option<FitResult>>) -> Self {
        let n = objects.len();
        let mut fits = fits;
        fits.resize(n, None);
        AppState {
            title,
            objects,
            fits,
            shown_object: None,
            load_error: None,
            fit_errors: vec![None; n],
            items: Vec::new(),
            order: Vec::new(),
            filter: Filter::default(),
            sort: SortKey::default(),
            selected: None,
            selection_serial: 0,
            shown: None,
            refit: None,
            view: ViewSettings::default(),
            plot_move: None,
            z_text: String::new(),
            note_text: String::new(),
            focus: None,
            flag_chord: false,
            messages: Vec::new(),
            help_open: false,
            name_prompt: None,
            path_text: String::new(),
            refit_running: false,
            pending: None,
            known_inspectors: Vec::new(),
            order_stale: false,
            quit_asked: false,
            spectrum_bounds: None,
            tools: Default::default(),
            audit: None,
        }
    }

    /// Rebuild the queue summaries from the fits and `verdict` lookups, then
    /// re-filter and re-sort the displayed list.
    pub fn rebuild_queue(&mut self, verdict: impl Fn(&str) -> Option<Verdict>) {
        self.items = self
            .objects
            .iter()
            .zip(&self.fits)
            .map(|(o, f)| {
                QueueItem::from_parts(
                    &o.id,
                    o.catalog.as_ref(),
                    o.snr,
                    f.as_ref(),
                    verdict(&o.id).as_ref(),
                )
            })
            .collect();
        if let Some(a) = &self.audit {
            queue::apply_audit(&mut self.items, &a.order, |id| a.width.get(id).copied());
        }
        self.order = queue::arrange(&self.items, &self.filter, self.sort);
        self.order_stale = false;
        self.tools.restrict(&self.items, &mut self.order);
    }

    /// Refresh one object's summary (after a verdict or a fit) without
    /// re-sorting, so the list does not jump under the inspector's eyes.
    pub fn refresh_item(&mut self, index: usize, verdict: Option<&Verdict>) {
        if let Some(o) = self.objects.get(index) {
            let fit = self.fits.get(index).and_then(|f| f.as_ref());
            let mut item = QueueItem::from_parts(&o.id, o.catalog.as_ref(), o.snr, fit, verdict);
            if let Some(a) = &self.audit {
                queue::apply_audit(std::slice::from_mut(&mut item), &a.order, |id| {
                    a.width.get(id).copied()
                });
            }
            self.items[index] = item;
        }
    }

    /// The selected object, read whole (None while nothing is selected or
    /// when it could not be read: see `load_error`).
    pub fn current(&self) -> Option<&SurveyObject> {
        match &self.shown_object {
            Some((i, o)) if Some(*i) == self.selected => Some(o),
            _ => None,
        }
    }

    /// The selected object's automatic fit (whole).
    pub fn current_fit(&self) -> Option<&FitResult> {
        self.current().and_then(|o| o.fit.as_ref())
    }

    /// Read object `index` whole into `shown_object` (through the store's
    /// cache); a failure is said in the message strip and kept in `load_error`.
    pub fn load_shown(&mut self, index: usize) {
        match self.objects.object(index) {
            Ok((o, problem)) => {
                self.shown_object = Some((index, o));
                self.load_error = None;
                if let Some(p) = problem {
                    self.say(p, true);
                }
            }
            Err(e) => {
                self.shown_object = None;
                self.say(e.clone(), true);
                self.load_error = Some(e);
            }
        }
    }

    /// A whole fit of object `index` arrived: the shown object takes it
    /// (keeping curves it already has when the new one has none).
    pub fn take_full_fit(&mut self, index: usize, fit: &FitResult) {
        if let Some((i, o)) = &mut self.shown_object {
            if *i == index {
                let curves = o.fit.take().map(|f| f.curves).unwrap_or_default();
                let mut f = fit.clone();
                if f.curves.is_empty() {
                    f.curves = curves;
                }
                o.fit = Some(f);
            }
        }
    }

    /// χ²(z) curves of object `index` arrived: the shown object's fit takes
    /// them when it has none.
    pub fn take_curves(&mut self, index: usize, fit: &FitResult) {
        if let Some((i, o)) = &mut self.shown_object {
            if *i == index {
                if let Some(f) = &mut o.fit {
                    if f.curves.is_empty() {
                        f.curves = fit.curves.clone();
                    }
                }
            }
        }
    }

    /// The fit whose candidates are listed: the refit if there is one, else the automatic fit.
    pub fn listed_fit(&self) -> Option<&FitResult> {
        self.refit.as_ref().or(self.current_fit())
    }

    /// Position of the selection in the displayed list.
    pub fn position(&self) -> Option<usize> {
        let sel = self.selected?;
        self.order.iter().position(|&i| i == sel)
    }

    /// Select object `index`: a reviewed object shows its recorded verdict,
    /// any other the automatic answer.
    pub fn select(&mut self, index: usize, verdict: Option<&Verdict>) {
        if index >= self.objects.len() {
            return;
        }
        self.selected = Some(index);
        self.selection_serial += 1;
        self.load_shown(index);
        self.refit = None;
        self.refit_running = false;
        self.flag_chord = false;
        self.pending = None;
        self.show_recorded(verdict);
        self.plot_move = Some(PlotMove::Reset);
    }

    /// Show the recorded verdict (or the automatic answer when there is
    /// none) and put its z and note into the text fields.
    pub fn show_recorded(&mut self, verdict: Option<&Verdict>) {
        let fit = self.listed_fit();
        self.shown = match verdict {
            Some(v) if v.class.is_some() || v.z.is_some() => Shown::for_verdict(fit, v),
            _ => fit.and_then(Shown::automatic),
        };
        self.sync_texts(verdict);
    }

    /// Put the verdict's note and the shown z into the text fields.
    pub fn sync_texts(&mut self, verdict: Option<&Verdict>) {
        self.note_text = verdict.map(|v| v.note.clone()).unwrap_or_default();
        self.z_text = match (&self.shown, verdict.and_then(|v| v.z)) {
            (Some(s), _) => format!("{:.5}", s.z()),
            (None, Some(z)) => format!("{z:.5}"),
            _ => String::new(),
        };
    }

    /// Move the selection `step` places along the displayed list (clamped).
    pub fn step_target(&self, step: isize) -> Option<usize> {
        if self.order.is_empty() {
            return None;
        }
        let pos = match self.position() {
            Some(p) => p as isize + step,
            None => 0,
        };
        let pos = pos.clamp(0, self.order.len() as isize - 1) as usize;
        Some(self.order[pos])
    }

    /// Add a message (errors in red in the strip); keeps the last 50.
    pub fn say(&mut self, text: impl Into<String>, is_error: bool) {
        self.messages.push(Message {
            text: text.into(),
            is_error,
        });
        let n = self.messages.len();
        if n > 50 {
            self.messages.drain(0..n - 50);
        }
    }

    /// Number of fitted objects.
    pub fn fitted_count(&self) -> usize {
        self.fits.iter().filter(|f| f.is_some()).count()
            + self.fit_errors.iter().filter(|e| e.is_some()).count()
    }
}
