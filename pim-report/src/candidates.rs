//! Ranked candidates as a terminal table, JSON, CSV or Markdown. Shared by `explain`,
//! `study` and the ticket.

use std::io::Write;

use pim_core::emitter::{carriers, Emitter};
use pim_core::geo::GeoPoint;
use pim_core::intermod::SearchParams;
use pim_core::onair::{Evidence, Logbook};
use pim_core::rank::{display_terms, formula, Candidate, LevelTerms, Ranking};
use serde::Serialize;

use crate::csv_out::write_row;
use crate::document::md_inline;
use crate::text_table::{Align, TextTable};
type CliResult = std::io::Result<()>;

/// Everything a listing of candidates draws on.
pub struct Listing<'a> {
    pub emitters: &'a [Emitter],
    pub params: &'a SearchParams,
    pub ranking: &'a Ranking,
    pub co_channel: &'a [usize],
}

/// Rounds to two decimals for output.
pub fn r2(x: f64) -> f64 {
    (x * 100.0).round() / 100.0
}

#[derive(Serialize)]
struct TermJson<'a> {
    emitter: &'a str,
    coefficient: i32,
    freq_mhz: f64,
    kind: Option<&'a str>,
    owner: Option<&'a str>,
    incident_dbm: Option<f64>,
}

#[derive(Serialize)]
struct CandidateJson<'a> {
    rank: usize,
    order: u32,
    formula: String,
    terms: Vec<TermJson<'a>>,
    product_mhz: f64,
    offset_khz: f64,
    bandwidth_khz: f64,
    predicted_level_dbm: Option<f64>,
    level_terms: Option<LevelTerms>,
    #[serde(skip_serializing_if = "Option::is_none")]
    on_air: Option<Evidence>,
}

fn candidate_json<'a>(l: &Listing<'a>, c: &Candidate) -> CandidateJson<'a> {
    let terms = display_terms(&c.product, l.emitters)
        .into_iter()
        .map(|t| {
            let e = &l.emitters[t.emitter];
            TermJson {
                emitter: &e.id,
                coefficient: t.coefficient,
                freq_mhz: e.freq.mhz(),
                kind: e.kind.as_deref(),
                owner: e.owner.as_deref(),
                incident_dbm: l.ranking.incidence[t.emitter].map(|i| r2(i.incident_dbm)),
            }
        })
        .collect();
    CandidateJson {
        rank: c.rank,
        order: c.product.order(),
        formula: formula(&c.product, l.emitters),
        terms,
        product_mhz: c.product.freq.mhz(),
        offset_khz: c.product.offset(l.params.target).khz(),
        bandwidth_khz: c.product.bandwidth(&carriers(l.emitters)).khz(),
        predicted_level_dbm: c.level_dbm.map(r2),
        level_terms: l.ranking.level_terms(&c.product).map(|t| LevelTerms {
            power_sum_db: r2(t.power_sum_db),
            conversion_db: r2(t.conversion_db),
            level_dbm: r2(t.level_dbm),
        }),
        on_air: c.evidence,
    }
}

#[derive(Serialize)]
struct CoChannelJson<'a> {
    emitter: &'a str,
    freq_mhz: f64,
    offset_khz: f64,
}

/// The co-channel emitters as JSON values.
pub fn co_channel_json(l: &Listing) -> serde_json::Value {
    let list: Vec<CoChannelJson> = l
        .co_channel
        .iter()
        .map(|&i| {
            let e = &l.emitters[i];
            CoChannelJson {
                emitter: &e.id,
                freq_mhz: e.freq.mhz(),
                offset_khz: (e.freq - l.params.target).khz(),
            }
        })
        .collect();
    serde_json::to_value(list).unwrap_or_default()
}

