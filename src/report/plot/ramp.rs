//! Colours: the sequential ramp of heat maps and the categorical palette of series.

/// The heat maps' ramp: viridis (van der Walt & Smith 2015, matplotlib's perceptually uniform
/// sequential map \[C\]: tests/reference/viridis_stops.py samples it) at 9 evenly spaced stops,
/// dark blue-violet to yellow. Its lightness rises steadily, so a larger value always reads
/// lighter, also in grey print and for the common colour-vision deficiencies.
pub const RAMP: [[u8; 3]; 9] = [
    [0x44, 0x01, 0x54],
    [0x47, 0x2d, 0x7b],
    [0x3b, 0x52, 0x8b],
    [0x2c, 0x72, 0x8e],
    [0x21, 0x91, 0x8c],
    [0x28, 0xae, 0x80],
    [0x5e, 0xc9, 0x62],
    [0xad, 0xdc, 0x30],
    [0xfd, 0xe7, 0x25],
];

/// Fill of a cell that has no value (a failed point).
pub const MISSING: &str = "#d0d0d0";

/// The colour at `t` in [0, 1] (clamped) on [`RAMP`], linear in sRGB between stops.
pub fn ramp(t: f64) -> [u8; 3] {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
    let x = t * (RAMP.len() - 1) as f64;
    let k = (x.floor() as usize).min(RAMP.len() - 2);
    let f = x - k as f64;
    let (a, b) = (RAMP[k], RAMP[k + 1]);
    let mix = |p: u8, q: u8| (p as f64 + f * (q as f64 - p as f64)).round() as u8;
    [mix(a[0], b[0]), mix(a[1], b[1]), mix(a[2], b[2])]
}

/// `#rrggbb`.
pub fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Series colours: the palette of Okabe & Ito (2008, "Color universal design") \[M\], which
/// stays distinguishable for the common colour-vision deficiencies; its yellow is left out
/// (too pale on white). Series beyond seven repeat colours; the chart then varies the marker.
pub const PALETTE: [&str; 7] = [
    "#0072b2", "#d55e00", "#009e73", "#cc79a7", "#e69f00", "#56b4e9", "#000000",
];

/// The colour of series `k`.
pub fn series_colour(k: usize) -> &'static str {
    PALETTE[k % PALETTE.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    /// CIE 1976 L* of an sRGB colour: the sRGB transfer function (IEC 61966-2-1), relative
    /// luminance Y = 0.2126 R + 0.7152 G + 0.0722 B, L* = 116 f(Y) − 16 (CIE 15:2004) \[M\].
    fn lightness(c: [u8; 3]) -> f64 {
        let lin = |v: u8| {
            let v = v as f64 / 255.0;
            if v <= 0.04045 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        let y = 0.2126 * lin(c[0]) + 0.7152 * lin(c[1]) + 0.0722 * lin(c[2]);
        let d: f64 = 6.0 / 29.0;
        let f = if y > d.powi(3) {
            y.cbrt()
        } else {
            y / (3.0 * d * d) + 4.0 / 29.0
        };
        116.0 * f - 16.0
    }

    #[test]
    fn stops_are_viridis_and_lightness_rises() {
        let reference = include_str!("../../../tests/reference/viridis_stops.txt");
        let rows: Vec<Vec<&str>> = reference
            .lines()
            .filter(|l| !l.starts_with('#'))
            .map(|l| l.split_whitespace().collect())
            .collect();
        assert_eq!(rows.len(), RAMP.len());
        for (k, row) in rows.iter().enumerate() {
            // Reference stops computed with matplotlib [C].
            assert_eq!(hex(RAMP[k]), row[1], "stop {k}");
            let l: f64 = row[2].parse().unwrap();
            assert!((lightness(RAMP[k]) - l).abs() < 0.2, "L* of stop {k}");
            let t: f64 = row[0].parse().unwrap();
            assert_eq!(ramp(t), RAMP[k]);
        }
        let mut last = f64::NEG_INFINITY;
        for k in 0..=200 {
            let l = lightness(ramp(k as f64 / 200.0));
            assert!(
                l > last,
                "L* rises along the ramp (at {k}/200: {l} after {last})"
            );
            last = l;
        }
        assert_eq!(ramp(-1.0), RAMP[0]);
        assert_eq!(ramp(2.0), RAMP[8]);
        assert_eq!(ramp(f64::NAN), RAMP[0]);
    }

    #[test]
    fn palette_colours_are_distinct() {
        for (i, a) in PALETTE.iter().enumerate() {
            for b in &PALETTE[i + 1..] {
                assert_ne!(a, b);
            }
        }
        assert_eq!(series_colour(7), series_colour(0));
    }
}
