//! The parts every plot draws around its data: the frame, the title, the two axis labels and
//! the notes under the plot.

use super::canvas::{Anchor, Canvas, Paint};
use super::text::fit;

/// Width of every plot, in pixels.
pub const WIDTH: f64 = 760.0;
/// Font size of the axis labels.
pub const LABEL_SIZE: f64 = 13.0;
/// Font size of the title.
pub const TITLE_SIZE: f64 = 15.0;
/// Font size of the notes.
const NOTE_SIZE: f64 = 10.5;

/// The title, centred at the top, shrunk to fit the plot's width.
pub fn title(k: &mut Canvas, title: &str) {
    let size = fit(title, TITLE_SIZE, WIDTH - 20.0);
    k.text(
        "title",
        (WIDTH / 2.0, 26.0),
        title,
        size,
        Anchor::Middle,
        false,
    );
}

/// The frame of the plotting area `(x0, y0, x1, y1)`, the x label centred on the line at `below`,
/// the y label turned along the left edge, and one line per note under the x label.
pub fn labels(
    k: &mut Canvas,
    (x0, y0, x1, y1): (f64, f64, f64, f64),
    below: f64,
    (x_label, y_label): (&str, &str),
    notes: &[String],
) {
    k.rect(
        "frame",
        (x0, y0),
        (x1 - x0, y1 - y0),
        Paint::stroke("#333333", 1.0),
        None,
    );
    let size = fit(x_label, LABEL_SIZE, x1 - x0);
    k.text(
        "x-label",
        ((x0 + x1) / 2.0, below),
        x_label,
        size,
        Anchor::Middle,
        false,
    );
    let size = fit(y_label, LABEL_SIZE, y1 - y0);
    k.text(
        "y-label",
        (18.0, (y0 + y1) / 2.0),
        y_label,
        size,
        Anchor::Middle,
        true,
    );
    for (n, note) in notes.iter().enumerate() {
        let size = fit(note, NOTE_SIZE, WIDTH - x0 - 10.0);
        k.text(
            "note",
            (x0, below + 17.0 + 15.0 * n as f64),
            note,
            size,
            Anchor::Start,
            false,
        );
    }
}
