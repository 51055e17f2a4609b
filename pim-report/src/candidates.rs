//! Ranked candidates as a terminal table, JSON, CSV or Markdown. Shared by `explain`,
//! `study` and the ticket.

use std::io::Write;

use pim_core::emitter::{carriers, Carrier, Emitter};
use pim_core::geo::GeoPoint;
use pim_core::intermod::SearchParams;
use pim_core::level::{FieldRegion, JunctionTerms, LevelModel, Mechanism, Plausibility};
use pim_core::onair::{Evidence, Logbook};
use pim_core::rank::{
    display_terms, formula, Calibration, Candidate, LevelBreakdown, Missing, NextStep, Outlook,
    Ranking,
};
use serde::Serialize;

use crate::csv_out::write_row;
use crate::text_table::{wrap_lines, Align, TextTable, TERMINAL_WIDTH};
type CliResult = std::io::Result<()>;

/// Everything a listing of candidates draws on.
pub struct Listing<'a> {
    pub emitters: &'a [Emitter],
    pub params: &'a SearchParams,
    pub ranking: &'a Ranking,
    pub co_channel: &'a [usize],
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
    mechanism: Mechanism,
    formed_in: Option<&'a str>,
    terms: Vec<TermJson<'a>>,
    product_mhz: f64,
    offset_khz: f64,
    bandwidth_khz: f64,
    predicted_level_dbm: Option<f64>,
    in_channel_dbm: Option<f64>,
    relative_db: Option<f64>,
    level_terms: Option<LevelTermsJson>,
    calibration: Option<Calibration>,
    implausible: bool,
    away_from_fix: bool,
    cleared_by_steps: bool,
    missing: Option<Missing>,
    #[serde(skip_serializing_if = "Option::is_none")]
    on_air: Option<Evidence>,
}

/// A candidate's level terms as its JSON gives them: every term a signed gain in dB
/// (the path term negative, a loss), so that `source_level_dbm + path_db + channel_db`
/// is `in_channel_dbm`, as in the table and the CSV.
#[derive(Serialize)]
struct LevelTermsJson {
    junction: Option<JunctionTerms>,
    source_level_dbm: f64,
    path_db: f64,
    path_distance_m: Option<f64>,
    path_floor_m: Option<f64>,
    spread_hz: i64,
    channel_fraction: f64,
    channel_db: f64,
    in_channel_dbm: f64,
    below_floor: bool,
    width_mismatch_db: f64,
}

impl From<&LevelBreakdown> for LevelTermsJson {
    fn from(b: &LevelBreakdown) -> Self {
        LevelTermsJson {
            junction: b.junction,
            source_level_dbm: b.source_level_dbm,
            path_db: path_db(b),
            path_distance_m: b.path_distance_m,
            path_floor_m: b.path_floor_m,
            spread_hz: b.spread_hz,
            channel_fraction: b.channel_fraction,
            channel_db: b.channel_db,
            in_channel_dbm: b.in_channel_dbm,
            below_floor: b.below_floor,
            width_mismatch_db: b.width_mismatch_db,
        }
    }
}

/// The path term as every output shows it: a signed gain, the loss from the source to
/// the receiver (less the receiving antenna's gain) taken as negative.
pub fn path_db(b: &LevelBreakdown) -> f64 {
    -b.path_to_receiver_db
}

/// One candidate's JSON element; `carriers` are the listing's emitters' carriers, made
/// once per listing.
fn candidate_json<'a>(l: &Listing<'a>, carriers: &[Carrier], c: &Candidate) -> CandidateJson<'a> {
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
                incident_dbm: l.ranking.incidence.get(t.emitter).map(|i| i.incident_dbm),
            }
        })
        .collect();
    CandidateJson {
        rank: c.rank,
        order: c.product.order(),
        formula: formula(&c.product, l.emitters),
        mechanism: c.mechanism,
        formed_in: c.formed_in.map(|i| l.emitters[i].id.as_str()),
        terms,
        product_mhz: c.product.freq.mhz(),
        offset_khz: c.product.offset(l.params.target).khz(),
        bandwidth_khz: c.product.bandwidth(carriers).khz(),
        predicted_level_dbm: c.level_dbm,
        in_channel_dbm: c.breakdown.map(|b| b.in_channel_dbm),
        relative_db: c.relative_db,
        level_terms: c.breakdown.as_ref().map(LevelTermsJson::from),
        calibration: c.calibration,
        implausible: c.implausible,
        away_from_fix: c.away_from_fix,
        cleared_by_steps: c.cleared_by_steps,
        missing: c.missing,
        on_air: c.evidence,
    }
}

