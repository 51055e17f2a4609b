//! `pim explain FREQ --emitters FILE`: which emitter combinations, at which order, make
//! a carrier heard on a receive channel, ranked by plausibility.

use std::io::Write;
use std::path::PathBuf;

use pim_core::emitter::{Carrier, Emitter};
use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::intermod::{find_products, Hits, SearchParams};
use pim_core::io::read_emitters;
use pim_core::level::JunctionModel;
use pim_core::rank::{rank, Ranking};
use serde_json::json;

use crate::common::{
    finish, finite_arg, frequency_arg, khz_arg, lat_arg, lon_arg, open, stdout, CliResult,
    ListFormat,
};
use crate::render::candidates::{
    co_channel_json, markdown_text, table_text, write_csv, write_json_array, Listing,
};

/// Search and ranking options shared by `explain` and `study`.
#[derive(clap::Args, Clone, Debug)]
pub struct SearchArgs {
    /// Receive channel width in kHz.
    #[arg(long = "rx-bw-khz", value_name = "KHZ", default_value = "12.5", value_parser = khz_arg)]
    pub rx_bw: Hz,
    /// Extra tolerance on each side of the channel, in kHz.
    #[arg(long = "tol-khz", value_name = "KHZ", default_value = "0", value_parser = khz_arg)]
    pub tol: Hz,
    /// Highest order Σ|k| to consider (1–15).
    #[arg(long, default_value_t = 7, value_parser = clap::value_parser!(u32).range(1..=15))]
    pub max_order: u32,
    /// Most distinct emitters in one product (1–3).
    #[arg(long, default_value_t = 3, value_parser = clap::value_parser!(u32).range(1..=3))]
    pub max_emitters: u32,
    /// Latitude of the receiver site, where the junction is assumed until a fix exists.
    #[arg(long, value_name = "DEG", value_parser = lat_arg, allow_hyphen_values = true, requires = "rx_lon")]
    pub rx_lat: Option<f64>,
    /// Longitude of the receiver site.
    #[arg(long, value_name = "DEG", value_parser = lon_arg, allow_hyphen_values = true, requires = "rx_lat")]
    pub rx_lon: Option<f64>,
    /// Junction model: third-order level (dBm) from two reference tones.
    #[arg(long, value_name = "DBM", default_value = "-80", value_parser = finite_arg, allow_hyphen_values = true)]
    pub junction_im3_dbm: f64,
    /// Junction model: level of each reference tone (dBm; IEC 62037-1 uses +43).
    #[arg(long, value_name = "DBM", default_value = "43", value_parser = finite_arg, allow_hyphen_values = true)]
    pub junction_ref_dbm: f64,
    /// Junction model: further loss per order above the third (dB).
    #[arg(long, value_name = "DB", default_value = "5", value_parser = finite_arg, allow_hyphen_values = true)]
    pub order_step_db: f64,
    /// Show at most N candidates (default: 20 in tables and Markdown, all in JSON and CSV).
    #[arg(long, value_name = "N")]
    pub limit: Option<usize>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = ListFormat::Table)]
    pub format: ListFormat,
}

impl SearchArgs {
    pub fn junction_model(&self) -> JunctionModel {
        JunctionModel {
            im3_dbm: self.junction_im3_dbm,
            reference_tone_dbm: self.junction_ref_dbm,
            order_step_db: self.order_step_db,
        }
    }

    pub fn rx_site(&self) -> Option<GeoPoint> {
        Some(GeoPoint::new(self.rx_lat?, self.rx_lon?))
    }

    pub fn params(&self, target: Hz, rx_bw: Hz) -> SearchParams {
        SearchParams {
            target,
            rx_bandwidth: rx_bw,
            tolerance: self.tol,
            max_order: self.max_order,
            max_emitters: self.max_emitters,
        }
    }

    /// How many candidates a listing shows.
    pub fn shown(&self) -> Option<usize> {
        match (self.limit, self.format) {
            (Some(n), _) => Some(n),
            (None, ListFormat::Table | ListFormat::Markdown) => Some(20),
            (None, _) => None,
        }
    }

