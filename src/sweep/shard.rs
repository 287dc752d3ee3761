//! Shards (`--shard I/N`) and merging their files back into one sweep.
//!
//! Shard I of N holds the points i with i mod N = I − 1: a deterministic, disjoint share that
//! deals neighbouring points (which often cost alike) to different shards. All N shards merged
//! hold every point once, each line exactly as an unsharded run writes it.

use super::store::{scan, sync_dir, Entry, Header};
use crate::error::{Error, Result};
use std::fmt;
use std::fs::File;
use std::io::{BufWriter, Read, Seek, SeekFrom, Write};

/// The I-th (1-based) of N disjoint shares of a sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    pub index: u64,
    pub count: u64,
}

impl Shard {
    /// Reads `I/N` with 1 ≤ I ≤ N.
    pub fn parse(text: &str) -> Result<Shard> {
        let bad = || {
            Error::usage(format!(
                "--shard {text}: expected I/N with 1 ≤ I ≤ N, e.g. `--shard 3/8` \
                 (in a job array: \"$SLURM_ARRAY_TASK_ID/$SLURM_ARRAY_TASK_COUNT\" with \
                 --array=1-N)"
            ))
        };
        let (i, n) = text.split_once('/').ok_or_else(bad)?;
        let index: u64 = i.trim().parse().map_err(|_| bad())?;
        let count: u64 = n.trim().parse().map_err(|_| bad())?;
        if index == 0 || index > count {
            return Err(bad());
        }
        Ok(Shard { index, count })
    }

    /// Whether point `i` belongs to this shard.
    pub fn contains(&self, i: u64) -> bool {
        i % self.count == self.index - 1
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// What a merge wrote.
#[derive(Debug)]
pub struct Merged {
    pub header: Header,
    /// Points written.
    pub points: u64,
    /// Input files that ended in a torn line (left out: its point was not finished).
    pub torn: Vec<String>,
}

/// Merges the sweep files `inputs` into `out`, ordered by point. Refuses files of different
/// sweeps, a point present twice, and an `out` that is one of the inputs. The merged file has
/// the header of a whole (unsharded) sweep, so `--resume` can finish any points still missing.
pub fn merge(inputs: &[String], out: &str) -> Result<Merged> {
    if inputs.is_empty() {
        return Err(Error::usage("merge needs at least one sweep file"));
    }
    let out_path = std::path::Path::new(out);
    for f in inputs {
        let same = std::fs::canonicalize(f)
            .ok()
            .is_some_and(|a| std::fs::canonicalize(out_path).ok().is_some_and(|b| a == b));
        if same || f == out {
            return Err(Error::usage(format!(
                "--out {out} is also an input; write the merge to a new file"
            )));
        }
    }
    let mut header: Option<Header> = None;
    let mut all: Vec<(Entry, usize)> = Vec::new();
    let mut torn = Vec::new();
    for (k, f) in inputs.iter().enumerate() {
        let s = scan(f, |_, _, _| {})?;
        let h = s.header.ok_or_else(|| {
            Error::usage(format!("{f} has no sweep header (an empty or torn file)"))
        })?;
        if let Some(first) = &header {
            if first.fingerprint != h.fingerprint {
                return Err(Error::usage(format!(
                    "{f} is from another sweep than {}; what differs: {}",
                    inputs[0],
                    first
                        .differences(&h, &format!("in {}", inputs[0]), &format!("in {f}"))
                        .join("; ")
                )));
            }
        }
        if let Some(shard) = h.shard()? {
            if let Some(e) = s.entries.iter().find(|e| !shard.contains(e.point)) {
                return Err(Error::usage(format!(
                    "{f} says it is shard {shard} but holds point {}, which is not in it",
                    e.point
                )));
            }
        }
        if s.torn {
            torn.push(f.clone());
        }
        all.extend(s.entries.into_iter().map(|e| (e, k)));
        header.get_or_insert(h);
    }
    let mut header = header.expect("at least one input");
    header.shard = None;
    all.sort_by_key(|(e, _)| e.point);
    for w in all.windows(2) {
        if w[0].0.point == w[1].0.point {
            return Err(Error::usage(format!(
                "point {} is in both {} and {}; merge each shard once",
                w[0].0.point, inputs[w[0].1], inputs[w[1].1]
            )));
        }
    }
    write_merged(inputs, out, &header, &all)?;
    Ok(Merged {
        header,
        points: all.len() as u64,
        torn,
    })
}

/// Writes the header and the lines, in the order given, to a temporary file beside `out`, syncs
/// it and renames it over `out`: a reader never sees half a merge.
fn write_merged(
    inputs: &[String],
    out: &str,
    header: &Header,
    all: &[(Entry, usize)],
) -> Result<()> {
    let tmp = format!("{out}.partial-{}", std::process::id());
    let io = |e| Error::io(&tmp, e);
    let mut files: Vec<File> = inputs
        .iter()
        .map(|f| File::open(f).map_err(|e| Error::io(f, e)))
        .collect::<Result<_>>()?;
    let result = (|| {
        let mut w = BufWriter::new(File::create(&tmp).map_err(io)?);
        w.write_all(header.line().as_bytes()).map_err(io)?;
        w.write_all(b"\n").map_err(io)?;
        let mut buf = Vec::new();
        for (e, k) in all {
            let f = &mut files[*k];
            buf.resize(e.len as usize + 1, 0);
            f.seek(SeekFrom::Start(e.offset))
                .and_then(|_| f.read_exact(&mut buf))
                .map_err(|err| Error::io(&inputs[*k], err))?;
            w.write_all(&buf).map_err(io)?;
        }
        let file = w.into_inner().map_err(|e| io(e.into_error()))?;
        file.sync_all().map_err(io)?;
        std::fs::rename(&tmp, out).map_err(|e| Error::io(out, e))?;
        sync_dir(out);
        Ok(())
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shards_are_disjoint_and_cover_every_point() {
        let shards: Vec<Shard> = (1..=4).map(|i| Shard { index: i, count: 4 }).collect();
        for p in 0..100 {
            assert_eq!(shards.iter().filter(|s| s.contains(p)).count(), 1);
        }
    }

    #[test]
    fn shard_syntax() {
        assert_eq!(Shard::parse("2/5").unwrap(), Shard { index: 2, count: 5 });
        for bad in ["0/5", "6/5", "1", "a/b", "1/0", "-1/3"] {
            assert!(Shard::parse(bad).is_err(), "{bad}");
        }
    }
}
