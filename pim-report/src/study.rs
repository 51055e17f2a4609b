//! One receiver of a site study, in each listing format: its heading, the channel, the
//! co-channel emitters and its first candidates.

use std::io::Write;

use pim_core::emitter::{Emitter, Receiver};
use pim_core::geo::GeoPoint;
use pim_core::intermod::SearchParams;
use pim_core::Explanation;
use serde_json::json;

use crate::candidates::{
    channel_summary, co_channel_json, co_channel_text, markdown_text, outlook_json, table_text,
    write_csv, write_json_array, Listing,
};

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
    pub fn table(&self, emitters: &[Emitter], emitters_source: &str, shown: usize) -> String {
        let ranking = &self.answer.ranking;
        let total = ranking.total;
        let at_least = if self.answer.complete {
            ""
        } else {
            "at least "
        };
        let listing = self.listing(emitters);
        format!(
            "━━ {} ━━ {at_least}{} product{}; {}.\n{}{}{}\n",
            self.receiver.id,
            total,
            if total == 1 { "" } else { "s" },
            ranking.basis(),
            channel_summary(&self.params, emitters.len(), emitters_source, self.junction),
            co_channel_text(&listing),
            table_text(&listing, shown)
        )
    }

    /// The receiver as a section of the study in Markdown.
    pub fn markdown(&self, emitters: &[Emitter], shown: usize) -> String {
        format!(
            "## {} ({} MHz)\n\n{}\n",
            crate::document::md_inline(&self.receiver.id),
            self.receiver.freq.mhz_text(),
            markdown_text(&self.listing(emitters), shown)
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
        write!(
            out,
            "  {{\"id\": {}, \"freq_mhz\": {}, \"bw_khz\": {}, \"co_channel\": {}, \"ranking_basis\": {}, \"outlook\": {}, \"next_steps\": {}, \"total\": {}, \"counted_all\": {}, \"shown\": {}, \"candidates\": ",
            json!(self.receiver.id),
            json!(self.receiver.freq.mhz()),
            json!(self.params.rx_bandwidth.khz()),
            co_channel_json(&listing),
            json!(ranking.basis()),
            outlook["outlook"],
            outlook["next_steps"],
            ranking.total,
            self.answer.complete,
            ranking.candidates.len()
        )?;
        write_json_array(out, &listing, shown)?;
        write!(out, "}}")
    }
}
