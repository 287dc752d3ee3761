//! The stochastic cases of the SBML test suite, judged by the suite's own criteria.
//!
//! The discrete stochastic models test suite (Evans, Gillespie & Wilkinson 2008, Bioinformatics
//! 24:285 [verified]) gives the exact mean μ_t and standard deviation σ_t of every reported
//! species at t = start, start + duration/steps, …, and two statistics of an ensemble of n
//! replicates at each point with σ_t > 0:
//!
//! - mean test Z_t = √n·(x̄_t − μ_t)/σ_t, standard normal for a correct simulator; the suite
//!   asks for Z_t inside its `meanRange` (−3, 3);
//! - variance test Y_t = √(n/2)·(S²_t/σ²_t − 1) with S²_t = (1/n)Σ(x_t − μ_t)², inside its
//!   `sdRange` (−5, 5).
//!
//! Where σ_t = 0 every replicate must equal μ_t exactly.
//!
//! **Multiple comparisons.** A case reports 51 correlated points per species. The suite's
//! per-point range (−3, 3) has a false-alarm rate α = 2Φ(−3) = 0.27 % under the null; held per
//! species series of m points by Bonferroni the mean range becomes ±Φ⁻¹(1 − α/(2m)) (±4.04 for
//! m = 51). The verdict uses that range; the count of points outside the suite's own (−3, 3)
//! is reported beside its expectation under the null, α per point.
//!
//! **The variance test where S² is not near-normal.** Y_t assumes Var(S²) = 2σ⁴/n, true for a
//! normal distribution. In general Var(S²) = (κ₄ + 2σ⁴)/n to leading order in 1/n, κ₄ the
//! fourth cumulant (Kendall & Stuart, The Advanced Theory of Statistics, vol. 1, §10.5 [M]), so
//! the plain Y_t has standard deviation s_Y = √(1 + κ₄/(2σ⁴)). Where s_Y > 5/4 the range ±5 no
//! longer spans 4 of the statistic's own standard deviations and the plain test is invalid: the
//! birth–death model started from 10 molecules (late in the run its law is a heavy-tailed
//! mixture with a growing mass at 0) reaches s_Y = 1.74, and a death counter whose mean is
//! below 1 early in the run reaches 1.43. A series where that happens at some point is judged
//! by the exact test Y*_t = (S²_t − σ²_t)/√((κ₄ + 2σ⁴)/n), κ₄ computed exactly for the model
//! (tests/reference/sbml_stochastic_cumulants.py, for every case), against the same range.
//! Both statistics are reported for every series.

use super::sbml_suite::Case;
use copyloop::ensemble::{self, EnsembleSpec};
use copyloop::network::{Network, Overrides};
use std::collections::HashMap;
use std::path::Path;

/// A case's `-settings.txt`.
#[derive(Clone, Debug)]
pub struct Settings {
    pub start: f64,
    pub duration: f64,
    pub steps: usize,
    pub variables: Vec<String>,
    pub amount: Vec<String>,
    pub concentration: Vec<String>,
    pub mean_range: (f64, f64),
    pub sd_range: (f64, f64),
}

fn range(v: &str) -> Option<(f64, f64)> {
    let v = v.trim().trim_start_matches('(').trim_end_matches(')');
    let (a, b) = v.split_once(',')?;
    Some((a.trim().parse().ok()?, b.trim().parse().ok()?))
}

fn list(v: &str) -> Vec<String> {
    v.split(',')
        .map(|x| x.trim().to_string())
        .filter(|x| !x.is_empty())
        .collect()
}

impl Settings {
    pub fn read(path: &Path) -> Result<Settings, String> {
        let text = std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let kv: HashMap<&str, &str> = text
            .lines()
            .filter_map(|l| l.split_once(':'))
            .map(|(k, v)| (k.trim(), v.trim()))
            .collect();
        let get = |k: &str| kv.get(k).copied().ok_or(format!("no `{k}`"));
        let num =
            |k: &str| -> Result<f64, String> { get(k)?.parse().map_err(|_| format!("bad `{k}`")) };
        Ok(Settings {
            start: num("start")?,
            duration: num("duration")?,
            steps: get("steps")?.parse().map_err(|_| "bad `steps`")?,
            variables: list(get("variables")?),
            amount: list(kv.get("amount").unwrap_or(&"")),
            concentration: list(kv.get("concentration").unwrap_or(&"")),
            mean_range: range(get("meanRange")?).ok_or("bad `meanRange`")?,
            sd_range: range(get("sdRange")?).ok_or("bad `sdRange`")?,
        })
    }
}