/// What a listing counted, under the one definition every command uses: a **product**
/// is a combination of the emitters' carriers that lands in the channel; a
/// **candidate** is a product with one way it can be made (at a junction, in a
/// transmitter's output stage, in the receiver), so one product may make several
/// candidates. Tables, Markdown, CSV notes and JSON all count with these.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Counts {
    /// Products found landing in the channel, before any narrowing.
    pub found: usize,
    /// Of those, the products the listing ranks (after `--coefficient`, or centred on a
    /// peak).
    pub products: usize,
    /// The candidates those products make.
    pub candidates: usize,
    /// The candidates listed.
    pub shown: usize,
    /// Whether every product was counted (else the counts read "at least").
    pub complete: bool,
}

impl Counts {
    /// The counts of an explanation, `limit` candidates listed.
    pub fn of(a: &pim_core::Explanation, limit: Option<usize>) -> Counts {
        Counts {
            found: a.found,
            products: a.kept,
            candidates: a.ranking.total,
            shown: a.ranking.candidates.len().min(limit.unwrap_or(usize::MAX)),
            complete: a.complete,
        }
    }

    /// "5 products land in the channel, making 6 candidates", "at least " before it
    /// when not every product was counted.
    pub fn text(&self) -> String {
        format!(
            "{}{} land{} in the channel, making {}",
            if self.complete { "" } else { "at least " },
            count(self.products, "product", "products"),
            if self.products == 1 { "s" } else { "" },
            count(self.candidates, "candidate", "candidates"),
        )
    }

    /// The counts as JSON fields, named alike in every command: `products_found`,
    /// `products`, `candidates_total`, `candidates_shown`, `counted_all`.
    pub fn json(&self) -> serde_json::Map<String, serde_json::Value> {
        let mut m = serde_json::Map::new();
        m.insert("products_found".into(), self.found.into());
        m.insert("products".into(), self.products.into());
        m.insert("candidates_total".into(), self.candidates.into());
        m.insert("candidates_shown".into(), self.shown.into());
        m.insert("counted_all".into(), self.complete.into());
        m
    }
}

/// `n` with its noun, singular or plural: "1 product", "2 products".
pub fn count(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// Where a candidate's product is made, in a few words: `junction`, `SKP-152 harmonic`,
/// `SKP-152 output stage`, `receiver`.
pub fn made_in(c: &Candidate, emitters: &[Emitter]) -> String {
    match c.mechanism {
        Mechanism::Junction => "junction".to_string(),
        Mechanism::Transmitter => match c.product.terms().next() {
            Some(t) => format!("{} harmonic", emitters[t.emitter].id),
            None => "transmitter".to_string(),
        },
        Mechanism::TransmitterIm => match c.formed_in {
            Some(i) => format!("{} output stage", emitters[i].id),
            None => "transmitter".to_string(),
        },
        Mechanism::Receiver => "receiver".to_string(),
    }
}

/// One of the usual next steps, as advice.
pub fn next_step_text(step: NextStep) -> &'static str {
    match step {
        NextStep::UnlistedEmitters => "look for emitters missing from the list: new or unlicensed transmitters, mobiles and portables, a neighbouring site, a broadcaster far off; a product of one of them may land where none of these does",
        NextStep::ReceiverOverload => "check for receiver overload with the attenuator test (the level at 0 to 10 dB of attenuation logged as `step_db,level_dbm` in attenuator-readings.csv, then `pim slope --kind attenuator --readings attenuator-readings.csv`): a product made in the receiver drops several dB per dB of attenuation, one arriving over the air one",
        NextStep::TransmitterSpurious => "check each nearby transmitter's own spurious output (a harmonic, or intermodulation in its output stage) at its output with a spectrum analyser, by arrangement with the licensee",
    }
}

/// A plain statement when nothing credible lands, with the usual next steps; `None`
/// when a credible candidate exists (or none could be levelled).
pub fn outlook_text(ranking: &Ranking) -> Option<String> {
    let head = match ranking.outlook {
        Outlook::Credible | Outlook::Unlevelled => return None,
        Outlook::NothingLands => {
            "Nothing credible: no product of the listed emitters lands in the channel.".to_string()
        }
        Outlook::OnlyImplausible => format!(
            "Nothing credible: every product that lands would need a junction mixing more strongly than any corroded joint (a third-order product above {:.0} dBc at two +43 dBm tones, or above the passive ceiling){}.",
            ranking.model.max_im3_dbc,
            if ranking.candidates.iter().any(|c| c.away_from_fix) {
                " or is made away from the fix"
            } else {
                ""
            }
        ),
    };
    let steps: Vec<String> = ranking
        .next_steps()
        .iter()
        .enumerate()
        .map(|(i, s)| format!("({}) {}", i + 1, next_step_text(*s)))
        .collect();
    Some(format!("{head} Usual next steps: {}.", steps.join("; ")))
}

