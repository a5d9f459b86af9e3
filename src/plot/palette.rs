//! Colours: a colour-blind-safe categorical palette and the viridis map.
//!
//! The categorical colours are those proposed by Okabe and Ito, which stay
//! distinguishable for the common forms of colour-vision deficiency. Black is
//! kept last so that data series only get it once the other seven are used.
//! Continuous values use viridis, which is perceptually uniform and stays
//! monotonic in lightness when printed in grey.

use plotters::style::RGBColor;

/// Okabe–Ito orange.
pub const ORANGE: RGBColor = RGBColor(230, 159, 0);
/// Okabe–Ito sky blue.
pub const SKY_BLUE: RGBColor = RGBColor(86, 180, 233);
/// Okabe–Ito bluish green.
pub const BLUISH_GREEN: RGBColor = RGBColor(0, 158, 115);
/// Okabe–Ito yellow.
pub const YELLOW: RGBColor = RGBColor(240, 228, 66);
/// Okabe–Ito blue.
pub const BLUE: RGBColor = RGBColor(0, 114, 178);
/// Okabe–Ito vermillion.
pub const VERMILLION: RGBColor = RGBColor(213, 94, 0);
/// Okabe–Ito reddish purple.
pub const REDDISH_PURPLE: RGBColor = RGBColor(204, 121, 167);
/// Okabe–Ito black.
pub const BLACK: RGBColor = RGBColor(0, 0, 0);

/// The eight Okabe–Ito colours in the order data series receive them:
/// strong, well-separated hues first, yellow (weak on white) late, black last.
pub const CATEGORICAL: [RGBColor; 8] = [
    BLUE,
    VERMILLION,
    BLUISH_GREEN,
    REDDISH_PURPLE,
    ORANGE,
    SKY_BLUE,
    YELLOW,
    BLACK,
];

/// Grey used for cells without a value.
pub const MISSING: RGBColor = RGBColor(190, 190, 190);

/// Colour of the `index`-th category. The eight Okabe–Ito colours first,
/// then the same eight darkened (mixed 45 % with black), then hues spaced
/// by the golden angle at two lightnesses; no two indices share a colour
/// (checked for the first thousand in the tests).
pub fn categorical(index: usize) -> RGBColor {
    let n = CATEGORICAL.len();
    match index / n {
        0 => CATEGORICAL[index],
        1 if index != 2 * n - 1 => darken(CATEGORICAL[index - n], 0.45),
        _ => golden(index - 2 * n + 1),
    }
}

/// Colour of the `index`-th filled category (phase-map cells, scan bands):
/// the [`categorical`] sequence without black. A black cell would hide the
/// black line drawn on top of it, and a lightened black is a grey, which
/// the neutral outcomes (no value, gapless, ...) use. Never a grey: every
/// entry has distinct red, green and blue values or is a saturated hue.
pub fn fill(index: usize) -> RGBColor {
    let black = CATEGORICAL.len() - 1;
    categorical(if index >= black { index + 1 } else { index })
}

/// Mixes `colour` with black: `amount = 0` keeps it, `amount = 1` gives black.
pub fn darken(colour: RGBColor, amount: f64) -> RGBColor {
    let a = 1.0 - amount.clamp(0.0, 1.0);
    let mix = |c: u8| (f64::from(c) * a).round() as u8;
    RGBColor(mix(colour.0), mix(colour.1), mix(colour.2))
}

/// The k-th hue by the golden angle, saturated, alternating two lightnesses
/// (k-th hue is distinct from every earlier one: the golden angle never
/// returns to a hue, and the lightness steps with k / 2 beyond the first
/// turns).
fn golden(k: usize) -> RGBColor {
    let hue = (k as f64 * 137.507_764_050_037_85) % 360.0;
    let light = [0.42, 0.62][k % 2] + 0.002 * ((k / 2) % 40) as f64;
    hsl(hue, 0.7, light)
}

fn hsl(h: f64, s: f64, l: f64) -> RGBColor {
    let c = (1.0 - (2.0 * l - 1.0).abs()) * s;
    let hp = h / 60.0;
    let x = c * (1.0 - (hp % 2.0 - 1.0).abs());
    let (r, g, b) = match hp as u32 {
        0 => (c, x, 0.0),
        1 => (x, c, 0.0),
        2 => (0.0, c, x),
        3 => (0.0, x, c),
        4 => (x, 0.0, c),
        _ => (c, 0.0, x),
    };
    let m = l - c / 2.0;
    let to = |v: f64| ((v + m) * 255.0).round().clamp(0.0, 255.0) as u8;
    RGBColor(to(r), to(g), to(b))
}