/// A CSV read by column name.
pub struct Table {
    pub columns: HashMap<String, Vec<f64>>,
}

impl Table {
    pub fn read(path: &Path) -> Result<Table, String> {
        let text = std::fs::read_to_string(path).map_err(|e| format!("{}: {e}", path.display()))?;
        let mut lines = text.lines().filter(|l| !l.trim().is_empty());
        let header: Vec<String> = lines
            .next()
            .ok_or("empty")?
            .split(',')
            .map(|s| s.trim().to_string())
            .collect();
        let mut cols = vec![Vec::new(); header.len()];
        for l in lines {
            for (k, v) in l.split(',').enumerate() {
                let x: f64 = v.trim().parse().map_err(|_| format!("bad number {v}"))?;
                cols.get_mut(k).ok_or("ragged row")?.push(x);
            }
        }
        Ok(Table {
            columns: header.into_iter().zip(cols).collect(),
        })
    }

    pub fn column(&self, name: &str) -> Result<&[f64], String> {
        self.columns
            .get(name)
            .map(|c| c.as_slice())
            .ok_or(format!("no column `{name}`"))
    }
}

/// Exact fourth cumulants of a case's species, `(species, time) → κ₄`, with the mean and
/// standard deviation the reference script computed beside them (checked against the suite's).
#[derive(Clone, Debug, Default)]
pub struct Cumulants {
    /// (case, species) → rows (time, mean, sd, κ₄).
    pub rows: HashMap<(String, String), Vec<[f64; 4]>>,
}

impl Cumulants {
    /// Reads tests/reference/sbml_stochastic_cumulants.csv.
    pub fn read() -> Cumulants {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/reference/sbml_stochastic_cumulants.csv"
        );
        let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{path}: {e}"));
        let mut rows: HashMap<(String, String), Vec<[f64; 4]>> = HashMap::new();
        for l in text.lines().skip(1).filter(|l| !l.starts_with('#')) {
            let f: Vec<&str> = l.split(',').collect();
            let num = |k: usize| f[k].trim().parse::<f64>().unwrap();
            rows.entry((f[0].to_string(), f[1].to_string()))
                .or_default()
                .push([num(2), num(3), num(4), num(5)]);
        }
        Cumulants { rows }
    }
}

/// One reported species of one case.
#[derive(Clone, Debug)]
pub struct Series {
    pub species: String,
    /// Points with σ_t > 0.
    pub tested: usize,
    /// Points with σ_t = 0, all of which matched μ_t exactly (else `failures` says where).
    pub exact: usize,
    pub max_z: f64,
    /// Points with Z outside the suite's own meanRange.
    pub z_outside: usize,
    pub max_y_plain: f64,
    pub y_plain_outside: usize,
    /// Largest standard deviation of the plain Y, √(1 + κ₄/2σ⁴), where κ₄ is known.
    pub max_s_y: Option<f64>,
    /// The exact Y*, where κ₄ is known.
    pub max_y_exact: Option<f64>,
    pub y_exact_outside: Option<usize>,
    /// Whether the verdict uses the exact Y* (the plain test is invalid somewhere).
    pub uses_exact: bool,
}

/// A stochastic case's result.
#[derive(Clone, Debug)]
pub struct Outcome {
    pub id: String,
    pub replicates: u64,
    pub seed: u64,
    pub series: Vec<Series>,
    /// The per-point false-alarm rate of the suite's meanRange.
    pub mean_alpha: f64,
    /// The Bonferroni mean range for a series of this length.
    pub z_bound: f64,
    /// The model files run (newest level first).
    pub levels: Vec<String>,
    /// Why it fails (empty: passes).
    pub failures: Vec<String>,
    pub events: u64,
    pub seconds: f64,
}

