//! A small stroke font of our own: every glyph is a few polylines and elliptical arcs on a
//! grid where the cap height is 10 units, the x-height 7, descenders reach −3. Text is drawn
//! as round-capped strokes, so SVG and PNG output look the same and need no font files.
//!
//! Covers printable ASCII, the Latin-1 accented letters in common use, the Greek letters
//! used in optics (λ θ φ α σ µ Δ π …), super- and subscript digits (built from the digits),
//! and symbols such as ° × · ± ≈ ≤ ≥ − – — → ∞ √ ∝ %. Anything else is drawn as
//! an open box.
//!
//! Glyph syntax (parsed once): strokes separated by `;`; a stroke is a list of points `x,y`
//! and arcs `@cx,cy,rx,ry,a0,a1` (centre, radii, start and end angle in degrees,
//! anticlockwise from +x with y up; `a1 < a0` runs clockwise). An arc continues the stroke.

use std::sync::OnceLock;

/// Cap height as a fraction of the font size (close to common sans-serif faces).
pub(crate) const CAP_FRACTION: f64 = 0.72;
/// Design units per cap height.
const CAP_UNITS: f64 = 10.0;
/// Side bearing on each side of a glyph, in design units.
const BEARING: f64 = 1.1;
/// Stroke width in design units for regular text.
pub(crate) const STROKE_UNITS: f64 = 1.05;

