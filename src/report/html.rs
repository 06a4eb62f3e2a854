//! A self-contained HTML report: one file, no network, no external CSS, scripts or fonts.
//!
//! Invariant: every piece of text handed to a [`Page`] is escaped; the only markup that goes
//! in unescaped is SVG made by our own plots (or passed to [`Page::figure_svg`]). The page is
//! also well-formed XML (void elements self-closed), so XML tools can read it. It always ends
//! with a provenance section and the note [`ESTIMATE_NOTE`].

use std::fmt::Write;

use super::plot::Plot;

/// The fixed note at the end of every report.
pub const ESTIMATE_NOTE: &str =
    "Results are engineering estimates; product ratings need certified measurement.";

/// Escapes text for HTML and XML content and attribute values (`& < > " '`).
pub fn escape(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => s.push_str("&amp;"),
            '<' => s.push_str("&lt;"),
            '>' => s.push_str("&gt;"),
            '"' => s.push_str("&quot;"),
            '\'' => s.push_str("&#39;"),
            // Control characters other than tab and line breaks are not allowed in XML.
            c if c.is_control() && !matches!(c, '\t' | '\n' | '\r') => s.push('\u{fffd}'),
            c => s.push(c),
        }
    }
    s
}

#[derive(Debug, Clone)]
enum Block {
    Heading(String),
    Paragraph(String),
    KeyValues {
        caption: String,
        rows: Vec<(String, String)>,
    },
    Table {
        caption: String,
        header: Vec<String>,
        rows: Vec<Vec<String>>,
    },
    Figure {
        name: String,
        caption: String,
        svg: String,
    },
    Files {
        caption: String,
        files: Vec<(String, String)>,
    },
}

/// Builder of one report page.
///
/// ```
/// use lightfold::report::html::Page;
/// let mut page = Page::new("Textured wafer <demo>");
/// page.paragraph("R + A + T = 1 at every wavelength.")
///     .key_values("Summary", [("Jsc (mA/cm²)", "41.2")])
///     .provenance("seed", "42");
/// let html = page.render();
/// assert!(html.contains("Textured wafer &lt;demo&gt;"));
/// ```
#[derive(Debug, Clone)]
pub struct Page {
    title: String,
    blocks: Vec<Block>,
    provenance: Vec<(String, String)>,
}

impl Page {
    /// An empty page with a title (shown as the top heading and the window title).
    pub fn new(title: impl Into<String>) -> Self {
        Self {
            title: title.into(),
            blocks: Vec::new(),
            provenance: Vec::new(),
        }
    }

    /// A section heading.
    pub fn heading(&mut self, text: impl Into<String>) -> &mut Self {
        self.blocks.push(Block::Heading(text.into()));
        self
    }

    /// A paragraph of plain text.
    pub fn paragraph(&mut self, text: impl Into<String>) -> &mut Self {
        self.blocks.push(Block::Paragraph(text.into()));
        self
    }

    /// A two-column table of names and values.
    pub fn key_values<K, V>(
        &mut self,
        caption: impl Into<String>,
        rows: impl IntoIterator<Item = (K, V)>,
    ) -> &mut Self
    where
        K: std::fmt::Display,
        V: std::fmt::Display,
    {
        let rows = rows
            .into_iter()
            .map(|(k, v)| (k.to_string(), v.to_string()))
            .collect();
        self.blocks.push(Block::KeyValues {
            caption: caption.into(),
            rows,
        });
        self
    }

    /// A data table; cells that read as numbers are right-aligned.
    pub fn table(
        &mut self,
        caption: impl Into<String>,
        header: Vec<String>,
        rows: Vec<Vec<String>>,
    ) -> &mut Self {
        self.blocks.push(Block::Table {
            caption: caption.into(),
            header,
            rows,
        });
        self
    }

    /// A figure drawn from a plot at `width` × `height` px, inline SVG in
    /// `<figure data-plot="name">`.
    pub fn figure(
        &mut self,
        name: &str,
        caption: impl Into<String>,
        plot: &dyn Plot,
        width: u32,
        height: u32,
    ) -> &mut Self {
        let svg = plot.to_svg(width, height);
        self.figure_svg(name, caption, svg)
    }

    /// A figure from SVG text made by lightfold's plots; it is inserted as is.
    pub fn figure_svg(&mut self, name: &str, caption: impl Into<String>, svg: String) -> &mut Self {
        self.blocks.push(Block::Figure {
            name: name.to_string(),
            caption: caption.into(),
            svg,
        });
        self
    }

    /// A list of files of the results folder with a description each, linked relatively
    /// (the links work when the page sits in that folder).
    pub fn files<N, D>(
        &mut self,
        caption: impl Into<String>,
        files: impl IntoIterator<Item = (N, D)>,
    ) -> &mut Self
    where
        N: std::fmt::Display,
        D: std::fmt::Display,
    {
        let files = files
            .into_iter()
            .map(|(n, d)| (n.to_string(), d.to_string()))
            .collect();
        self.blocks.push(Block::Files {
            caption: caption.into(),
            files,
        });
        self
    }

    /// One line of provenance (program version, seed, scenario, date, …), shown at the end.
    pub fn provenance(&mut self, key: impl Into<String>, value: impl Into<String>) -> &mut Self {
        self.provenance.push((key.into(), value.into()));
        self
    }