/// Φ⁻¹(p) for the standard normal (statrs, a general-purpose reference library).
fn normal_quantile(p: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    Normal::standard().inverse_cdf(p)
}

fn normal_cdf(x: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    Normal::standard().cdf(x)
}

/// The false-alarm rate of the per-point range `(lo, hi)` for a standard normal statistic.
pub fn false_alarm(range: (f64, f64)) -> f64 {
    normal_cdf(range.0) + 1.0 - normal_cdf(range.1)
}

/// The Bonferroni-held mean range for `m` points of a series, from the suite's per-point range:
/// its per-point false-alarm rate divided by m.
pub fn bonferroni_bound(range: (f64, f64), m: usize) -> f64 {
    -normal_quantile(false_alarm(range) / (2.0 * m as f64))
}

/// Replicates per case: `COPYLOOP_SBML_REPLICATES`, else 10,000. The discrete stochastic suite's
/// guidance is at least 1,000 replicates, and 10,000 or more to find small errors; 10,000 runs
/// the 28 imported cases (about 1.7e8 events) in well under a minute on two cores in release mode.
pub fn replicates() -> u64 {
    std::env::var("COPYLOOP_SBML_REPLICATES")
        .ok()
        .and_then(|v| v.parse().ok())
        .filter(|&n| n >= 2)
        .unwrap_or(10_000)
}

/// Largest s_Y for which the plain variance test is valid: ±5 spans 4 of its standard deviations.
pub const PLAIN_Y_MAX_SD: f64 = 1.25;