/// Glyph outlines, see the module doc for the syntax.
const GLYPHS: &[(char, &str)] = &[
    // Digits (drawn at one common width below, so columns of numbers line up).
    ('0', "@3,5,3,5,0,360"),
    ('1', "0.8,8 3,10 3,0"),
    ('2', "@3,7,3,3,160,-30 0,0 6,0"),
    ('3', "@3,7.5,2.7,2.5,150,-90 @3,2.5,3,2.5,90,-150"),
    ('4', "4.5,0 4.5,10 0,3 6,3"),
    ('5', "5.5,10 1,10 0.6,5.6 @3,3.2,3,3.2,125,-150"),
    ('6', "@3.5,5,3.5,5,60,180 0,3 @3,3,3,3,180,540"),
    ('7', "0,10 6,10 2,0"),
    ('8', "@3,7.5,2.6,2.5,0,360; @3,2.5,3,2.5,0,360"),
    ('9', "@2.5,5,3.5,5,240,360 6,7 @3,7,3,3,0,360"),
    // Capitals.
    ('A', "0,0 3.5,10 7,0; 1.3,3.5 5.7,3.5"),
    (
        'B',
        "0,5 4,5 @4,7.5,2.5,2.5,-90,90 0,10 0,0 4.2,0 @4.2,2.5,2.8,2.5,-90,90 4,5",
    ),
    ('C', "@3.8,5,3.8,5,40,320"),
    ('D', "0,0 0,10 3,10 @3,5,4,5,90,-90 0,0"),
    ('E', "6,10 0,10 0,0 6,0; 0,5 4.5,5"),
    ('F', "6,10 0,10 0,0; 0,5 4.5,5"),
    ('G', "@3.8,5,3.8,5,40,330 7.1,4.5 4.3,4.5"),
    ('H', "0,0 0,10; 7,0 7,10; 0,5 7,5"),
    ('I', "2,0 2,10; 0,10 4,10; 0,0 4,0"),
    ('J', "5,10 5,3 @2.5,3,2.5,3,0,-180"),
    ('K', "0,0 0,10; 6.5,10 0,3.5; 2.2,5.6 6.5,0"),
    ('L', "0,10 0,0 6,0"),
    ('M', "0,0 0,10 4,2 8,10 8,0"),
    ('N', "0,0 0,10 7,0 7,10"),
    ('O', "@4,5,4,5,0,360"),
    ('P', "0,0 0,10 4,10 @4,7.25,2.75,2.75,90,-90 0,4.5"),
    ('Q', "@4,5,4,5,0,360; 4.5,2.5 8,-0.5"),
    (
        'R',
        "0,0 0,10 4,10 @4,7.25,2.75,2.75,90,-90 0,4.5; 3.5,4.5 7,0",
    ),
    ('S', "@3.2,7.5,3,2.5,35,270 @3.2,2.5,3.2,2.5,90,-145"),
    ('T', "0,10 7,10; 3.5,10 3.5,0"),
    ('U', "0,10 0,3.5 @3.5,3.5,3.5,3.5,180,360 7,10"),
    ('V', "0,10 3.5,0 7,10"),
    ('W', "0,10 2,0 4.5,7 7,0 9,10"),
    ('X', "0,0 7,10; 0,10 7,0"),
    ('Y', "0,10 3.5,5 7,10; 3.5,5 3.5,0"),
    ('Z', "0,10 7,10 0,0 7,0"),
    // Small letters.
    ('a', "@3,3.5,3,3.5,0,360; 6,7 6,0"),
    ('b', "0,10 0,0; @3,3.5,3,3.5,0,360"),
    ('c', "@3.2,3.5,3.2,3.5,45,315"),
    ('d', "6,10 6,0; @3,3.5,3,3.5,0,360"),
    ('e', "0,3.5 6,3.5 @3,3.5,3,3.5,0,320"),
    ('f', "@4.5,8,2,2,30,180 2.5,0; 0.5,7 5,7"),
    ('g', "@3,3.5,3,3.5,0,360; 6,7 6,-1 @3,-1,3,2,0,-160"),
    ('h', "0,10 0,0; @3,4,3,3,180,0 6,0"),
    ('i', "1,0 1,7; 1,9.2 1,9.21"),
    ('j', "3,7 3,-1.5 @1.5,-1.5,1.5,1.5,0,-160; 3,9.2 3,9.21"),
    ('k', "0,10 0,0; 5.5,7 0,2.5; 2,4.2 6,0"),
    ('l', "0.8,10 0.8,1.2 @2,1.2,1.2,1.2,180,300"),
    (
        'm',
        "0,7 0,0; @2.25,4.75,2.25,2.25,180,0 4.5,0; @6.75,4.75,2.25,2.25,180,0 9,0",
    ),
    ('n', "0,7 0,0; @3,4,3,3,180,0 6,0"),
    ('o', "@3,3.5,3,3.5,0,360"),
    ('p', "0,7 0,-3; @3,3.5,3,3.5,0,360"),
    ('q', "6,7 6,-3; @3,3.5,3,3.5,0,360"),
    ('r', "0,7 0,0; @3.5,4,3.5,3,180,60"),
    ('s', "@2.8,5.25,2.6,1.75,20,270 @2.8,1.75,2.8,1.75,90,-160"),
    ('t', "2,10 2,1 @3.5,1,1.5,1,180,300; 0,7 5,7"),
    ('u', "0,7 0,3 @3,3,3,3,180,360; 6,7 6,0"),
    ('v', "0,7 3,0 6,7"),
    ('w', "0,7 2,0 4.5,5.5 7,0 9,7"),
    ('x', "0,0 6,7; 0,7 6,0"),
    ('y', "0,7 3.2,0; 6,7 2,-3 0.5,-3"),
    ('z', "0,7 6,7 0,0 6,0"),
    ('ı', "1,0 1,7"),
    // Punctuation.
    ('.', "1,0 1,0.01"),
    (',', "1.2,0.6 1,0 0.2,-1.8"),
    (':', "1,0 1,0.01; 1,5 1,5.01"),
    (';', "1.2,0.6 1,0 0.2,-1.8; 1.2,5 1.2,5.01"),
    ('-', "0,4 4,4"),
    ('+', "3,1 3,7; 0,4 6,4"),
    ('=', "0,2.5 6,2.5; 0,5.5 6,5.5"),
    ('(', "@4,4,3.5,7,120,240"),
    (')', "@-1,4,3.5,7,60,-60"),
    ('[', "3,11 1,11 1,-2 3,-2"),
    (']', "0,11 2,11 2,-2 0,-2"),
    (
        '{',
        "3,11 @3,9,1.5,2,90,180 1.5,5.5 0,4.5 1.5,3.5 @3,-0,1.5,2,180,270",
    ),
    (
        '}',
        "0,11 @0,9,1.5,2,90,0 1.5,5.5 3,4.5 1.5,3.5 @0,0,1.5,2,0,-90",
    ),
    ('/', "0,-1 5,10.5"),
    ('\\', "0,10.5 5,-1"),
    (
        '%',
        "0,0 7,10; @1.5,8.2,1.5,1.8,0,360; @5.5,1.8,1.5,1.8,0,360",
    ),
    ('\'', "1,10 1,7.5"),
    ('"', "0.5,10 0.5,7.5; 2.5,10 2.5,7.5"),
    ('`', "0,10 1.5,8.3"),
    ('!', "1,10 1,3; 1,0 1,0.01"),
    ('?', "@3,7.5,3,2.5,160,-60 3,3.8 3,2.5; 3,0 3,0.01"),
    ('_', "0,-2 6,-2"),
    ('*', "3,9 3,3; 0.4,7.5 5.6,4.5; 0.4,4.5 5.6,7.5"),
    ('<', "6,8 0,4 6,0"),
    ('>', "0,8 6,4 0,0"),
    ('|', "1,11 1,-2"),
    ('#', "2,0 3,10; 5,0 6,10; 0.5,3.3 7,3.3; 1,6.7 7.5,6.7"),
    (
        '&',
        "6.5,0 1.4,6.6 @2.9,8.3,1.6,1.7,229,-40 0.6,2.9 @2.7,2.3,2.2,2.3,165,330 6.3,4",
    ),
    ('^', "0,7 2.5,10 5,7"),
    ('~', "@1.5,4,1.5,1,180,0 @4.5,4,1.5,1,180,360"),
    (
        '$',
        "@3.2,7.5,3,2.5,35,270 @3.2,2.5,3.2,2.5,90,-145; 3.2,11 3.2,-1",
    ),
    (
        '@',
        "@5,4,2,2.2,0,360; 7,6.2 7,3 @8,3,1,1.2,180,360 @5,4.5,4,5.5,10,340",
    ),
    // Greek letters used in optics (µ is the micro sign, μ the Greek letter: same glyph).
    ('µ', "0,-3 0,7; @3,3,3,3,180,360; 6,7 6,0"),
    ('μ', "0,-3 0,7; @3,3,3,3,180,360; 6,7 6,0"),
    ('λ', "0.5,10 6,0; 3.4,5.3 0,0"),
    ('θ', "@3,5,3,5,0,360; 0,5 6,5"),
    ('φ', "@3.5,3.5,3.5,3.5,0,360; 3.5,10 3.5,-3"),
    ('ϕ', "@3.5,3.5,3.5,3.5,0,360; 3.5,10 3.5,-3"),
    ('σ', "@3,3.5,3,3.5,0,360; 3,7 7,7"),
    ('α', "6,7 5.6,3.5 @2.8,3.5,2.8,3.5,0,360 6.3,0"),
    ('Δ', "0,0 3.5,10 7,0 0,0"),
    ('π', "0,7 7,7; 2,7 2,0; 5,7 5,0"),
    ('ρ', "0,-3 0,3.5 @3,3.5,3,3.5,180,540"),
    ('τ', "0,7 6,7; 3,7 3,0"),
    ('ν', "0,7 3,0 6,7"),
    ('Σ', "7,10 0,10 3.5,5 0,0 7,0"),
    // Symbols.
    ('°', "@1.5,8.5,1.5,1.5,0,360"),
    ('×', "0.5,1 5.5,7; 0.5,7 5.5,1"),
    ('·', "1,4 1,4.01"),
    ('±', "3,2.5 3,8.5; 0,5.5 6,5.5; 0,0.5 6,0.5"),
    (
        '≈',
        "@1.5,5.5,1.5,1,180,0 @4.5,5.5,1.5,1,180,360; @1.5,2.5,1.5,1,180,0 @4.5,2.5,1.5,1,180,360",
    ),
    ('≤', "6,9 0,6 6,3; 0,1 6,1"),
    ('≥', "0,9 6,6 0,3; 0,1 6,1"),
    ('−', "0,4 6,4"),
    ('–', "0,4 6,4"),
    ('—', "0,4 10,4"),
    ('‐', "0,4 4,4"),
    ('→', "0,4 8,4; 5.5,6.5 8,4 5.5,1.5"),
    ('←', "8,4 0,4; 2.5,6.5 0,4 2.5,1.5"),
    ('∞', "@2,4,2,2,0,360; @6,4,2,2,180,540"),
    ('√', "0,5 1.5,5.5 3.5,0 6.5,11 9,11"),
    (
        '∝',
        "8,6.5 6,6.2 4.7,4 3.4,1.8 @2.2,4,2.2,2.3,-70,-290 4.7,4 6,1.8 8,1.5",
    ),
    ('…', "1,0 1,0.01; 4,0 4,0.01; 7,0 7,0.01"),
    (
        'Å',
        "0,0 3.5,10 7,0; 1.3,3.5 5.7,3.5; @3.5,12,1.2,1.2,0,360",
    ),
    ('′', "1.5,10 0.8,7.5"),
    ('‘', "1,7.5 1.6,10"),
    ('’', "1.6,10 1,7.5"),
    ('“', "1,7.5 1.6,10; 3,7.5 3.6,10"),
    ('”', "1.6,10 1,7.5; 3.6,10 3,7.5"),
    ('□', "0,0 6,0 6,10 0,10 0,0"),
];

