//! `pim explain FREQ --emitters FILE`: which emitter combinations, at which order, make
//! a carrier heard on a receive channel, ranked by plausibility.

use std::io::Write;
use std::path::PathBuf;

use pim_core::emitter::{carriers, Emitter};
use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::intermod::{find_products, retain_coefficients, Hits, SearchParams, MAX_ORDER};
use pim_core::io::{read_emitters, read_heard, read_on_air, Clock};
use pim_core::level::LevelModel as JunctionModel;
use pim_core::onair::{Logbook, Schedule};
use pim_core::rank::{rank_with_evidence, Ranking};
use pim_core::Error;
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
    #[arg(long, value_name = "DBM", default_value = "-35", value_parser = finite_arg, allow_hyphen_values = true)]
    pub junction_im3_dbm: f64,
    /// Junction model: drive of each reference tone (dBm; IEC 62037-1 uses +43).
    #[arg(long, value_name = "DBM", default_value = "0", value_parser = finite_arg, allow_hyphen_values = true)]
    pub junction_ref_dbm: f64,
    /// Junction model: further loss per order above the third (dB).
    #[arg(long, value_name = "DB", default_value = "5", value_parser = finite_arg, allow_hyphen_values = true)]
    pub order_step_db: f64,
}

/// How a listing of candidates is written.
#[derive(clap::Args, Clone, Debug)]
pub struct ListingArgs {
    /// Show at most N candidates (default: the first few in tables and Markdown, all in
    /// JSON and CSV).
    #[arg(long, value_name = "N")]
    pub limit: Option<usize>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = ListFormat::Table)]
    pub format: ListFormat,
}

impl ListingArgs {
    /// How many candidates a listing shows; `for_reading` in tables and Markdown.
    pub fn shown(&self, for_reading: usize) -> Option<usize> {
        match (self.limit, self.format) {
            (Some(n), _) => Some(n),
            (None, ListFormat::Table | ListFormat::Markdown) => Some(for_reading),
            (None, _) => None,
        }
    }
}