/// The one-line refusal of `explain` when nothing credible lands (exit 5), naming what
/// to check next; `None` when a candidate is credible or none could be levelled.
pub fn nothing_explains_text(ranking: &Ranking, params: &SearchParams) -> Option<String> {
    let why = match ranking.outlook {
        Outlook::Credible | Outlook::Unlevelled => return None,
        Outlook::NothingLands => "no product of the listed emitters lands in the channel",
        Outlook::OnlyImplausible => "every product that lands would need an implausible junction",
    };
    Some(format!(
        "nothing explains the carrier on {} MHz: {why}; check next for emitters missing from the list, receiver overload (the attenuator test) and a transmitter's own spurious output",
        params.target.mhz_text()
    ))
}

#[derive(Serialize)]
struct NextStepJson {
    step: NextStep,
    advice: &'static str,
}

/// The ranking's outlook and next steps as JSON fields: `outlook`, `statement`,
/// `next_steps`, `calibrated`.
pub fn outlook_json(ranking: &Ranking) -> serde_json::Value {
    let steps: Vec<NextStepJson> = ranking
        .next_steps()
        .iter()
        .map(|&step| NextStepJson {
            step,
            advice: next_step_text(step),
        })
        .collect();
    serde_json::json!({
        "outlook": ranking.outlook,
        "statement": outlook_text(ranking),
        "next_steps": steps,
        "calibrated": ranking.calibrated,
    })
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
    pim_io::precision::rounded_json(&list).unwrap_or_default()
}

/// Writes the candidates as a JSON array, one element at a time (no second copy of the
/// results is built); the carriers the rows need are made once.
pub fn write_json_array(out: &mut dyn Write, l: &Listing, limit: Option<usize>) -> CliResult {
    let carriers = carriers(l.emitters);
    out.write_all(b"[")?;
    let shown = l
        .ranking
        .candidates
        .iter()
        .take(limit.unwrap_or(usize::MAX));
    for (i, c) in shown.enumerate() {
        out.write_all(if i == 0 { b"\n    " } else { b",\n    " })?;
        pim_io::precision::write_json(out, &candidate_json(l, &carriers, c), false)?;
    }
    out.write_all(b"\n  ]")?;
    Ok(())
}

/// The header of the CSV listing.
pub const CSV_HEADER: &str = "rank,formula,order,product_mhz,offset_khz,bandwidth_khz,mechanism,formed_in,predicted_level_dbm,drive_db,form_db,order_db,even_order_db,path_db,path_distance_m,path_floor_m,channel_db,in_channel_dbm,relative_db,shift_db,required_im3_dbc,implausible,away_from_fix,missing,terms,kinds,owners";

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

fn mechanism_name(m: Mechanism) -> &'static str {
    match m {
        Mechanism::Junction => "junction",
        Mechanism::Transmitter => "transmitter",
        Mechanism::TransmitterIm => "transmitter-im",
        Mechanism::Receiver => "receiver",
    }
}

fn missing_name(m: Missing) -> &'static str {
    match m {
        Missing::Location => "location",
        Missing::ErpOrLocation => "erp-or-location",
        Missing::Iip3 => "iip3",
        Missing::ReceiverOverload => "receiver-overload",
    }
}

