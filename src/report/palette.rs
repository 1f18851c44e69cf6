//! The report's colours and small drawing helpers shared by the plots.
//!
//! The palette is our own: warm paper, slate ink, a sea-green for the
//! decoder's output, a rust orange for the lexicon's, indigo for ground
//! truth, and a paper-to-deep-sea ramp for heat maps.

use plotters::style::RGBColor;

/// Page background.
pub(crate) const PAPER: RGBColor = RGBColor(0xfb, 0xfa, 0xf6);
/// Text and axes.
pub(crate) const INK: RGBColor = RGBColor(0x24, 0x30, 0x3c);
/// Secondary text.
pub(crate) const MUTED: RGBColor = RGBColor(0x6a, 0x76, 0x82);
/// Grid lines.
pub(crate) const GRID: RGBColor = RGBColor(0xe2, 0xe0, 0xd8);
/// The decoder's output (without lexicon).
pub(crate) const SEA: RGBColor = RGBColor(0x1f, 0x7a, 0x70);
/// The output after lexicon rescoring.
pub(crate) const RUST: RGBColor = RGBColor(0xc0, 0x5a, 0x22);
/// Ground truth.
pub(crate) const INDIGO: RGBColor = RGBColor(0x3a, 0x47, 0x8f);
/// A wrong reading.
pub(crate) const WRONG: RGBColor = RGBColor(0xb0, 0x2a, 0x37);
/// A flat (unraised) dot position.
pub(crate) const FLAT: RGBColor = RGBColor(0xcf, 0xcb, 0xc0);

/// `#rrggbb` of a colour.
pub(crate) fn hex(c: RGBColor) -> String {
    format!("#{:02x}{:02x}{:02x}", c.0, c.1, c.2)
}

/// The heat-map ramp at `t` in [0, 1]: paper, pale sea, sea, deep sea.
pub(crate) fn ramp(t: f64) -> RGBColor {
    const STOPS: [(f64, (f64, f64, f64)); 4] = [
        (0.0, (251.0, 250.0, 246.0)),
        (0.35, (158.0, 207.0, 196.0)),
        (0.7, (31.0, 122.0, 112.0)),
        (1.0, (14.0, 42.0, 58.0)),
    ];
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    for w in STOPS.windows(2) {
        let (t0, a) = w[0];
        let (t1, b) = w[1];
        if t <= t1 {
            let u = (t - t0) / (t1 - t0);
            let mix = |x: f64, y: f64| (x + u * (y - x)).round() as u8;
            return RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2));
        }
    }
    RGBColor(14, 42, 58)
}

/// Text safe inside HTML or SVG elements and attribute values.
pub(crate) fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A character as a label: visible stand-ins for space and controls.
pub(crate) fn char_label(c: char) -> String {
    match c {
        ' ' => "\u{2423}".to_string(),
        c if c.is_control() => format!("U+{:04X}", c as u32),
        c => c.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ramp_ends_and_escape() {
        assert_eq!(ramp(0.0), RGBColor(251, 250, 246));
        assert_eq!(ramp(1.0), RGBColor(14, 42, 58));
        assert_eq!(ramp(f64::NAN), ramp(0.0));
        assert_eq!(escape("<a & 'b'>"), "&lt;a &amp; &#39;b&#39;&gt;");
        assert_eq!(char_label(' '), "\u{2423}");
        assert_eq!(hex(SEA), "#1f7a70");
    }
}
