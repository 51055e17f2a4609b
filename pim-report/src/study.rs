//! One receiver of a site study, in each listing format: its heading, the channel, the
//! co-channel emitters and its first candidates.

use std::io::Write;

use pim_core::emitter::{Emitter, Receiver};
use pim_core::geo::GeoPoint;
use pim_core::intermod::SearchParams;
use pim_core::Explanation;
use serde_json::json;

use crate::candidates::{
    channel_summary, co_channel_json, co_channel_text, markdown_text, model_text, outlook_json,
    table_text, write_csv, write_json_array, Counts, Layout, Listing, EVIDENCE_LEGEND,
};

/// What every receiver of a study shares, said once above them: how the levels are
/// worked out (every mechanism the model levels) and, with on-air evidence, what its
/// columns mean.
pub fn study_legend(
    model: &pim_core::level::LevelModel,
    calibrated: bool,
    evidence: bool,
) -> String {
    let mut s = String::from("How the levels are worked out (for every receiver below):\n");
    s.push_str(&model_text(model, None, calibrated));
    if evidence {
        s.push_str(EVIDENCE_LEGEND);
    }
    crate::text_table::wrap_lines(&s, crate::text_table::TERMINAL_WIDTH)
}

/// A receiver studied: the channel searched, where the junction was put, the answer.
pub struct StudiedReceiver<'a> {
    /// The receiver, as its file gives it.
    pub receiver: &'a Receiver,
    /// The search of its channel.
    pub params: SearchParams,
    /// Where the junction was assumed (the receiver's own position, else the site's).
    pub junction: Option<GeoPoint>,
    /// The products that land, ranked.
    pub answer: Explanation,
}

impl StudiedReceiver<'_> {
    fn listing<'b>(&'b self, emitters: &'b [Emitter]) -> Listing<'b> {
        Listing {
            emitters,
            params: &self.params,
            ranking: &self.answer.ranking,
            co_channel: &self.answer.co_channel,
        }
    }

    /// The receiver as a block of the study's table: a heading with its count, the
    /// channel, the co-channel emitters and the first `shown` candidates.
    /// The counts of the receiver's listing, `shown` candidates listed.
    pub fn counts(&self, shown: Option<usize>) -> Counts {
        Counts::of(&self.answer, shown)
    }

    /// The receiver's heading line: its counts and what they were ranked by.
    fn summary(&self, shown: usize) -> String {
        format!(
            "{}; {}.",
            self.counts(Some(shown)).text(),
            self.answer.ranking.basis()
        )
    }

    /// The receiver as a block of the study's table: a heading with its counts, the
    /// channel, the co-channel emitters and the first `shown` candidates; the level
    /// model is explained once for the study ([`study_legend`]).
    pub fn table(
        &self,
        emitters: &[Emitter],
        emitters_source: &str,
        shown: usize,
        wide: bool,
    ) -> String {
        let listing = self.listing(emitters);
        let head = format!(
            "━━ {} ━━ {}\n{}{}",
            self.receiver.id,
            self.summary(shown),
            channel_summary(&self.params, emitters.len(), emitters_source, self.junction),
            co_channel_text(&listing),
        );
        format!(
            "{}{}\n",
            crate::text_table::wrap_lines(&head, crate::text_table::TERMINAL_WIDTH),
            table_text(
                &listing,
                shown,
                Layout {
                    wide,
                    legend: false
                }
            )
        )
    }

    /// The receiver as a section of the study in Markdown.
    pub fn markdown(&self, emitters: &[Emitter], shown: usize) -> String {
        format!(
            "## {} ({} MHz)\n\n{}\n\n{}\n",
            crate::document::md_inline(&self.receiver.id),
            self.receiver.freq.mhz_text(),
            crate::document::md_text(&self.summary(shown)),
            markdown_text(
                &self.listing(emitters),
                shown,
                Layout {
                    wide: true,
                    legend: false
                }
            )
        )
    }

    /// The receiver's rows of the study's CSV (the header too when `header`), each with
    /// a `receiver` column.
    pub fn write_csv(
        &self,
        out: &mut dyn Write,
        emitters: &[Emitter],
        shown: Option<usize>,
        header: bool,
    ) -> std::io::Result<()> {
        write_csv(
            out,
            &self.listing(emitters),
            shown,
            Some(("receiver", &self.receiver.id)),
            header,
        )
    }

    /// The receiver as one object of the study's JSON `receivers` array.
    pub fn write_json(
        &self,
        out: &mut dyn Write,
        emitters: &[Emitter],
        shown: Option<usize>,
    ) -> std::io::Result<()> {
        let ranking = &self.answer.ranking;
        let listing = self.listing(emitters);
        let outlook = outlook_json(ranking);
        let mut head = serde_json::Map::new();
        head.insert("id".into(), json!(self.receiver.id));
        head.insert("freq_mhz".into(), json!(self.receiver.freq.mhz()));
        head.insert("bw_khz".into(), json!(self.params.rx_bandwidth.khz()));
        head.insert("co_channel".into(), co_channel_json(&listing));
        head.insert("ranking_basis".into(), json!(ranking.basis()));
        head.insert("outlook".into(), outlook["outlook"].clone());
        head.insert("next_steps".into(), outlook["next_steps"].clone());
        head.extend(self.counts(shown).json());
        let head = pim_io::precision::json_text(&head, false).map_err(std::io::Error::from)?;
        // the head's closing brace gives way to the candidates
        let head = head.strip_suffix('}').unwrap_or(&head);
        write!(out, "  {head},\"candidates\": ")?;
        write_json_array(out, &listing, shown)?;
        write!(out, "}}")
    }
}
