/*!
The line tables behind [`super::all`], [`super::sky`], [`super::telluric_bands`]
and [`super::diagnostic`]. Vacuum wavelengths in Å; see the module docs of
[`super`] for the meaning of the source notes.
*/
use super::{Line, LineKind, SRC_NIST, SRC_PRACTICE, SRC_SKY};

use LineKind::{Absorption as A, Emission as E, Sky as S};

const fn l(name: &'static str, wave: f64, kind: LineKind, strength: f64, source: &'static str) -> Line {
    Line {
        name,
        wave,
        kind,
        strength,
        source,
    }
}

/// Doublet centroids weighted by oscillator strength, as commonly quoted.
const SRC_DOUBLET: &str = "common practice (doublet centroid)";

/// Rest-frame lines, sorted by wavelength.
pub(super) static ALL: &[Line] = &[
    l("Lyβ", 1025.72, E, 0.4, SRC_NIST),
    l("O VI 1032", 1031.91, E, 0.3, SRC_NIST),
    l("O VI 1038", 1037.61, E, 0.2, SRC_NIST),
    l("Lyα", 1215.67, E, 1.0, SRC_NIST),
    l("N V 1239", 1238.82, E, 0.4, SRC_NIST),
    l("N V 1243", 1242.80, E, 0.3, SRC_NIST),
    l("Si II 1260", 1260.42, A, 0.3, SRC_NIST),
    l("O I 1302", 1302.17, A, 0.3, SRC_NIST),
    l("C II 1335", 1334.53, A, 0.3, SRC_NIST),
    l("Si IV 1394", 1393.76, E, 0.3, SRC_NIST),
    l("Si IV+O IV]", 1399.8, E, 0.5, SRC_PRACTICE),
    l("Si IV 1403", 1402.77, E, 0.2, SRC_NIST),
    l("Si II 1527", 1526.71, A, 0.2, SRC_NIST),
    l("C IV 1548", 1548.20, E, 0.5, SRC_NIST),
    l("C IV", 1549.06, E, 1.0, SRC_DOUBLET),
    l("C IV 1551", 1550.78, E, 0.4, SRC_NIST),
    l("Fe II 1608", 1608.45, A, 0.2, SRC_NIST),
    l("He II 1640", 1640.42, E, 0.4, SRC_NIST),
    l("O III] 1661", 1660.81, E, 0.2, SRC_NIST),
    l("O III] 1666", 1666.15, E, 0.2, SRC_NIST),
    l("Al II 1671", 1670.79, A, 0.2, SRC_NIST),
    l("Al III", 1857.4, E, 0.2, SRC_DOUBLET),
    l("Si III] 1892", 1892.03, E, 0.2, SRC_NIST),
    l("[C III] 1907", 1906.68, E, 0.3, SRC_NIST),
    l("C III]", 1908.73, E, 0.8, SRC_NIST),
    l("C II] 2326", 2326.0, E, 0.2, SRC_PRACTICE),
    l("Fe II 2344", 2344.21, A, 0.3, SRC_NIST),
    l("Fe II 2374", 2374.46, A, 0.2, SRC_NIST),
    l("Fe II 2383", 2382.77, A, 0.4, SRC_NIST),
    l("Fe II 2587", 2586.65, A, 0.3, SRC_NIST),
    l("Fe II 2600", 2600.17, A, 0.4, SRC_NIST),
    l("Mg II 2796", 2796.35, A, 0.6, SRC_NIST),
    l("Mg II", 2798.75, E, 1.0, SRC_DOUBLET),
    l("Mg II 2804", 2803.53, A, 0.5, SRC_NIST),
    l("Mg I 2853", 2852.96, A, 0.3, SRC_NIST),
    l("[Ne V] 3427", 3426.85, E, 0.3, SRC_NIST),
    l("[O II] 3727", 3727.09, E, 0.8, SRC_NIST),
    l("[O II] 3730", 3729.88, E, 0.6, SRC_NIST),
    l("H10", 3798.98, E, 0.2, SRC_NIST),
    l("H9", 3836.47, E, 0.2, SRC_NIST),
    l("[Ne III] 3870", 3869.85, E, 0.4, SRC_NIST),
    l("H8", 3890.15, E, 0.2, SRC_NIST),
    l("Ca II K", 3934.78, A, 1.0, SRC_NIST),
    l("[Ne III] 3969", 3968.58, E, 0.1, SRC_NIST),
    l("Ca II H", 3969.59, A, 1.0, SRC_NIST),
    l("Hε", 3971.20, E, 0.3, SRC_NIST),
    l("Hδ", 4102.89, E, 0.5, SRC_NIST),
    l("Ca I 4228", 4227.92, A, 0.3, SRC_NIST),
    l("G band", 4305.61, A, 0.6, SRC_PRACTICE),
    l("Hγ", 4341.68, E, 0.6, SRC_NIST),
    l("[O III] 4364", 4364.44, E, 0.2, SRC_NIST),
    l("Fe I 4385", 4384.78, A, 0.2, SRC_NIST),
    l("He I 4473", 4472.73, E, 0.2, SRC_NIST),
    l("He II 4687", 4687.02, E, 0.3, SRC_NIST),
    l("Hβ", 4862.68, E, 0.9, SRC_NIST),
    l("[O III] 4960", 4960.29, E, 0.6, SRC_NIST),
    l("[O III] 5008", 5008.24, E, 1.0, SRC_NIST),
    l("Mg b 5169", 5168.76, A, 0.4, SRC_NIST),
    l("Mg b 5174", 5174.12, A, 0.5, SRC_NIST),
    l("Mg b 5185", 5185.04, A, 0.5, SRC_NIST),
    l("Fe I 5271", 5271.01, A, 0.3, SRC_NIST),
    l("Fe I 5330", 5329.52, A, 0.2, SRC_NIST),
    l("He I 5877", 5877.25, E, 0.3, SRC_NIST),
    l("Na D2", 5891.58, A, 0.6, SRC_NIST),
    l("Na D1", 5897.56, A, 0.6, SRC_NIST),
    l("[O I] 6302", 6302.05, E, 0.3, SRC_NIST),
    l("[O I] 6366", 6365.54, E, 0.1, SRC_NIST),
    l("[N II] 6550", 6549.86, E, 0.4, SRC_NIST),
    l("Hα", 6564.61, E, 1.0, SRC_NIST),
    l("[N II] 6585", 6585.27, E, 0.6, SRC_NIST),
    l("He I 6680", 6680.00, E, 0.1, SRC_NIST),
    l("[S II] 6718", 6718.29, E, 0.5, SRC_NIST),
    l("[S II] 6733", 6732.67, E, 0.5, SRC_NIST),
    l("[Ar III] 7138", 7137.76, E, 0.2, SRC_NIST),
    l("K I 7667", 7667.01, A, 0.2, SRC_NIST),
    l("K I 7701", 7701.08, A, 0.2, SRC_NIST),
    l("Na I 8186", 8185.51, A, 0.2, SRC_NIST),
    l("Na I 8197", 8197.07, A, 0.2, SRC_NIST),
    l("Ca II 8500", 8500.35, A, 0.5, SRC_NIST),
    l("Ca II 8544", 8544.44, A, 0.6, SRC_NIST),
    l("Ca II 8664", 8664.52, A, 0.5, SRC_NIST),
    l("Mg I 8809", 8809.18, A, 0.2, SRC_NIST),
    l("[S III] 9071", 9071.09, E, 0.3, SRC_NIST),
    l("[S III] 9533", 9533.21, E, 0.4, SRC_NIST),
    l("Paε", 9548.59, E, 0.2, SRC_NIST),
    l("Paδ", 10052.13, E, 0.2, SRC_NIST),
    l("Paγ", 10941.09, E, 0.3, SRC_NIST),
    l("Paβ", 12821.59, E, 0.4, SRC_NIST),
];

