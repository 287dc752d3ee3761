//! Text inside an SVG document: escaped so that any name, file name or JSON pointer stays
//! well-formed XML, and measured roughly so that labels and legends can be laid out without
//! fonts.

/// `s` made safe as SVG character data or as a quoted attribute value: `& < > " '` become
/// entities, and characters XML 1.0 does not allow (controls other than tab, line feed and
/// carriage return, U+FFFE, U+FFFF) become U+FFFD (XML 1.0 §2.2, "Char" \[verified\]).
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            '\t' | '\n' | '\r' => out.push(' '),
            c if (c as u32) < 0x20 || c == '\u{fffe}' || c == '\u{ffff}' => out.push('\u{fffd}'),
            c => out.push(c),
        }
    }
    out
}

/// Average advance of a character of a sans-serif face, in ems: an upper estimate (common
/// practice: proportional faces average about 0.5 em for lower-case text; digits and capitals
/// run wider).
const ADVANCE_EM: f64 = 0.6;

/// Estimated width in pixels of `s` at `size` pixels, used to reserve room for labels.
pub fn width(s: &str, size: f64) -> f64 {
    s.chars().count() as f64 * ADVANCE_EM * size
}

/// The font size, at most `size`, at which `s` fits in `room` pixels (never below 6 px).
pub fn fit(s: &str, size: f64, room: f64) -> f64 {
    let w = width(s, size);
    if w <= room {
        size
    } else {
        (size * room / w).max(6.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_keeps_any_text_well_formed() {
        let nasty = "a<b & \"c\" 'd' \u{1}\u{7}e>\u{ffff}";
        let e = esc(nasty);
        assert_eq!(
            e,
            "a&lt;b &amp; &quot;c&quot; &apos;d&apos; \u{fffd}\u{fffd}e&gt;\u{fffd}"
        );
        let doc =
            format!(r#"<svg xmlns="http://www.w3.org/2000/svg" a="{e}"><text>{e}</text></svg>"#);
        let parsed = roxmltree::Document::parse(&doc).expect("well-formed");
        let text = parsed
            .descendants()
            .find(|n| n.has_tag_name("text"))
            .unwrap();
        assert_eq!(
            text.text(),
            Some("a<b & \"c\" 'd' \u{fffd}\u{fffd}e>\u{fffd}")
        );
        assert_eq!(parsed.root_element().attribute("a"), text.text());
    }

    #[test]
    fn width_grows_with_length_and_size() {
        assert_eq!(width("", 12.0), 0.0);
        assert!(width("H·G", 12.0) < width("H·G → HG", 12.0));
        assert!((width("abcd", 10.0) - 24.0).abs() < 1e-12);
        assert_eq!(fit("abcd", 10.0, 100.0), 10.0);
        assert!((width("abcdefghij", fit("abcdefghij", 12.0, 50.0)) - 50.0).abs() < 1e-9);
        assert_eq!(fit("abcdefghij", 12.0, 10.0), 6.0, "never below 6 px");
    }
}
