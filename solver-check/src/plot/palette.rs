//! The colours of every picture: our own qualitative palette, and the fills
//! that extend it past its size.
//!
//! How the palette was built (DEVELOPERS.md, "The plot palette"): eight hues
//! evenly spaced in OKLCH, 0°, 45°, … 315°, all at chroma 0.115 (at 0.12 the
//! 225° colour falls just outside sRGB), with the lightness cycling through
//! 0.45, 0.79 and 0.62 (dark, light, middle).
//! At one fixed lightness a dichromat sees pairs of hues mirrored about the
//! confusion axis as one colour; three lightness levels keep them apart.
//! Each OKLCH colour was converted to sRGB (every one lies inside the gamut)
//! and rounded to 8 bits. `tests/python/test_palette.py` rebuilds the table
//! from this recipe and checks its differences, plain and under simulated
//! colour-vision deficiency.

use std::fmt::Write as _;

/// The eight colours, in hue order (OKLCH hue 0°, 45°, … 315°).
pub const PALETTE: [&str; 8] = [
    "#863553", "#f8a27c", "#a18222", "#376317", "#56d3bd", "#0e94ba", "#3d4f95", "#d6a4ed",
];

/// The background of a plot panel (this and the four below are the
/// drawings' neutral greys).
pub const PANEL_FILL: &str = "#f8f8f6";
/// The frame around a panel.
pub const FRAME: &str = "#8c8c88";
/// Grid lines.
pub const GRID: &str = "#e2e2de";
/// The line at zero on a power axis.
pub const ZERO_LINE: &str = "#5a5a56";
/// Text: titles, tick labels, legends.
pub const INK: &str = "#1e1e1c";

/// How many series get a fill of their own: each colour plain, then with
/// diagonal hatching, then cross-hatched.
pub const FILLS: usize = PALETTE.len() * 3;

/// The fill of the `k`-th series: a colour, or a hatched pattern defined by
/// [`defs`]. Past [`FILLS`] the fills repeat (the legend still names each).
pub fn fill(k: usize) -> String {
    let k = k % FILLS;
    match k / PALETTE.len() {
        0 => PALETTE[k].to_string(),
        n => format!("url(#fill-{}-{n})", k % PALETTE.len()),
    }
}

/// SVG definitions of the hatched fills that `fill` names for `count` series.
pub fn defs(count: usize) -> String {
    let mut out = String::from("<defs>");
    for k in PALETTE.len()..count.min(FILLS) {
        let (c, n) = (k % PALETTE.len(), k / PALETTE.len());
        let _ = write!(
            out,
            r#"<pattern id="fill-{c}-{n}" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="6" height="6" fill="{}"/><line x1="0" y1="0" x2="0" y2="6" stroke="white" stroke-width="2"/>"#,
            PALETTE[c]
        );
        if n == 2 {
            out += r#"<line x1="0" y1="0" x2="6" y2="0" stroke="white" stroke-width="2"/>"#;
        }
        out += "</pattern>";
    }
    out + "</defs>"
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fills_are_distinct_up_to_their_count_and_defined() {
        let all: Vec<String> = (0..FILLS).map(fill).collect();
        let mut unique = all.clone();
        unique.sort();
        unique.dedup();
        assert_eq!(unique.len(), FILLS);
        let d = defs(FILLS);
        for f in all.iter().filter(|f| f.starts_with("url(#")) {
            let id = &f[5..f.len() - 1];
            assert!(d.contains(&format!(r#"id="{id}""#)), "{id} undefined");
        }
    }
}