/// Extra space characters and their advance in design units.
const SPACES: &[(char, f64)] = &[(' ', 4.5), ('\u{a0}', 4.5), ('\u{2009}', 2.5)];

/// Accents placed over (or under) a base letter.
#[derive(Debug, Clone, Copy)]
enum Accent {
    Acute,
    Grave,
    Circumflex,
    Diaeresis,
    Tilde,
    Ring,
    Cedilla,
}

/// Composed letters: (letter, base, accent).
const COMPOSED: &[(char, char, Accent)] = &[
    ('à', 'a', Accent::Grave),
    ('á', 'a', Accent::Acute),
    ('â', 'a', Accent::Circumflex),
    ('ã', 'a', Accent::Tilde),
    ('ä', 'a', Accent::Diaeresis),
    ('å', 'a', Accent::Ring),
    ('ç', 'c', Accent::Cedilla),
    ('è', 'e', Accent::Grave),
    ('é', 'e', Accent::Acute),
    ('ê', 'e', Accent::Circumflex),
    ('ë', 'e', Accent::Diaeresis),
    ('ì', 'ı', Accent::Grave),
    ('í', 'ı', Accent::Acute),
    ('î', 'ı', Accent::Circumflex),
    ('ï', 'ı', Accent::Diaeresis),
    ('ñ', 'n', Accent::Tilde),
    ('ò', 'o', Accent::Grave),
    ('ó', 'o', Accent::Acute),
    ('ô', 'o', Accent::Circumflex),
    ('õ', 'o', Accent::Tilde),
    ('ö', 'o', Accent::Diaeresis),
    ('ù', 'u', Accent::Grave),
    ('ú', 'u', Accent::Acute),
    ('û', 'u', Accent::Circumflex),
    ('ü', 'u', Accent::Diaeresis),
    ('ý', 'y', Accent::Acute),
    ('ÿ', 'y', Accent::Diaeresis),
    ('À', 'A', Accent::Grave),
    ('Á', 'A', Accent::Acute),
    ('Â', 'A', Accent::Circumflex),
    ('Ä', 'A', Accent::Diaeresis),
    ('Ç', 'C', Accent::Cedilla),
    ('È', 'E', Accent::Grave),
    ('É', 'E', Accent::Acute),
    ('Ê', 'E', Accent::Circumflex),
    ('Ñ', 'N', Accent::Tilde),
    ('Ó', 'O', Accent::Acute),
    ('Ö', 'O', Accent::Diaeresis),
    ('Ú', 'U', Accent::Acute),
    ('Ü', 'U', Accent::Diaeresis),
];

