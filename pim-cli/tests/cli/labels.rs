//! Labels that do not collide (issue 24, item 8): every SVG the demo writes (its
//! ticket's map with its inset, spectrum and band trace, and the recording's waterfall),
//! and the ticket's pictures as inlined in ticket.html, drawn for a screen and for a
//! phone, are read back and no two of its text boxes overlap. A box is estimated from the
//! font size and the number of characters (0.6 em a character, 0.76 em above the
//! baseline and 0.24 em below: a wide sans-serif face's usual measures, common
//! practice), placed by `x`, `y`, `dy` and `text-anchor`; rotated texts (axis titles)
//! are left out. Boxes may touch by up to 1 px, the slack of the estimate. Also: the
//! ticket names the emitters of its listed candidates that lie beyond its map.

use std::path::Path;

use crate::support::{pim_in, scratch, stderr_of};

#[derive(Debug)]
struct TextBox {
    text: String,
    left: f64,
    top: f64,
    right: f64,
    bottom: f64,
}

fn attr(tag: &str, name: &str) -> Option<String> {
    let key = format!(" {name}=\"");
    let start = tag.find(&key)? + key.len();
    let end = tag[start..].find('"')?;
    Some(tag[start..start + end].to_string())
}

/// A length in em or ex of a font of `size` px, or in px.
fn length(text: &str, size: f64) -> f64 {
    if let Some(v) = text.strip_suffix("em") {
        v.parse::<f64>().unwrap_or(0.0) * size
    } else if let Some(v) = text.strip_suffix("ex") {
        v.parse::<f64>().unwrap_or(0.0) * size * 0.5
    } else {
        text.trim_end_matches("px").parse().unwrap_or(0.0)
    }
}

/// The text boxes of an SVG document (the root's font size is the default).
fn text_boxes(svg: &str) -> Vec<TextBox> {
    let root_size = svg
        .find("<svg")
        .and_then(|i| attr(&svg[i..i + svg[i..].find('>').unwrap()], "font-size"))
        .and_then(|s| s.parse().ok())
        .unwrap_or(12.0);
    let mut boxes = Vec::new();
    let mut rest = svg;
    while let Some(i) = rest.find("<text") {
        let after = &rest[i..];
        let tag_end = after.find('>').unwrap();
        let tag = &after[..tag_end];
        let body_end = after.find("</text>").unwrap();
        let body = after[tag_end + 1..body_end].trim();
        rest = &after[body_end..];
        if tag.contains("transform=") || body.is_empty() {
            continue;
        }
        let size = attr(tag, "font-size")
            .and_then(|s| s.trim_end_matches("px").parse().ok())
            .unwrap_or(root_size);
        let x: f64 = attr(tag, "x").and_then(|s| s.parse().ok()).unwrap_or(0.0);
        let y: f64 = attr(tag, "y").and_then(|s| s.parse().ok()).unwrap_or(0.0);
        let baseline = y + attr(tag, "dy").map_or(0.0, |d| length(&d, size));
        let text = body
            .replace("&amp;", "&")
            .replace("&lt;", "<")
            .replace("&gt;", ">")
            .replace("&quot;", "\"")
            .replace("&#39;", "'");
        let width = text.chars().count() as f64 * 0.6 * size;
        let left = match attr(tag, "text-anchor").as_deref() {
            Some("middle") => x - width / 2.0,
            Some("end") => x - width,
            _ => x,
        };
        boxes.push(TextBox {
            text,
            left,
            top: baseline - 0.76 * size,
            right: left + width,
            bottom: baseline + 0.24 * size,
        });
    }
    boxes
}

fn overlapping(svg: &str) -> Vec<(String, String)> {
    let boxes = text_boxes(svg);
    let mut found = Vec::new();
    for (i, a) in boxes.iter().enumerate() {
        for b in &boxes[i + 1..] {
            let w = a.right.min(b.right) - a.left.max(b.left);
            let h = a.bottom.min(b.bottom) - a.top.max(b.top);
            if w > 1.0 && h > 1.0 {
                found.push((a.text.clone(), b.text.clone()));
            }
        }
    }
    found
}

fn svgs_in(dir: &Path) -> Vec<std::path::PathBuf> {
    let mut files: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "svg"))
        .collect();
    files.sort();
    files
}

/// The estimate itself: two labels on one line overlap, one below the other does not.
#[test]
fn the_box_estimate_finds_an_overlap() {
    let svg = r#"<svg font-size="10"><text x="0" y="10">FIRE-DSP</text><text x="20" y="12">SKP-152</text><text x="0" y="30">HWY-BASE</text></svg>"#;
    assert_eq!(
        overlapping(svg),
        vec![("FIRE-DSP".to_string(), "SKP-152".to_string())]
    );
}

#[test]
fn no_two_labels_of_the_demo_s_pictures_overlap() {
    let tmp = scratch();
    let o = pim_in(Some(tmp.path()), &["demo", "--out", "demo"]);
    assert!(o.status.success(), "{}", stderr_of(&o));
    let files = svgs_in(&tmp.path().join("demo"));
    let names: Vec<String> = files
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    for want in ["map.svg", "spectrum.svg", "trace.svg", "waterfall.svg"] {
        assert!(names.iter().any(|n| n == want), "{want} in {names:?}");
    }
    // the map is sized to the walk: the listed candidates' emitters beyond it are named
    // with their distance and bearing from the fix
    let md = std::fs::read_to_string(tmp.path().join("demo/ticket.md")).unwrap();
    assert!(
        md.contains("Emitters of the listed candidates beyond the map's")
            // the FM broadcaster about 1.2 km north-east of the old tower
            && md.contains("QFMR (12")
            && md.contains(" m at 59°)"),
        "{md}"
    );
    for f in files {
        let svg = std::fs::read_to_string(&f).unwrap();
        assert!(text_boxes(&svg).len() > 3, "{}", f.display());
        let clashes = overlapping(&svg);
        assert!(clashes.is_empty(), "{}: {clashes:?}", f.display());
    }
    // The ticket's pictures as inlined, each drawn twice: for a screen and for a phone.
    let html = std::fs::read_to_string(tmp.path().join("demo/ticket.html")).unwrap();
    let mut inlined = 0;
    let mut rest = html.as_str();
    while let Some(i) = rest.find("<svg") {
        let end = rest[i..].find("</svg>").unwrap() + i + "</svg>".len();
        let svg = &rest[i..end];
        rest = &rest[end..];
        inlined += 1;
        assert!(text_boxes(svg).len() > 3, "inlined picture {inlined}");
        let clashes = overlapping(svg);
        assert!(clashes.is_empty(), "inlined picture {inlined}: {clashes:?}");
    }
    assert_eq!(inlined, 6, "map, spectrum and trace, wide and for a phone");
}
