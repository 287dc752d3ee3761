//! Reading copyloop's plots back: the SVG parsed as XML (roxmltree), its elements found by the
//! `class` each carries, every coordinate checked finite and inside the view box, and the
//! document rendered by a real SVG renderer (resvg), which must accept it without a warning.

use roxmltree::{Document, Node};
use std::sync::{Mutex, OnceLock};
use std::thread::ThreadId;

/// A parsed plot.
pub struct Plot<'a> {
    pub doc: Document<'a>,
    pub width: f64,
    pub height: f64,
}

/// Parses `text` as XML, which must be an `<svg>` with a `0 0 W H` view box matching its
/// width and height.
pub fn parse(text: &str) -> Plot<'_> {
    let doc = Document::parse(text).expect("the SVG is well-formed XML");
    let root = doc.root_element();
    assert!(
        root.has_tag_name(("http://www.w3.org/2000/svg", "svg")),
        "root is svg"
    );
    let vb: Vec<f64> = root
        .attribute("viewBox")
        .expect("a view box")
        .split_whitespace()
        .map(|v| v.parse().expect("a number"))
        .collect();
    assert_eq!(vb.len(), 4);
    assert_eq!((vb[0], vb[1]), (0.0, 0.0));
    let num = |a: &str| root.attribute(a).and_then(|v| v.parse::<f64>().ok());
    assert_eq!(num("width"), Some(vb[2]));
    assert_eq!(num("height"), Some(vb[3]));
    let p = Plot {
        doc,
        width: vb[2],
        height: vb[3],
    };
    p.check_coordinates();
    p
}

fn has_class(n: &Node, class: &str) -> bool {
    n.attribute("class")
        .is_some_and(|c| c.split_whitespace().any(|w| w == class))
}

/// The numbers of an SVG path's `d`, as (x, y) pairs (the plots write `M`, `L` and `Z` with
/// absolute coordinates only).
pub fn path_points(d: &str) -> Vec<(f64, f64)> {
    d.split_whitespace()
        .filter(|t| *t != "Z")
        .map(|t| {
            let t = t.trim_start_matches(['M', 'L']);
            let (x, y) = t.split_once(',').expect("x,y");
            (x.parse().expect("x"), y.parse().expect("y"))
        })
        .collect()
}

/// Estimated advance of a sans-serif character in ems: an upper estimate (the plots lay out
/// their text with the same one).
const ADVANCE_EM: f64 = 0.6;

impl<'a> Plot<'a> {
    /// Every element with `class` (in document order).
    pub fn all(&self, class: &str) -> Vec<Node<'_, 'a>> {
        self.doc
            .descendants()
            .filter(|n| n.is_element() && has_class(n, class))
            .collect()
    }

    /// The texts of the elements with `class`.
    pub fn texts(&self, class: &str) -> Vec<String> {
        self.all(class)
            .iter()
            .map(|n| n.text().unwrap_or("").to_string())
            .collect()
    }

    /// The one text with `class`.
    pub fn text(&self, class: &str) -> String {
        let t = self.texts(class);
        assert_eq!(t.len(), 1, "one {class}: {t:?}");
        t[0].clone()
    }

    /// The series groups of a chart, in order.
    pub fn series(&self) -> Vec<Node<'_, 'a>> {
        self.all("series")
    }

    /// The legend's names, in order; the legend must stand beside the plot area, never over
    /// the data.
    pub fn legend(&self) -> Vec<String> {
        let legend = self.all("legend");
        assert_eq!(legend.len(), 1, "one legend");
        let (frame, box_) = (self.bounds("frame"), self.bounds("legend-frame"));
        assert!(
            box_.0 > frame.2,
            "legend {box_:?} beside the plot area {frame:?}"
        );
        legend[0]
            .descendants()
            .filter(|n| has_class(n, "legend-label"))
            .map(|n| n.text().unwrap_or("").to_string())
            .collect()
    }

    /// A box (x0, y0, x1, y1) of an element with `class`.
    pub fn bounds(&self, class: &str) -> (f64, f64, f64, f64) {
        let n = &self.all(class)[0];
        let v = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
        (v("x"), v("y"), v("x") + v("width"), v("y") + v("height"))
    }