    /// The whole page as one HTML document.
    pub fn render(&self) -> String {
        let mut s = String::new();
        let title = escape(&self.title);
        let _ = write!(
            s,
            "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n\
             <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n\
             <title>{title}</title>\n<style>\n{CSS}</style>\n</head>\n<body>\n<main>\n\
             <h1>{title}</h1>\n"
        );
        for b in &self.blocks {
            match b {
                Block::Heading(t) => {
                    let _ = writeln!(s, "<h2>{}</h2>", escape(t));
                }
                Block::Paragraph(t) => {
                    let _ = writeln!(s, "<p>{}</p>", escape(t));
                }
                Block::KeyValues { caption, rows } => {
                    s.push_str("<table class=\"kv\">\n");
                    caption_row(&mut s, caption);
                    s.push_str("<tbody>\n");
                    for (k, v) in rows {
                        let _ = writeln!(
                            s,
                            "<tr><th scope=\"row\">{}</th><td{}>{}</td></tr>",
                            escape(k),
                            num_class(v),
                            escape(v)
                        );
                    }
                    s.push_str("</tbody>\n</table>\n");
                }
                Block::Table {
                    caption,
                    header,
                    rows,
                } => {
                    s.push_str("<div class=\"scroll\"><table class=\"data\">\n");
                    caption_row(&mut s, caption);
                    s.push_str("<thead><tr>");
                    for h in header {
                        let _ = write!(s, "<th scope=\"col\">{}</th>", escape(h));
                    }
                    s.push_str("</tr></thead>\n<tbody>\n");
                    for row in rows {
                        s.push_str("<tr>");
                        for cell in row {
                            let _ = write!(s, "<td{}>{}</td>", num_class(cell), escape(cell));
                        }
                        s.push_str("</tr>\n");
                    }
                    s.push_str("</tbody>\n</table></div>\n");
                }
                Block::Figure { name, caption, svg } => {
                    let _ = write!(s, "<figure data-plot=\"{}\">\n{}", escape(name), svg);
                    if !caption.is_empty() {
                        let _ = writeln!(s, "<figcaption>{}</figcaption>", escape(caption));
                    }
                    s.push_str("</figure>\n");
                }
                Block::Files { caption, files } => {
                    if !caption.is_empty() {
                        let _ = writeln!(s, "<h3>{}</h3>", escape(caption));
                    }
                    s.push_str("<ul class=\"files\">\n");
                    for (n, d) in files {
                        let _ = writeln!(
                            s,
                            "<li><a href=\"{n}\"><code>{n}</code></a> — {}</li>",
                            escape(d),
                            n = escape(n)
                        );
                    }
                    s.push_str("</ul>\n");
                }
            }
        }
        s.push_str("<section id=\"provenance\">\n<h2>Provenance</h2>\n");
        if !self.provenance.is_empty() {
            s.push_str("<table class=\"kv\">\n<tbody>\n");
            for (k, v) in &self.provenance {
                let _ = writeln!(
                    s,
                    "<tr><th scope=\"row\">{}</th><td>{}</td></tr>",
                    escape(k),
                    escape(v)
                );
            }
            s.push_str("</tbody>\n</table>\n");
        }
        let _ = write!(
            s,
            "<p class=\"note\">{}</p>\n</section>\n</main>\n</body>\n</html>\n",
            escape(ESTIMATE_NOTE)
        );
        s
    }
}

fn caption_row(s: &mut String, caption: &str) {
    if !caption.is_empty() {
        let _ = writeln!(s, "<caption>{}</caption>", escape(caption));
    }
}

/// ` class="num"` for cells that read as numbers (with an optional ± part or unit-free).
fn num_class(cell: &str) -> &'static str {
    let head = cell.split(['±', ' ']).next().unwrap_or("").trim();
    let head = head.replace('−', "-");
    if !head.is_empty() && head.parse::<f64>().is_ok() {
        " class=\"num\""
    } else {
        ""
    }
}

/// Inline style: readable on screen, compact in print; system fonts only.
const CSS: &str = r#"body { margin: 0; background: #fafafa; color: #222;
  font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; }
main { max-width: 980px; margin: 0 auto; padding: 1.5em 1.5em 3em; background: #fff; }
h1 { font-size: 1.6em; margin: 0.2em 0 0.6em; }
h2 { font-size: 1.25em; margin: 1.6em 0 0.5em; border-bottom: 1px solid #ddd; padding-bottom: 0.2em; }
h3 { font-size: 1.05em; margin: 1.2em 0 0.4em; }
table { border-collapse: collapse; margin: 0.8em 0; font-size: 0.93em; }
caption { text-align: left; font-weight: 600; padding-bottom: 0.3em; }
th, td { padding: 0.25em 0.7em; border-bottom: 1px solid #e6e6e6; text-align: left; vertical-align: top; }
thead th { border-bottom: 2px solid #bbb; }
table.kv th { font-weight: normal; color: #555; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.scroll { overflow-x: auto; }
figure { margin: 1.2em 0; }
figure svg { display: block; max-width: 100%; height: auto; }
figcaption { color: #555; font-size: 0.9em; margin-top: 0.3em; }
code { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: 0.92em; }
ul.files { padding-left: 1.2em; }
.note { margin-top: 1.5em; padding: 0.6em 0.9em; background: #fff8e1; border-left: 4px solid #e69f00; }
@media print {
  body { background: #fff; font-size: 11pt; }
  main { max-width: none; padding: 0; }
  figure, table { break-inside: avoid; }
  a { color: inherit; text-decoration: none; }
}
"#;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_recognised_for_alignment() {
        assert_eq!(num_class("41.23"), " class=\"num\"");
        assert_eq!(num_class("−0.5 ± 0.1"), " class=\"num\"");
        assert_eq!(num_class("1e-3"), " class=\"num\"");
        assert_eq!(num_class("silicon"), "");
        assert_eq!(num_class(""), "");
    }
}