/// Raised and lowered characters: (character, base, scale, shift in design units).
const SHIFTED: &[(char, char, f64, f64)] = &[
    ('⁰', '0', 0.6, 5.0),
    ('¹', '1', 0.6, 5.0),
    ('²', '2', 0.6, 5.0),
    ('³', '3', 0.6, 5.0),
    ('⁴', '4', 0.6, 5.0),
    ('⁵', '5', 0.6, 5.0),
    ('⁶', '6', 0.6, 5.0),
    ('⁷', '7', 0.6, 5.0),
    ('⁸', '8', 0.6, 5.0),
    ('⁹', '9', 0.6, 5.0),
    ('⁺', '+', 0.6, 5.0),
    ('⁻', '−', 0.6, 5.0),
    ('⁼', '=', 0.6, 5.0),
    ('⁽', '(', 0.6, 5.0),
    ('⁾', ')', 0.6, 5.0),
    ('ⁿ', 'n', 0.6, 5.0),
    ('₀', '0', 0.6, -2.5),
    ('₁', '1', 0.6, -2.5),
    ('₂', '2', 0.6, -2.5),
    ('₃', '3', 0.6, -2.5),
    ('₄', '4', 0.6, -2.5),
    ('₅', '5', 0.6, -2.5),
    ('₆', '6', 0.6, -2.5),
    ('₇', '7', 0.6, -2.5),
    ('₈', '8', 0.6, -2.5),
    ('₉', '9', 0.6, -2.5),
    ('₊', '+', 0.6, -2.5),
    ('₋', '−', 0.6, -2.5),
    ('ₐ', 'a', 0.6, -2.5),
    ('ₑ', 'e', 0.6, -2.5),
    ('ₒ', 'o', 0.6, -2.5),
    ('ₓ', 'x', 0.6, -2.5),
    ('ₕ', 'h', 0.6, -2.5),
    ('ₖ', 'k', 0.6, -2.5),
    ('ₗ', 'l', 0.6, -2.5),
    ('ₘ', 'm', 0.6, -2.5),
    ('ₙ', 'n', 0.6, -2.5),
    ('ₚ', 'p', 0.6, -2.5),
    ('ₛ', 's', 0.6, -2.5),
    ('ₜ', 't', 0.6, -2.5),
    ('ᵢ', 'i', 0.6, -2.5),
    ('ⱼ', 'j', 0.6, -2.5),
];

