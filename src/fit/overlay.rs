/*!
Template overlays: any template of the engine's set (one star type, one
member of a class basis, or the whole basis) fitted to a spectrum at a fixed
redshift — least-squares amplitudes plus the engine's continuum polynomial,
by the same sums and solver as the refinement ([`super::sums::sums_fit`])
— and its model flux at the spectrum's pixels. The inspector compares it with
the data; nothing here touches a fit result or a verdict.
*/
use super::config::FitError;
use super::engine::Engine;
use super::result::Candidate;
use super::sums::{sums_fit, thresholds};
use super::units::Unit;
use crate::spectrum::Spectrum;
use crate::ObjectClass;

/// One choice of template for an overlay.
#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub struct OverlayTemplate {
    /// Class of its unit.
    pub class: ObjectClass,
    /// Index of the unit in [`Engine::units`].
    pub unit: usize,
    /// One template of a multi-template unit, or `None` for the whole unit.
    pub member: Option<usize>,
    /// Name for lists: the template's name, or `<unit> (all n)`.
    pub label: String,
}

/// An overlay fitted at one redshift.
#[derive(Debug, Clone, PartialEq)]
pub struct Overlay {
    /// Model flux at the spectrum's pixels (NaN where the template does not
    /// cover or outside the engine's fitted range).
    pub model: Vec<f64>,
    /// χ² of the fit over the engine's good pixels.
    pub chi2: f64,
    /// The template amplitudes (one per template used).
    pub amplitudes: Vec<f64>,
}

impl Engine {
    /// Every template the inspector can lay over a spectrum: each unit
    /// whole, and each member of a multi-template unit alone.
    pub fn overlay_templates(&self) -> Vec<OverlayTemplate> {
        let mut out = Vec::new();
        for (ui, u) in self.units().iter().enumerate() {
            if u.k() == 1 {
                out.push(OverlayTemplate {
                    class: u.class,
                    unit: ui,
                    member: None,
                    label: u.names.first().cloned().unwrap_or_else(|| u.name.clone()),
                });
                continue;
            }
            out.push(OverlayTemplate {
                class: u.class,
                unit: ui,
                member: None,
                label: format!("{} (all {})", u.name, u.k()),
            });
            for (m, name) in u.names.iter().enumerate() {
                out.push(OverlayTemplate {
                    class: u.class,
                    unit: ui,
                    member: Some(m),
                    label: name.clone(),
                });
            }
        }
        out
    }

    /// Fit `t` to `s` at redshift `z` (amplitudes and the continuum
    /// polynomial by least squares, with the engine's non-negativity
    /// setting) and return its model at `s`'s pixels.
    pub fn overlay(&self, s: &Spectrum, t: &OverlayTemplate, z: f64) -> Result<Overlay, FitError> {
        if !(z > -1.0 && z.is_finite()) {
            return Err(FitError::InvalidConfig(format!(
                "cannot place a template at z = {z}"
            )));
        }
        let base = self
            .units()
            .get(t.unit)
            .ok_or_else(|| FitError::InvalidConfig(format!("no template unit {}", t.unit)))?;
        let sub;
        let unit: &Unit = match t.member {
            None => base,
            Some(m) if m < base.k() => {
                sub = Unit {
                    name: base.names[m].clone(),
                    kind: base.kinds[m],
                    t: vec![base.t[m].clone()],
                    names: vec![base.names[m].clone()],
                    kinds: vec![base.kinds[m]],
                    ..base.clone_empty()
                };
                &sub
            }
            Some(m) => {
                return Err(FitError::InvalidConfig(format!(
                    "{} has no template {m}",
                    base.name
                )))
            }
        };
        let prep = self.prepare(s)?;
        let shift = (1.0 + z).log10() / self.config().dloglam;
        let fit = sums_fit(&prep, unit, shift, &thresholds(&prep, unit), prep.nonneg);
        let c = Candidate {
            class: unit.class,
            template: unit.name.clone(),
            z,
            z_err: f64::NAN,
            chi2: fit.chi2,
            coeffs: fit.coeffs,
        };
        Ok(Overlay {
            model: self.model_of(unit, s, &c),
            chi2: fit.chi2,
            amplitudes: c.coeffs[..unit.k()].to_vec(),
        })
    }
}

impl Unit {
    /// The unit's class and placement without its templates.
    fn clone_empty(&self) -> Unit {
        Unit {
            class: self.class,
            name: self.name.clone(),
            kind: self.kind,
            t0: self.t0,
            t: Vec::new(),
            names: Vec::new(),
            kinds: Vec::new(),
            groups: self.groups,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::synth::{simulate, SimSpec};
    use crate::fit::FitConfig;
    use rand::SeedableRng;

    fn engine() -> Engine {
        Engine::new(crate::templates::builtin(), FitConfig::default()).unwrap()
    }

    #[test]
    fn every_template_is_offered() {
        let e = engine();
        let list = e.overlay_templates();
        let n_templates: usize = e.units().iter().map(|u| u.k()).sum();
        let singles = list
            .iter()
            .filter(|t| e.units()[t.unit].k() == 1 || t.member.is_some());
        assert_eq!(singles.count(), n_templates);
        assert!(list.iter().any(|t| t.class == ObjectClass::Star));
    }

    #[test]
    fn the_engines_own_best_fit_is_reproduced() {
        // Laying the automatic best template over the spectrum at the
        // automatic z gives the engine's own model (same sums, same solver).
        let e = engine();
        let set = crate::templates::builtin();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let spec = SimSpec {
            class: ObjectClass::Star,
            z: 0.0003,
            ..SimSpec::default()
        };
        let (s, truth) = simulate(set, &spec, &mut rng).expect("a simulated star");
        let fit = e.fit(&s).unwrap();
        let best = fit.best().unwrap();
        let t = e
            .overlay_templates()
            .into_iter()
            .find(|t| e.units()[t.unit].name == best.template && t.member.is_none())
            .unwrap();
        let o = e.overlay(&s, &t, best.z).unwrap();
        let m = e.model(&s, best);
        let mut compared = 0;
        for (a, b) in o.model.iter().zip(&m) {
            if a.is_finite() && b.is_finite() {
                assert!((a - b).abs() <= 1e-6 * b.abs().max(1.0), "{a} vs {b}");
                compared += 1;
            }
        }
        assert!(compared > s.len() / 2, "{compared} pixels compared");
        // A star of the simulated type fits better than the worst other star type.
        let stars: Vec<OverlayTemplate> = e
            .overlay_templates()
            .into_iter()
            .filter(|t| t.class == ObjectClass::Star)
            .collect();
        let chi2: Vec<(String, f64)> = stars
            .iter()
            .map(|t| (t.label.clone(), e.overlay(&s, t, best.z).unwrap().chi2))
            .collect();
        let own = chi2.iter().find(|(l, _)| *l == truth).map(|x| x.1);
        let worst = chi2.iter().map(|x| x.1).fold(f64::MIN, f64::max);
        if let Some(own) = own {
            assert!(own < worst, "{truth}: {own} vs worst {worst}");
        }
    }

    #[test]
    fn bad_redshift_is_an_error() {
        let e = engine();
        let set = crate::templates::builtin();
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
        let (s, _) = simulate(set, &SimSpec::default(), &mut rng).unwrap();
        let t = e.overlay_templates().remove(0);
        assert!(e.overlay(&s, &t, f64::NAN).is_err());
        assert!(e.overlay(&s, &t, -1.5).is_err());
    }
}
