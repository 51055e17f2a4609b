//! A small document model written out twice: as Markdown and as a self-contained HTML
//! page (styles and pictures inline, readable printed). The ticket is built once as
//! blocks and rendered to both, so the two never drift apart.

/// One block of a document.
#[derive(Clone, Debug, PartialEq)]
pub enum Block {
    /// A heading of level 1–3.
    Heading(u8, String),
    Para(String),
    /// A list of points.
    List(Vec<String>),
    /// Steps in order.
    Steps(Vec<String>),
    /// A table; `right[i]` aligns column i to the right.
    Table {
        headers: Vec<String>,
        right: Vec<bool>,
        rows: Vec<Vec<String>>,
    },
    /// A picture kept beside the document as `file`, inlined in HTML.
    Picture {
        file: String,
        alt: String,
        svg: String,
    },
    /// Points set apart as cautions.
    Cautions(Vec<String>),
}

fn md_cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

/// The document as Markdown.
pub fn markdown(blocks: &[Block]) -> String {
    let mut out = String::new();
    for b in blocks {
        match b {
            Block::Heading(level, text) => {
                out.push_str(&format!("{} {text}\n\n", "#".repeat(*level as usize)));
            }
            Block::Para(text) => out.push_str(&format!("{text}\n\n")),
            Block::List(items) => {
                for i in items {
                    out.push_str(&format!("- {i}\n"));
                }
                out.push('\n');
            }
            Block::Steps(items) => {
                for (n, i) in items.iter().enumerate() {
                    out.push_str(&format!("{}. {i}\n", n + 1));
                }
                out.push('\n');
            }
            Block::Table {
                headers,
                right,
                rows,
            } => {
                out.push_str(&format!(
                    "| {} |\n",
                    headers
                        .iter()
                        .map(|h| md_cell(h))
                        .collect::<Vec<_>>()
                        .join(" | ")
                ));
                out.push_str(&format!(
                    "|{}|\n",
                    right
                        .iter()
                        .map(|r| if *r { "---:" } else { "---" })
                        .collect::<Vec<_>>()
                        .join("|")
                ));
                for row in rows {
                    out.push_str(&format!(
                        "| {} |\n",
                        row.iter()
                            .map(|c| md_cell(c))
                            .collect::<Vec<_>>()
                            .join(" | ")
                    ));
                }
                out.push('\n');
            }
            Block::Picture { file, alt, .. } => out.push_str(&format!("![{alt}]({file})\n\n")),
            Block::Cautions(items) => {
                out.push_str("> **Cautions**\n>\n");
                for i in items {
                    out.push_str(&format!("> - {i}\n"));
                }
                out.push('\n');
            }
        }
    }
    out
}

/// Text made safe for HTML (the XML escape of [`pim_io::text::xml_escape`]).
pub use pim_io::text::xml_escape as escape;

const STYLE: &str = r#"
  :root { --ink:#1d2430; --muted:#5b6573; --rule:#d5dae1; --band:#f3f5f8; --accent:#8a3b12; --warn:#fff4e5; }
  body { font: 15px/1.45 "Segoe UI", "Helvetica Neue", Arial, sans-serif; color: var(--ink); max-width: 58rem; margin: 2rem auto; padding: 0 1rem; }
  h1 { font-size: 1.5rem; border-bottom: 3px solid var(--accent); padding-bottom: .3rem; }
  h2 { font-size: 1.15rem; margin-top: 1.8rem; color: var(--accent); }
  h3 { font-size: 1rem; }
  table { border-collapse: collapse; width: 100%; margin: .5rem 0 1rem; font-size: 13.5px; }
  th, td { border-bottom: 1px solid var(--rule); padding: .3rem .45rem; text-align: left; vertical-align: top; }
  th { background: var(--band); font-weight: 600; }
  td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
  figure { margin: 1rem 0; } figure svg { width: 100%; height: auto; border: 1px solid var(--rule); }
  figcaption { color: var(--muted); font-size: 13px; }
  .cautions { background: var(--warn); border-left: 4px solid var(--accent); padding: .6rem 1rem; margin: 1rem 0; }
  .cautions strong { display: block; margin-bottom: .3rem; }
  @media print { body { margin: 0; max-width: none; font-size: 11pt; } h2 { break-after: avoid; } figure, table, .cautions { break-inside: avoid; } }
"#;

/// The document as a self-contained HTML page.
pub fn html(title: &str, blocks: &[Block]) -> String {
    let mut out = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        escape(title)
    );
    for b in blocks {
        match b {
            Block::Heading(level, text) => {
                out.push_str(&format!("<h{level}>{}</h{level}>\n", escape(text)));
            }
            Block::Para(text) => out.push_str(&format!("<p>{}</p>\n", escape(text))),
            Block::List(items) | Block::Steps(items) => {
                let tag = if matches!(b, Block::Steps(_)) {
                    "ol"
                } else {
                    "ul"
                };
                out.push_str(&format!("<{tag}>\n"));
                for i in items {
                    out.push_str(&format!("  <li>{}</li>\n", escape(i)));
                }
                out.push_str(&format!("</{tag}>\n"));
            }
            Block::Table {
                headers,
                right,
                rows,
            } => {
                let class = |i: usize| {
                    if right.get(i).copied().unwrap_or(false) {
                        " class=\"num\""
                    } else {
                        ""
                    }
                };
                out.push_str("<table>\n<thead><tr>");
                for (i, h) in headers.iter().enumerate() {
                    out.push_str(&format!("<th{}>{}</th>", class(i), escape(h)));
                }
                out.push_str("</tr></thead>\n<tbody>\n");
                for row in rows {
                    out.push_str("<tr>");
                    for (i, c) in row.iter().enumerate() {
                        out.push_str(&format!("<td{}>{}</td>", class(i), escape(c)));
                    }
                    out.push_str("</tr>\n");
                }
                out.push_str("</tbody>\n</table>\n");
            }
            Block::Picture { alt, svg, .. } => {
                let body = match svg.find("<svg") {
                    Some(i) => &svg[i..],
                    None => svg.as_str(),
                };
                out.push_str(&format!(
                    "<figure>\n{body}\n<figcaption>{}</figcaption>\n</figure>\n",
                    escape(alt)
                ));
            }
            Block::Cautions(items) => {
                out.push_str("<div class=\"cautions\"><strong>Cautions</strong>\n<ul>\n");
                for i in items {
                    out.push_str(&format!("  <li>{}</li>\n", escape(i)));
                }
                out.push_str("</ul>\n</div>\n");
            }
        }
    }
    out.push_str("</body>\n</html>\n");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn both_renderings_carry_the_content() {
        let doc = vec![
            Block::Heading(1, "Ticket <A&B>".into()),
            Block::Table {
                headers: vec!["a".into(), "b|c".into()],
                right: vec![false, true],
                rows: vec![vec!["1".into(), "2".into()]],
            },
            Block::Cautions(vec!["RF exposure".into()]),
        ];
        let md = markdown(&doc);
        assert!(md.contains("# Ticket <A&B>"));
        assert!(md.contains("| a | b\\|c |"));
        let h = html("t", &doc);
        assert!(h.contains("<h1>Ticket &lt;A&amp;B&gt;</h1>"));
        assert!(h.contains("<td class=\"num\">2</td>"));
        assert!(h.contains("class=\"cautions\""));
    }
}
