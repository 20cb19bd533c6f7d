/*!
What is measured: the emission lines per class, which of them are tied to a
parent line by a ratio fixed by atomic physics, their kind (which sets the
shared velocity and width) and the physical width range of each kind.
*/
use crate::ObjectClass;

/// The kinematic kind of a line: all lines of one kind share one velocity
/// offset and one Gaussian width.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum LineKind {
    /// Recombination and other permitted lines (Balmer, He, and the broad
    /// lines of quasars: Lyα, C IV, C III], Mg II).
    Permitted,
    /// Forbidden lines ([O II], [O III], [N II], [S II], …).
    Forbidden,
}

impl LineKind {
    /// Both kinds, in parameter order.
    pub const ALL: [LineKind; 2] = [LineKind::Permitted, LineKind::Forbidden];

    /// Position in [`LineKind::ALL`].
    pub fn index(self) -> usize {
        match self {
            LineKind::Permitted => 0,
            LineKind::Forbidden => 1,
        }
    }
}

/// One measured line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineSpec {
    /// Name in the line list ([`crate::lines::all`]).
    pub name: &'static str,
    /// Kinematic kind.
    pub kind: LineKind,
    /// `Some((parent, r))`: this line's flux is the parent's flux × `r`
    /// (same kind, same velocity and width).
    pub tie: Option<(&'static str, f64)>,
    /// A Balmer line: its stellar absorption equivalent width is reported.
    pub balmer: bool,
}

/// [O III] λ5008/λ4960 flux ratio (Storey & Zeippen 2000, MNRAS 312, 813;
/// value from memory): both lines leave the same upper level, so the ratio
/// is that of transition probabilities × photon energies, independent of
/// density and temperature.
pub const OIII_5008_4960: f64 = 2.98;
/// [N II] λ6585/λ6550 flux ratio: the template generator's value, from the
/// transition probabilities of Froese Fischer & Tachiev 2004 (ADNDT 87, 1;
/// see [`crate::templates::galaxies::NII_RATIO`]).
pub const NII_6585_6550: f64 = crate::templates::galaxies::NII_RATIO;
/// [Ne III] λ3870/λ3969 flux ratio: same upper level, ratio of transition
/// probabilities × photon energies (from memory; no paper at hand).
pub const NEIII_3870_3969: f64 = 3.32;

const fn p(name: &'static str) -> LineSpec {
    LineSpec {
        name,
        kind: LineKind::Permitted,
        tie: None,
        balmer: false,
    }
}
const fn h(name: &'static str) -> LineSpec {
    LineSpec {
        name,
        kind: LineKind::Permitted,
        tie: None,
        balmer: true,
    }
}
const fn f(name: &'static str) -> LineSpec {
    LineSpec {
        name,
        kind: LineKind::Forbidden,
        tie: None,
        balmer: false,
    }
}
const fn tied(name: &'static str, parent: &'static str, ratio: f64) -> LineSpec {
    LineSpec {
        name,
        kind: LineKind::Forbidden,
        tie: Some((parent, ratio)),
        balmer: false,
    }
}

/// Narrow lines of galaxies (and of stars, should they show any).
static GALAXY: &[LineSpec] = &[
    p("Lyα"),
    p("C III]"),
    f("[O II] 3727"),
    f("[O II] 3730"),
    f("[Ne III] 3870"),
    tied("[Ne III] 3969", "[Ne III] 3870", 1.0 / NEIII_3870_3969),
    h("Hε"),
    h("Hδ"),
    h("Hγ"),
    f("[O III] 4364"),
    p("He II 4687"),
    h("Hβ"),
    tied("[O III] 4960", "[O III] 5008", 1.0 / OIII_5008_4960),
    f("[O III] 5008"),
    p("He I 5877"),
    f("[O I] 6302"),
    f("[O I] 6366"),
    tied("[N II] 6550", "[N II] 6585", 1.0 / NII_6585_6550),
    h("Hα"),
    f("[N II] 6585"),
    f("[S II] 6718"),
    f("[S II] 6733"),
    f("[Ar III] 7138"),
    f("[S III] 9071"),
    f("[S III] 9533"),
];