/// Runs case `c` (its newest-level file, already known to import) with `replicates` replicates
/// from `seed` and judges it.
pub fn run(
    root: &Path,
    c: &Case,
    net: &Network,
    replicates: u64,
    seed: u64,
    cumulants: &Cumulants,
) -> Result<Outcome, String> {
    let dir = c.dir(root);
    let settings = Settings::read(&dir.join(format!("{}-settings.txt", c.id)))?;
    let results = Table::read(&dir.join(format!("{}-results.csv", c.id)))?;
    if settings.start != 0.0 {
        return Err(format!("start {} is not 0", settings.start));
    }
    if !settings.concentration.is_empty() {
        return Err("concentration variables are not compared".into());
    }
    let spec = EnsembleSpec {
        replicates,
        seed,
        grid_points: settings.steps + 1,
        ..EnsembleSpec::new(settings.duration)
    };
    let r = ensemble::run(net, &spec).map_err(|e| e.to_string())?;
    let times = results.column("time")?;
    let n = replicates as f64;
    let z_bound = bonferroni_bound(settings.mean_range, times.len());
    let (ylo, yhi) = settings.sd_range;
    let mut failures = Vec::new();
    let mut series = Vec::new();
    for v in &settings.variables {
        // A species of the network, or one an assignment rule computes from one of them.
        let (i, a, b) = match net.species_index(v) {
            Some(i) => (i, 0.0, 1.0),
            None => affine_rule(root, c, net, v)?,
        };
        let mean = results.column(&format!("{v}-mean"))?;
        let sd = results.column(&format!("{v}-sd"))?;
        let exact = cumulants.rows.get(&(c.id.clone(), v.clone()));
        if let Some(rows) = exact {
            if rows.len() != times.len() {
                return Err(format!(
                    "{v}: the cumulant reference has {} rows",
                    rows.len()
                ));
            }
        }
        let mut s = Series {
            species: v.clone(),
            tested: 0,
            exact: 0,
            max_z: 0.0,
            z_outside: 0,
            max_y_plain: 0.0,
            y_plain_outside: 0,
            max_s_y: exact.map(|_| 0.0),
            max_y_exact: exact.map(|_| 0.0),
            y_exact_outside: exact.map(|_| 0),
            uses_exact: false,
        };
        let mut ys = Vec::new();
        for (p, &t) in times.iter().enumerate() {
            let g = (t / settings.duration * settings.steps as f64).round() as usize;
            if (r.grid_times[g] - t).abs() > 1e-9 * settings.duration {
                return Err(format!("grid time {} is not {t}", r.grid_times[g]));
            }
            let w = &Moments::of(&r.grid[g][i], a, b);
            let (mu, sigma) = (mean[p], sd[p]);
            if sigma == 0.0 {
                if w.mean() != mu || w.variance() != 0.0 {
                    failures.push(format!(
                        "{v} t={t}: deterministic point {mu}, ensemble mean {} sd {}",
                        w.mean(),
                        w.sd()
                    ));
                }
                s.exact += 1;
                continue;
            }
            s.tested += 1;
            let z = n.sqrt() * (w.mean() - mu) / sigma;
            let s2 = (n - 1.0) / n * w.variance() + (w.mean() - mu).powi(2);
            let y = (n / 2.0).sqrt() * (s2 / (sigma * sigma) - 1.0);
            if z.abs() > s.max_z.abs() {
                s.max_z = z;
            }
            if z <= settings.mean_range.0 || z >= settings.mean_range.1 {
                s.z_outside += 1;
            }
            if z.abs() >= z_bound {
                failures.push(format!(
                    "{v} t={t}: Z = {z:.2} outside ±{z_bound:.2} (mean {} vs {mu})",
                    w.mean()
                ));
            }
            if y.abs() > s.max_y_plain.abs() {
                s.max_y_plain = y;
            }
            let y_out = y <= ylo || y >= yhi;
            if y_out {
                s.y_plain_outside += 1;
            }
            let mut y_exact = None;
            if let Some(rows) = exact {
                let [rt, rmu, rsd, k4] = rows[p];
                let tol = |a: f64, b: f64| (a - b).abs() <= 1e-5 * b.abs() + 1e-6;
                if !(tol(rt, t) && tol(rmu, mu) && tol(rsd, sigma)) {
                    return Err(format!(
                        "{v} t={t}: the cumulant reference (mean {rmu}, sd {rsd}) is not the suite's model (mean {mu}, sd {sigma})"
                    ));
                }
                let s4 = sigma.powi(4);
                let s_y = (1.0 + k4 / (2.0 * s4)).sqrt();
                let ye = (s2 - sigma * sigma) / ((k4 + 2.0 * s4) / n).sqrt();
                s.max_s_y = s.max_s_y.map(|m| m.max(s_y));
                if ye.abs() > s.max_y_exact.unwrap().abs() {
                    s.max_y_exact = Some(ye);
                }
                if ye <= ylo || ye >= yhi {
                    *s.y_exact_outside.as_mut().unwrap() += 1;
                }
                y_exact = Some(ye);
            }
            ys.push((t, y, y_exact, w.sd(), sigma));
        }
        s.uses_exact = s.max_s_y.is_some_and(|m| m > PLAIN_Y_MAX_SD);
        for (t, y, ye, got, sigma) in ys {
            let judged = if s.uses_exact { ye.unwrap() } else { y };
            if judged <= ylo || judged >= yhi {
                let name = if s.uses_exact { "Y*" } else { "Y" };
                failures.push(format!(
                    "{v} t={t}: {name} = {judged:.2} outside ({ylo}, {yhi}) (sd {got} vs {sigma})"
                ));
            }
        }
        series.push(s);
    }
    Ok(Outcome {
        id: c.id.clone(),
        replicates,
        seed,
        series,
        mean_alpha: false_alarm(settings.mean_range),
        z_bound,
        levels: Vec::new(),
        failures,
        events: r.events_total,
        seconds: r.wall_seconds,
    })
}

/// The ensemble mean and variance of a + b·X from those of X.
struct Moments {
    mean: f64,
    variance: f64,
}

impl Moments {
    fn of(x: &copyloop::stats::Welford, a: f64, b: f64) -> Moments {
        Moments {
            mean: a + b * x.mean(),
            variance: b * b * x.variance(),
        }
    }
    fn mean(&self) -> f64 {
        self.mean
    }
    fn variance(&self) -> f64 {
        self.variance
    }
    fn sd(&self) -> f64 {
        self.variance.sqrt()
    }
}