/// A CSV cell of a level, a gain or a distance: two decimals, never `-0.00`.
fn cell(x: Option<f64>) -> String {
    x.map(|v| pim_io::precision::fixed(v, 2))
        .unwrap_or_default()
}

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
        let b = c.breakdown;
        let j = b.and_then(|b| b.junction);
        let k = c.calibration;
        let mut fields = vec![
            c.rank.to_string(),
            formula(&c.product, l.emitters),
            c.product.order().to_string(),
            c.product.freq.mhz_text(),
            c.product.offset(l.params.target).khz_text(),
            c.product.bandwidth(&carriers).khz_text(),
            mechanism_name(c.mechanism).to_string(),
            c.formed_in
                .map(|i| l.emitters[i].id.clone())
                .unwrap_or_default(),
            cell(c.level_dbm),
            cell(j.map(|j| j.drive_db)),
            cell(j.map(|j| j.form_db)),
            cell(j.map(|j| j.order_db)),
            cell(j.map(|j| j.even_order_db)),
            cell(b.as_ref().map(path_db)),
            cell(b.and_then(|b| b.path_distance_m)),
            cell(b.and_then(|b| b.path_floor_m)),
            cell(b.map(|b| b.channel_db)),
            cell(b.map(|b| b.in_channel_dbm)),
            cell(c.relative_db),
            cell(k.map(|k| k.shift_db)),
            cell(k.and_then(|k| k.required_im3_dbc)),
            c.implausible.to_string(),
            c.away_from_fix.to_string(),
            c.missing.map(missing_name).unwrap_or_default().to_string(),
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

use pim_io::precision::signed;

fn level_text(x: Option<f64>) -> String {
    x.map(|v| pim_io::precision::fixed(v, 1))
        .unwrap_or_else(|| "—".to_string())
}

fn signed_text(x: Option<f64>) -> String {
    x.map(|v| signed(v, 1)).unwrap_or_else(|| "—".to_string())
}

/// A candidate's level relative to the first, `≤` before it where the prediction lies
/// below the level floor (shown there).
pub fn relative_text(c: &Candidate) -> String {
    let text = signed_text(c.relative_db);
    if c.breakdown.is_some_and(|b| b.below_floor) {
        format!("≤{text}")
    } else {
        text
    }
}

/// The path column: the loss as a negative term, marked `*` where the distance was
/// raised to its floor (the legend says which floor).
fn path_text(b: Option<&LevelBreakdown>) -> String {
    match b {
        Some(b) if b.path_floor_m.is_some() => format!("{}*", signed(path_db(b), 1)),
        Some(b) => signed(path_db(b), 1),
        None => "—".to_string(),
    }
}

/// The channel column: `≤−120.0` where the product's share of the channel was raised to
/// its floor ([`pim_core::level::MIN_CHANNEL_FRACTION`]).
fn chan_text(b: Option<&LevelBreakdown>) -> String {
    match b {
        Some(b) if b.channel_fraction <= pim_core::level::MIN_CHANNEL_FRACTION => {
            format!("≤{}", signed(b.channel_db, 1))
        }
        Some(b) => signed(b.channel_db, 1),
        None => "—".to_string(),
    }
}

/// What the floored path terms of the candidates shown assumed, for the legend: one
/// line when any path was taken at its floor.
pub fn path_floor_text(candidates: &[&Candidate]) -> Option<String> {
    let floored: Vec<&LevelBreakdown> = candidates
        .iter()
        .filter_map(|c| c.breakdown.as_ref())
        .filter(|b| b.path_floor_m.is_some())
        .collect();
    let first = floored.first()?;
    let d = first.path_distance_m.unwrap_or(0.0);
    let floor = first.path_floor_m.unwrap_or(0.0);
    Some(format!(
        "* path at its floor: the source lies {d:.1} m from the receiver, closer than λ/2π = {floor:.2} m, so the\n  loss is taken over {floor:.2} m, nothing closer being predicted ({} candidate{} shown).",
        floored.len(),
        if floored.len() == 1 { "" } else { "s" }
    ))
}

/// A candidate's remark for the table: why it ranks low, or why it has no level.
fn remark(c: &Candidate) -> String {
    let mut r = Vec::new();
    match c.calibration.and_then(|k| k.plausibility) {
        Some(Plausibility::Implausible)
            if c.calibration.is_some_and(|k| k.required_im3_dbc.is_none()) =>
        {
            r.push("implausible: above the passive ceiling")
        }
        Some(Plausibility::Implausible) => r.push("implausible"),
        Some(Plausibility::Unlikely) => r.push("unlikely"),
        _ if c.implausible => r.push("implausible"),
        _ => {}
    }
    if c.away_from_fix {
        r.push("away from the fix");
    }
    if c.cleared_by_steps {
        r.push("cleared by the power steps");
    }
    match c.missing {
        Some(Missing::Location) => r.push("no location"),
        Some(Missing::ErpOrLocation) => r.push("ERP or location missing"),
        Some(Missing::Iip3) => r.push("no IIP3"),
        Some(Missing::ReceiverOverload) => r.push("receiver overloaded (a carrier above its P1dB)"),
        None => {}
    }
    r.join(", ")
}

/// The calibrated level of the first candidate in the channel (dBm): its prediction
/// shifted to match the heard level. Every other candidate then stands at this plus its
/// `relative_db`.
pub fn calibrated_first_dbm(ranking: &Ranking) -> Option<f64> {
    let first = ranking
        .candidates
        .iter()
        .find(|c| c.relative_db.is_some())?;
    Some(first.breakdown?.in_channel_dbm + first.calibration?.shift_db)
}

/// How a listing's table is laid out.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Layout {
    /// Every column, however wide (`--wide`); else the level terms are left out (a line
    /// says so) and the text columns wrapped to [`TERMINAL_WIDTH`].
    pub wide: bool,
    /// The level model's explanation below the table; a study writes it once, above its
    /// receivers, and leaves it out of each.
    pub legend: bool,
}

