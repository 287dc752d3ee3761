//! The sweep file: JSON lines, a header line first, then one line per finished point.
//!
//! ```text
//! {"copyloop_sweep":1,"fingerprint":"…","network":{…},"vary":[…],"design":"grid",…}
//! {"point":0,"params":{"kon":1000000.0},"seed":…,"result":{…}}
//! {"point":3,"params":{"kon":…},"seed":…,"error":"…"}
//! ```
//!
//! Every point line is written with one `write` under a lock, then flushed and synced to the
//! disk (`fdatasync`), so a crash or a kill loses at most the points still running and can tear
//! only the last line. The fingerprint identifies the sweep: the network text, the varied
//! values, the design, the seed, the task and its options — not the shard, the thread count or
//! the file names, which do not change any number.

use super::design::{point_seed, Design};
use super::shard::Shard;
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use serde_json::{json, Map, Value};
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Write};
use std::path::Path;
use std::sync::{Mutex, MutexGuard};

/// Version of the file layout, the header's first key.
pub const FORMAT: u32 = 1;

/// FNV-1a, 64 bits: h ← (h ⊕ byte)·0x100000001b3 from 0xcbf29ce484222325 (Fowler, Noll & Vo;
/// IETF draft-eastlake-fnv \[M\]). A fingerprint against accidents, not against forgery.
pub fn fnv1a(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// The network a sweep ran on.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NetworkRef {
    pub file: String,
    /// FNV-1a of the file's bytes, 16 hex digits.
    pub hash: String,
}

/// The first line of a sweep file.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Header {
    pub copyloop_sweep: u32,
    /// 16 hex digits identifying the sweep (see the module doc).
    pub fingerprint: String,
    /// The copyloop version that started the file.
    pub version: String,
    pub network: NetworkRef,
    /// Each varied name: `name`, `spec` as typed, `target`, `scale`, `unit` (null: the unit the
    /// file wrote), `file_unit` (that unit, where the file shows one), and for a grid its
    /// `values`.
    pub vary: Vec<Value>,
    pub design: String,
    /// Points in the whole design (all shards).
    pub points: u64,
    pub seed: u64,
    pub task: String,
    pub options: Value,
    /// `I/N` for a shard, null for a whole sweep (or a merge of all shards).
    pub shard: Option<String>,
    /// What the fingerprint is a hash of.
    pub identity: Value,
    /// The result key a plot of the sweep draws when none is named (the first species the
    /// file does not clamp); absent where the task's result decides, and in older files.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub default_metric: Option<String>,
}

impl Header {
    /// The header of a sweep of `design` over the network file `file` (bytes `source`), running
    /// `task` with `options`.
    pub fn new(
        file: &str,
        source: &[u8],
        design: &Design,
        task: &str,
        options: Value,
        shard: Option<Shard>,
    ) -> Header {
        let hash = format!("{:016x}", fnv1a(source));
        let identity = json!({
            "format": FORMAT,
            "network": hash,
            "vary": design.vary.iter().map(|v| v.identity()).collect::<Vec<_>>(),
            "design": design.kind.as_str(),
            "points": design.total(),
            "seed": design.seed,
            "task": task,
            "options": options,
        });
        let fingerprint = format!("{:016x}", fnv1a(identity.to_string().as_bytes()));
        let columns = design.grid_columns();
        let vary = design
            .vary
            .iter()
            .enumerate()
            .map(|(d, v)| {
                let mut m = json!({
                    "name": v.name, "spec": v.spec, "target": v.target.as_str(),
                    "scale": v.scale.as_str(), "unit": v.unit_text(),
                    "file_unit": v.file_unit,
                });
                if let Some(c) = columns {
                    m["values"] = json!(c[d]);
                }
                m
            })
            .collect();
        Header {
            copyloop_sweep: FORMAT,
            fingerprint,
            version: env!("CARGO_PKG_VERSION").to_string(),
            network: NetworkRef {
                file: file.to_string(),
                hash,
            },
            vary,
            design: design.kind.as_str().to_string(),
            points: design.total(),
            seed: design.seed,
            task: task.to_string(),
            options,
            shard: shard.map(|s| s.to_string()),
            identity,
            default_metric: None,
        }
    }