/// A parsed glyph: strokes in design units (y up), shifted so its left edge is at 0.
#[derive(Debug, Clone)]
struct Glyph {
    strokes: Vec<Vec<[f64; 2]>>,
    /// Horizontal advance in design units.
    advance: f64,
}

/// All glyphs, sorted by character for binary search.
fn table() -> &'static [(char, Glyph)] {
    static TABLE: OnceLock<Vec<(char, Glyph)>> = OnceLock::new();
    TABLE.get_or_init(|| {
        let mut t: Vec<(char, Glyph)> = Vec::new();
        for &(c, src) in GLYPHS {
            let strokes = parse_glyph(src).unwrap_or_default();
            t.push((c, place(strokes, c.is_ascii_digit())));
        }
        for &(c, adv) in SPACES {
            t.push((
                c,
                Glyph {
                    strokes: Vec::new(),
                    advance: adv,
                },
            ));
        }
        let lookup = |t: &Vec<(char, Glyph)>, c: char| {
            t.iter().find(|(k, _)| *k == c).map(|(_, g)| g.clone())
        };
        let mut extra = Vec::new();
        for &(c, base, accent) in COMPOSED {
            if let Some(g) = lookup(&t, base) {
                extra.push((c, with_accent(g, base.is_uppercase(), accent)));
            }
        }
        for &(c, base, scale, shift) in SHIFTED {
            if let Some(g) = lookup(&t, base) {
                extra.push((c, shifted(&g, scale, shift)));
            }
        }
        t.extend(extra);
        t.sort_by_key(|(c, _)| *c);
        t.dedup_by_key(|(c, _)| *c);
        t
    })
}

fn glyph(c: char) -> &'static Glyph {
    let t = table();
    match t.binary_search_by_key(&c, |(k, _)| *k) {
        Ok(i) => &t[i].1,
        Err(_) => {
            let i = t
                .binary_search_by_key(&'□', |(k, _)| *k)
                .unwrap_or_default();
            &t[i].1
        }
    }
}