impl SearchArgs {
    pub fn junction_model(&self) -> JunctionModel {
        JunctionModel {
            im3_dbm: self.junction_im3_dbm,
            reference_tone_dbm: self.junction_ref_dbm,
            order_step_db: self.order_step_db,
            ..JunctionModel::default()
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

/// The frequency heard and the emitters that may make it.
#[derive(clap::Args, Debug)]
pub struct HeardArgs {
    /// The frequency heard: a bare number is MHz; units: 146.52MHz, 600kHz, 1.2GHz.
    #[arg(value_name = "FREQ", value_parser = frequency_arg)]
    pub freq: Hz,
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
}

#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    #[command(flatten)]
    pub input: HeardArgs,
    /// Keep only candidates in which EMITTER carries |k| = K, as a power step found it
    /// (K = 0: candidates without EMITTER). Repeatable.
    #[arg(long = "coefficient", value_name = "EMITTER=K", value_parser = coefficient_arg)]
    pub coefficients: Vec<(String, u32)>,
    /// On-air log: CSV `emitter,start,end` with ISO 8601 times (needs --heard).
    #[arg(long = "on-air", value_name = "FILE", requires = "heard")]
    pub on_air: Option<PathBuf>,
    /// Listening log: CSV `time,heard` with heard true or false (needs --on-air).
    #[arg(long, value_name = "FILE", requires = "on_air")]
    pub heard: Option<PathBuf>,
    #[command(flatten)]
    pub search: SearchArgs,
    #[command(flatten)]
    pub listing: ListingArgs,
}

/// clap parser for `EMITTER=K`: an emitter id and the |k| it carries.
pub fn coefficient_arg(text: &str) -> Result<(String, u32), String> {
    let (id, k) = text
        .rsplit_once('=')
        .ok_or_else(|| format!("`{text}` is not EMITTER=K (such as SKP-152=2)"))?;
    let id = id.trim();
    if id.is_empty() {
        return Err(format!("`{text}` names no emitter before `=`"));
    }
    let k: u32 = k
        .trim()
        .parse()
        .map_err(|_| format!("`{k}` is not a whole number 0 to {MAX_ORDER}"))?;
    if k > MAX_ORDER {
        return Err(format!(
            "|k| = {k} is above {MAX_ORDER}, the highest order searched"
        ));
    }
    Ok((id.to_string(), k))
}

/// Turns `EMITTER=K` pairs into emitter indices; an unknown id or one given twice with
/// different values is a bad argument.
pub fn coefficient_indices(
    pairs: &[(String, u32)],
    emitters: &[Emitter],
    source: &str,
) -> Result<Vec<(usize, u32)>, Error> {
    let mut out: Vec<(usize, u32)> = Vec::new();
    for (id, k) in pairs {
        let i = emitters.iter().position(|e| &e.id == id).ok_or_else(|| {
            Error::argument("--coefficient", format!("no emitter `{id}` in {source}"))
        })?;
        match out.iter().find(|(j, _)| *j == i) {
            Some((_, other)) if other != k => {
                return Err(Error::argument(
                    "--coefficient",
                    format!("`{id}` is given both |k| = {other} and |k| = {k}"),
                ))
            }
            Some(_) => {}
            None => out.push((i, *k)),
        }
    }
    Ok(out)
}

/// Reads the on-air and listening logs against `emitters`.
pub fn load_logbook(
    on_air: &std::path::Path,
    heard: &std::path::Path,
    emitters: &[Emitter],
) -> CliResult<Logbook> {
    let mut clock = Clock::default();
    let intervals = read_on_air(
        &on_air.display().to_string(),
        open(on_air)?,
        emitters,
        &mut clock,
    )?;
    let observations = read_heard(&heard.display().to_string(), open(heard)?, &mut clock)?;
    Ok(Logbook::new(
        Schedule::new(emitters, &intervals),
        observations,
    ))
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
    let (ranking, co_channel, _) =
        search_and_rank_with(emitters, params, junction, model, &[], None);
    (ranking, co_channel)
}

/// [`search_and_rank`], keeping only the products with the given coefficients and
/// ranking on the logbook's evidence when one is given. Also returns how many products
/// the search found before the coefficients narrowed them.
pub fn search_and_rank_with(
    emitters: &[Emitter],
    params: &SearchParams,
    junction: Option<GeoPoint>,
    model: &JunctionModel,
    coefficients: &[(usize, u32)],
    logbook: Option<&Logbook>,
) -> (Ranking, Vec<usize>, usize) {
    let carriers = carriers(emitters);
    let Hits {
        mut products,
        co_channel,
    } = find_products(&carriers, params);
    let found = products.len();
    retain_coefficients(&mut products, coefficients);
    let ranking = rank_with_evidence(products, emitters, params, junction, model, logbook);
    (ranking, co_channel, found)
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
fn narrowing_text(
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

pub fn run(args: Args) -> CliResult {
    let emitters = load_emitters(&args.input.emitters)?;
    let source = args.input.emitters.display().to_string();
    let coefficients = coefficient_indices(&args.coefficients, &emitters, &source)?;
    let logbook = match (&args.on_air, &args.heard) {
        (Some(on_air), Some(heard)) => Some(load_logbook(on_air, heard, &emitters)?),
        _ => None,
    };
    let s = &args.search;
    let params = s.params(args.input.freq, s.rx_bw);
    let junction = s.rx_site();
    let (ranking, co_channel, found) = search_and_rank_with(
        &emitters,
        &params,
        junction,
        &s.junction_model(),
        &coefficients,
        logbook.as_ref(),
    );
    let listing = Listing {
        emitters: &emitters,
        params: &params,
        ranking: &ranking,
        co_channel: &co_channel,
    };
    let mut out = stdout();
    let shown = args.listing.shown(20);
    match args.listing.format {
        ListFormat::Table => {
            let n = shown.unwrap_or(usize::MAX);
            write!(
                out,
                "{}",
                channel_summary(
                    &params,
                    emitters.len(),
                    &args.input.emitters.display().to_string(),
                    junction
                )
            )?;
            write!(out, "{}", co_channel_text(&listing))?;
            write!(
                out,
                "{}",
                narrowing_text(
                    &emitters,
                    &coefficients,
                    found,
                    ranking.candidates.len(),
                    logbook.as_ref()
                )
            )?;
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
            inputs["target_mhz"] = json!(args.input.freq.mhz());
            inputs["rx_bw_khz"] = json!(s.rx_bw.khz());
            inputs["emitters_file"] = json!(args.input.emitters.display().to_string());
            inputs["emitter_count"] = json!(emitters.len());
            inputs["coefficients"] = json!(coefficients
                .iter()
                .map(|&(i, k)| (emitters[i].id.clone(), k))
                .collect::<std::collections::BTreeMap<_, _>>());
            inputs["on_air_file"] = json!(args.on_air.as_ref().map(|p| p.display().to_string()));
            inputs["heard_file"] = json!(args.heard.as_ref().map(|p| p.display().to_string()));
            if let Some(book) = &logbook {
                inputs["heard_times"] = json!(book.heard_count());
                inputs["silent_times"] = json!(book.observations.len() - book.heard_count());
            }
            writeln!(out, "{{")?;
            writeln!(
                out,
                "  \"inputs\": {},",
                serde_json::to_string(&inputs).map_err(std::io::Error::from)?
            )?;
            writeln!(out, "  \"ranking_basis\": {},", json!(ranking.basis()))?;
            writeln!(out, "  \"co_channel\": {},", co_channel_json(&listing))?;
            writeln!(out, "  \"found\": {found},")?;
            writeln!(out, "  \"total\": {},", ranking.candidates.len())?;
            write!(out, "  \"candidates\": ")?;
            write_json_array(&mut out, &listing, shown)?;
            writeln!(out, "\n}}")?;
        }
    }
    finish(out)
}
