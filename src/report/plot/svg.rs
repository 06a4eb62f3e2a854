//! Scene → SVG 1.1 text. Coordinates are written with at most two decimals (1/100 px),
//! text as stroked paths with the text itself in `aria-label`, so the file needs no fonts
//! and looks like the PNG. No ids are used, so many plots can sit inline in one page.

use std::fmt::Write;

use super::scene::{Item, Scene, text_strokes};
use crate::report::html::escape;

/// The scene as a standalone SVG document (also valid inline in HTML).
pub(crate) fn render(scene: &Scene) -> String {
    let (w, h) = (num(scene.width), num(scene.height));
    let mut s = String::new();
    let _ = write!(
        s,
        "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"{w}\" height=\"{h}\" \
         viewBox=\"0 0 {w} {h}\" role=\"img\" aria-label=\"{t}\">\n<title>{t}</title>\n",
        t = escape(&scene.title)
    );
    let _ = writeln!(
        s,
        "<rect width=\"{w}\" height=\"{h}\" fill=\"{}\"/>",
        scene.background.hex()
    );
    for item in &scene.items {
        match item {
            Item::Stroke {
                pts,
                color,
                width,
                dash,
            } => {
                let _ = write!(
                    s,
                    "<path d=\"{}\" fill=\"none\" stroke=\"{}\"{} stroke-width=\"{}\" \
                     stroke-linecap=\"round\" stroke-linejoin=\"round\"",
                    path_data(std::slice::from_ref(pts), false),
                    color.hex(),
                    opacity("stroke-opacity", color.opacity()),
                    num(*width)
                );
                if let Some((on, off)) = dash {
                    let _ = write!(s, " stroke-dasharray=\"{} {}\"", num(*on), num(*off));
                }
                s.push_str("/>\n");
            }
            Item::Fill { pts, color, edge } => {
                let _ = write!(
                    s,
                    "<path d=\"{}\" fill=\"{}\"{}",
                    path_data(std::slice::from_ref(pts), true),
                    color.hex(),
                    opacity("fill-opacity", color.opacity())
                );
                if *edge > 0.0 {
                    let _ = write!(
                        s,
                        " stroke=\"{}\"{} stroke-width=\"{}\" stroke-linejoin=\"round\"",
                        color.hex(),
                        opacity("stroke-opacity", color.opacity()),
                        num(*edge)
                    );
                }
                s.push_str("/>\n");
            }
            Item::Circle { c, r, color } => {
                let _ = writeln!(
                    s,
                    "<circle cx=\"{}\" cy=\"{}\" r=\"{}\" fill=\"{}\"{}/>",
                    num(c[0]),
                    num(c[1]),
                    num(*r),
                    color.hex(),
                    opacity("fill-opacity", color.opacity())
                );
            }
            Item::Text { color, text, .. } => {
                let (strokes, width) = text_strokes(item);
                let _ = writeln!(
                    s,
                    "<path class=\"text\" aria-label=\"{}\" d=\"{}\" fill=\"none\" stroke=\"{}\"{} \
                     stroke-width=\"{}\" stroke-linecap=\"round\" stroke-linejoin=\"round\"/>",
                    escape(text),
                    path_data(&strokes, false),
                    color.hex(),
                    opacity("stroke-opacity", color.opacity()),
                    num(width)
                );
            }
        }
    }
    s.push_str("</svg>\n");
    s
}

fn opacity(attr: &str, o: f64) -> String {
    if o >= 1.0 {
        String::new()
    } else {
        format!(" {attr}=\"{}\"", num(o))
    }
}

/// Path data for polylines (`closed`: each ends with `Z`).
fn path_data(polys: &[Vec<[f64; 2]>], closed: bool) -> String {
    let mut d = String::new();
    for pts in polys {
        for (i, p) in pts.iter().enumerate() {
            if !d.is_empty() {
                d.push(' ');
            }
            d.push(if i == 0 { 'M' } else { 'L' });
            d.push_str(&num(p[0]));
            d.push(',');
            d.push_str(&num(p[1]));
        }
        if closed && !pts.is_empty() {
            d.push_str(" Z");
        }
    }
    d
}

/// A coordinate with at most two decimals and no trailing zeros (`12.5`, `3`, `-0.25`).
pub(crate) fn num(v: f64) -> String {
    let v = if v.is_finite() { v } else { 0.0 };
    let mut s = format!("{v:.2}");
    if s.contains('.') {
        while s.ends_with('0') {
            s.pop();
        }
        if s.ends_with('.') {
            s.pop();
        }
    }
    if s == "-0" { "0".to_string() } else { s }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_short_and_clean() {
        assert_eq!(num(12.5), "12.5");
        assert_eq!(num(3.0), "3");
        assert_eq!(num(-0.001), "0");
        assert_eq!(num(1.239), "1.24");
        assert_eq!(num(f64::NAN), "0");
    }
}