/// Whether the font has a glyph of its own for `c` (otherwise a box is drawn).
pub fn has_glyph(c: char) -> bool {
    table().binary_search_by_key(&c, |(k, _)| *k).is_ok()
}

/// Parses the glyph syntax of the module doc.
fn parse_glyph(src: &str) -> Result<Vec<Vec<[f64; 2]>>, String> {
    let mut strokes = Vec::new();
    for stroke_src in src.split(';') {
        let mut pts: Vec<[f64; 2]> = Vec::new();
        for item in stroke_src.split_whitespace() {
            if let Some(arc) = item.strip_prefix('@') {
                let v = numbers(arc)?;
                if v.len() != 6 {
                    return Err(format!("arc `{item}` needs 6 numbers"));
                }
                let (cx, cy, rx, ry, a0, a1) = (v[0], v[1], v[2], v[3], v[4], v[5]);
                // Segments of at most 10° keep curves smooth at large sizes.
                let n = (((a1 - a0).abs() / 10.0).ceil() as usize).max(2);
                for k in 0..=n {
                    let a = (a0 + (a1 - a0) * k as f64 / n as f64).to_radians();
                    pts.push([cx + rx * a.cos(), cy + ry * a.sin()]);
                }
            } else {
                let v = numbers(item)?;
                if v.len() != 2 {
                    return Err(format!("point `{item}` needs 2 numbers"));
                }
                pts.push([v[0], v[1]]);
            }
        }
        if !pts.is_empty() {
            strokes.push(pts);
        }
    }
    Ok(strokes)
}

fn numbers(s: &str) -> Result<Vec<f64>, String> {
    s.split(',')
        .map(|t| t.parse::<f64>().map_err(|_| format!("bad number `{t}`")))
        .collect()
}

/// Shifts strokes so the ink starts at `BEARING` and sets the advance; digits share one
/// width (6 units) so that tick labels line up.
fn place(mut strokes: Vec<Vec<[f64; 2]>>, tabular: bool) -> Glyph {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for p in strokes.iter().flatten() {
        lo = lo.min(p[0]);
        hi = hi.max(p[0]);
    }
    if !lo.is_finite() {
        return Glyph {
            strokes,
            advance: 4.5,
        };
    }
    let ink = hi - lo;
    let (box_w, pad) = if tabular {
        (6.0_f64.max(ink), (6.0_f64.max(ink) - ink) / 2.0)
    } else {
        (ink, 0.0)
    };
    let dx = BEARING + pad - lo;
    for p in strokes.iter_mut().flatten() {
        p[0] += dx;
    }
    Glyph {
        strokes,
        advance: box_w + 2.0 * BEARING,
    }
}

fn with_accent(mut g: Glyph, upper: bool, accent: Accent) -> Glyph {
    let cx = g.advance / 2.0;
    let t = if upper { 10.0 } else { 7.0 };
    let marks: Vec<Vec<[f64; 2]>> = match accent {
        Accent::Acute => vec![vec![[cx - 0.7, t + 1.3], [cx + 1.0, t + 3.0]]],
        Accent::Grave => vec![vec![[cx - 1.0, t + 3.0], [cx + 0.7, t + 1.3]]],
        Accent::Circumflex => vec![vec![
            [cx - 1.5, t + 1.3],
            [cx, t + 3.0],
            [cx + 1.5, t + 1.3],
        ]],
        Accent::Diaeresis => vec![
            vec![[cx - 1.4, t + 2.0], [cx - 1.4, t + 2.01]],
            vec![[cx + 1.4, t + 2.0], [cx + 1.4, t + 2.01]],
        ],
        Accent::Tilde => vec![vec![
            [cx - 2.0, t + 1.5],
            [cx - 1.0, t + 2.4],
            [cx + 0.5, t + 1.6],
            [cx + 1.5, t + 2.5],
        ]],
        Accent::Ring => {
            let mut ring = Vec::new();
            for k in 0..=16 {
                let a = std::f64::consts::TAU * k as f64 / 16.0;
                ring.push([cx + a.cos(), t + 2.3 + a.sin()]);
            }
            vec![ring]
        }
        Accent::Cedilla => vec![vec![[cx, 0.0], [cx + 0.8, -1.2], [cx - 0.6, -2.4]]],
    };
    g.strokes.extend(marks);
    g
}

