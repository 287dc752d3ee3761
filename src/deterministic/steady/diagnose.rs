//! Why there is no steady state: the time course classified (growth, oscillation), and the
//! messages that name the species, the rate and the conservation law concerned.

use super::newton::{newton, Ctx};
use super::verify::Segment;
use super::Steady;
use crate::deterministic::ode::OdeFailure;
use crate::network::Network;
use crate::numbers::short;
use crate::Error;

/// What the time course shows.
pub(super) enum Reason {
    /// Species slot still rising, with its rate of change (concentration/s).
    Growth { slot: usize, rate: f64 },
    /// Species slot swinging between `low` and `high` with about `period` seconds per cycle.
    Oscillation {
        slot: usize,
        low: f64,
        high: f64,
        period: f64,
    },
}

/// Turning points of a sampled series, ignoring wiggles below 10⁻⁹ of its range.
pub(super) fn turning_points(xs: &[f64]) -> usize {
    let (lo, hi) = xs
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let eps = 1e-9 * (hi - lo).max(0.0);
    let mut last = 0i8;
    let mut count = 0;
    for w in xs.windows(2) {
        let d = w[1] - w[0];
        let s = if d > eps {
            1
        } else if d < -eps {
            -1
        } else {
            0
        };
        if s != 0 {
            if last != 0 && s != last {
                count += 1;
            }
            last = s;
        }
    }
    count
}

/// When the time course may be judged.
pub(super) struct Watch {
    /// Earliest time for a verdict.
    pub(super) t_min: f64,
    /// A stable fixed point: growth is claimed only for a species already past 10 times its
    /// level there.
    pub(super) ceiling: Option<Vec<f64>>,
    /// A level no bounded transient reaches: a million times the largest amount at the start or
    /// at the fixed point, plus one molecule. A species still rising past it is growing without
    /// bound whatever the time.
    pub(super) huge: f64,
}

pub(super) fn classify(ctx: &Ctx, history: &[Segment], watch: &Watch) -> Option<Reason> {
    let n = ctx.sys.n();
    let h = history.len();
    if h >= 3 {
        for k in 0..n {
            let (a, b, c) = (
                history[h - 3].y_end[k],
                history[h - 2].y_end[k],
                history[h - 1].y_end[k],
            );
            if c > watch.huge && a > 0.0 && b >= 1.25 * a && c >= 1.25 * b {
                let f = ctx.sys.rhs(&history[h - 1].y_end);
                return Some(Reason::Growth {
                    slot: k,
                    rate: f[k],
                });
            }
        }
    }
    if history.last().is_none_or(|s| s.t_end < watch.t_min) {
        return None;
    }
    // Unbounded growth: rising ≥ 25 % per doubling over the last five doublings, and still
    // rising at a rate comparable to level/time (power-law or faster growth).
    if h >= 6 {
        for k in 0..n {
            let rising = (h - 5..h).all(|s| {
                let (a, b) = (history[s - 1].y_end[k], history[s].y_end[k]);
                a > 0.0 && b >= 1.25 * a
            });
            let past = watch
                .ceiling
                .as_ref()
                .is_none_or(|c| history[h - 1].y_end[k] > 10.0 * c[k] + ctx.tiny);
            if rising && past {
                let last = &history[h - 1];
                let f = ctx.sys.rhs(&last.y_end);
                if f[k] > 0.0 && f[k] * last.t_end / last.y_end[k] >= 0.2 {
                    return Some(Reason::Growth {
                        slot: k,
                        rate: f[k],
                    });
                }
            }
        }
    }
    // Sustained oscillation: ≥ 4 turning points in each of the last three segments, and the
    // swing not shrinking below half from one segment to the next.
    if h >= 3 {
        let swing = |s: &Segment, k: usize| -> (f64, f64) {
            s.samples
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), y| {
                    (a.min(y[k]), b.max(y[k]))
                })
        };
        let mut best: Option<(usize, f64)> = None;
        for k in 0..n {
            let ok = (h - 3..h).all(|s| {
                let series: Vec<f64> = history[s].samples.iter().map(|y| y[k]).collect();
                let (lo, hi) = swing(&history[s], k);
                let scale = hi.abs().max(lo.abs()).max(ctx.tiny);
                turning_points(&series) >= 4 && (hi - lo) > 1e-6 * scale
            }) && (h - 2..h).all(|s| {
                let (a0, a1) = swing(&history[s - 1], k);
                let (b0, b1) = swing(&history[s], k);
                (b1 - b0) >= 0.5 * (a1 - a0)
            });
            if ok {
                let (lo, hi) = swing(&history[h - 1], k);
                let rel = (hi - lo) / hi.abs().max(ctx.tiny);
                if best.is_none_or(|(_, r)| rel > r) {
                    best = Some((k, rel));
                }
            }
        }
        if let Some((k, _)) = best {
            let last = &history[h - 1];
            let (lo, hi) = swing(last, k);
            let series: Vec<f64> = last.samples.iter().map(|y| y[k]).collect();
            let span = last.t_end - history[h - 2].t_end;
            let tp = turning_points(&series).max(1) as f64;
            return Some(Reason::Oscillation {
                slot: k,
                low: lo,
                high: hi,
                period: 2.0 * span / tp,
            });
        }
    }
    None
}

