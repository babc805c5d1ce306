//! The design report as one self-contained HTML5 page: inline CSS, inline
//! SVG figures, no script, no external resource, so it opens offline,
//! mails as one file and prints on one or two A4 pages.
//!
//! Generic: the caller provides the sections as plain data
//! ([`ReportDoc`]). Invariants: every caller text goes through [`escape`];
//! the only markup taken as is, is each figure's SVG (with any XML
//! prolog removed), which must come from a trusted writer such as
//! [`crate::export::plot::svg`].

// `write!` into a String cannot fail, so its results are dropped with
// `let _ =` throughout.
use std::fmt::Write as _;

/// A figure: an SVG chart and its caption.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Figure {
    /// Caption under the chart.
    pub caption: String,
    /// A standalone SVG document, inserted as markup (not escaped).
    pub svg: String,
}

/// A table of text cells.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Table {
    /// Caption above the table.
    pub caption: String,
    /// Column headings.
    pub header: Vec<String>,
    /// Rows of cells; a row may be shorter than the header.
    pub rows: Vec<Vec<String>>,
}

/// Everything the report page shows, in this order: title, summary,
/// cautions (near the top, so a reviewer cannot miss them), figures,
/// tables, notes. Empty sections are left out.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ReportDoc {
    /// Page title and main heading.
    pub title: String,
    /// Key/value rows of the design summary.
    pub summary: Vec<(String, String)>,
    /// Warnings a reviewer must see (clipping stages, unmet margins).
    pub cautions: Vec<String>,
    /// Charts.
    pub figures: Vec<Figure>,
    /// Parts tables and the like.
    pub tables: Vec<Table>,
    /// Remarks at the end.
    pub notes: Vec<String>,
}

/// Text made safe for HTML element content and quoted attribute values:
/// `&`, `<`, `>`, `"` and `'` become character references.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Page style. Figures sit two to a row on paper (and on a wide screen),
/// tables use a small font, and no section is split across pages where it
/// can be avoided.
const STYLE: &str = "
@page { size: A4; margin: 12mm; }
body { font-family: sans-serif; font-size: 10.5pt; color: #111; margin: 0 auto; max-width: 1100px; padding: 12px; }
h1 { font-size: 17pt; margin: 0 0 6px 0; }
h2 { font-size: 12pt; margin: 14px 0 6px 0; border-bottom: 1px solid #999; }
table { border-collapse: collapse; margin: 4px 0 10px 0; }
th, td { border: 1px solid #bbb; padding: 2px 6px; text-align: left; vertical-align: top; }
th { background: #eee; }
table.summary th { width: 16em; font-weight: normal; }
table.parts { font-size: 9pt; }
caption { caption-side: top; text-align: left; font-weight: bold; padding: 2px 0; }
.cautions { border: 2px solid #c60; background: #fff4e6; padding: 4px 10px; }
.figures { display: grid; grid-template-columns: repeat(auto-fill, minmax(420px, 1fr)); gap: 8px; }
figure { margin: 0; break-inside: avoid; }
figure svg { width: 100%; height: auto; display: block; }
figcaption { font-size: 9pt; color: #333; }
section, table, .cautions { break-inside: avoid; }
@media print {
  body { max-width: none; padding: 0; font-size: 9.5pt; }
  .figures { grid-template-columns: 1fr 1fr; }
}
";

/// The whole page.
pub fn html_report(doc: &ReportDoc) -> String {
    let mut page = String::new();
    let title = escape(&doc.title);
    page.push_str("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n");
    page.push_str("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n");
    let _ = writeln!(
        page,
        "<title>{title}</title>\n<style>{STYLE}</style>\n</head>\n<body>"
    );
    let _ = writeln!(page, "<h1>{title}</h1>");
    summary(&mut page, &doc.summary);
    list(&mut page, "Cautions", "cautions", &doc.cautions);
    figures(&mut page, &doc.figures);
    for table in &doc.tables {
        parts_table(&mut page, table);
    }
    list(&mut page, "Notes", "notes", &doc.notes);
    page.push_str("</body>\n</html>\n");
    page
}

fn summary(page: &mut String, rows: &[(String, String)]) {
    if rows.is_empty() {
        return;
    }
    page.push_str("<section>\n<h2>Summary</h2>\n<table class=\"summary\">\n");
    for (key, value) in rows {
        let _ = writeln!(
            page,
            "<tr><th>{}</th><td>{}</td></tr>",
            escape(key),
            escape(value)
        );
    }
    page.push_str("</table>\n</section>\n");
}

fn list(page: &mut String, heading: &str, class: &str, items: &[String]) {
    if items.is_empty() {
        return;
    }
    let _ = writeln!(
        page,
        "<section class=\"{class}\">\n<h2>{heading}</h2>\n<ul>"
    );
    for item in items {
        let _ = writeln!(page, "<li>{}</li>", escape(item));
    }
    page.push_str("</ul>\n</section>\n");
}

fn figures(page: &mut String, figures: &[Figure]) {
    if figures.is_empty() {
        return;
    }
    page.push_str("<section>\n<h2>Figures</h2>\n<div class=\"figures\">\n");
    for figure in figures {
        let _ = writeln!(
            page,
            "<figure>\n{}\n<figcaption>{}</figcaption>\n</figure>",
            without_prolog(&figure.svg),
            escape(&figure.caption)
        );
    }
    page.push_str("</div>\n</section>\n");
}

/// The SVG without a leading `<?xml ...?>` declaration, which is not
/// allowed inside HTML.
fn without_prolog(svg: &str) -> &str {
    let svg = svg.trim_start();
    match svg.strip_prefix("<?xml") {
        Some(rest) => rest
            .split_once("?>")
            .map_or(svg, |(_, body)| body.trim_start()),
        None => svg,
    }
}

fn parts_table(page: &mut String, table: &Table) {
    page.push_str("<table class=\"parts\">\n");
    let _ = writeln!(page, "<caption>{}</caption>", escape(&table.caption));
    page.push_str("<thead><tr>");
    for heading in &table.header {
        let _ = write!(page, "<th>{}</th>", escape(heading));
    }
    page.push_str("</tr></thead>\n<tbody>\n");
    for row in &table.rows {
        page.push_str("<tr>");
        for cell in row {
            let _ = write!(page, "<td>{}</td>", escape(cell));
        }
        page.push_str("</tr>\n");
    }
    page.push_str("</tbody>\n</table>\n");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prolog_is_dropped() {
        let svg = "<?xml version=\"1.0\"?>\n<svg></svg>";
        assert_eq!(without_prolog(svg), "<svg></svg>");
        assert_eq!(without_prolog("<svg/>"), "<svg/>");
    }
}