/// Night-sky emission lines in the observed frame, sorted by wavelength.
pub(super) static SKY: &[Line] = &[
    l("Hg I 4360 (sky)", 4359.57, S, 0.3, SRC_SKY),
    l("Hg I 5462 (sky)", 5462.26, S, 0.3, SRC_SKY),
    l("O I 5579 (sky)", 5578.89, S, 1.0, SRC_SKY),
    l("Na D2 (sky)", 5891.58, S, 0.5, SRC_SKY),
    l("Na D1 (sky)", 5897.55, S, 0.5, SRC_SKY),
    l("O I 6302 (sky)", 6302.05, S, 0.8, SRC_SKY),
    l("O I 6366 (sky)", 6365.54, S, 0.5, SRC_SKY),
    l("OH 6866", 6865.85, S, 0.4, SRC_SKY),
    l("OH 7278", 7278.41, S, 0.4, SRC_SKY),
    l("OH 7318", 7318.30, S, 0.5, SRC_SKY),
    l("OH 7343", 7342.91, S, 0.5, SRC_SKY),
    l("OH 7371", 7371.28, S, 0.4, SRC_SKY),
    l("OH 7753", 7752.77, S, 0.5, SRC_SKY),
    l("OH 7796", 7796.26, S, 0.5, SRC_SKY),
    l("OH 7824", 7823.66, S, 0.5, SRC_SKY),
    l("OH 7916", 7915.89, S, 0.5, SRC_SKY),
    l("OH 7996", 7995.53, S, 0.5, SRC_SKY),
    l("OH 8347", 8346.90, S, 0.6, SRC_SKY),
    l("OH 8401", 8401.48, S, 0.6, SRC_SKY),
    l("OH 8432", 8432.49, S, 0.6, SRC_SKY),
    l("OH 8468", 8467.53, S, 0.6, SRC_SKY),
    l("OH 8830", 8829.52, S, 0.7, SRC_SKY),
    l("OH 8888", 8888.29, S, 0.7, SRC_SKY),
    l("OH 8922", 8922.06, S, 0.6, SRC_SKY),
    l("OH 8946", 8945.85, S, 0.6, SRC_SKY),
    l("OH 8961", 8960.54, S, 0.6, SRC_SKY),
    l("OH 9379", 9378.53, S, 0.6, SRC_SKY),
    l("OH 9442", 9442.26, S, 0.6, SRC_SKY),
];