impl Layout {
    /// The layout of a single listing: the model explained below it.
    pub fn single(wide: bool) -> Layout {
        Layout { wide, legend: true }
    }
}

/// The level-term columns the terminal table leaves out without `--wide`.
const LEVEL_TERMS: &str = "Not shown: the width (kHz) and the level terms source, drive, form, order, path and chan (dB);\n  --wide shows them.\n";

/// The columns of a listing and its rows, shared by the table and the Markdown so that
/// the two show the same values under the same names.
struct Columns<'a> {
    headers: Vec<(&'static str, Align)>,
    rows: Vec<Vec<String>>,
    shown: Vec<&'a Candidate>,
    /// Emitters feeding a junction candidate shown, by index.
    used: Vec<bool>,
    mechanisms: Vec<Mechanism>,
}

fn columns<'a>(l: &Listing<'a>, limit: usize, wide: bool) -> Columns<'a> {
    let levelled = l.ranking.junction.is_some();
    let calibrated = l.ranking.calibrated;
    let mut headers = vec![
        ("#", Align::Right),
        ("product", Align::Left),
        ("made in", Align::Left),
        ("order", Align::Right),
        ("at MHz", Align::Right),
        ("offset kHz", Align::Right),
    ];
    if wide {
        headers.push(("width kHz", Align::Right));
    }
    if levelled {
        headers.push(("rel dB", Align::Right));
        if calibrated {
            headers.push(("needs dBc", Align::Right));
        }
        if wide {
            headers.extend([
                ("source dBm", Align::Right),
                ("drive dB", Align::Right),
                ("form dB", Align::Right),
                ("order dB", Align::Right),
                ("path dB", Align::Right),
                ("chan dB", Align::Right),
            ]);
        }
    }
    if l.ranking.by_evidence {
        headers.extend([
            ("support", Align::Right),
            ("contradictions", Align::Right),
            ("heard off", Align::Right),
            ("unknown", Align::Right),
        ]);
    }
    let shown: Vec<&Candidate> = l.ranking.candidates.iter().take(limit).collect();
    let remarks = levelled && shown.iter().any(|c| !remark(c).is_empty());
    if remarks {
        headers.push(("note", Align::Left));
    }
    let carriers = carriers(l.emitters);
    let mut used = vec![false; l.emitters.len()];
    let mut mechanisms = Vec::new();
    let mut rows = Vec::new();
    for c in &shown {
        if !mechanisms.contains(&c.mechanism) {
            mechanisms.push(c.mechanism);
        }
        if c.mechanism == Mechanism::Junction {
            for term in c.product.terms() {
                used[term.emitter] = true;
            }
        }
        let mut row = vec![
            c.rank.to_string(),
            formula(&c.product, l.emitters),
            made_in(c, l.emitters),
            c.product.order().to_string(),
            pim_io::precision::fixed(c.product.freq.mhz(), 4),
            signed(c.product.offset(l.params.target).khz(), 1),
        ];
        if wide {
            row.push(pim_io::precision::fixed(
                c.product.bandwidth(&carriers).khz(),
                1,
            ));
        }
        if levelled {
            let b = c.breakdown;
            let j = b.and_then(|b| b.junction);
            row.push(relative_text(c));
            if calibrated {
                row.push(signed_text(c.calibration.and_then(|k| k.required_im3_dbc)));
            }
            if wide {
                row.extend([
                    level_text(c.level_dbm),
                    signed_text(j.map(|j| j.drive_db)),
                    signed_text(j.map(|j| j.form_db)),
                    signed_text(j.map(|j| j.order_db + j.even_order_db)),
                    path_text(b.as_ref()),
                    chan_text(b.as_ref()),
                ]);
            }
        }
        if l.ranking.by_evidence {
            row.extend(c.evidence.as_ref().map(evidence_cells).unwrap_or_default());
        }
        if remarks {
            row.push(remark(c));
        }
        rows.push(row);
    }
    Columns {
        headers,
        rows,
        shown,
        used,
        mechanisms,
    }
}

