/*!
Drawing a stratified random audit sample.

The catalogue's objects are split into strata by the photometric class
and/or bins of a magnitude or of the spectrum's S/N (`--strata
phot_class,mag_r:19,20,21,snr:3,10`). Each stratum gets n_h objects, drawn
without replacement by a seeded shuffle (ChaCha8, so a seed gives the same
sample on every machine):

- **proportional** allocation: n_h ∝ N_h (largest remainders), with at least
  one object in every stratum when the sample has room for it, so no part of
  the catalogue is left without an estimate;
- **equal** allocation: the same n_h in every stratum, capped at N_h, the
  surplus passed on to strata with room — better for small strata (rare
  classes), at the price of unequal weights.

Each object's inclusion probability is π = n_h / N_h; the estimates weight a
vetted sample object by 1/π. The sample also gets one random review order,
so inspectors who stop halfway leave a random subset unvetted, not the hard
cases.
*/
use crate::catalog::BANDS;
use crate::ObjectClass;
use rand::seq::SliceRandom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// One stratification variable.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum StrataVar {
    /// The photometric classifier's class (`none` when the catalogue has none).
    PhotClass,
    /// An AB magnitude in band `BANDS[i]`, binned at the edges.
    Mag(usize, Vec<f64>),
    /// The spectrum's median per-pixel S/N, binned at the edges.
    Snr(Vec<f64>),
}

/// Parse `phot_class,mag_r:19,20,21,snr:3,10`: a name with a colon starts a
/// binned variable whose edges are the numbers that follow.
pub fn parse_strata(spec: &str) -> Result<Vec<StrataVar>, String> {
    let mut vars: Vec<StrataVar> = Vec::new();
    for tok in spec.split(',').map(str::trim).filter(|t| !t.is_empty()) {
        if let Ok(x) = tok.parse::<f64>() {
            let edges = match vars.last_mut() {
                Some(StrataVar::Mag(_, e)) | Some(StrataVar::Snr(e)) => e,
                _ => {
                    return Err(format!(
                        "`{tok}`: a number must follow a binned variable such as mag_r:19"
                    ))
                }
            };
            push_edge(edges, x)?;
            continue;
        }
        let (name, first) = match tok.split_once(':') {
            Some((n, f)) => (n.trim(), Some(f.trim())),
            None => (tok, None),
        };
        let mut var = match name {
            "phot_class" => {
                if first.is_some() {
                    return Err("phot_class takes no bins".into());
                }
                StrataVar::PhotClass
            }
            "snr" => StrataVar::Snr(Vec::new()),
            m if m.starts_with("mag_") => {
                let band = &m[4..];
                let i = BANDS
                    .iter()
                    .position(|b| *b == band)
                    .ok_or_else(|| format!("`{m}`: no band `{band}` (bands: {})", BANDS.join(", ")))?;
                StrataVar::Mag(i, Vec::new())
            }
            other => {
                return Err(format!(
                    "unknown stratification variable `{other}` (use phot_class, mag_<band>:edges, snr:edges)"
                ))
            }
        };
        if let StrataVar::Mag(_, e) | StrataVar::Snr(e) = &mut var {
            let f = first.ok_or_else(|| format!("`{name}` needs bin edges, e.g. {name}:19,20,21"))?;
            let x: f64 = f.parse().map_err(|_| format!("`{f}` is not a number"))?;
            push_edge(e, x)?;
        }
        if vars
            .iter()
            .any(|v| std::mem::discriminant(v) == std::mem::discriminant(&var) && same_var(v, &var))
        {
            return Err(format!("`{name}` given twice"));
        }
        vars.push(var);
    }
    Ok(vars)
}

fn same_var(a: &StrataVar, b: &StrataVar) -> bool {
    match (a, b) {
        (StrataVar::Mag(i, _), StrataVar::Mag(j, _)) => i == j,
        _ => true,
    }
}