/// A variable that an assignment rule computes as a + b·X from one species X of the network
/// (its count; the case's newest file is read for the rule): (X's index, a, b). The ensemble's
/// moments of X give the variable's exactly (mean a + b·μ, variance b²·σ², common practice);
/// any other rule needs each replicate's values and is an error.
fn affine_rule(root: &Path, c: &Case, net: &Network, v: &str) -> Result<(usize, f64, f64), String> {
    let no = || format!("no species `{v}` in the network");
    let file = c.files(root).into_iter().next().ok_or_else(no)?;
    let bytes = std::fs::read(&file).map_err(|e| e.to_string())?;
    let doc = copyloop::sbml::import(&bytes)
        .map_err(|e| format!("{e:?}"))?
        .document;
    let m = &doc.model;
    let rule = m
        .rules
        .iter()
        .find(|r| r.variable.as_deref() == Some(v))
        .and_then(|r| r.math.as_ref())
        .ok_or_else(no)?;
    let mut read = Vec::new();
    rule.visit(&mut |x| {
        if let copyloop::sbml::math::MathKind::Ident(id) = &x.kind {
            if let Some(i) = net.species_index(id) {
                if !read.contains(&(i, id.clone())) {
                    read.push((i, id.clone()));
                }
            }
        }
    });
    let [(i, x)] = read.as_slice() else {
        return Err(format!(
            "`{v}`: its rule reads {} species, not one",
            read.len()
        ));
    };
    let k = m.species.iter().position(|s| &s.id == x).ok_or_else(no)?;
    if !copyloop::sbml::initial::symbol_is_amount(m, k) {
        return Err(format!("`{v}`: its rule reads the concentration of `{x}`"));
    }
    let values = copyloop::sbml::initial::initial_values(m).map_err(|e| e.to_string())?;
    let at = |count: f64| -> Result<f64, String> {
        let value = |id: &str| {
            if id == x {
                return Some(count);
            }
            let p = m.parameters.iter().position(|p| p.id == id)?;
            values.parameters[p]
        };
        copyloop::sbml::map::rules::rule_values(&doc, &value, 0.0)
            .into_iter()
            .find(|(r, _)| r == v)
            .and_then(|(_, y)| y)
            .ok_or(format!(
                "`{v}`: its rule reads more than `{x}` and constants"
            ))
    };
    let a = at(0.0)?;
    let b = at(1.0)? - a;
    for probe in [2.0, 7.0, 1000.0] {
        let y = at(probe)?;
        if (y - (a + b * probe)).abs() > 1e-12 * (a.abs() + (b * probe).abs()) {
            return Err(format!("`{v}`: its rule is not a + b·{x}"));
        }
    }
    Ok((*i, a, b))
}

/// Every model file of a case as a network, newest level first: (file name, network).
pub fn networks(root: &Path, c: &Case) -> Result<Vec<(String, Network)>, String> {
    let files = c.files(root);
    if files.is_empty() {
        return Err("no model file".into());
    }
    files
        .iter()
        .map(|f| {
            let name = f.file_name().unwrap().to_string_lossy().into_owned();
            let net = copyloop::sbml::load(&f.to_string_lossy(), &Overrides::default())
                .map_err(|e| format!("{name}: {e}"))?;
            Ok((name, net))
        })
        .collect()
}

/// Whether two networks give the same numbers, bit for bit, from one seed (1,000 replicates to
/// t = 50, 51 grid points).
pub fn same_numbers(a: &Network, b: &Network, seed: u64) -> Result<(), String> {
    let spec = EnsembleSpec {
        replicates: 1_000,
        seed,
        grid_points: 51,
        ..EnsembleSpec::new(50.0)
    };
    let ra = ensemble::run(a, &spec).map_err(|e| e.to_string())?;
    let rb = ensemble::run(b, &spec).map_err(|e| e.to_string())?;
    let key = |r: &ensemble::EnsembleResult| -> Vec<(u64, u64)> {
        r.grid
            .iter()
            .flatten()
            .map(|w| (w.mean().to_bits(), w.variance().to_bits()))
            .collect()
    };
    if ra.events_total != rb.events_total || key(&ra) != key(&rb) {
        return Err(format!(
            "not the same numbers as the newest level ({} events against {})",
            rb.events_total, ra.events_total
        ));
    }
    Ok(())
}