/// The ranked candidates as an aligned terminal table, followed by what a reader needs
/// to check each row: the drives at the junction, the paths at their floor and (when
/// `layout.legend`) the level model's terms.
pub fn table_text(l: &Listing, limit: usize, layout: Layout) -> String {
    let levelled = l.ranking.junction.is_some();
    let cols = columns(l, limit, layout.wide);
    let mut out = String::new();
    if cols.rows.is_empty() {
        out.push_str(
            &outlook_text(l.ranking).unwrap_or_else(|| {
                "No product of these emitters lands in the channel.".to_string()
            }),
        );
        out.push('\n');
        return out;
    }
    let mut t = TextTable::new(&cols.headers);
    for row in cols.rows {
        t.push(row);
    }
    out.push_str(&if layout.wide {
        t.render()
    } else {
        t.render_within(TERMINAL_WIDTH)
    });
    if !layout.wide {
        out.push_str(if levelled {
            LEVEL_TERMS
        } else {
            "Not shown: the width (kHz); --wide shows it.\n"
        });
    }
    if l.ranking.by_evidence && layout.legend {
        out.push('\n');
        out.push_str(EVIDENCE_LEGEND);
    }
    if levelled {
        let notes = listing_notes(l, &cols.used, &cols.shown, layout.wide);
        if !notes.is_empty() {
            out.push('\n');
            out.push_str(&wrap_lines(&notes, TERMINAL_WIDTH));
        }
        if layout.legend {
            out.push('\n');
            out.push_str(&wrap_lines(
                &model_text(
                    &l.ranking.model,
                    Some(&cols.mechanisms),
                    l.ranking.calibrated,
                ),
                TERMINAL_WIDTH,
            ));
            out.push_str(&unmodelled_text(l.ranking));
        }
    }
    if let Some(s) = outlook_text(l.ranking) {
        out.push('\n');
        out.push_str(&wrap_lines(&s, TERMINAL_WIDTH));
        out.push('\n');
    }
    out
}

/// What one listing adds to the model's explanation: the drive of each emitter feeding a
/// junction candidate shown, the paths taken at their floor and the calibrated level.
/// The paths' floor is noted where the path column is shown (`with_path`).
fn listing_notes(l: &Listing, used: &[bool], shown: &[&Candidate], with_path: bool) -> String {
    let m = &l.ranking.model;
    let mut out = String::new();
    let incident: Vec<String> = used
        .iter()
        .enumerate()
        .filter(|(_, u)| **u)
        .filter_map(|(i, _)| {
            l.ranking.incidence.get(i).map(|inc| {
                let region = match inc.region {
                    FieldRegion::Far => "far field".to_string(),
                    FieldRegion::Cylindrical => "near field, cylindrical".to_string(),
                    FieldRegion::Reactive => format!(
                        "reactive near field: raised to λ/2π = {:.2} m",
                        inc.distance_used_m
                    ),
                };
                format!(
                    "  {:<12} ERP {:>5.1} dBm, {:>6.0} m ({region}): E {:>5.1} dB(µV/m), P {:>6.1} dBm",
                    l.emitters[i].id,
                    inc.erp_dbm,
                    inc.distance_m,
                    inc.field_dbuv_m,
                    inc.incident_dbm
                )
            })
        })
        .collect();
    if !incident.is_empty() {
        out.push_str(&format!(
            "Drive P at the junction: the power a {} m² aperture takes from the field E = √(30·EIRP)/d (ITU-R P.525; EIRP = ERP + 2.15 dB):\n",
            m.coupling_aperture_m2
        ));
        for line in incident {
            out.push_str(&line);
            out.push('\n');
        }
    }
    if let Some(floor) = path_floor_text(shown).filter(|_| with_path) {
        out.push_str(&floor);
        out.push('\n');
    }
    if l.ranking.calibrated {
        out.push_str(&format!(
            "The first candidate would be heard at {}.\n",
            calibrated_first_dbm(l.ranking)
                .map(|v| format!("{v:.1} dBm"))
                .unwrap_or_else(|| "—".into())
        ));
    }
    out
}

/// The mechanisms the ranking could not level for want of data, one line each.
fn unmodelled_text(ranking: &Ranking) -> String {
    let mut out = String::new();
    for (mech, missing) in &ranking.unmodelled {
        if *mech == Mechanism::Receiver && *missing == Missing::Iip3 {
            out.push_str("Products made in the receiver are not levelled: give --rx-iip3-dbm (or run the attenuator test).\n");
        }
    }
    out
}