/// Writes the candidates as a JSON array, one element at a time (no second copy of the
/// results is built).
pub fn write_json_array(out: &mut dyn Write, l: &Listing, limit: Option<usize>) -> CliResult {
    out.write_all(b"[")?;
    let shown = l
        .ranking
        .candidates
        .iter()
        .take(limit.unwrap_or(usize::MAX));
    for (i, c) in shown.enumerate() {
        out.write_all(if i == 0 { b"\n    " } else { b",\n    " })?;
        serde_json::to_writer(&mut *out, &candidate_json(l, c)).map_err(std::io::Error::from)?;
    }
    out.write_all(b"\n  ]")?;
    Ok(())
}

/// The header of the CSV listing.
pub const CSV_HEADER: &str = "rank,formula,order,product_mhz,offset_khz,bandwidth_khz,predicted_level_dbm,power_sum_db,conversion_db,terms,kinds,owners";

/// The columns the CSV listing adds when on-air evidence was given.
pub const CSV_EVIDENCE_HEADER: &str =
    "on_air_support,on_air_contradictions,on_air_heard_off_air,on_air_unknown";

/// The evidence columns' cells, in the order of the headers.
fn evidence_cells(e: &Evidence) -> [String; 4] {
    [
        e.support.to_string(),
        e.contradictions.to_string(),
        e.heard_off_air.to_string(),
        e.unknown.to_string(),
    ]
}

/// What the evidence columns of the table mean.
pub const EVIDENCE_LEGEND: &str = "On-air evidence: support = times heard with all the product's emitters on air; contradictions = times\nnot heard although all were on air; heard off = times heard while one of them was off air (the product\ncannot have made those); unknown = times with an emitter of unknown state.\n";

/// Writes candidates as CSV rows (with the header when `header`); `prefix` fields are
/// put in front of each row (the receiver of a study).
pub fn write_csv(
    out: &mut dyn Write,
    l: &Listing,
    limit: Option<usize>,
    prefix: Option<(&str, &str)>,
    header: bool,
) -> CliResult {
    if header {
        let evidence = if l.ranking.by_evidence {
            format!(",{CSV_EVIDENCE_HEADER}")
        } else {
            String::new()
        };
        match prefix {
            Some((name, _)) => writeln!(out, "{name},{CSV_HEADER}{evidence}")?,
            None => writeln!(out, "{CSV_HEADER}{evidence}")?,
        }
        // The header's names are ours and need no quoting.
    }
    let carriers = carriers(l.emitters);
    for c in l
        .ranking
        .candidates
        .iter()
        .take(limit.unwrap_or(usize::MAX))
    {
        let terms = display_terms(&c.product, l.emitters);
        let join = |f: &dyn Fn(&Emitter) -> String| {
            terms
                .iter()
                .map(|t| f(&l.emitters[t.emitter]))
                .collect::<Vec<_>>()
                .join(";")
        };
        let lt = l.ranking.level_terms(&c.product);
        let mut fields = vec![
            c.rank.to_string(),
            formula(&c.product, l.emitters),
            c.product.order().to_string(),
            c.product.freq.mhz_text(),
            c.product.offset(l.params.target).khz_text(),
            c.product.bandwidth(&carriers).khz_text(),
            c.level_dbm.map(|v| format!("{v:.2}")).unwrap_or_default(),
            lt.as_ref()
                .map(|t| format!("{:.2}", t.power_sum_db))
                .unwrap_or_default(),
            lt.as_ref()
                .map(|t| format!("{:.2}", t.conversion_db))
                .unwrap_or_default(),
            terms
                .iter()
                .map(|t| format!("{}:{}", l.emitters[t.emitter].id, t.coefficient))
                .collect::<Vec<_>>()
                .join(";"),
            join(&|e| e.kind.clone().unwrap_or_default()),
            join(&|e| e.owner.clone().unwrap_or_default()),
        ];
        if l.ranking.by_evidence {
            fields.extend(c.evidence.as_ref().map(evidence_cells).unwrap_or_default());
        }
        if let Some((_, value)) = prefix {
            fields.insert(0, value.to_string());
        }
        write_row(out, &fields)?;
    }
    Ok(())
}

