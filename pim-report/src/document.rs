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
    /// A picture kept beside the document as `file`, inlined in HTML; `phone_svg`, when
    /// given, is the same picture drawn for a phone, which the HTML shows in its place on
    /// a narrow screen.
    Picture {
        file: String,
        alt: String,
        svg: String,
        phone_svg: Option<String>,
    },
    /// Points set apart as cautions.
    Cautions(Vec<String>),
}

/// Text made literal in CommonMark where it starts a line (a paragraph, a list item):
/// [`md_inline`], and what would open a block at the start of a line (a heading, quote,
/// list, thematic break or setext underline; leading spaces, which would make indented
/// code, are dropped) gets a backslash there too (CommonMark 0.31, "Backslash escapes":
/// any ASCII punctuation may be escaped).
///
/// ```
/// use pim_report::document::md_text;
/// assert_eq!(md_text("x\n## Cautions <!--"), "x ## Cautions \\<!--");
/// assert_eq!(md_text("## Cautions"), "\\## Cautions");
/// assert_eq!(md_text("- [a](b)"), "\\- \\[a\\](b)");
/// assert_eq!(md_text("1. SKP-152"), "1\\. SKP-152");
/// ```
pub fn md_text(text: &str) -> String {
    let inline = md_inline(text);
    let body = inline.trim_start();
    let digits = body.bytes().take_while(u8::is_ascii_digit).count();
    if body.starts_with(['#', '+', '-', '=', '>']) {
        format!("\\{body}")
    } else if digits > 0 && body[digits..].starts_with(['.', ')']) {
        format!("{}\\{}", &body[..digits], &body[digits..])
    } else {
        body.to_string()
    }
}

/// Text made literal inside a line of CommonMark (a table cell, a heading, the middle of
/// a paragraph): a pair of backticks around text without a backtick or a bar becomes a
/// code span, as the tool writes commands and options (`pim slope`), its content kept
/// as it is (nothing inside a code span is markup); elsewhere the characters that open
/// emphasis, code spans, links and images, raw HTML and comments, entities and cells get
/// a backslash; line breaks become spaces, so text never leaves its line or cell; control
/// and invisible characters are shown escaped (`\x1b`), as on the terminal.
///
/// ```
/// use pim_report::document::md_inline;
/// assert_eq!(md_inline("a|b <b>*x*</b>\n`c`"), "a\\|b \\<b\\>\\*x\\*\\</b\\> `c`");
/// assert_eq!(md_inline("146.3400"), "146.3400");
/// assert_eq!(md_inline("run `pim slope --kind attenuator`"), "run `pim slope --kind attenuator`");
/// assert_eq!(md_inline("a ` b"), "a \\` b");
/// assert_eq!(md_inline("so the\n  loss"), "so the loss");
/// ```
pub fn md_inline(text: &str) -> String {
    // a line break and the indent around it become one space: no run of spaces in a
    // sentence that was wrapped for the terminal
    let flat = text
        .split(['\n', '\r'])
        .enumerate()
        .filter(|(i, l)| *i == 0 || !l.trim().is_empty())
        .map(|(i, l)| if i == 0 { l.trim_end() } else { l.trim() })
        .collect::<Vec<_>>()
        .join(" ");
    let shown = pim_io::text::terminal_escape(&flat, false);
    let chars: Vec<char> = shown.chars().collect();
    let mut out = String::with_capacity(shown.len() + 8);
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        if c == '`' {
            if let Some(len) = chars[i + 1..].iter().position(|&d| d == '`') {
                let content = &chars[i + 1..i + 1 + len];
                let plain = !content.is_empty()
                    && !content.contains(&'|')
                    && content.first() != Some(&' ')
                    && content.last() != Some(&' ');
                if plain {
                    out.push('`');
                    out.extend(content);
                    out.push('`');
                    i += len + 2;
                    continue;
                }
            }
        }
        if "\\`*_[]<>|~&".contains(c) {
            out.push('\\');
        }
        out.push(c);
        i += 1;
    }
    out
}

fn md_cell(s: &str) -> String {
    md_inline(s)
}