/// The level model's terms behind the level columns, for the `mechanisms` shown (every
/// mechanism when `None`), so that each row's arithmetic can be checked; shared by all
/// the listings of a study.
pub fn model_text(m: &LevelModel, mechanisms: Option<&[Mechanism]>, calibrated: bool) -> String {
    let has = |x: Mechanism| mechanisms.is_none_or(|ms| ms.contains(&x));
    let mut out = String::new();
    if has(Mechanism::Junction) {
        out.push_str(&format!(
            "junction: a joint of {:.0} dBc at two +43 dBm tones (IEC 62037-1; --junction-dbc); law = L3 + form + drive + order, L3 = {:.1} dBm; form = 20·log10 of the product's multinomial coefficient over the two-tone one; drive = Σ α·|k|·(P − 43 dBm), α = {:.2}; order = −{:.1} dB per order above the third, −{:.1} dB more for even orders; the law bends to the passive ceiling, the weakest drive less 20·log10(order) (Page 1958).\n",
            m.im3_dbc(), m.im3_dbm, m.drive_exponent, m.order_step_db, m.even_order_penalty_db
        ));
    }
    if has(Mechanism::Transmitter) {
        out.push_str("harmonic: source = the transmitter's EIRP at the ITU-R SM.329 category A spurious limit of its service (an upper figure).\n");
    }
    if has(Mechanism::TransmitterIm) {
        out.push_str(&format!(
            "output stage: source = the other emitter's ERP − isolation between the antennas (free space, at least {:.0} dB) − {:.0} dB conversion loss + 2.15 dB (EIRP), less {:.0} dB for the carrier and again for the product outside the transmitter's band (±10 %). An upper figure: no isolator or filter is assumed at either end.\n",
            m.min_antenna_isolation_db, m.tx_conversion_loss_db, m.tx_out_of_band_rejection_db
        ));
    }
    if has(Mechanism::Receiver) {
        if let Some(iip3) = m.rx_iip3_dbm {
            out.push_str(&format!(
                "receiver: source = Σ|k|·(carrier at its input) − 2·IIP3 + form, IIP3 = {iip3:.1} dBm (--rx-iip3-dbm), below compression only (a carrier above IIP3 − 9.6 dB overloads it); no front-end selectivity assumed.\n"
            ));
        }
    }
    out.push_str("In the channel at the receiver: source + path (free-space loss to the receiver, a negative gain) + chan (10·log10 of the product's share of the channel: Gaussian spectra by emission class, widths |k|·B added root-sum-square; AM broadcast and unmodulated carriers as lines); rel dB = that level less the first candidate's.\n");
    if calibrated {
        out.push_str(&format!(
            "Calibrated to the level heard: needs = the junction's third-order product at two +43 dBm tones, dBc (IEC 62037-1); corroded hardware measures about −80 to −120 dBc: stronger than {:.0} dBc is unlikely, than {:.0} dBc implausible (--unlikely-dbc, --max-im3-dbc); a level above the passive ceiling is implausible whatever the joint.\n",
            m.unlikely_im3_dbc, m.max_im3_dbc,
        ));
    } else {
        out.push_str("Levels are relative: a real junction may differ by tens of dB; give --heard-dbm to calibrate.\n");
    }
    out
}

/// The ranked candidates as a Markdown table with every column of the wide terminal
/// table and the emitters' kinds and owners, then the same notes and explanation as the
/// table (the notes as preformatted text, their columns aligned).
pub fn markdown_text(l: &Listing, limit: usize, layout: Layout) -> String {
    let cols = columns(l, limit, true);
    if cols.rows.is_empty() {
        let text = outlook_text(l.ranking)
            .unwrap_or_else(|| "No product of these emitters lands in the channel.".to_string());
        return format!("{}\n", crate::document::md_text(&text));
    }
    let mut headers: Vec<String> = cols.headers.iter().map(|(h, _)| h.to_string()).collect();
    headers.push("emitters".into());
    let mut right: Vec<bool> = cols
        .headers
        .iter()
        .map(|(_, a)| *a == Align::Right)
        .collect();
    right.push(false);
    let rows: Vec<Vec<String>> = cols
        .rows
        .into_iter()
        .zip(&cols.shown)
        .map(|(mut row, c)| {
            row.push(emitters_text(c, l.emitters));
            row
        })
        .collect();
    let mut out = crate::document::markdown(&[crate::document::Block::Table {
        headers,
        right,
        rows,
    }]);
    let mut notes = String::new();
    if l.ranking.by_evidence && layout.legend {
        notes.push_str(EVIDENCE_LEGEND);
    }
    if l.ranking.junction.is_some() {
        notes.push_str(&listing_notes(l, &cols.used, &cols.shown, true));
        if layout.legend {
            notes.push_str(&model_text(
                &l.ranking.model,
                Some(&cols.mechanisms),
                l.ranking.calibrated,
            ));
            notes.push_str(&unmodelled_text(l.ranking));
        }
    }
    if !notes.is_empty() {
        out.push_str(&preformatted(&notes));
    }
    if let Some(s) = outlook_text(l.ranking) {
        out.push_str(&crate::document::md_text(&s));
        out.push('\n');
    }
    out
}