/// Broad permitted lines and the narrow forbidden lines of quasars (the
/// close doublets of C IV and Mg II are one blend at quasar widths).
static QUASAR: &[LineSpec] = &[
    p("Lyα"),
    p("Si IV+O IV]"),
    p("C IV"),
    p("C III]"),
    p("Mg II"),
    f("[Ne V] 3427"),
    f("[Ne III] 3870"),
    h("Hδ"),
    h("Hγ"),
    h("Hβ"),
    tied("[O III] 4960", "[O III] 5008", 1.0 / OIII_5008_4960),
    f("[O III] 5008"),
    tied("[N II] 6550", "[N II] 6585", 1.0 / NII_6585_6550),
    h("Hα"),
    f("[N II] 6585"),
];

/// The lines measured for `class`, by wavelength.
pub fn lines_for(class: ObjectClass) -> &'static [LineSpec] {
    match class {
        ObjectClass::Quasar => QUASAR,
        _ => GALAXY,
    }
}

/// Allowed Gaussian σ (observed, km/s, instrument included), the start
/// value and the largest velocity offset from the redshift (km/s).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limits {
    /// Smallest σ (km/s).
    pub sigma_min: f64,
    /// Largest σ (km/s).
    pub sigma_max: f64,
    /// Start (and fixed value for an undetected kind).
    pub sigma_start: f64,
    /// Largest |velocity offset| (km/s).
    pub vmax: f64,
}

/// Width ranges per class and kind (common practice): narrow lines of
/// galaxies, σ 30–500 km/s (a 500 km/s σ already is an outflow or an active
/// nucleus's narrow-line region); broad permitted lines of quasars,
/// σ 500–8000 km/s (FWHM ≈ 1200–19000 km/s); quasars' narrow forbidden
/// lines, σ 50–1000 km/s.
pub fn limits(class: ObjectClass, kind: LineKind) -> Limits {
    match (class, kind) {
        (ObjectClass::Quasar, LineKind::Permitted) => Limits {
            sigma_min: 500.0,
            sigma_max: 8000.0,
            sigma_start: 2000.0,
            vmax: 3000.0,
        },
        (ObjectClass::Quasar, LineKind::Forbidden) => Limits {
            sigma_min: 50.0,
            sigma_max: 1000.0,
            sigma_start: 300.0,
            vmax: 1500.0,
        },
        _ => Limits {
            sigma_min: 30.0,
            sigma_max: 500.0,
            sigma_start: 100.0,
            vmax: 500.0,
        },
    }
}

/// Continuum kept on each side of a line (rest Å) for `class`: galaxies
/// need room for the wings of stellar Balmer absorption; quasars for
/// broad lines (≈ 4σ_max in km/s at the line, set per line instead).
pub fn margin_rest(class: ObjectClass, rest: f64) -> f64 {
    match class {
        ObjectClass::Quasar => rest * 4.0 * 5000.0 / super::C_KMS,
        _ => 80.0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_line_is_in_the_line_list_and_ties_point_to_a_listed_parent() {
        for class in ObjectClass::ALL {
            let list = lines_for(class);
            for l in list {
                assert!(crate::lines::find(l.name).is_some(), "{}", l.name);
                if let Some((parent, r)) = l.tie {
                    let p = list.iter().find(|x| x.name == parent).expect("parent listed");
                    assert!(p.tie.is_none() && p.kind == l.kind && r > 0.0 && r < 1.0);
                }
            }
            for w in list.windows(2) {
                assert!(crate::lines::wave_of(w[0].name) < crate::lines::wave_of(w[1].name));
            }
        }
    }
}