fn signed(x: f64, decimals: usize) -> String {
    format!("{x:+.decimals$}")
}

fn level_text(x: Option<f64>) -> String {
    x.map(|v| format!("{v:.1}"))
        .unwrap_or_else(|| "—".to_string())
}

/// The ranked candidates as an aligned terminal table, followed by the incident power
/// of each emitter that appears in it.
pub fn table_text(l: &Listing, limit: usize) -> String {
    let mut headers = vec![
        ("#", Align::Right),
        ("product", Align::Left),
        ("order", Align::Right),
        ("at MHz", Align::Right),
        ("offset kHz", Align::Right),
        ("width kHz", Align::Right),
        ("level dBm", Align::Right),
        ("Σ|k|·P dB", Align::Right),
        ("C(n) dB", Align::Right),
    ];
    if l.ranking.by_evidence {
        headers.extend([
            ("support", Align::Right),
            ("contradictions", Align::Right),
            ("heard off", Align::Right),
            ("unknown", Align::Right),
        ]);
    }
    let mut t = TextTable::new(&headers);
    let carriers = carriers(l.emitters);
    let mut used = vec![false; l.emitters.len()];
    for c in l.ranking.candidates.iter().take(limit) {
        let lt = l.ranking.level_terms(&c.product);
        for term in c.product.terms() {
            used[term.emitter] = true;
        }
        let mut row = vec![
            c.rank.to_string(),
            formula(&c.product, l.emitters),
            c.product.order().to_string(),
            format!("{:.4}", c.product.freq.mhz()),
            signed(c.product.offset(l.params.target).khz(), 1),
            format!("{:.1}", c.product.bandwidth(&carriers).khz()),
            level_text(c.level_dbm),
            level_text(lt.as_ref().map(|x| x.power_sum_db)),
            level_text(lt.as_ref().map(|x| x.conversion_db)),
        ];
        if l.ranking.by_evidence {
            row.extend(c.evidence.as_ref().map(evidence_cells).unwrap_or_default());
        }
        t.push(row);
    }
    let mut out = String::new();
    if t.is_empty() {
        out.push_str("No product of these emitters lands in the channel.\n");
        return out;
    }
    out.push_str(&t.render());
    if l.ranking.by_evidence {
        out.push('\n');
        out.push_str(EVIDENCE_LEGEND);
    }
    let incident: Vec<String> = used
        .iter()
        .enumerate()
        .filter(|(_, u)| **u)
        .filter_map(|(i, _)| {
            l.ranking.incidence[i].map(|inc| {
                format!(
                    "  {:<12} ERP {:>6.1} dBm − path loss {:>5.1} dB over {:>6.0} m = {:>6.1} dBm",
                    l.emitters[i].id,
                    inc.erp_dbm,
                    inc.path_loss_db,
                    inc.distance_m,
                    inc.incident_dbm
                )
            })
        })
        .collect();
    if !incident.is_empty() {
        out.push_str("\nIncident power P at the junction (ERP − free-space loss, ITU-R P.525):\n");
        for line in incident {
            out.push_str(&line);
            out.push('\n');
        }
        let m = &l.ranking.model;
        out.push_str(&format!(
            "Level = Σ|k|·P + C(n); C(n) = L3 − s·(n − 3) − n·Pref with L3 = {:.1} dBm, s = {:.1} dB, Pref = {:.1} dBm\n(the junction makes L3 at third order from two Pref tones; change with --junction-im3-dbm, --order-step-db).\n",
            m.im3_dbm, m.order_step_db, m.reference_tone_dbm
        ));
    }
    out
}

