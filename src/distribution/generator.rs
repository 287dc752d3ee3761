//! The generator of the projected master equation, stored once in compressed sparse row form.
//!
//! dP/dt = A·P with A_ts = a_j(x_s) for each transition s → t (t ≠ s) and A_ss = −Σ_j a_j(x_s)
//! (every way out of s, into the projection or out of it). Rows are destinations, so a product
//! A·v reads each row's sources and writes one entry: rows split into independent chunks for
//! threads (transient.rs). Rows `states..states + sinks` are the absorbing sinks (Munsky & Khammash 2006,
//! J. Chem. Phys. 124:044104 \[M\]): their entries are the rates that leave the projection across
//! each bound, and their diagonal is zero. A transition of a state to itself (kept only where
//! its firings are counted) is an entry on row s and part of A_ss, so A is unchanged by it.
//!
//! **Coded rates.** A transient solve streams the whole generator once per product, so its
//! time is set by the bytes read per entry. At low copy number a reaction's propensity takes
//! one value per count of the species it reads, and the whole generator few distinct values
//! (a four-stage cascade bounded at 31: under 200 among 5·10⁶ entries). Where there are at
//! most 2¹⁶ distinct values, each entry stores a 2-byte code into a table of them instead of
//! its 8-byte value: the same numbers bit for bit, 6 bytes per entry (code and column) instead
//! of 12, and the table (at most 512 kB) stays in cache (dictionary coding, common practice).

use super::space::Projection;
use std::collections::HashMap;

/// The off-diagonal rates of a generator, one per entry: as they are, or coded (module doc).
#[derive(Clone, Debug)]
pub enum Rates {
    Plain(Vec<f64>),
    Coded { code: Vec<u16>, table: Vec<f64> },
}

impl Rates {
    /// Codes `v` where it has at most 2¹⁶ distinct values (compared bit for bit), else keeps it.
    pub fn new(v: Vec<f64>) -> Rates {
        let mut index: HashMap<u64, u16> = HashMap::new();
        let mut table = Vec::new();
        let mut code = Vec::with_capacity(v.len());
        for &a in &v {
            let k = match index.get(&a.to_bits()) {
                Some(&k) => k,
                None => {
                    if table.len() > u16::MAX as usize {
                        return Rates::Plain(v);
                    }
                    let k = table.len() as u16;
                    index.insert(a.to_bits(), k);
                    table.push(a);
                    k
                }
            };
            code.push(k);
        }
        Rates::Coded { code, table }
    }

    /// The rate of entry `e`.
    pub fn get(&self, e: usize) -> f64 {
        match self {
            Rates::Plain(v) => v[e],
            Rates::Coded { code, table } => table[code[e] as usize],
        }
    }

    /// Σ_{e ∈ range} rate_e.
    pub fn sum(&self, range: std::ops::Range<usize>) -> f64 {
        match self {
            Rates::Plain(v) => v[range].iter().sum(),
            Rates::Coded { code, table } => code[range].iter().map(|&k| table[k as usize]).sum(),
        }
    }

    /// Bytes held.
    pub fn bytes(&self) -> usize {
        match self {
            Rates::Plain(v) => v.len() * 8,
            Rates::Coded { code, table } => code.len() * 2 + table.len() * 8,
        }
    }
}

#[derive(Clone, Debug)]
pub struct Generator {
    pub states: usize,
    pub sinks: usize,
    /// Row r holds `col[row_ptr[r]..row_ptr[r + 1]]`, `rate[…]`.
    pub row_ptr: Vec<usize>,
    pub col: Vec<u32>,
    pub rate: Rates,
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
            rate: Rates::new(rate),
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

    /// The uniformization rate q = max_s |A_ss| (Jensen 1953; Grassmann 1977 \[M\]).
    pub fn max_exit_rate(&self) -> f64 {
        self.diag.iter().fold(0.0f64, |m, &d| m.max(-d))
    }

    /// Bytes held by the generator.
    pub fn bytes(&self) -> usize {
        self.row_ptr.len() * std::mem::size_of::<usize>()
            + self.col.len() * 4
            + self.rate.bytes()
            + self.reaction.len() * 4
            + self.diag.len() * 8
    }
}

#[cfg(test)]
mod tests {
    use super::Rates;

    // Dictionary coding is lossless (common practice): every value comes back bit for bit,
    // and past 2¹⁶ distinct values the rates are kept as they are.
    #[test]
    fn coded_rates_are_the_rates_bit_for_bit() {
        let v: Vec<f64> = (0..10_000).map(|e| 0.5 * (e % 97) as f64 + 1e-3).collect();
        let r = Rates::new(v.clone());
        assert!(matches!(&r, Rates::Coded { table, .. } if table.len() == 97));
        for (e, &a) in v.iter().enumerate() {
            assert_eq!(r.get(e).to_bits(), a.to_bits());
        }
        assert_eq!(r.sum(10..20), v[10..20].iter().sum::<f64>());
        let wide: Vec<f64> = (0..70_000).map(|e| e as f64 * 0.25).collect();
        let r = Rates::new(wide.clone());
        assert!(matches!(&r, Rates::Plain(p) if *p == wide));
        let edge: Vec<f64> = (0..65_536).map(|e| e as f64).collect();
        assert!(matches!(Rates::new(edge), Rates::Coded { table, .. } if table.len() == 65_536));
    }
}