/// The document as Markdown.
pub fn markdown(blocks: &[Block]) -> String {
    let mut out = String::new();
    for b in blocks {
        match b {
            Block::Heading(level, text) => {
                out.push_str(&format!(
                    "{} {}\n\n",
                    "#".repeat(*level as usize),
                    md_inline(text)
                ));
            }
            Block::Para(text) => out.push_str(&format!("{}\n\n", md_text(text))),
            Block::List(items) => {
                for i in items {
                    out.push_str(&format!("- {}\n", md_text(i)));
                }
                out.push('\n');
            }
            Block::Steps(items) => {
                for (n, i) in items.iter().enumerate() {
                    out.push_str(&format!("{}. {}\n", n + 1, md_text(i)));
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
            Block::Picture { file, alt, .. } => {
                out.push_str(&format!("![{}]({file})\n\n", md_text(alt)))
            }
            Block::Cautions(items) => {
                out.push_str("> **Cautions**\n>\n");
                for i in items {
                    out.push_str(&format!("> - {}\n", md_text(i)));
                }
                out.push('\n');
            }
        }
    }
    out
}

/// Text made safe for HTML (the XML escape of [`pim_io::text::xml_escape`]).
pub use pim_io::text::xml_escape as escape;

/// Text made safe for HTML with the code spans the Markdown has: a pair of backticks
/// around text without a backtick or a bar (as the tool writes commands and options,
/// [`md_inline`]) becomes `<code>`, the rest is escaped.
///
/// ```
/// use pim_report::document::html_inline;
/// assert_eq!(html_inline("run `pim slope <x>` & go"), "run <code>pim slope &lt;x&gt;</code> &amp; go");
/// assert_eq!(html_inline("a ` b"), "a ` b");
/// ```
pub fn html_inline(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 16);
    let mut rest = text;
    while let Some(open) = rest.find('`') {
        let after = &rest[open + 1..];
        let span = after.find('`').map(|close| &after[..close]).filter(|c| {
            !c.is_empty() && !c.contains('|') && !c.starts_with(' ') && !c.ends_with(' ')
        });
        match span {
            Some(code) => {
                out.push_str(&escape(&rest[..open]));
                out.push_str(&format!("<code>{}</code>", escape(code)));
                rest = &after[code.len() + 1..];
            }
            None => {
                out.push_str(&escape(&rest[..open + 1]));
                rest = after;
            }
        }
    }
    out.push_str(&escape(rest));
    out
}

const STYLE: &str = r#"
  :root { --ink:#1d2430; --muted:#5b6573; --rule:#d5dae1; --band:#f3f5f8; --accent:#8a3b12; --warn:#fff4e5; }
  body { font: 15px/1.45 "Segoe UI", "Helvetica Neue", Arial, sans-serif; color: var(--ink); max-width: 58rem; margin: 2rem auto; padding: 0 1rem; }
  h1 { font-size: 1.5rem; border-bottom: 3px solid var(--accent); padding-bottom: .3rem; }
  h2 { font-size: 1.15rem; margin-top: 1.8rem; color: var(--accent); }
  h3 { font-size: 1rem; }
  code { font-family: ui-monospace, "DejaVu Sans Mono", Menlo, Consolas, monospace; font-size: .92em; background: var(--band); padding: 0 .2em; overflow-wrap: anywhere; }
  table { border-collapse: collapse; width: 100%; margin: .5rem 0 1rem; font-size: 13.5px; }
  th, td { border-bottom: 1px solid var(--rule); padding: .3rem .45rem; text-align: left; vertical-align: top; }
  th { background: var(--band); font-weight: 600; }
  td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; }
  figure { margin: 1rem 0; } figure svg { width: 100%; height: auto; border: 1px solid var(--rule); }
  figcaption { color: var(--muted); font-size: 13px; }
  .cautions { background: var(--warn); border-left: 4px solid var(--accent); padding: .6rem 1rem; margin: 1rem 0; }
  .cautions strong { display: block; margin-bottom: .3rem; }
  figure svg { max-width: 100%; }
  /* A picture drawn twice: the wide drawing on a screen or paper, the phone's below 600 px. */
  .pic-phone { display: none; }
  /* A phone: each table row a card, each cell under its column's name. */
  @media screen and (max-width: 600px) {
    body { margin: 1rem auto; font-size: 16px; }
    table, thead, tbody, tr, th, td { display: block; }
    thead { position: absolute; width: 1px; height: 1px; overflow: hidden; clip: rect(0 0 0 0); }
    tr { border: 1px solid var(--rule); border-radius: 4px; margin: 0 0 .6rem; padding: .2rem .5rem; }
    td, td.num { border: 0; padding: .15rem 0; text-align: left; overflow-wrap: anywhere; }
    td[data-label]::before { content: attr(data-label) ": "; font-weight: 600; color: var(--muted); }
    .pic-phone { display: block; } .pic-wide.has-phone { display: none; }
  }
  /* Paper: A4 or Letter, whichever the printer holds; margins that fit both. */
  @page { margin: 15mm 12mm; }
  @media print {
    body { margin: 0; max-width: none; font-size: 10.5pt; color: #000; }
    h2 { break-after: avoid; } figure, tr, .cautions { break-inside: avoid; }
    table { font-size: 9pt; } th { background: none; } thead { display: table-header-group; }
    figure svg { width: 100%; max-width: 100%; border: 0; }
  }
"#;

/// The document as a self-contained HTML page.
pub fn html(title: &str, blocks: &[Block]) -> String {
    let mut out = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        escape(title)
    );
    for b in blocks {
        match b {
            Block::Heading(level, text) => {
                out.push_str(&format!("<h{level}>{}</h{level}>\n", escape(text)));
            }
            Block::Para(text) => out.push_str(&format!("<p>{}</p>\n", html_inline(text))),
            Block::List(items) | Block::Steps(items) => {
                let tag = if matches!(b, Block::Steps(_)) {
                    "ol"
                } else {
                    "ul"
                };
                out.push_str(&format!("<{tag}>\n"));
                for i in items {
                    out.push_str(&format!("  <li>{}</li>\n", html_inline(i)));
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
                        let label = headers
                            .get(i)
                            .map(|h| format!(" data-label=\"{}\"", escape(h)))
                            .unwrap_or_default();
                        out.push_str(&format!("<td{}{label}>{}</td>", class(i), html_inline(c)));
                    }
                    out.push_str("</tr>\n");
                }
                out.push_str("</tbody>\n</table>\n");
            }
            Block::Picture {
                alt,
                svg,
                phone_svg,
                ..
            } => {
                let body = |svg: &str| match svg.find("<svg") {
                    Some(i) => svg[i..].trim_end().to_string(),
                    None => svg.to_string(),
                };
                let pictures = match phone_svg {
                    Some(phone) => format!(
                        "<div class=\"pic-wide has-phone\">\n{}\n</div>\n<div class=\"pic-phone\">\n{}\n</div>",
                        body(svg),
                        body(phone)
                    ),
                    None => body(svg),
                };
                out.push_str(&format!(
                    "<figure>\n{pictures}\n<figcaption>{}</figcaption>\n</figure>\n",
                    escape(alt)
                ));
            }
            Block::Cautions(items) => {
                out.push_str("<div class=\"cautions\"><strong>Cautions</strong>\n<ul>\n");
                for i in items {
                    out.push_str(&format!("  <li>{}</li>\n", html_inline(i)));
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

    /// A note that tries to forge a section or hide the next one stays inside its line.
    #[test]
    fn input_text_cannot_open_markdown_blocks() {
        let doc = vec![
            Block::List(vec!["note: x\n\n## Cautions\nnone <!--".into()]),
            Block::Para("```\ncode".into()),
            Block::Para("    indented".into()),
            Block::Table {
                headers: vec!["id".into()],
                right: vec![false],
                rows: vec![vec!["a|b\n# c".into()]],
            },
        ];
        let md = markdown(&doc);
        for line in md.lines() {
            assert!(!line.starts_with('#') && !line.starts_with("```"), "{md}");
        }
        assert!(!md.contains(" <!--") && md.contains("\\<!--"), "{md}");
        assert!(md.contains("| a\\|b # c |"), "{md}");
        assert!(md.contains("\n\\`\\`\\` code\n"), "{md}");
        assert!(md.contains("\nindented\n"), "{md}");
    }

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
            Block::Picture {
                file: "p.svg".into(),
                alt: "p".into(),
                svg: "<svg id=\"wide\"></svg>".into(),
                phone_svg: Some("<svg id=\"phone\"></svg>".into()),
            },
        ];
        let md = markdown(&doc);
        assert!(md.contains("# Ticket \\<A\\&B\\>"), "{md}");
        assert!(md.contains("| a | b\\|c |"));
        let h = html("t", &doc);
        assert!(h.contains("<h1>Ticket &lt;A&amp;B&gt;</h1>"));
        assert!(h.contains("<td class=\"num\" data-label=\"b|c\">2</td>"));
        assert!(
            h.contains("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">")
        );
        assert!(h.contains("@media screen and (max-width: 600px)") && h.contains("@media print"));
        assert!(h.contains("class=\"cautions\""));
        // Both drawings of a picture, the phone's shown in the wide one's place on a
        // narrow screen.
        assert!(h.contains("<div class=\"pic-wide has-phone\">\n<svg id=\"wide\"></svg>\n</div>\n<div class=\"pic-phone\">\n<svg id=\"phone\"></svg>\n</div>"), "{h}");
        assert!(h.contains(".pic-phone { display: block; } .pic-wide.has-phone { display: none; }"));
        assert!(md.contains("![p](p.svg)"));
    }
}