/// `1234 molecules (2.05e-9 M)` style amount of a state value y (counts/Ω), with its
/// concentration where `own` (Ω_c of the compartment it refers to) is known.
pub(super) fn amount(net: &Network, own: Option<f64>, y: f64) -> String {
    let count = y * net.omega;
    match own {
        Some(w) => format!(
            "{} molecules ({} {})",
            short(count),
            short(count / w),
            net.amount.concentration_unit
        ),
        None => format!("{} molecules", short(count)),
    }
}

/// [`amount`] per second.
pub(super) fn rate_text(net: &Network, own: Option<f64>, rate: f64) -> String {
    let count = rate * net.omega;
    match own {
        Some(w) => format!(
            "{} molecules/s ({} {}/s)",
            short(count),
            short(count / w),
            net.amount.concentration_unit
        ),
        None => format!("{} molecules/s", short(count)),
    }
}

/// Ω of the only compartment, for figures that belong to no one species (a conserved total).
pub(super) fn single_omega(net: &Network) -> Option<f64> {
    (net.compartments.len() == 1).then(|| net.compartments[0].omega)
}

/// Where the algebraic steady state exists only with a negative concentration: a sentence
/// naming it, and the conservation law it breaks if it belongs to one.
pub(super) fn negative_root_note(ctx: &Ctx, starts: &[&[f64]]) -> Option<String> {
    let net = ctx.sys.net;
    for s in starts {
        let run = newton(ctx, s, false, 200);
        if !run.converged {
            continue;
        }
        let top = run.y.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let mut neg: Vec<usize> = (0..run.y.len())
            .filter(|&k| run.y[k] < -(1e-9 * top).max(ctx.tiny))
            .collect();
        if neg.is_empty() {
            continue;
        }
        neg.sort_by(|&a, &b| run.y[a].total_cmp(&run.y[b]));
        let listed: Vec<String> = neg
            .iter()
            .map(|&k| {
                format!(
                    "{} ({})",
                    net.species[ctx.sys.free[k]].name,
                    amount(net, net.species_molar_omega(ctx.sys.free[k]), run.y[k])
                )
            })
            .collect();
        let mut note = format!(
            " The rate equations balance only at a negative amount of {}",
            listed.join(" and ")
        );
        let law = net
            .conservation_laws
            .iter()
            .find(|l| neg.iter().any(|&k| l[ctx.sys.free[k]] != 0));
        if let Some(l) = law {
            let total: f64 = l
                .iter()
                .zip(&net.initial_concentrations())
                .map(|(&c, x)| c as f64 * x)
                .sum();
            note.push_str(&format!(
                ", so the conserved total {} = {} cannot hold with every amount at least 0.",
                crate::network::law_text(net, l),
                amount(net, single_omega(net), total)
            ));
        } else {
            note.push('.');
        }
        return Some(note);
    }
    None
}