    /// The header as one JSON line (without the newline).
    pub fn line(&self) -> String {
        serde_json::to_string(self).expect("a header always encodes")
    }

    /// The parts of the sweep that differ between `self` and `other`, in words, each with its
    /// value in both (`mine` and `theirs` name them).
    pub fn differences(&self, other: &Header, mine: &str, theirs: &str) -> Vec<String> {
        let a = &self.identity;
        let b = &other.identity;
        let mut out = Vec::new();
        let parts = [
            ("network", "the network file's text"),
            ("vary", "the --vary values"),
            ("design", "the design"),
            ("points", "the number of points"),
            ("seed", "the seed"),
            ("task", "the task"),
            ("options", "the task's options"),
            ("format", "the file format"),
        ];
        for (key, words) in parts {
            if a[key] != b[key] {
                out.push(format!("{words} ({} {mine}, {} {theirs})", a[key], b[key]));
            }
        }
        if out.is_empty() && self.fingerprint != other.fingerprint {
            out.push("the fingerprint".into());
        }
        out
    }

    /// The shard the header names, if any.
    pub fn shard(&self) -> Result<Option<Shard>> {
        self.shard.as_deref().map(Shard::parse).transpose()
    }
}

/// The line of a finished point: `{point, params, seed, result}`, or `error` in place of
/// `result` when the task failed there.
pub fn point_line(
    design: &Design,
    point: u64,
    outcome: std::result::Result<&Value, &str>,
) -> String {
    let mut params = Map::new();
    for (v, x) in design.vary.iter().zip(design.values(point)) {
        params.insert(v.name.clone(), json!(x));
    }
    let (key, body) = match outcome {
        Ok(result) => ("result", result.to_string()),
        Err(e) => ("error", Value::from(e).to_string()),
    };
    format!(
        "{{\"point\":{point},\"params\":{},\"seed\":{},\"{key}\":{body}}}",
        Value::Object(params),
        design.seed_of(point)
    )
}

/// Where one point's line sits in a file.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Entry {
    pub point: u64,
    /// Byte offset of the line.
    pub offset: u64,
    /// Length in bytes, without the newline.
    pub len: u64,
}

/// What a sweep file holds.
#[derive(Debug)]
pub struct Scan {
    /// `None` for an empty file, or one whose header line is torn.
    pub header: Option<Header>,
    /// The point lines, in file order.
    pub entries: Vec<Entry>,
    /// Bytes up to the end of the last whole line.
    pub good_len: u64,
    /// Whether the file ends in a torn (unfinished) line after `good_len`.
    pub torn: bool,
}

/// Reads the sweep file at `path`, checking every line, and calls `visit` with the header and
/// each point line.
/// A file that ends without a newline ends in a torn line: it is reported, not read. Any other
/// line that is not a point of this sweep (bad JSON, a point out of range or seen twice, a seed
/// that is not the point's) is an error.
pub fn scan(path: &str, mut visit: impl FnMut(&Header, &Entry, &Value)) -> Result<Scan> {
    let file = File::open(path).map_err(|e| Error::io(path, e))?;
    let mut reader = BufReader::new(file);
    let mut buf = Vec::new();
    let mut offset = 0u64;
    let mut header: Option<Header> = None;
    let mut entries = Vec::new();
    let mut seen = Bits::default();
    let mut line_no = 0u64;
    loop {
        buf.clear();
        let n = reader
            .read_until(b'\n', &mut buf)
            .map_err(|e| Error::io(path, e))?;
        if n == 0 {
            return Ok(Scan {
                header,
                entries,
                good_len: offset,
                torn: false,
            });
        }
        line_no += 1;
        if buf.last() != Some(&b'\n') {
            return Ok(Scan {
                header,
                entries,
                good_len: offset,
                torn: true,
            });
        }
        let text = &buf[..buf.len() - 1];
        let bad = |what: &str| {
            Error::usage(format!(
                "{path}:{line_no}: {what}; this is not a copyloop sweep file, or it was edited"
            ))
        };
        match &header {
            None => {
                let h: Header = serde_json::from_slice(text)
                    .map_err(|_| bad("the first line is not a sweep header"))?;
                if h.copyloop_sweep != FORMAT {
                    return Err(bad(&format!(
                        "the file has format {}, this copyloop reads format {FORMAT}",
                        h.copyloop_sweep
                    )));
                }
                header = Some(h);
            }
            Some(h) => {
                let v: Value =
                    serde_json::from_slice(text).map_err(|_| bad("this line is not JSON"))?;
                let point = v["point"]
                    .as_u64()
                    .filter(|&p| p < h.points)
                    .ok_or_else(|| bad("this line has no valid `point`"))?;
                if v["seed"].as_u64() != Some(point_seed(h.seed, point)) {
                    return Err(bad(&format!("point {point} has the wrong `seed`")));
                }
                if v.get("result").is_none() && v.get("error").is_none() {
                    return Err(bad(&format!(
                        "point {point} has neither `result` nor `error`"
                    )));
                }
                if !seen.insert(point) {
                    return Err(bad(&format!("point {point} appears twice")));
                }
                let e = Entry {
                    point,
                    offset,
                    len: text.len() as u64,
                };
                visit(h, &e, &v);
                entries.push(e);
            }
        }
        offset += n as u64;
    }
}