fn push_edge(edges: &mut Vec<f64>, x: f64) -> Result<(), String> {
    if !x.is_finite() {
        return Err(format!("bin edge {x} is not finite"));
    }
    if edges.last().is_some_and(|&l| x <= l) {
        return Err(format!(
            "bin edges must increase ({x} after {})",
            edges.last().copied().unwrap_or(0.0)
        ));
    }
    edges.push(x);
    Ok(())
}

/// What the sampler knows about one catalogue object.
#[derive(Debug, Clone, PartialEq)]
pub struct Unit {
    /// Object id.
    pub id: String,
    /// Photometric class.
    pub phot_class: Option<ObjectClass>,
    /// AB magnitudes in [`BANDS`] order.
    pub mag: [Option<f64>; 5],
    /// Median per-pixel S/N of the spectrum.
    pub snr: Option<f64>,
}

fn bin_label(name: &str, edges: &[f64], v: Option<f64>) -> String {
    let Some(v) = v.filter(|v| v.is_finite()) else {
        return format!("{name}=none");
    };
    let i = edges.iter().take_while(|&&e| v >= e).count();
    match (i.checked_sub(1).and_then(|j| edges.get(j)), edges.get(i)) {
        (None, Some(hi)) => format!("{name}<{hi}"),
        (Some(lo), None) => format!("{name}≥{lo}"),
        (Some(lo), Some(hi)) => format!("{name}={lo}–{hi}"),
        (None, None) => format!("{name}=all"),
    }
}

/// The stratum key of an object, e.g. `phot_class=star|mag_r=20–21`.
pub fn stratum_of(vars: &[StrataVar], u: &Unit) -> String {
    if vars.is_empty() {
        return "all".into();
    }
    vars.iter()
        .map(|v| match v {
            StrataVar::PhotClass => format!("phot_class={}", u.phot_class.map_or("none", |c| c.as_str())),
            StrataVar::Mag(i, e) => bin_label(&format!("mag_{}", BANDS[*i]), e, u.mag[*i]),
            StrataVar::Snr(e) => bin_label("snr", e, u.snr),
        })
        .collect::<Vec<_>>()
        .join("|")
}

/// How the sample is spread over the strata.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Allocation {
    /// n_h ∝ N_h.
    #[default]
    Proportional,
    /// The same n_h in every stratum (capped at N_h).
    Equal,
}

/// Sample sizes per stratum for a total of `size` (≤ Σ N_h).
pub fn allocate(sizes: &[usize], size: usize, how: Allocation) -> Vec<usize> {
    let total: usize = sizes.iter().sum();
    let size = size.min(total);
    let nonempty = sizes.iter().filter(|&&n| n > 0).count();
    let mut n = vec![0usize; sizes.len()];
    if size == 0 || nonempty == 0 {
        return n;
    }
    match how {
        Allocation::Proportional => {
            // quotas q_h = size·N_h/N, floored; one per stratum when the
            // sample has room for it; then the largest remainders
            let floor_one = size >= nonempty;
            let quotas: Vec<f64> = sizes
                .iter()
                .map(|&s| size as f64 * s as f64 / total as f64)
                .collect();
            for h in 0..sizes.len() {
                n[h] = (quotas[h].floor() as usize).min(sizes[h]);
                if floor_one && sizes[h] > 0 && n[h] == 0 {
                    n[h] = 1;
                }
            }
            // the bumps may overshoot: take back from the largest allocations
            while n.iter().sum::<usize>() > size {
                let Some(h) = (0..n.len())
                    .filter(|&h| n[h] > 1)
                    .max_by_key(|&h| (n[h], std::cmp::Reverse(h)))
                else {
                    break;
                };
                n[h] -= 1;
            }
            let mut order: Vec<usize> = (0..sizes.len()).collect();
            order.sort_by(|&a, &b| {
                (quotas[b] - quotas[b].floor())
                    .total_cmp(&(quotas[a] - quotas[a].floor()))
                    .then(a.cmp(&b))
            });
            fill(&mut n, sizes, size, &order);
        }
        Allocation::Equal => {
            let order: Vec<usize> = (0..sizes.len()).collect();
            fill(&mut n, sizes, size, &order);
        }
    }
    n
}

