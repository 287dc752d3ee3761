//! The XML layer: size limit, UTF-8, well-formedness and namespaces, and the line and column of
//! every element.
//!
//! XML is read with `roxmltree`: a read-only tree over the input text that resolves namespaces
//! as the XML Namespaces recommendation says (so `<sbml:species>` and `<species>` under a
//! default namespace are the same element, and a foreign element named `species` is not), keeps
//! each node's byte range, refuses DTDs (and with them entity expansion attacks), and parses a
//! large model in a few milliseconds. Positions are computed here from a table of line starts,
//! so looking one up costs a binary search rather than a scan of the text.

use super::error::{ErrorKind, Loc, SbmlError};

/// Largest SBML file the importer reads (32 MiB): far above curated kinetic models (a
/// 2,000-reaction model is a few megabytes), small enough that a stray file fails at once.
pub const MAX_BYTES: usize = 32 << 20;

/// The MathML namespace.
pub const MATHML_NS: &str = "http://www.w3.org/1998/Math/MathML";

/// A parsed XML document and the table that turns byte offsets into lines and columns.
pub struct Xml<'a> {
    pub doc: roxmltree::Document<'a>,
    text: &'a str,
    line_starts: Vec<usize>,
}

pub type Node<'a, 'i> = roxmltree::Node<'a, 'i>;

/// Checks `bytes` (size, UTF-8) and returns them as text.
pub fn text(bytes: &[u8]) -> Result<&str, SbmlError> {
    if bytes.len() > MAX_BYTES {
        return Err(SbmlError::new(
            ErrorKind::TooLarge {
                bytes: bytes.len() as u64,
                limit: MAX_BYTES as u64,
            },
            "sbml",
            None,
            Loc { line: 1, col: 1 },
        ));
    }
    std::str::from_utf8(bytes).map_err(|e| {
        let good = &bytes[..e.valid_up_to()];
        let line = good.iter().filter(|&&b| b == b'\n').count() as u32 + 1;
        let start = good.iter().rposition(|&b| b == b'\n').map_or(0, |p| p + 1);
        let col = String::from_utf8_lossy(&good[start..]).chars().count() as u32 + 1;
        SbmlError::new(ErrorKind::NotUtf8, "sbml", None, Loc { line, col })
    })
}

impl<'a> Xml<'a> {
    /// Parses `text` as XML.
    pub fn parse(text: &'a str) -> Result<Xml<'a>, SbmlError> {
        let opts = roxmltree::ParsingOptions {
            allow_dtd: false,
            ..Default::default()
        };
        let doc = roxmltree::Document::parse_with_options(text, opts).map_err(|e| {
            let p = e.pos();
            SbmlError::new(
                ErrorKind::Xml {
                    message: xml_message(&e),
                },
                "xml",
                None,
                Loc {
                    line: p.row,
                    col: p.col,
                },
            )
        })?;
        let mut line_starts = vec![0];
        line_starts.extend(memchr_newlines(text));
        Ok(Xml {
            doc,
            text,
            line_starts,
        })
    }

    /// Line and column of a node's start.
    pub fn loc(&self, node: Node) -> Loc {
        let at = node.range().start;
        let i = match self.line_starts.binary_search(&at) {
            Ok(i) => i,
            Err(i) => i - 1,
        };
        let start = self.line_starts[i];
        let col = self.text[start..at].chars().count() as u32 + 1;
        Loc {
            line: i as u32 + 1,
            col,
        }
    }
}

fn memchr_newlines(text: &str) -> impl Iterator<Item = usize> + '_ {
    text.bytes()
        .enumerate()
        .filter(|&(_, b)| b == b'\n')
        .map(|(i, _)| i + 1)
}

/// roxmltree's message without its trailing position (the diagnostic shows it).
fn xml_message(e: &roxmltree::Error) -> String {
    let s = e.to_string();
    match s.rfind(" at ") {
        Some(i) if s[i + 4..].chars().all(|c| c.is_ascii_digit() || c == ':') => s[..i].to_string(),
        _ => s,
    }
}

/// The element children of `node` (text, comments and processing instructions skipped).
pub fn elements<'a, 'i>(node: Node<'a, 'i>) -> impl Iterator<Item = Node<'a, 'i>> {
    node.children().filter(|n| n.is_element())
}

/// The local name of an element.
pub fn name<'a>(node: Node<'a, '_>) -> &'a str {
    node.tag_name().name()
}

/// The namespace of an element, or "" when it has none.
pub fn ns<'a>(node: Node<'a, '_>) -> &'a str {
    node.tag_name().namespace().unwrap_or("")
}

/// The attribute `name` without a namespace (SBML core attributes are unprefixed).
pub fn attr<'a>(node: Node<'a, '_>, name: &str) -> Option<&'a str> {
    node.attributes()
        .find(|a| a.name() == name && a.namespace().is_none())
        .map(|a| a.value())
}