/// A growable set of point numbers, one bit each.
#[derive(Default)]
struct Bits(Vec<u64>);

impl Bits {
    /// Adds `i`; false if it was there already.
    fn insert(&mut self, i: u64) -> bool {
        let (w, b) = ((i / 64) as usize, i % 64);
        if w >= self.0.len() {
            self.0.resize(w + 1, 0);
        }
        let had = self.0[w] >> b & 1 == 1;
        self.0[w] |= 1 << b;
        !had
    }
}

/// An open sweep file that finished points are appended to.
#[derive(Debug)]
pub struct Store {
    path: String,
    file: Mutex<File>,
}

impl Store {
    /// Starts a new sweep file with `header`. An existing file that is not empty is left alone:
    /// it may hold a night's work (`--resume` continues it).
    pub fn create(path: &str, header: &Header) -> Result<Store> {
        let file = open_locked(path)?;
        let len = file.metadata().map_err(|e| Error::io(path, e))?.len();
        if len > 0 {
            return Err(Error::usage(format!(
                "{path} already exists; add --resume to continue that sweep, or remove the file"
            )));
        }
        Store::start(path, file, header)
    }

    /// Writes the header to a new (or emptied) file this process holds the lock of.
    fn start(path: &str, mut file: File, header: &Header) -> Result<Store> {
        let mut line = header.line();
        line.push('\n');
        file.set_len(0)
            .and_then(|_| file.write_all(line.as_bytes()))
            .and_then(|_| file.sync_all())
            .map_err(|e| Error::io(path, e))?;
        sync_dir(path);
        Ok(Store {
            path: path.to_string(),
            file: Mutex::new(file),
        })
    }

    /// Continues the sweep file at `path`: returns it and the points it already holds. A
    /// missing or empty file (or one whose only line is a torn header) starts afresh; a torn
    /// last line is cut off; a file of another sweep, or of another shard, is refused.
    pub fn resume(path: &str, header: &Header) -> Result<(Store, Vec<u64>)> {
        let file = open_locked(path)?;
        let scan = scan(path, |_, _, _| {})?;
        let Some(found) = scan.header else {
            return Ok((Store::start(path, file, header)?, Vec::new()));
        };
        if found.fingerprint != header.fingerprint {
            return Err(Error::usage(format!(
                "{path} belongs to another sweep (fingerprint {} there, {} here); what differs: \
                 {}; use another --out file, or the settings that started it",
                found.fingerprint,
                header.fingerprint,
                found
                    .differences(header, "in the file", "in this run")
                    .join("; ")
            )));
        }
        if found.shard != header.shard {
            let name = |s: &Option<String>| match s {
                Some(s) => format!("shard {s}"),
                None => "the whole sweep".to_string(),
            };
            return Err(Error::usage(format!(
                "{path} holds {}, but this run is {}; give the same --shard",
                name(&found.shard),
                name(&header.shard)
            )));
        }
        if scan.torn {
            file.set_len(scan.good_len)
                .and_then(|_| file.sync_all())
                .map_err(|e| Error::io(path, e))?;
        }
        let done = scan.entries.iter().map(|e| e.point).collect();
        Ok((
            Store {
                path: path.to_string(),
                file: Mutex::new(file),
            },
            done,
        ))
    }