pub(super) fn candidate_note(net: &Network, candidate: Option<&Steady>) -> String {
    let Some(c) = candidate else {
        return String::new();
    };
    let ev: Vec<String> = c
        .eigenvalues
        .iter()
        .take(4)
        .map(|z| {
            if z.im.abs() > 0.0 {
                format!(
                    "{} {} {}i",
                    short(z.re),
                    if z.im < 0.0 { "-" } else { "+" },
                    short(z.im.abs())
                )
            } else {
                short(z.re)
            }
        })
        .collect();
    let at: Vec<String> = net
        .species
        .iter()
        .enumerate()
        .filter(|(_, s)| !s.clamped)
        .take(6)
        .map(|(i, s)| format!("{} = {}", s.name, short(c.counts[i])))
        .collect();
    format!(
        " The fixed point of the rate equations at {} (molecules) is {} (eigenvalues {}).",
        at.join(", "),
        c.stability.as_str(),
        ev.join(", ")
    )
}

/// The steps that change species `i` in the direction of `sign` (+1: make it, −1: remove it),
/// each as `` step `label` (file:line:column) `` so the user finds the one at fault; "no step"
/// when none does.
fn steps_moving(net: &Network, i: usize, sign: i64) -> String {
    let steps: Vec<String> = net
        .reactions
        .iter()
        .filter(|r| r.change.iter().any(|&(k, d)| k == i && d.signum() == sign))
        .map(|r| {
            format!(
                "step `{}` ({}:{}:{})",
                r.label, net.file, r.span.line, r.span.col
            )
        })
        .collect();
    if steps.is_empty() {
        "no step".into()
    } else {
        steps.join(", ")
    }
}

pub(super) fn no_steady_state_because(
    ctx: &Ctx,
    y0: &[f64],
    candidate: Option<&Steady>,
    reason: Reason,
    t: f64,
) -> Error {
    let net = ctx.sys.net;
    let msg = match reason {
        Reason::Growth { slot, rate } => {
            let i = ctx.sys.free[slot];
            let name = &net.species[i].name;
            let mut m = format!(
                "{}: no steady state is reached from the initial state: {name} grows without bound (still rising at {} at t = {} s; what makes it, {}, outpaces what removes it, {}).",
                net.file,
                rate_text(net, net.species_molar_omega(i), rate),
                short(t),
                steps_moving(net, i, 1),
                steps_moving(net, i, -1)
            );
            if let Some(note) = negative_root_note(ctx, &[y0]) {
                m.push_str(&note);
            }
            m
        }
        Reason::Oscillation {
            slot,
            low,
            high,
            period,
        } => {
            let i = ctx.sys.free[slot];
            let name = &net.species[i].name;
            let own = net.species_molar_omega(i);
            format!(
                "{}: no steady state is reached from the initial state: sustained oscillation; {name} keeps swinging between {} and {} (about {} s per cycle at t = {} s; made by {}, removed by {}).{}",
                net.file,
                amount(net, own, low),
                amount(net, own, high),
                short(period),
                short(t),
                steps_moving(net, i, 1),
                steps_moving(net, i, -1),
                candidate_note(net, candidate)
            )
        }
    };
    Error::Usage(msg)
}

/// A rate that is negative or not finite, located at its step.
pub(super) fn bad_rate(net: &Network, j: usize, v: f64, where_: &str) -> Error {
    let r = &net.reactions[j];
    let d = crate::error::Diagnostic::at(
        &net.file,
        &net.source.source,
        r.span,
        format!(
            "step `{}`: its rate is {} {where_}; a rate must be finite and not negative",
            r.label,
            rate_text(net, net.reaction_molar_omega(j), v)
        ),
    )
    .with_help(
        "check the law for a subtraction or division that can go below zero or blow up \
         (e.g. write `max(0, 3 - A)` or use sat/inhib)",
    );
    Error::Input(vec![d])
}

