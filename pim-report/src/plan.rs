//! The answer of a channel plan: the channels chosen, each with the product of the set
//! that comes closest to it, as a text table or JSON.

use std::io::{self, Write};

use pim_core::emitter::Emitter;
use pim_core::freq::Hz;
use pim_core::plan::{ClosestProduct, Plan, PlanMethod};
use pim_core::rank::formula;
use pim_io::ListedChannel;
use serde::Serialize;
use serde_json::json;

use crate::text_table::{frequency_column, Align, TextTable, TERMINAL_WIDTH};

/// A plan with what its answer names.
pub struct PlanReport<'a> {
    /// The channels chosen, in frequency order.
    pub chosen: Vec<&'a ListedChannel>,
    /// Each chosen channel's closest product.
    pub closest: Vec<Option<ClosestProduct>>,
    /// The chosen channels as emitters (named by [`label`]), for the formulas.
    pub names: Vec<Emitter>,
    /// How the plan was found.
    pub result: &'a Plan,
    /// How many candidates there were.
    pub candidates: usize,
    /// What the candidates were, in words.
    pub description: String,
    /// The highest order planned against.
    pub order: u32,
    /// The guard around each channel.
    pub guard: Hz,
    /// The protected frequencies.
    pub protected: &'a [ListedChannel],
    /// The search's time limit, s.
    pub time_limit_s: f64,
    /// The time the search took, s.
    pub elapsed_s: f64,
}

/// The JSON answer; the first three fields are the contract.
#[derive(Serialize)]
struct PlanJson<'a> {
    channels_mhz: Vec<f64>,
    count: usize,
    optimal: bool,
    candidates: usize,
    order: u32,
    guard_khz: f64,
    protected_mhz: Vec<f64>,
    search: serde_json::Value,
    channels: Vec<ChannelJson<'a>>,
}

#[derive(Serialize)]
struct ChannelJson<'a> {
    freq_mhz: f64,
    id: Option<&'a str>,
    bw_khz: f64,
    closest_product: Option<ClosestJson>,
}

#[derive(Serialize)]
struct ClosestJson {
    formula: String,
    product_mhz: f64,
    distance_khz: f64,
    order: u32,
}

/// A channel's name: its id, or its frequency.
pub fn label(c: &ListedChannel) -> String {
    c.id.clone().unwrap_or_else(|| c.freq.mhz_text())
}

fn order_words(order: u32) -> &'static str {
    if order == 3 {
        "third"
    } else {
        "fifth"
    }
}

fn search_text(p: &Plan, time_limit: f64, secs: f64) -> String {
    match p.method {
        PlanMethod::BranchAndBound => format!(
            "Proved the largest: the branch and bound examined every larger set ({} conflicts, {} nodes, {secs:.2} s).",
            p.conflicts, p.nodes
        ),
        PlanMethod::BranchAndBoundCutShort => format!(
            "Best found, not proved the largest: the branch and bound was cut short by the {time_limit} s limit ({} conflicts, {} nodes); a longer --time-limit-s may prove it or find more.",
            p.conflicts, p.nodes
        ),
        PlanMethod::Greedy => format!(
            "Best found, not proved the largest: the candidates' conflicts could not be listed within the limits of the exact search (at most {} candidates, {} conflicts, the time limit), so greedy passes ran for {secs:.1} s.",
            pim_core::plan::EXACT_MAX_CANDIDATES,
            pim_core::plan::MAX_CONFLICTS
        ),
    }
}

/// The plan as JSON (the first three fields are the contract).
pub fn write_json(out: &mut dyn Write, r: &PlanReport) -> io::Result<()> {
    let channels = r
        .chosen
        .iter()
        .zip(&r.closest)
        .map(|(c, near)| ChannelJson {
            freq_mhz: c.freq.mhz(),
            id: c.id.as_deref(),
            bw_khz: c.bandwidth.khz(),
            closest_product: near.map(|n| ClosestJson {
                formula: formula(&n.product, &r.names),
                product_mhz: n.product.freq.mhz(),
                distance_khz: n.distance.khz(),
                order: n.product.order(),
            }),
        })
        .collect();
    let v = PlanJson {
        channels_mhz: r.chosen.iter().map(|c| c.freq.mhz()).collect(),
        count: r.chosen.len(),
        optimal: r.result.optimal,
        candidates: r.candidates,
        order: r.order,
        guard_khz: r.guard.khz(),
        protected_mhz: r.protected.iter().map(|c| c.freq.mhz()).collect(),
        search: json!({
            "method": r.result.method,
            "conflicts": r.result.conflicts,
            "nodes": r.result.nodes,
            "elapsed_s": (r.elapsed_s * 1000.0).round() / 1000.0,
            "time_limit_s": r.time_limit_s,
        }),
        channels,
    };
    pim_io::precision::write_json(out, &v, true)?;
    writeln!(out)?;
    Ok(())
}

/// The plan as a text table with a few lines of explanation.
pub fn write_table(out: &mut dyn Write, r: &PlanReport) -> io::Result<()> {
    crate::text_table::write_wrapped(out, |body| table_body(body, r))
}

fn table_body(out: &mut dyn Write, r: &PlanReport) -> io::Result<()> {
    writeln!(
        out,
        "Channel plan: {} of {}.",
        r.chosen.len(),
        r.description
    )?;
    writeln!(
        out,
        "No product of two or three chosen channels, up to {} order, lands within {} kHz of a chosen channel{}.",
        order_words(r.order),
        r.guard.khz_text(),
        match r.protected.len() {
            0 => String::new(),
            1 => " or of the protected frequency".to_string(),
            n => format!(" or of any of the {n} protected frequencies"),
        }
    )?;
    writeln!(
        out,
        "{}\n",
        search_text(r.result, r.time_limit_s, r.elapsed_s)
    )?;
    let with_ids = r.chosen.iter().any(|c| c.id.is_some());
    let mut headers = vec![("#", Align::Right), ("channel MHz", Align::Right)];
    if with_ids {
        headers.push(("id", Align::Left));
    }
    headers.extend([
        ("closest product", Align::Left),
        ("at MHz", Align::Right),
        ("distance kHz", Align::Right),
        ("order", Align::Right),
    ]);
    let mut t = TextTable::new(&headers);
    // each frequency column with one number of decimals, so that the points line up
    let channels = frequency_column(
        &r.chosen.iter().map(|c| Some(c.freq)).collect::<Vec<_>>(),
        6,
    );
    let ats = frequency_column(
        &r.closest
            .iter()
            .map(|n| n.as_ref().map(|n| n.product.freq))
            .collect::<Vec<_>>(),
        6,
    );
    let distances = frequency_column(
        &r.closest
            .iter()
            .map(|n| n.as_ref().map(|n| n.distance))
            .collect::<Vec<_>>(),
        3,
    );
    for (i, (c, near)) in r.chosen.iter().zip(&r.closest).enumerate() {
        let (f, at, d, o) = match near {
            Some(n) => (
                formula(&n.product, &r.names),
                ats[i].clone(),
                distances[i].clone(),
                n.product.order().to_string(),
            ),
            None => ("—".into(), "—".into(), "—".into(), "—".into()),
        };
        let mut row = vec![(i + 1).to_string(), channels[i].clone()];
        if with_ids {
            row.push(c.id.clone().unwrap_or_default());
        }
        row.extend([f, at, d, o]);
        t.push(row);
    }
    write!(out, "{}", t.render_within(TERMINAL_WIDTH))?;
    Ok(())
}