    /// Appends one line (given without its newline), then syncs it to the disk.
    pub fn append(&self, line: &str) -> Result<()> {
        let mut bytes = Vec::with_capacity(line.len() + 1);
        bytes.extend_from_slice(line.as_bytes());
        bytes.push(b'\n');
        let mut file = self.lock();
        file.write_all(&bytes)
            .and_then(|_| file.flush())
            .and_then(|_| file.sync_data())
            .map_err(|e| Error::io(&self.path, e))
    }

    /// Holds the file: no line is written while the guard lives, so a process that exits
    /// holding it leaves only whole lines behind.
    pub fn lock(&self) -> MutexGuard<'_, File> {
        self.file.lock().unwrap_or_else(|p| p.into_inner())
    }

    pub fn path(&self) -> &str {
        &self.path
    }
}

/// Opens (creating it if missing) the sweep file at `path` for appending, and takes its
/// exclusive advisory lock for as long as the file stays open, so that a second sweep given
/// the same `--out` is refused instead of interleaving its lines with the first's. Every write
/// goes to the end of the file (append mode).
fn open_locked(path: &str) -> Result<File> {
    let file = OpenOptions::new()
        .read(true)
        .append(true)
        .create(true)
        .open(path)
        .map_err(|e| Error::io(path, e))?;
    match file.try_lock() {
        Ok(()) => Ok(file),
        Err(std::fs::TryLockError::WouldBlock) => Err(Error::usage(format!(
            "{path} is being written by another copyloop sweep (it holds the file's lock); \
             wait for it to finish, or give this sweep another --out"
        ))),
        Err(std::fs::TryLockError::Error(e)) => Err(Error::io(path, e)),
    }
}

/// Syncs the directory holding `path`, so that a newly created file survives a crash (POSIX
/// leaves the directory entry to the directory's own sync). Best effort: some file systems do
/// not allow opening a directory.
pub(crate) fn sync_dir(path: &str) {
    let dir = Path::new(path)
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    if let Ok(d) = File::open(dir) {
        let _ = d.sync_all();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // FNV-1a 64 test vectors (FNV reference suite; recomputed in tests/reference/tables.py
    // [C]): "" → cbf29ce484222325,
    // "a" → af63dc4c8601ec8c, "foobar" → 85944171f73967e8.
    // Two sweeps given one --out: the second is refused while the first holds the file, and
    // the first's lines stay whole.
    #[test]
    fn a_second_writer_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.jsonl");
        let path = path.to_str().unwrap();
        let src = b"param k = 1\nspecies A = 0\nstep s 0 -> A @ k\n";
        let ast = crate::network::parser::parse("t.crn", src).unwrap();
        let vary = crate::sweep::Vary::parse("k=list:1,2", &ast).unwrap();
        let design = Design::grid(vec![vary], 0).unwrap();
        let header = Header::new("t.crn", src, &design, "steady", json!({}), None);
        let first = Store::create(path, &header).unwrap();
        let e = Store::create(path, &header).unwrap_err();
        assert!(e.to_string().contains("another copyloop sweep"), "{e}");
        let e = Store::resume(path, &header).unwrap_err();
        assert!(e.to_string().contains("another copyloop sweep"), "{e}");
        drop(first);
        // Once the first is done the file can be resumed.
        let (_, done) = Store::resume(path, &header).unwrap();
        assert!(done.is_empty());
    }

    #[test]
    fn fnv1a_test_vectors() {
        assert_eq!(fnv1a(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a(b"a"), 0xaf63_dc4c_8601_ec8c);
        assert_eq!(fnv1a(b"foobar"), 0x8594_4171_f739_67e8);
    }
}