/// Telluric absorption bands (observed frame, vacuum Å), sorted.
pub(super) static TELLURIC: &[(f64, f64)] = &[
    (6278.0, 6320.0), // O₂ γ band
    (6868.0, 6922.0), // O₂ B band
    (7162.0, 7342.0), // H₂O
    (7596.0, 7702.0), // O₂ A band
    (8122.0, 8352.0), // H₂O
    (8952.0, 9802.0), // H₂O (strongest 9300–9650)
];

/// Typical fraction of the flux each band of [`TELLURIC`] absorbs, band
/// averaged, in an uncorrected spectrum at resolution R ≈ 2000, airmass
/// ≈ 1.2 and 5 mm of water vapour (a typical site and night): from memory,
/// except the far-red water band, checked in tests/lines.rs against the
/// transmission pypeit ships (1 mm at airmass 1, scaled to 6 mm·airmass:
/// 0.233). The water bands scale with the vapour column, several-fold from
/// a dry night to a humid one.
pub(super) static TELLURIC_DEPTH: &[f64] = &[
    0.05, // O₂ γ
    0.15, // O₂ B
    0.10, // H₂O 7162–7342
    0.40, // O₂ A (the head, 7596–7630, absorbs most)
    0.10, // H₂O 8122–8352
    0.25, // H₂O 8952–9802
];

/// Names (in [`ALL`]) of the lines offered as close-ups, by wavelength.
pub(super) static DIAGNOSTIC: &[&str] = &[
    "Lyα",
    "C IV",
    "C III]",
    "Mg II",
    "[O II] 3727",
    "Ca II K",
    "Ca II H",
    "Hδ",
    "G band",
    "Hβ",
    "[O III] 5008",
    "Mg b 5174",
    "Na D2",
    "Hα",
    "Ca II 8544",
];