/// Add one object at a time, round robin over `order`, to strata with room.
fn fill(n: &mut [usize], sizes: &[usize], size: usize, order: &[usize]) {
    let mut have: usize = n.iter().sum();
    while have < size {
        let mut added = false;
        for &h in order {
            if have < size && n[h] < sizes[h] {
                n[h] += 1;
                have += 1;
                added = true;
            }
        }
        if !added {
            break;
        }
    }
}

/// One stratum of a drawn sample.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Stratum {
    /// Its key (`phot_class=star|mag_r=20–21`).
    pub key: String,
    /// Catalogue objects in it (N_h).
    pub population: usize,
    /// Objects drawn (n_h).
    pub sampled: usize,
}

impl Stratum {
    /// Inclusion probability of its objects, n_h / N_h.
    pub fn inclusion(&self) -> f64 {
        if self.population == 0 {
            0.0
        } else {
            self.sampled as f64 / self.population as f64
        }
    }
}

/// One drawn object.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Member {
    /// Object id.
    pub id: String,
    /// Index into [`AuditSample::strata`].
    pub stratum: usize,
}

/// A drawn audit sample, as stored in the campaign (`audit-sample.json`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AuditSample {
    /// File format version.
    pub format: u32,
    /// When drawn.
    pub created: chrono::DateTime<chrono::Utc>,
    /// Seed of the draw.
    pub seed: u64,
    /// The stratification as given.
    pub strata_spec: String,
    /// The allocation rule.
    pub allocation: Allocation,
    /// Every stratum of the catalogue, sampled or not.
    pub strata: Vec<Stratum>,
    /// The drawn objects, in their random review order.
    pub members: Vec<Member>,
}

/// Version of the stored sample file.
pub const SAMPLE_FORMAT: u32 = 1;

impl AuditSample {
    /// Draw `size` objects of `units`, stratified by `spec`.
    pub fn draw(
        units: &[Unit],
        spec: &str,
        size: usize,
        allocation: Allocation,
        seed: u64,
    ) -> Result<AuditSample, String> {
        let vars = parse_strata(spec)?;
        if size == 0 {
            return Err("--size must be at least 1".into());
        }
        if units.is_empty() {
            return Err("the campaign has no objects to sample".into());
        }
        // Strata in key order; ids within each sorted, so the draw depends
        // only on the seed and the catalogue, not on the reading order.
        let mut by_key: BTreeMap<String, Vec<&str>> = BTreeMap::new();
        for u in units {
            by_key.entry(stratum_of(&vars, u)).or_default().push(&u.id);
        }
        for ids in by_key.values_mut() {
            ids.sort_unstable();
            ids.dedup();
        }
        let sizes: Vec<usize> = by_key.values().map(Vec::len).collect();
        let n = allocate(&sizes, size, allocation);
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut members = Vec::new();
        let mut strata = Vec::new();
        for (h, ((key, ids), &nh)) in by_key.into_iter().zip(&n).enumerate() {
            let mut ids = ids;
            let (chosen, _) = ids.partial_shuffle(&mut rng, nh);
            members.extend(chosen.iter().map(|id| Member {
                id: (*id).to_string(),
                stratum: h,
            }));
            strata.push(Stratum {
                key,
                population: ids.len(),
                sampled: nh,
            });
        }
        members.shuffle(&mut rng);
        Ok(AuditSample {
            format: SAMPLE_FORMAT,
            created: chrono::Utc::now(),
            seed,
            strata_spec: spec.to_string(),
            allocation,
            strata,
            members,
        })
    }

    /// The stratification variables (parsed again from the stored spec).
    pub fn vars(&self) -> Vec<StrataVar> {
        parse_strata(&self.strata_spec).unwrap_or_default()
    }