/// Text as a CommonMark fenced block of plain text, fenced with more backticks than it
/// holds in a row.
pub fn preformatted(text: &str) -> String {
    let mut longest = 0;
    let mut run = 0;
    for c in text.chars() {
        run = if c == '`' { run + 1 } else { 0 };
        longest = longest.max(run);
    }
    let fence = "`".repeat((longest + 1).max(3));
    format!("{fence}text\n{}\n{fence}\n\n", text.trim_end())
}

/// The emitters of a candidate with their kinds and owners: `SKP-152 (paging, Skyline)`.
fn emitters_text(c: &Candidate, emitters: &[Emitter]) -> String {
    let who: Vec<String> = display_terms(&c.product, emitters)
        .iter()
        .map(|t| {
            let e = &emitters[t.emitter];
            match (&e.kind, &e.owner) {
                (Some(k), Some(o)) => format!("{} ({k}, {o})", e.id),
                (Some(k), None) => format!("{} ({k})", e.id),
                (None, Some(o)) => format!("{} ({o})", e.id),
                (None, None) => e.id.clone(),
            }
        })
        .collect();
    who.join("; ")
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
    s.push_str(&format!(
        "{} from {source}; ",
        count(emitter_count, "emitter", "emitters")
    ));
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

#[cfg(test)]
mod tests {
    use super::*;
    use pim_core::freq::Hz;
    use pim_core::{Query, Site};

    /// Two invented transmitters 300 m from the junction; 2·152.84 − 159.34 = 146.34 MHz.
    fn site() -> Site {
        let j = GeoPoint::new(45.0, -122.0);
        let mk = |id: &str, hz: i64, az: f64| {
            let mut e = Emitter::new(id, Hz(hz), Hz(16_000));
            e.erp_dbm = Some(50.0);
            e.position = Some(pim_core::geo::destination(j, az, 300.0));
            e
        };
        Site::new(vec![
            mk("SKP-152", 152_840_000, 0.0),
            mk("FIRE-DSP", 159_340_000, 120.0),
        ])
    }

    #[test]
    fn the_table_shows_the_terms_it_ranks_by() {
        let site = site();
        let q = Query {
            junction: Some(GeoPoint::new(45.0, -122.0)),
            ..Query::new(Hz(146_340_000))
        };
        let a = site.explain(&q).unwrap();
        let l = Listing {
            emitters: site.emitters(),
            params: &a.params,
            ranking: &a.ranking,
            co_channel: &a.co_channel,
        };
        let t = table_text(&l, 10, Layout::single(true));
        for want in [
            "made in",
            "rel dB",
            "drive dB",
            "form dB",
            "chan dB",
            "SKP-152 output stage",
            "junction: a joint of -90 dBc at two +43 dBm tones",
            "passive ceiling",
            "give --heard-dbm to calibrate",
        ] {
            assert!(t.contains(want), "{want}: {t}");
        }
        assert!(!t.contains("ERP − path loss"), "{t}");
        assert!(outlook_text(&a.ranking).is_none());
    }

    #[test]
    fn nothing_landing_is_said_with_the_next_steps() {
        let site = site();
        let a = site.explain(&Query::new(Hz(300_000_000))).unwrap();
        let s = outlook_text(&a.ranking).unwrap();
        assert!(s.starts_with("Nothing credible: no product"), "{s}");
        assert!(s.contains("(3) check each nearby transmitter's own spurious output"));
        let v = outlook_json(&a.ranking);
        assert_eq!(v["outlook"], "nothing-lands");
        assert_eq!(v["next_steps"][1]["step"], "receiver-overload");
    }
}