pub(super) fn negative_during_run(ctx: &Ctx, slot: usize, value: f64, t: f64) -> Error {
    let net = ctx.sys.net;
    let i = ctx.sys.free[slot];
    let name = &net.species[i].name;
    Error::Usage(format!(
        "{}: no steady state is reached from the initial state: {name} becomes negative ({} at t = {} s); a rate law keeps removing it when none is left ({}; write the law so that it vanishes with {name}, e.g. with sat({name}, K)).",
        net.file,
        amount(net, net.species_molar_omega(i), value),
        short(t),
        steps_moving(net, i, -1)
    ))
}

pub(super) fn no_steady_state(
    ctx: &Ctx,
    y0: &[f64],
    candidate: Option<&Steady>,
    history: &[Segment],
    failure: Option<&OdeFailure>,
    y_last: &[f64],
    t_last: f64,
) -> Error {
    let net = ctx.sys.net;
    let head = format!(
        "{}: no steady state is reached from the initial state",
        net.file
    );
    if let Some(f) = failure {
        if let Some(reason) = classify(
            ctx,
            history,
            &Watch {
                t_min: 0.0,
                ceiling: None,
                huge: f64::INFINITY,
            },
        ) {
            return no_steady_state_because(ctx, y0, candidate, reason, t_last);
        }
        // The species that grew most relative to the start (plus one molecule).
        let one = 1.0 / net.omega;
        let big = (0..y_last.len()).max_by(|&a, &b| {
            let ga = y_last[a].abs() / (y0[a].abs() + one);
            let gb = y_last[b].abs() / (y0[b].abs() + one);
            ga.total_cmp(&gb)
        });
        let what = match big {
            Some(k) if y_last[k].abs() > 1e3 * (y0[k].abs() + one) => {
                let own = net.species_molar_omega(ctx.sys.free[k]);
                format!(
                    " {} has reached {} (from {} at the start), which points to unbounded growth.",
                    net.species[ctx.sys.free[k]].name,
                    amount(net, own, y_last[k]),
                    amount(net, own, y0[k])
                )
            }
            _ => {
                let f = ctx.sys.rhs(y_last);
                match (0..f.len()).max_by(|&a, &b| f[a].abs().total_cmp(&f[b].abs())) {
                    Some(k) => format!(
                        " At that time {} is changing at {}.",
                        net.species[ctx.sys.free[k]].name,
                        rate_text(net, net.species_molar_omega(ctx.sys.free[k]), f[k])
                    ),
                    None => String::new(),
                }
            }
        };
        let mut m = format!("{head}: {}.{what}", f.describe());
        if let Some(note) = negative_root_note(ctx, &[y0]) {
            m.push_str(&note);
        }
        m.push_str(&candidate_note(net, candidate));
        return Error::Usage(m);
    }
    let f = ctx.sys.rhs(y_last);
    let k = (0..f.len()).max_by(|&a, &b| f[a].abs().total_cmp(&f[b].abs()));
    let still = match k {
        Some(k) => format!(
            "; {} is still changing at {}",
            net.species[ctx.sys.free[k]].name,
            rate_text(net, net.species_molar_omega(ctx.sys.free[k]), f[k])
        ),
        None => String::new(),
    };
    let mut m = format!(
        "{head}: the rates of change have not settled by t = {} s{still} (the approach is slower than exponential, or there is none).",
        short(t_last)
    );
    if let Some(note) = negative_root_note(ctx, &[y0, y_last]) {
        m.push_str(&note);
    }
    m.push_str(&candidate_note(net, candidate));
    Error::Usage(m)
}