/// Mixes `colour` with white: `amount = 0` keeps it, `amount = 1` gives white.
pub fn lighten(colour: RGBColor, amount: f64) -> RGBColor {
    let a = amount.clamp(0.0, 1.0);
    let mix = |c: u8| (f64::from(c) + (255.0 - f64::from(c)) * a).round() as u8;
    RGBColor(mix(colour.0), mix(colour.1), mix(colour.2))
}

/// Viridis sampled at t = 0, 1/16, …, 1 (17 anchors).
const VIRIDIS: [(u8, u8, u8); 17] = [
    (68, 1, 84),
    (72, 24, 106),
    (71, 45, 123),
    (66, 64, 134),
    (59, 82, 139),
    (51, 99, 141),
    (44, 114, 142),
    (38, 129, 142),
    (33, 144, 140),
    (31, 159, 136),
    (40, 174, 128),
    (62, 188, 116),
    (93, 201, 99),
    (130, 211, 76),
    (171, 220, 50),
    (213, 226, 26),
    (253, 231, 37),
];

/// Viridis colour at `t` in [0, 1] (clamped; NaN gives the low end),
/// linearly interpolated between 17 anchors.
pub fn viridis(t: f64) -> RGBColor {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
    let last = VIRIDIS.len() - 1;
    let pos = t * last as f64;
    let i = (pos.floor() as usize).min(last - 1);
    let f = pos - i as f64;
    let (a, b) = (VIRIDIS[i], VIRIDIS[i + 1]);
    let lerp = |p: u8, q: u8| (f64::from(p) + (f64::from(q) - f64::from(p)) * f).round() as u8;
    RGBColor(lerp(a.0, b.0), lerp(a.1, b.1), lerp(a.2, b.2))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn luminance(c: RGBColor) -> f64 {
        0.2126 * f64::from(c.0) + 0.7152 * f64::from(c.1) + 0.0722 * f64::from(c.2)
    }

    #[test]
    fn viridis_hits_its_end_points_and_clamps() {
        assert_eq!(viridis(0.0), RGBColor(68, 1, 84));
        assert_eq!(viridis(1.0), RGBColor(253, 231, 37));
        assert_eq!(viridis(-3.0), viridis(0.0));
        assert_eq!(viridis(7.0), viridis(1.0));
        assert_eq!(viridis(f64::NAN), viridis(0.0));
    }

    #[test]
    fn viridis_interpolates_between_anchors() {
        // Half-way between anchors 0 and 1.
        assert_eq!(viridis(0.5 / 16.0), RGBColor(70, 13, 95));
        assert_eq!(viridis(0.5), RGBColor(33, 144, 140));
    }

    #[test]
    fn viridis_lightness_increases_monotonically() {
        let mut previous = -1.0;
        for k in 0..=200 {
            let l = luminance(viridis(k as f64 / 200.0));
            assert!(l >= previous - 0.5, "lightness dips at step {k}");
            previous = l;
        }
    }

    #[test]
    fn categorical_palette_is_distinct_and_keeps_black_last() {
        for (i, a) in CATEGORICAL.iter().enumerate() {
            assert!(CATEGORICAL[..i].iter().all(|b| b != a));
        }
        assert_eq!(CATEGORICAL[7], BLACK);
    }

    #[test]
    fn categorical_colours_never_repeat() {
        let all: Vec<RGBColor> = (0..1000).map(categorical).collect();
        let mut seen = std::collections::HashSet::new();
        for (i, c) in all.iter().enumerate() {
            assert!(seen.insert((c.0, c.1, c.2)), "index {i} repeats {c:?}");
        }
        assert_eq!(categorical(3), CATEGORICAL[3]);
    }

    #[test]
    fn fill_colours_skip_black_and_are_never_grey() {
        assert_eq!(fill(6), CATEGORICAL[6]);
        assert_eq!(fill(7), categorical(8));
        let all: Vec<RGBColor> = (0..1000).map(fill).collect();
        let mut seen = std::collections::HashSet::new();
        for (i, c) in all.iter().enumerate() {
            assert!(seen.insert((c.0, c.1, c.2)), "fill {i} repeats {c:?}");
            assert!(!(c.0 == c.1 && c.1 == c.2), "fill {i} is a grey: {c:?}");
        }
    }

    #[test]
    fn lighten_moves_towards_white() {
        assert_eq!(lighten(BLUE, 0.0), BLUE);
        assert_eq!(lighten(BLUE, 1.0), RGBColor(255, 255, 255));
        assert_eq!(lighten(RGBColor(0, 100, 200), 0.5), RGBColor(128, 178, 228));
    }
}