/// The ranked candidates as a Markdown table.
pub fn markdown_text(l: &Listing, limit: usize) -> String {
    let carriers = carriers(l.emitters);
    let mut out = if l.ranking.by_evidence {
        String::from(
            "| # | product | order | at MHz | offset kHz | width kHz | level dBm | support | contradictions | heard off | unknown | emitters |\n|---:|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|\n",
        )
    } else {
        String::from(
            "| # | product | order | at MHz | offset kHz | width kHz | level dBm | emitters |\n|---:|---|---:|---:|---:|---:|---:|---|\n",
        )
    };
    for c in l.ranking.candidates.iter().take(limit) {
        let who: Vec<String> = display_terms(&c.product, l.emitters)
            .iter()
            .map(|t| {
                let e = &l.emitters[t.emitter];
                match (&e.kind, &e.owner) {
                    (Some(k), Some(o)) => format!("{} ({k}, {o})", e.id),
                    (Some(k), None) => format!("{} ({k})", e.id),
                    (None, Some(o)) => format!("{} ({o})", e.id),
                    (None, None) => e.id.clone(),
                }
            })
            .collect();
        let evidence = match (&c.evidence, l.ranking.by_evidence) {
            (Some(e), true) => format!("{} | ", evidence_cells(e).join(" | ")),
            (None, true) => "— | — | — | — | ".to_string(),
            _ => String::new(),
        };
        out.push_str(&format!(
            "| {} | {} | {} | {:.4} | {} | {:.1} | {} | {evidence}{} |\n",
            c.rank,
            md_inline(&formula(&c.product, l.emitters)),
            c.product.order(),
            c.product.freq.mhz(),
            signed(c.product.offset(l.params.target).khz(), 1),
            c.product.bandwidth(&carriers).khz(),
            level_text(c.level_dbm),
            md_inline(&who.join("; ")),
        ));
    }
    out
}

/// The header lines above a table listing.
pub fn channel_summary(
    params: &SearchParams,
    emitter_count: usize,
    source: &str,
    junction: Option<GeoPoint>,
) -> String {
    let mut s = format!(
        "Receive channel {} MHz, {} kHz wide, tolerance {} kHz; orders up to {}, products of up to {} emitter{}.\n",
        params.target.mhz_text(),
        params.rx_bandwidth.khz_text(),
        params.tolerance.khz_text(),
        params.max_order,
        params.max_emitters,
        if params.max_emitters == 1 { "" } else { "s" },
    );
    s.push_str(&format!("{emitter_count} emitters from {source}; "));
    match junction {
        Some(j) => s.push_str(&format!(
            "junction assumed at {:.6}, {:.6}.\n",
            j.lat_deg, j.lon_deg
        )),
        None => s.push_str("no junction location (give --rx-lat/--rx-lon for levels).\n"),
    }
    s
}

pub fn co_channel_text(listing: &Listing) -> String {
    if listing.co_channel.is_empty() {
        return String::new();
    }
    let names: Vec<String> = listing
        .co_channel
        .iter()
        .map(|&i| {
            let e = &listing.emitters[i];
            format!("{} at {} MHz", e.id, e.freq.mhz_text())
        })
        .collect();
    format!(
        "Co-channel (a carrier in the channel itself, not a product): {}\n",
        names.join(", ")
    )
}

/// A line saying what narrowed the list and what the logs hold, for the table header.
pub fn narrowing_text(
    emitters: &[Emitter],
    coefficients: &[(usize, u32)],
    found: usize,
    kept: usize,
    logbook: Option<&Logbook>,
) -> String {
    let mut s = String::new();
    if !coefficients.is_empty() {
        let list: Vec<String> = coefficients
            .iter()
            .map(|&(i, k)| format!("{} |k| = {k}", emitters[i].id))
            .collect();
        s.push_str(&format!(
            "Kept {kept} of {found} products: those with {}.\n",
            list.join(", ")
        ));
    }
    if let Some(book) = logbook {
        let heard = book.heard_count();
        s.push_str(&format!(
            "On-air evidence: {} listening times, heard at {heard}, silent at {}.\n",
            book.observations.len(),
            book.observations.len() - heard
        ));
    }
    s
}