fn shifted(g: &Glyph, scale: f64, shift: f64) -> Glyph {
    let strokes = g
        .strokes
        .iter()
        .map(|s| {
            s.iter()
                .map(|p| [p[0] * scale, p[1] * scale + shift])
                .collect()
        })
        .collect();
    Glyph {
        strokes,
        advance: g.advance * scale,
    }
}

/// Text laid out in pixels: strokes with the origin at the left end of the baseline and
/// y pointing down, plus the advance width.
#[derive(Debug, Clone)]
pub(crate) struct TextShape {
    pub strokes: Vec<Vec<[f64; 2]>>,
    pub width: f64,
}

/// Pixels per design unit at font size `size` (px).
fn unit(size: f64) -> f64 {
    size * CAP_FRACTION / CAP_UNITS
}

/// Lays out one line of `text` at font size `size` px (line breaks are drawn as spaces).
pub(crate) fn shape_text(text: &str, size: f64) -> TextShape {
    let u = unit(size);
    let mut x = 0.0;
    let mut strokes = Vec::new();
    for c in text.chars() {
        let c = if c.is_whitespace() && !SPACES.iter().any(|(s, _)| *s == c) {
            ' '
        } else {
            c
        };
        let g = glyph(c);
        for s in &g.strokes {
            strokes.push(s.iter().map(|p| [x + p[0] * u, -p[1] * u]).collect());
        }
        x += g.advance * u;
    }
    TextShape { strokes, width: x }
}

/// Advance width of `text` in px at font size `size`.
pub(crate) fn text_width(text: &str, size: f64) -> f64 {
    let u = unit(size);
    text.chars()
        .map(|c| {
            let c = if c.is_whitespace() { ' ' } else { c };
            glyph(c).advance * u
        })
        .sum()
}

/// Cap height in px at font size `size`.
pub(crate) fn cap_height(size: f64) -> f64 {
    size * CAP_FRACTION
}

/// Stroke width in px for text at font size `size`; `weight` 1 is regular, ~1.5 bold.
pub(crate) fn stroke_width(size: f64, weight: f64) -> f64 {
    unit(size) * STROKE_UNITS * weight
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_glyph_parses() {
        for &(c, src) in GLYPHS {
            let s = parse_glyph(src).unwrap_or_else(|e| panic!("glyph {c:?}: {e}"));
            assert!(!s.is_empty(), "glyph {c:?} has no strokes");
        }
    }

    #[test]
    fn printable_ascii_and_common_symbols_are_covered() {
        for c in (0x21u8..0x7f).map(char::from) {
            assert!(has_glyph(c), "missing glyph for {c:?}");
        }
        for c in "µλθφ²³⁻·%°×±≈≤≥−–→Åé∝ₓ".chars() {
            assert!(has_glyph(c), "missing glyph for {c:?}");
        }
    }

    #[test]
    fn digits_share_one_advance() {
        let w0 = text_width("0", 10.0);
        for d in "123456789".chars() {
            assert!((text_width(&d.to_string(), 10.0) - w0).abs() < 1e-12);
        }
    }

    #[test]
    fn unknown_characters_draw_a_box_and_advance() {
        let s = shape_text("\u{4e00}", 10.0);
        assert_eq!(s.strokes.len(), 1);
        assert!(s.width > 0.0);
    }

    #[test]
    fn superscripts_are_smaller_and_raised() {
        let two = shape_text("2", 10.0);
        let sup = shape_text("²", 10.0);
        let top = |t: &TextShape| {
            t.strokes
                .iter()
                .flatten()
                .map(|p| p[1])
                .fold(f64::MAX, f64::min)
        };
        let bottom = |t: &TextShape| {
            t.strokes
                .iter()
                .flatten()
                .map(|p| p[1])
                .fold(f64::MIN, f64::max)
        };
        assert!(sup.width < two.width);
        assert!(bottom(&sup) < bottom(&two) - 2.0, "superscript not raised");
        assert!(top(&sup) <= top(&two) + 1e-9);
    }
}
