//! The generator of the projected master equation, stored once in compressed sparse row form.
//!
//! dP/dt = A·P with A_ts = a_j(x_s) for each transition s → t (t ≠ s) and A_ss = −Σ_j a_j(x_s)
//! (every way out of s, into the projection or out of it). Rows are destinations, so a product
//! A·v reads each row's sources and writes one entry: rows split into independent chunks for
//! threads (transient.rs). Rows `states..states + sinks` are the absorbing sinks (Munsky & Khammash 2006,
//! J. Chem. Phys. 124:044104 [M]): their entries are the rates that leave the projection across
//! each bound, and their diagonal is zero. A transition of a state to itself (kept only where
//! its firings are counted) is an entry on row s and part of A_ss, so A is unchanged by it.

use super::space::Projection;

#[derive(Clone, Debug)]
pub struct Generator {
    pub states: usize,
    pub sinks: usize,
    /// Row r holds `col[row_ptr[r]..row_ptr[r + 1]]`, `rate[…]`.
    pub row_ptr: Vec<usize>,
    pub col: Vec<u32>,
    pub rate: Vec<f64>,
    /// The reaction of each entry.
    pub reaction: Vec<u32>,
    /// A_ss, the negative total exit rate of each state (sinks: none stored, zero).
    pub diag: Vec<f64>,
}

impl Generator {
    /// Transposes the projection's transitions (by source) into rows by destination, with the
    /// rates of phase `phase`.
    pub fn new(p: &Projection, sinks: usize, phase: usize) -> Generator {
        let rows = p.states + sinks;
        let mut count = vec![0usize; rows + 1];
        for &t in &p.target {
            count[t as usize + 1] += 1;
        }
        for r in 0..rows {
            count[r + 1] += count[r];
        }
        let row_ptr = count.clone();
        let mut next = count;
        let mut col = vec![0u32; p.target.len()];
        let mut rate = vec![0f64; p.target.len()];
        let mut reaction = vec![0u32; p.target.len()];
        let mut diag = vec![0f64; p.states];
        for (s, d) in diag.iter_mut().enumerate() {
            for e in p.first[s]..p.first[s + 1] {
                let t = p.target[e] as usize;
                col[next[t]] = s as u32;
                let a = p.rate[e * p.phases + phase];
                rate[next[t]] = a;
                reaction[next[t]] = p.reaction[e];
                next[t] += 1;
                *d -= a;
            }
        }
        Generator {
            states: p.states,
            sinks,
            row_ptr,
            col,
            rate,
            reaction,
            diag,
        }
    }

    /// Length of a probability vector over the states and the sinks.
    pub fn len(&self) -> usize {
        self.states + self.sinks
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Stored non-zeros (off-diagonal entries, sink rows included).
    pub fn nonzeros(&self) -> usize {
        self.col.len()
    }

    /// The uniformization rate q = max_s |A_ss| (Jensen 1953; Grassmann 1977 [M]).
    pub fn max_exit_rate(&self) -> f64 {
        self.diag.iter().fold(0.0f64, |m, &d| m.max(-d))
    }

    /// Bytes held by the generator.
    pub fn bytes(&self) -> usize {
        self.row_ptr.len() * std::mem::size_of::<usize>()
            + self.col.len() * 4
            + self.rate.len() * 8
            + self.reaction.len() * 4
            + self.diag.len() * 8
    }
}