    pub fn inputs_json(&self) -> serde_json::Value {
        json!({
            "tol_khz": self.tol.khz(),
            "max_order": self.max_order,
            "max_emitters": self.max_emitters,
            "rx_lat": self.rx_lat,
            "rx_lon": self.rx_lon,
            "junction_model": self.junction_model(),
        })
    }
}

#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// The frequency heard: a bare number is MHz; units: 146.52MHz, 600kHz, 1.2GHz.
    #[arg(value_name = "FREQ", value_parser = frequency_arg)]
    pub freq: Hz,
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
    #[command(flatten)]
    pub search: SearchArgs,
}

/// Reads an emitter file and reports unused columns on standard error.
pub fn load_emitters(path: &std::path::Path) -> CliResult<Vec<Emitter>> {
    let source = path.display().to_string();
    let file = read_emitters(&source, open(path)?)?;
    if !file.ignored_columns.is_empty() {
        eprintln!(
            "pim: note: {source}: column{} {} not used",
            if file.ignored_columns.len() == 1 {
                ""
            } else {
                "s"
            },
            file.ignored_columns
                .iter()
                .map(|c| format!("`{c}`"))
                .collect::<Vec<_>>()
                .join(", ")
        );
    }
    Ok(file.emitters)
}

/// Searches and ranks: the whole of `explain` short of rendering.
pub fn search_and_rank(
    emitters: &[Emitter],
    params: &SearchParams,
    junction: Option<GeoPoint>,
    model: &JunctionModel,
) -> (Ranking, Vec<usize>) {
    let carriers: Vec<Carrier> = emitters.iter().map(|e| e.carrier()).collect();
    let Hits {
        products,
        co_channel,
    } = find_products(&carriers, params);
    let ranking = rank(products, emitters, params.target, junction, model);
    (ranking, co_channel)
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

pub fn run(args: Args) -> CliResult {
    let emitters = load_emitters(&args.emitters)?;
    let s = &args.search;
    let params = s.params(args.freq, s.rx_bw);
    let junction = s.rx_site();
    let (ranking, co_channel) = search_and_rank(&emitters, &params, junction, &s.junction_model());
    let listing = Listing {
        emitters: &emitters,
        params: &params,
        ranking: &ranking,
        co_channel: &co_channel,
    };
    let mut out = stdout();
    let shown = s.shown();
    match s.format {
        ListFormat::Table => {
            let n = shown.unwrap_or(usize::MAX);
            write!(
                out,
                "{}",
                channel_summary(
                    &params,
                    emitters.len(),
                    &args.emitters.display().to_string(),
                    junction
                )
            )?;
            write!(out, "{}", co_channel_text(&listing))?;
            let total = ranking.candidates.len();
            writeln!(
                out,
                "{total} product{} land{} in the channel; {}.{}\n",
                if total == 1 { "" } else { "s" },
                if total == 1 { "s" } else { "" },
                ranking.basis(),
                if total > n {
                    format!(" The first {n}:")
                } else {
                    String::new()
                }
            )?;
            write!(out, "{}", table_text(&listing, n))?;
        }
        ListFormat::Markdown => {
            write!(
                out,
                "{}",
                markdown_text(&listing, shown.unwrap_or(usize::MAX))
            )?;
        }
        ListFormat::Csv => write_csv(&mut out, &listing, shown, None, true)?,
        ListFormat::Json => {
            let mut inputs = s.inputs_json();
            inputs["target_mhz"] = json!(args.freq.mhz());
            inputs["rx_bw_khz"] = json!(s.rx_bw.khz());
            inputs["emitters_file"] = json!(args.emitters.display().to_string());
            inputs["emitter_count"] = json!(emitters.len());
            writeln!(out, "{{")?;
            writeln!(
                out,
                "  \"inputs\": {},",
                serde_json::to_string(&inputs).map_err(std::io::Error::from)?
            )?;
            writeln!(out, "  \"ranking_basis\": {},", json!(ranking.basis()))?;
            writeln!(out, "  \"co_channel\": {},", co_channel_json(&listing))?;
            writeln!(out, "  \"total\": {},", ranking.candidates.len())?;
            write!(out, "  \"candidates\": ")?;
            write_json_array(&mut out, &listing, shown)?;
            writeln!(out, "\n}}")?;
        }
    }
    finish(out)
}
