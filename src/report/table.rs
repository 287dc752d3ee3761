//! Aligned text tables: a header row, a rule, and columns padded to their widest cell
//! (numbers right-aligned, text left-aligned).

/// A table under construction.
#[derive(Debug, Default)]
pub struct Table {
    header: Vec<String>,
    rows: Vec<Vec<String>>,
}

impl Table {
    pub fn new(header: &[&str]) -> Table {
        Table {
            header: header.iter().map(|s| s.to_string()).collect(),
            rows: Vec::new(),
        }
    }

    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    fn numeric(cell: &str) -> bool {
        !cell.is_empty()
            && cell
                .chars()
                .all(|c| c.is_ascii_digit() || "+-.e[], ±%".contains(c))
            && cell.chars().any(|c| c.is_ascii_digit())
    }

    pub fn render(&self) -> String {
        let cols = self.header.len();
        let mut width = vec![0usize; cols];
        for row in std::iter::once(&self.header).chain(&self.rows) {
            for (w, cell) in width.iter_mut().zip(row) {
                *w = (*w).max(cell.chars().count());
            }
        }
        let mut out = String::new();
        let line = |cells: &[String], out: &mut String, header: bool| {
            let mut parts = Vec::new();
            for (k, w) in width.iter().enumerate() {
                let cell = cells.get(k).map_or("", |s| s.as_str());
                let pad = w - cell.chars().count();
                if !header && Self::numeric(cell) {
                    parts.push(format!("{}{cell}", " ".repeat(pad)));
                } else {
                    parts.push(format!("{cell}{}", " ".repeat(pad)));
                }
            }
            out.push_str("  ");
            out.push_str(parts.join("  ").trim_end());
            out.push('\n');
        };
        line(&self.header, &mut out, true);
        let rule: Vec<String> = width.iter().map(|w| "-".repeat(*w)).collect();
        line(&rule, &mut out, true);
        for r in &self.rows {
            line(r, &mut out, false);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::Table;

    #[test]
    fn columns_align() {
        let mut t = Table::new(&["name", "count"]);
        t.row(vec!["E".into(), "100".into()]);
        t.row(vec!["substrate".into(), "5".into()]);
        let s = t.render();
        let lines: Vec<&str> = s.lines().collect();
        assert_eq!(lines[0], "  name       count");
        assert_eq!(lines[2], "  E            100");
        assert_eq!(lines[3], "  substrate      5");
    }
}
