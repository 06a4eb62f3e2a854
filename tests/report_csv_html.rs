//! CSV and HTML writers: floats round-trip exactly (Rust `{:?}` shortest form), cells are
//! quoted per RFC 4180 (IETF, 2005), HTML text is escaped and the page is self-contained
//! and well-formed XML (W3C XML 1.0, checked with `roxmltree`).

use lightfold::report::csv::Cell;
use lightfold::report::html::{ESTIMATE_NOTE, Page, escape};
use lightfold::report::{Column, CsvWriter, LinePlot, ReportError, Series};

#[test]
fn csv_floats_round_trip_bit_for_bit() {
    let values = [
        0.1,
        1.0 / 3.0,
        6.02214076e23,
        -1.5e-300,
        f64::MIN_POSITIVE,
        1e-7,
        1234.5,
    ];
    let mut w = CsvWriter::new(&[Column::new("value", "")]);
    for v in values {
        w.row_f64(&[v]).unwrap();
    }
    let text = w.finish();
    let back: Vec<f64> = text
        .lines()
        .skip(1)
        .map(|l| l.parse::<f64>().unwrap())
        .collect();
    assert_eq!(back.len(), values.len());
    for (a, b) in values.iter().zip(&back) {
        assert_eq!(a.to_bits(), b.to_bits(), "{a:e} came back as {b:e}");
    }
}

#[test]
fn csv_has_comments_then_header_with_units() {
    let mut w = CsvWriter::new(&[
        Column::new("wavelength", "nm"),
        Column::new("absorptance", ""),
        Column::new("note", ""),
    ]);
    w.comment("lightfold 0.1.0\nseed = 42");
    w.row(&[Cell::Num(600.0), Cell::Num(0.25), Cell::from("a, \"b\"")])
        .unwrap();
    w.row(&[Cell::Num(f64::NAN), Cell::Num(f64::INFINITY), Cell::Int(-3)])
        .unwrap();
    assert_eq!(
        w.finish(),
        "# lightfold 0.1.0\n# seed = 42\nwavelength (nm),absorptance,note\n\
         600.0,0.25,\"a, \"\"b\"\"\"\nNaN,inf,-3\n"
    );
    assert_eq!(w.n_rows(), 2);
}

#[test]
fn csv_row_of_wrong_width_is_an_error() {
    let mut w = CsvWriter::new(&[Column::new("a", ""), Column::new("b", "")]);
    w.row_f64(&[1.0, 2.0]).unwrap();
    let err = w.row_f64(&[1.0]).unwrap_err();
    assert!(
        matches!(
            err,
            ReportError::CsvRowWidth {
                row: 2,
                expected: 2,
                got: 1
            }
        ),
        "{err:?}"
    );
}

#[test]
fn csv_columns_are_cut_to_the_shortest() {
    let mut w = CsvWriter::new(&[Column::new("x", ""), Column::new("y", "")]);
    w.columns_f64(&[&[1.0, 2.0, 3.0], &[4.0, 5.0]]).unwrap();
    assert_eq!(w.finish(), "x,y\n1.0,4.0\n2.0,5.0\n");
}

#[test]
fn html_escaping_covers_markup_characters() {
    assert_eq!(
        escape(r#"<b>"R&D" 'x'</b>"#),
        "&lt;b&gt;&quot;R&amp;D&quot; &#39;x&#39;&lt;/b&gt;"
    );
    assert_eq!(escape("λ = 600 nm, 10⁻³"), "λ = 600 nm, 10⁻³");
    assert_eq!(escape("bell\u{7}"), "bell\u{fffd}");
}

fn sample_page() -> String {
    let plot = LinePlot::new("R <front>", "wavelength (nm)", "R").series(Series::line(
        "a&b",
        vec![400.0, 800.0],
        vec![0.1, 0.2],
    ));
    let mut page = Page::new("Report <script>alert(1)</script>");
    page.paragraph("Tom & Jerry <i>")
        .heading("Section \"one\"")
        .key_values("Summary", [("Jsc (mA/cm²)", "41.2 ± 0.1"), ("<k>", "<v>")])
        .table(
            "Table",
            vec!["λ (nm)".into(), "R".into()],
            vec![
                vec!["600".into(), "0.1".into()],
                vec!["<x>".into(), "y".into()],
            ],
        )
        .figure("spectrum", "Caption & more", &plot, 500, 300)
        .files("Files", [("summary.json", "headline <numbers>")])
        .provenance("seed", "42")
        .provenance("scenario", "demo <embedded>");
    page.render()
}

#[test]
fn html_page_escapes_all_text() {
    let html = sample_page();
    assert!(!html.contains("<script"), "script tag leaked");
    assert!(html.contains("Report &lt;script&gt;alert(1)&lt;/script&gt;"));
    assert!(html.contains("Tom &amp; Jerry &lt;i&gt;"));
    assert!(html.contains("<th scope=\"row\">&lt;k&gt;</th>"));
    assert!(html.contains("demo &lt;embedded&gt;"));
}

#[test]
fn html_page_is_self_contained() {
    let html = sample_page();
    for banned in [
        "<link", "<script", "src=", "@import", "url(", "<iframe", "<img",
    ] {
        assert!(!html.contains(banned), "page contains {banned:?}");
    }
    // The only address is the SVG namespace name, which is never fetched.
    let without_ns = html.replace("xmlns=\"http://www.w3.org/2000/svg\"", "");
    assert!(!without_ns.contains("http:") && !without_ns.contains("https:"));
}

#[test]
fn html_page_is_well_formed_and_has_figure_provenance_and_note() {
    let html = sample_page();
    let opts = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    let doc = roxmltree::Document::parse_with_options(&html, opts)
        .unwrap_or_else(|e| panic!("page is not well-formed: {e}"));
    let figures: Vec<_> = doc
        .descendants()
        .filter(|n| n.has_tag_name("figure"))
        .collect();
    assert_eq!(figures.len(), 1);
    assert_eq!(figures[0].attribute("data-plot"), Some("spectrum"));
    assert!(
        figures[0]
            .descendants()
            .any(|n| n.tag_name().name() == "svg")
    );
    let provenance = doc
        .descendants()
        .find(|n| n.attribute("id") == Some("provenance"))
        .expect("provenance section");
    let text: String = provenance
        .descendants()
        .filter(|n| n.is_text())
        .map(|n| n.text().unwrap_or(""))
        .collect();
    assert!(text.contains("seed") && text.contains("42"));
    assert!(text.contains(ESTIMATE_NOTE));
}