    /// Check a sample read from disk: strata sizes agree with the members,
    /// no id twice, indices in range.
    pub fn validate(&self) -> Result<(), String> {
        if self.format != SAMPLE_FORMAT {
            return Err(format!(
                "format {} (this zvet reads {SAMPLE_FORMAT})",
                self.format
            ));
        }
        parse_strata(&self.strata_spec)?;
        let mut count = vec![0usize; self.strata.len()];
        let mut seen = std::collections::HashSet::new();
        for m in &self.members {
            let c = count
                .get_mut(m.stratum)
                .ok_or_else(|| format!("object {}: stratum {} does not exist", m.id, m.stratum))?;
            *c += 1;
            if !seen.insert(m.id.as_str()) {
                return Err(format!("object {} drawn twice", m.id));
            }
        }
        for (s, c) in self.strata.iter().zip(&count) {
            if s.sampled != *c || s.sampled > s.population {
                return Err(format!(
                    "stratum {}: {} drawn of {} but {} members listed",
                    s.key, s.sampled, s.population, c
                ));
            }
        }
        Ok(())
    }

    /// Stratum index per member id, and review order.
    pub fn index(&self) -> BTreeMap<&str, (usize, usize)> {
        self.members
            .iter()
            .enumerate()
            .map(|(i, m)| (m.id.as_str(), (m.stratum, i)))
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn units(n: usize) -> Vec<Unit> {
        (0..n)
            .map(|i| Unit {
                id: format!("obj{i:05}"),
                phot_class: Some(ObjectClass::ALL[i % 3]),
                mag: [None, None, Some(18.0 + (i % 50) as f64 / 10.0), None, None],
                snr: Some((i % 20) as f64),
            })
            .collect()
    }

    #[test]
    fn strata_specs_parse_and_reject_nonsense() {
        let v = parse_strata("phot_class,mag_r:19,20,21,snr:3,10").unwrap();
        assert_eq!(
            v,
            vec![
                StrataVar::PhotClass,
                StrataVar::Mag(2, vec![19.0, 20.0, 21.0]),
                StrataVar::Snr(vec![3.0, 10.0])
            ]
        );
        for bad in [
            "mag_q:1",
            "mag_r",
            "mag_r:20,19",
            "19",
            "colour",
            "phot_class,phot_class",
            "snr:nan",
        ] {
            assert!(parse_strata(bad).is_err(), "{bad} accepted");
        }
    }

    #[test]
    fn allocations_sum_to_the_size_and_respect_stratum_sizes() {
        let sizes = [500, 300, 150, 40, 10];
        for how in [Allocation::Proportional, Allocation::Equal] {
            for size in [1, 5, 37, 100, 999, 1000, 5000] {
                let n = allocate(&sizes, size, how);
                assert_eq!(n.iter().sum::<usize>(), size.min(1000), "{how:?} {size}");
                assert!(n.iter().zip(&sizes).all(|(a, b)| a <= b));
                if size >= 5 {
                    assert!(n.iter().all(|&x| x >= 1), "{how:?} {size}: {n:?}");
                }
            }
        }
        assert_eq!(
            allocate(&sizes, 100, Allocation::Proportional),
            vec![50, 30, 15, 4, 1]
        );
        assert_eq!(allocate(&sizes, 100, Allocation::Equal), vec![23, 23, 22, 22, 10]);
    }

    #[test]
    fn a_draw_is_reproducible_and_follows_the_allocation() {
        let u = units(3000);
        let a = AuditSample::draw(&u, "phot_class,mag_r:19,21", 150, Allocation::Proportional, 7).unwrap();
        let mut b =
            AuditSample::draw(&u, "phot_class,mag_r:19,21", 150, Allocation::Proportional, 7).unwrap();
        b.created = a.created;
        assert_eq!(a, b);
        a.validate().unwrap();
        assert_eq!(a.members.len(), 150);
        assert_eq!(a.strata.iter().map(|s| s.population).sum::<usize>(), 3000);
        let c = AuditSample::draw(&u, "phot_class,mag_r:19,21", 150, Allocation::Proportional, 8).unwrap();
        assert_ne!(a.members, c.members);
        // every member is in the stratum it is filed under
        let vars = a.vars();
        let by_id: BTreeMap<&str, &Unit> = u.iter().map(|x| (x.id.as_str(), x)).collect();
        for m in &a.members {
            assert_eq!(stratum_of(&vars, by_id[m.id.as_str()]), a.strata[m.stratum].key);
        }
    }
}