    /// Every coordinate finite and inside the view box, and every text's estimated extent too.
    fn check_coordinates(&self) {
        let (w, h) = (self.width, self.height);
        let inside = |what: &str, x: f64, y: f64| {
            assert!(
                x.is_finite() && y.is_finite(),
                "{what}: non-finite coordinate ({x}, {y})"
            );
            assert!(
                (-0.01..=w + 0.01).contains(&x) && (-0.01..=h + 0.01).contains(&y),
                "{what}: ({x}, {y}) outside the view box {w} × {h}"
            );
        };
        for n in self.doc.descendants().filter(|n| n.is_element()) {
            let tag = n.tag_name().name();
            let what = format!("<{tag} class={:?}>", n.attribute("class").unwrap_or(""));
            let num = |a: &str| -> Option<f64> {
                n.attribute(a).map(|v| {
                    v.parse::<f64>()
                        .unwrap_or_else(|_| panic!("{what}: {a}={v:?} is not a number"))
                })
            };
            for (ax, ay) in [("x", "y"), ("x1", "y1"), ("x2", "y2"), ("cx", "cy")] {
                if tag == "linearGradient" {
                    continue;
                }
                if let (Some(x), Some(y)) = (num(ax), num(ay)) {
                    inside(&what, x, y);
                }
            }
            if tag == "rect" {
                let (x, y) = (num("x").unwrap_or(0.0), num("y").unwrap_or(0.0));
                let (rw, rh) = (num("width").unwrap(), num("height").unwrap());
                assert!(rw >= 0.0 && rh >= 0.0, "{what}: negative size");
                inside(&what, x + rw, y + rh);
            }
            if tag == "circle" {
                let (x, y, r) = (num("cx").unwrap(), num("cy").unwrap(), num("r").unwrap());
                inside(&what, x - r, y - r);
                inside(&what, x + r, y + r);
            }
            if tag == "path" {
                let pts = path_points(n.attribute("d").expect("a path has d"));
                assert!(!pts.is_empty(), "{what}: empty path");
                for (x, y) in pts {
                    inside(&what, x, y);
                }
            }
            if tag == "text" {
                let (x, y) = (num("x").unwrap(), num("y").unwrap());
                let size = num("font-size").unwrap();
                let len = n.text().unwrap_or("").chars().count() as f64 * ADVANCE_EM * size;
                let (a, b) = match n.attribute("text-anchor") {
                    Some("middle") => (-len / 2.0, len / 2.0),
                    Some("end") => (-len, 0.0),
                    _ => (0.0, len),
                };
                if n.attribute("transform")
                    .is_some_and(|t| t.starts_with("rotate(-90"))
                {
                    // Read upwards: the text runs from y − a up to y − b.
                    inside(&what, x - size, y - b);
                    inside(&what, x, y - a);
                } else {
                    inside(&what, x + a, y - size);
                    inside(&what, x + b, y);
                }
            }
        }
    }
}

/// Warnings the renderer logged, with the thread that rendered.
static WARNINGS: Mutex<Vec<(ThreadId, String)>> = Mutex::new(Vec::new());

struct Collect;

impl log::Log for Collect {
    fn enabled(&self, m: &log::Metadata) -> bool {
        m.level() <= log::Level::Warn
    }

    fn log(&self, r: &log::Record) {
        if self.enabled(r.metadata()) {
            let id = std::thread::current().id();
            WARNINGS.lock().unwrap().push((id, format!("{}", r.args())));
        }
    }

    fn flush(&self) {}
}

/// Renders `text` with resvg, which must parse it and log no warning about it; returns the
/// pixels (RGBA, premultiplied, white background as the document paints it).
pub fn render(text: &str) -> resvg::tiny_skia::Pixmap {
    static LOGGER: OnceLock<()> = OnceLock::new();
    LOGGER.get_or_init(|| {
        log::set_logger(&Collect).expect("no other logger");
        log::set_max_level(log::LevelFilter::Warn);
    });
    let me = std::thread::current().id();
    WARNINGS.lock().unwrap().retain(|(id, _)| *id != me);
    let tree = resvg::usvg::Tree::from_str(text, &resvg::usvg::Options::default())
        .unwrap_or_else(|e| panic!("resvg rejects the SVG: {e}"));
    let size = tree.size().to_int_size();
    let mut pixmap =
        resvg::tiny_skia::Pixmap::new(size.width(), size.height()).expect("a non-empty picture");
    resvg::render(
        &tree,
        resvg::tiny_skia::Transform::default(),
        &mut pixmap.as_mut(),
    );
    let warnings: Vec<String> = WARNINGS
        .lock()
        .unwrap()
        .iter()
        .filter(|(id, _)| *id == me)
        .map(|(_, w)| w.clone())
        .collect();
    assert!(warnings.is_empty(), "resvg warned: {warnings:?}");
    pixmap
}

/// How many pixels are within `tolerance` (per channel) of the colour `#rrggbb`.
pub fn pixels_of(p: &resvg::tiny_skia::Pixmap, hex: &str, tolerance: u8) -> usize {
    let c = u32::from_str_radix(hex.trim_start_matches('#'), 16).expect("#rrggbb");
    let want = [(c >> 16) as u8, (c >> 8) as u8, c as u8];
    p.pixels()
        .iter()
        .filter(|px| {
            let got = [px.red(), px.green(), px.blue()];
            px.alpha() == 255
                && got
                    .iter()
                    .zip(want)
                    .all(|(g, w)| g.abs_diff(w) <= tolerance)
        })
        .count()
}

/// Writes the rendered picture as PNG beside the SVG when `COPYLOOP_PLOTS_DIR` is set (for
/// looking at the plots by eye).
pub fn keep(name: &str, svg: &str, p: &resvg::tiny_skia::Pixmap) {
    if let Ok(dir) = std::env::var("COPYLOOP_PLOTS_DIR") {
        let dir = std::path::Path::new(&dir);
        std::fs::write(dir.join(format!("{name}.svg")), svg).expect("write the SVG");
        p.save_png(dir.join(format!("{name}.png")))
            .expect("write the PNG");
    }
}
