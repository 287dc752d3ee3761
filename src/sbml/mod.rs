//! SBML import: models written for other tools, read into copyloop's own network.
//!
//! ```text
//! xml.rs (bytes → XML tree, positions) → read.rs (typed Document, level defaults; math.rs reads
//! each MathML formula) → validate.rs (references, refusals) → functions.rs (calls expanded)
//! → map.rs (Document → Network)
//! ```
//!
//! Level 2 Versions 1–5 and Level 3 Versions 1–2 core. What copyloop does not simulate is
//! refused with the construct, the element's id and its line, never replaced by a different
//! model. Every step before `map.rs` is independent of the network representation.

pub mod builtins;
pub mod error;
pub mod eval;
pub mod export;
pub mod functions;
pub mod initial;
pub mod map;
pub mod math;
pub mod model;
pub mod monomial;
pub mod output;
pub mod read;
pub mod units;
pub mod validate;
pub mod write;
pub mod xml;

pub use error::{Construct, ErrorKind, Loc, SbmlError};
pub use model::Document;

use crate::error::Error;
use crate::network::{Network, Overrides};

/// Most errors reported for one file.
const MAX_ERRORS: usize = 50;

/// A read and validated document, function calls expanded.
#[derive(Clone, Debug)]
pub struct Import {
    pub document: Document,
    /// Things skipped on purpose (presentation packages, constraints).
    pub warnings: Vec<SbmlError>,
}

/// Whether a path names an SBML file (by its extension, `.xml` or `.sbml`).
pub fn is_sbml_path(path: &str) -> bool {
    let p = std::path::Path::new(path);
    p.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("xml") || e.eq_ignore_ascii_case("sbml"))
}

/// Reads, validates and expands an SBML file's bytes.
pub fn import(bytes: &[u8]) -> Result<Import, Vec<SbmlError>> {
    let text = xml::text(bytes).map_err(|e| vec![e])?;
    let tree = xml::Xml::parse(text).map_err(|e| vec![e])?;
    let mut document = read::document(&tree).map_err(|e| vec![e])?;
    let (mut errors, warnings) = validate::validate(&document);
    if !errors.is_empty() {
        errors.truncate(MAX_ERRORS);
        return Err(errors);
    }
    let keep = builtins::recognised(&document.model).into_keys().collect();
    functions::expand(&mut document.model, &keep).map_err(|e| vec![e])?;
    Ok(Import { document, warnings })
}

/// The network compiler's syntax tree for SBML `bytes` (the file called `file`), for commands
/// that compile variants of one network (sweeps).
pub fn syntax_tree(file: &str, bytes: &[u8]) -> Result<crate::network::parser::Ast, Error> {
    let text = String::from_utf8_lossy(bytes);
    let diagnostics = |errs: Vec<SbmlError>| {
        Error::Input(errs.iter().map(|e| e.diagnostic(file, &text)).collect())
    };
    let imported = import(bytes).map_err(diagnostics)?;
    map::ast(file, &text, &imported.document)
        .map(|m| m.ast)
        .map_err(|e| diagnostics(vec![e]))
}

/// Reads the SBML file at `path` and compiles it to a network.
pub fn load(path: &str, overrides: &Overrides) -> Result<Network, Error> {
    load_with_document(path, overrides).map(|(net, _)| net)
}

/// As [`load`], keeping the imported document beside the network, for output that reports
/// the model's own symbols by id.
pub fn load_with_document(path: &str, overrides: &Overrides) -> Result<(Network, Document), Error> {
    let bytes = std::fs::read(path).map_err(|e| Error::io(path, e))?;
    compile_source(path, &bytes, overrides)
}

/// Compiles SBML `bytes` (the file called `file`) to a network.
pub fn load_source(file: &str, bytes: &[u8], overrides: &Overrides) -> Result<Network, Error> {
    compile_source(file, bytes, overrides).map(|(net, _)| net)
}

/// The network of SBML `bytes` and the document it was compiled from.
fn compile_source(
    file: &str,
    bytes: &[u8],
    overrides: &Overrides,
) -> Result<(Network, Document), Error> {
    let text = String::from_utf8_lossy(bytes);
    let diagnostics = |errs: Vec<SbmlError>| {
        Error::Input(errs.iter().map(|e| e.diagnostic(file, &text)).collect())
    };
    let imported = import(bytes).map_err(diagnostics)?;
    let mut net = map::network(file, &text, &imported.document, overrides)?;
    net.warnings.extend(
        imported
            .warnings
            .iter()
            .map(|w| w.diagnostic(file, &text).warning()),
    );
    Ok((net, imported.document))
}
