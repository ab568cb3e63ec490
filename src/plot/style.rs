//! The figures' colours, dash patterns and markers, and the sequential ramp of the heat maps.
//!
//! Legibility in greyscale and for colour-blind readers does not rest on hue:
//! - the six line colours step in CIE lightness L* from 11 to 78, at least 9 apart from
//!   each other, and alternate between a blue and an orange hue family (the pair that stays
//!   apart under the common red–green deficiencies), so neighbours in the list differ in
//!   both lightness and hue;
//! - every colour comes with its own marker shape, and the second identity of a curve (the
//!   value of another axis) is carried by a dash pattern, so a greyscale print still tells
//!   every curve apart;
//! - the heat-map ramp rises monotonically in lightness (L* 6 → 92, checked by a test), so
//!   darker always means a larger value, in colour or in grey; cells without a value are
//!   grey with a cross, not a ramp colour.
//!
//! The lightness figures are computed from sRGB with the CIE 1976 L* formula (common
//! practice, no source; `lightness` below).

/// An sRGB colour.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rgb(pub u8, pub u8, pub u8);

/// The line colours, in order of use.
pub const PALETTE: [Rgb; 6] = [
    Rgb(0x1a, 0x18, 0x46), // indigo
    Rgb(0x8a, 0x2f, 0x0c), // rust
    Rgb(0x2f, 0x6d, 0xb5), // blue
    Rgb(0xc7, 0x70, 0x1f), // orange
    Rgb(0x5a, 0xae, 0xcb), // sky
    Rgb(0xe0, 0xbd, 0x40), // ochre
];

/// Grey of reference lines (continuum level, LTE, regime boundaries).
pub const REFERENCE: Rgb = Rgb(0x70, 0x70, 0x70);
/// Grid lines.
pub const GRID_LIGHT: Rgb = Rgb(0xee, 0xee, 0xee);
/// Major grid lines.
pub const GRID_BOLD: Rgb = Rgb(0xd8, 0xd8, 0xd8);
/// Cells without a value in a heat map.
pub const MISSING: Rgb = Rgb(0xe4, 0xe4, 0xe4);

/// The colour of curve `i` (cycling).
pub fn colour(i: usize) -> Rgb {
    PALETTE[i % PALETTE.len()]
}

/// A dash pattern.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dash {
    /// Unbroken.
    Solid,
    /// 11 px dashes, 5 px gaps.
    Long,
    /// 6 px dashes, 5 px gaps.
    Short,
    /// 2 px dots, 4 px gaps.
    Dotted,
}

impl Dash {
    /// The patterns in order of use.
    pub const ALL: [Dash; 4] = [Dash::Solid, Dash::Long, Dash::Short, Dash::Dotted];

    /// Pattern `i` (cycling).
    pub fn nth(i: usize) -> Dash {
        Dash::ALL[i % Dash::ALL.len()]
    }

    /// (dash, gap) in pixels; `None` for a solid line.
    pub fn pattern(self) -> Option<(u32, u32)> {
        match self {
            Dash::Solid => None,
            Dash::Long => Some((11, 5)),
            Dash::Short => Some((6, 5)),
            Dash::Dotted => Some((2, 4)),
        }
    }
}

/// A marker shape drawn at data points.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// Filled disc.
    Disc,
    /// Filled triangle.
    Triangle,
    /// Open square.
    Square,
    /// Diagonal cross.
    Cross,
    /// Open circle.
    Ring,
    /// Filled diamond.
    Diamond,
}

impl Marker {
    /// The shapes in order of use (paired with [`PALETTE`]).
    pub const ALL: [Marker; 6] = [
        Marker::Disc,
        Marker::Triangle,
        Marker::Square,
        Marker::Cross,
        Marker::Ring,
        Marker::Diamond,
    ];

    /// Marker `i` (cycling).
    pub fn nth(i: usize) -> Marker {
        Marker::ALL[i % Marker::ALL.len()]
    }
}

/// CIE 1976 lightness L* (0–100) of an sRGB colour (D65, the sRGB transfer curve).
pub fn lightness(c: Rgb) -> f64 {
    let lin = |v: u8| {
        let v = f64::from(v) / 255.0;
        if v <= 0.04045 {
            v / 12.92
        } else {
            ((v + 0.055) / 1.055).powf(2.4)
        }
    };
    let y = 0.2126 * lin(c.0) + 0.7152 * lin(c.1) + 0.0722 * lin(c.2);
    if y > 216.0 / 24389.0 {
        116.0 * y.cbrt() - 16.0
    } else {
        y * 24389.0 / 27.0
    }
}

/// Anchors of the heat-map ramp, light (small values) to dark (large values).
const RAMP: [Rgb; 6] = [
    Rgb(0xf7, 0xe8, 0xa6),
    Rgb(0xf2, 0xa2, 0x3a),
    Rgb(0xd9, 0x59, 0x3c),
    Rgb(0x9a, 0x2f, 0x6a),
    Rgb(0x4a, 0x1f, 0x6b),
    Rgb(0x14, 0x10, 0x2e),
];

/// The ramp colour at `t` ∈ [0, 1] (clamped): 0 lightest, 1 darkest.
pub fn ramp(t: f64) -> Rgb {
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let s = t * (RAMP.len() - 1) as f64;
    let i = (s.floor() as usize).min(RAMP.len() - 2);
    let f = s - i as f64;
    let mix = |a: u8, b: u8| (f64::from(a) + f * (f64::from(b) - f64::from(a))).round() as u8;
    let (a, b) = (RAMP[i], RAMP[i + 1]);
    Rgb(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn palette_lightness_steps_apart() {
        // Greyscale legibility (module docs): every pair of line colours at least 9 L* apart,
        // all dark enough to show on white (L* ≤ 80). Common practice, no source.
        for (i, a) in PALETTE.iter().enumerate() {
            assert!(lightness(*a) <= 80.0, "{a:?}: {}", lightness(*a));
            for b in &PALETTE[i + 1..] {
                let d = (lightness(*a) - lightness(*b)).abs();
                assert!(d >= 9.0, "{a:?} vs {b:?}: ΔL* = {d:.1}");
            }
        }
    }

    #[test]
    fn ramp_darkens_monotonically() {
        let mut last = f64::INFINITY;
        for i in 0..=512 {
            let l = lightness(ramp(i as f64 / 512.0));
            assert!(l < last + 0.3, "step {i}: L* {l} after {last}");
            last = l;
        }
        assert!(lightness(ramp(0.0)) > 90.0 && lightness(ramp(1.0)) < 8.0);
    }

    #[test]
    fn lightness_of_black_white_and_mid_grey() {
        // CIE L*: black 0, white 100, sRGB 119/255 ≈ 50 (common practice, no source).
        assert!(lightness(Rgb(0, 0, 0)).abs() < 1e-12);
        assert!((lightness(Rgb(255, 255, 255)) - 100.0).abs() < 1e-9);
        assert!((lightness(Rgb(119, 119, 119)) - 50.0).abs() < 0.1);
    }
}
