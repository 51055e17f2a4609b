//! What `pim explain` writes around its listing: the lines above it (the same in the
//! table and in Markdown) and its JSON document.

use std::io::Write;

use pim_core::emitter::Emitter;
use pim_core::geo::GeoPoint;
use pim_core::onair::Logbook;
use serde_json::json;

use crate::candidates::{
    channel_summary, co_channel_json, co_channel_text, narrowing_text, outlook_json,
    write_json_array, Counts, Listing,
};

/// What the lines above an explanation's listing say.
pub struct ExplainLines<'a> {
    pub listing: &'a Listing<'a>,
    /// The emitter file, as named on the command line.
    pub emitters_source: &'a str,
    /// Where the candidates are levelled, when known.
    pub junction: Option<GeoPoint>,
    /// `--coefficient` pairs (emitter index, |k|).
    pub coefficients: &'a [(usize, u32)],
    /// Products found, and kept after the narrowing.
    pub found: usize,
    pub kept: usize,
    pub logbook: Option<&'a Logbook>,
    pub counts: &'a Counts,
    pub shown: Option<usize>,
    /// Candidates the power steps cleared, and the steps' file.
    pub cleared: Option<(usize, String)>,
    /// A heard level was given but no candidate has a level to calibrate.
    pub heard_unused: bool,
}

/// The lines above the listing: the channel, co-channel emitters, the narrowing, the
/// counts and the ranking's basis, what the power steps cleared.
pub fn explain_preamble(l: &ExplainLines) -> String {
    let emitters: &[Emitter] = l.listing.emitters;
    let ranking = l.listing.ranking;
    let mut preamble = channel_summary(
        l.listing.params,
        emitters.len(),
        l.emitters_source,
        l.junction,
    );
    preamble.push_str(&co_channel_text(l.listing));
    preamble.push_str(&narrowing_text(
        emitters,
        l.coefficients,
        l.found,
        l.kept,
        l.logbook,
    ));
    let total = ranking.total;
    let n = l.shown.unwrap_or(usize::MAX);
    if total > 0 {
        preamble.push_str(&format!(
            "{} (a candidate: a product with one way it can be made); {}.{}\n",
            l.counts.text(),
            ranking.basis(),
            if total > n && n > 0 {
                format!(" The first {n}:")
            } else {
                String::new()
            }
        ));
    }
    if let Some((n, path)) = &l.cleared {
        preamble.push_str(&format!(
            "Power steps ({path}): {n} candidate{} cleared (a stepped emitter moved the level and takes no part, or with a |k| its slope does not fit), ranked after the others.\n",
            if *n == 1 { "" } else { "s" }
        ));
    }
    if l.heard_unused {
        preamble.push_str("The heard level is not used: without a junction location (--rx-lat/--rx-lon) no candidate has a level.\n");
    }
    preamble
}

/// The explanation as one JSON document: its inputs, the ranking's basis and outlook,
/// the co-channel emitters, the counts and the candidates listed.
pub fn write_explain_json(
    out: &mut dyn Write,
    listing: &Listing,
    inputs: &serde_json::Value,
    counts: &Counts,
    shown: Option<usize>,
) -> std::io::Result<()> {
    let ranking = listing.ranking;
    writeln!(out, "{{")?;
    writeln!(
        out,
        "  \"inputs\": {},",
        pim_io::precision::json_text(inputs, false).map_err(std::io::Error::from)?
    )?;
    writeln!(out, "  \"ranking_basis\": {},", json!(ranking.basis()))?;
    let outlook = outlook_json(ranking);
    for key in ["outlook", "statement", "next_steps", "calibrated"] {
        writeln!(out, "  {}: {},", json!(key), outlook[key])?;
    }
    writeln!(out, "  \"co_channel\": {},", co_channel_json(listing))?;
    for (key, value) in counts.json() {
        writeln!(out, "  {}: {value},", json!(key))?;
    }
    write!(out, "  \"candidates\": ")?;
    write_json_array(out, listing, shown)?;
    writeln!(out, "\n}}")
}
