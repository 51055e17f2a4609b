//! Command-line options that several commands share, defined once: the heard frequency
//! and emitter file, the search and level-model options, and how a listing is written.

use std::path::PathBuf;

use pim_core::freq::Hz;
use pim_core::geo::GeoPoint;
use pim_core::intermod::{SearchParams, MAX_ORDER};
use pim_core::level::LevelModel;
use pim_core::rank::HeardLevel;
use serde_json::json;

use crate::common::{frequency_arg, khz_arg, lat_arg, lon_arg, ranged, whole, ListFormat};

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
    #[arg(long, default_value_t = 7, value_parser = whole::<u32>(1, 15))]
    pub max_order: u32,
    /// Most distinct emitters in one product (1–3).
    #[arg(long, default_value_t = 3, value_parser = whole::<u32>(1, 3))]
    pub max_emitters: u32,
    /// Latitude of the receiver site, where the junction is assumed until a fix exists.
    #[arg(long, value_name = "DEG", value_parser = lat_arg, allow_hyphen_values = true, requires = "rx_lon")]
    pub rx_lat: Option<f64>,
    /// Longitude of the receiver site.
    #[arg(long, value_name = "DEG", value_parser = lon_arg, allow_hyphen_values = true, requires = "rx_lat")]
    pub rx_lon: Option<f64>,
    /// Junction: its third-order product at two +43 dBm tones (IEC 62037-1), dBc
    /// (−200 to −20; −90 a corroded joint, −150 and weaker a good connector).
    #[arg(long, value_name = "DBC", default_value = "-90", value_parser = ranged(-200.0, -20.0, "dBc"), allow_hyphen_values = true)]
    pub junction_dbc: f64,
    /// Junction: further loss per order above the third, dB (0 to 40).
    #[arg(long, value_name = "DB", default_value = "5", value_parser = ranged(0.0, 40.0, "dB"), allow_hyphen_values = true)]
    pub order_step_db: f64,
    /// Junction: further loss of even orders, dB (0 to 100).
    #[arg(long, value_name = "DB", default_value = "20", value_parser = ranged(0.0, 100.0, "dB"), allow_hyphen_values = true)]
    pub even_order_penalty_db: f64,
    /// Junction: drive exponent α, the measured slope over the ideal one (0.1 to 1.5; 1 is
    /// the ideal law, n dB per dB at order n; `pim slope --kind power` measures it).
    /// Default 1, or in a ticket the exponent its power steps measured.
    #[arg(long, value_name = "ALPHA", value_parser = ranged(0.1, 1.5, ""), allow_hyphen_values = true)]
    pub drive_exponent: Option<f64>,
    /// Height of the junction above ground, m (0 to 600).
    #[arg(long, value_name = "M", default_value = "0", value_parser = ranged(0.0, 600.0, "m"), allow_hyphen_values = true)]
    pub junction_height_m: f64,
    /// The receiver's input third-order intercept, dBm (−60 to +60): levels products made
    /// in the receiver itself.
    #[arg(long, value_name = "DBM", value_parser = ranged(-60.0, 60.0, "dBm"), allow_hyphen_values = true)]
    pub rx_iip3_dbm: Option<f64>,
    /// The receiver's front-end filter: CSV `offset_mhz,rejection_db` (a duplexer's or
    /// cavity's rejection by a carrier's offset from the channel); it lowers the carriers
    /// at the input before the receiver's own products are levelled. None by default.
    #[arg(long, value_name = "FILE", requires = "rx_iip3_dbm")]
    pub rx_filter: Option<PathBuf>,
    /// A junction needing a third-order product above this at two +43 dBm tones is
    /// implausible, dBc (−140 to −20).
    #[arg(long, value_name = "DBC", default_value = "-60", value_parser = ranged(-140.0, -20.0, "dBc"), allow_hyphen_values = true)]
    pub max_im3_dbc: f64,
    /// A junction needing more than this at two +43 dBm tones (and no more than
    /// --max-im3-dbc) is unlikely, dBc (−160 to −20).
    #[arg(long, value_name = "DBC", default_value = "-80", value_parser = ranged(-160.0, -20.0, "dBc"), allow_hyphen_values = true)]
    pub unlikely_dbc: f64,
}

/// The level heard on the channel, to calibrate the level model against (`explain`,
/// `ticket`).
#[derive(clap::Args, Clone, Debug)]
pub struct CalibrationArgs {
    /// Level of the carrier at the receiver input, dBm (−200 to +30): each candidate gets
    /// the junction it would need, and those needing an implausible one are flagged.
    #[arg(long, value_name = "DBM", value_parser = ranged(-200.0, 30.0, "dBm"), allow_hyphen_values = true)]
    pub heard_dbm: Option<f64>,
    /// Width of what was heard, kHz: about 1 for a narrow steady carrier, tens for a wide
    /// noise-like hump; candidates are weighed by how well their spread matches it.
    #[arg(long = "heard-width-khz", value_name = "KHZ", value_parser = khz_arg)]
    pub heard_width: Option<Hz>,
}

impl CalibrationArgs {
    /// `model` with the heard width, when given.
    pub fn weigh(&self, model: LevelModel) -> LevelModel {
        LevelModel {
            heard_width: self.heard_width.or(model.heard_width),
            ..model
        }
    }

    /// The heard level, at the receiver.
    pub fn heard(&self) -> Vec<HeardLevel> {
        self.heard_dbm
            .map(|level_dbm| HeardLevel {
                position: None,
                level_dbm,
            })
            .into_iter()
            .collect()
    }
}

/// How many candidates JSON and CSV listings hold unless `--limit` says otherwise;
/// beyond it, `--limit all`.
pub const MACHINE_LISTING_LENGTH: usize = 1_000;

/// A listing's length: a count, or every candidate.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Limit {
    Count(usize),
    All,
}

/// clap parser for `--limit`: a whole number or `all`.
pub fn limit_arg(text: &str) -> Result<Limit, String> {
    if text.trim().eq_ignore_ascii_case("all") {
        return Ok(Limit::All);
    }
    text.trim().parse().map(Limit::Count).map_err(|_| {
        format!(
            "`{text}` is neither a whole number nor `all`{}",
            pim_io::table::decimal_comma_hint(text)
        )
    })
}

/// How a listing of candidates is written.
#[derive(clap::Args, Clone, Debug)]
pub struct ListingArgs {
    /// Show at most N candidates, or `all` (default: the first few in tables and
    /// Markdown, the first 1000 in JSON and CSV). Only the first N are kept in memory.
    #[arg(long, value_name = "N|all", value_parser = limit_arg)]
    pub limit: Option<Limit>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = ListFormat::Table)]
    pub format: ListFormat,
    /// Every column of the table, however wide (by default a table keeps to 100
    /// characters, leaving out the level terms, which JSON, CSV and Markdown always have).
    #[arg(long)]
    pub wide: bool,
}

impl ListingArgs {
    /// How many candidates a listing shows (`None`: every one); `for_reading` in tables
    /// and Markdown, [`MACHINE_LISTING_LENGTH`] in JSON and CSV.
    pub fn shown(&self, for_reading: usize) -> Option<usize> {
        match (self.limit, self.format) {
            (Some(Limit::Count(n)), _) => Some(n),
            (Some(Limit::All), _) => None,
            (None, ListFormat::Table | ListFormat::Markdown) => Some(for_reading),
            (None, _) => Some(MACHINE_LISTING_LENGTH),
        }
    }

    /// The count `--limit` gave, `None` for `all`, `default` without the option.
    pub fn count_or(&self, default: usize) -> Option<usize> {
        match self.limit {
            Some(Limit::Count(n)) => Some(n),
            Some(Limit::All) => None,
            None => Some(default),
        }
    }
}

impl SearchArgs {
    /// The level model the options describe; the others keep their defaults.
    pub fn junction_model(&self) -> LevelModel {
        LevelModel {
            order_step_db: self.order_step_db,
            even_order_penalty_db: self.even_order_penalty_db,
            drive_exponent: self.drive_exponent.unwrap_or(1.0),
            junction_height_m: self.junction_height_m,
            rx_iip3_dbm: self.rx_iip3_dbm,
            max_im3_dbc: self.max_im3_dbc,
            unlikely_im3_dbc: self.unlikely_dbc.min(self.max_im3_dbc),
            ..LevelModel::default()
        }
        .with_im3_dbc(self.junction_dbc)
    }

    /// [`SearchArgs::junction_model`] with the receiver's front-end filter read from its
    /// file, when given.
    pub fn model(&self) -> crate::common::CliResult<LevelModel> {
        let mut model = self.junction_model();
        if let Some(path) = &self.rx_filter {
            let source = path.display().to_string();
            let (filter, unused) =
                pim_io::rx_filter::read_rx_filter(&source, crate::common::open(path)?)?;
            crate::common::note_unused(&source, &unused);
            model.rx_filter = Some(filter);
        }
        Ok(model)
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
            "rx_lat_deg": self.rx_lat,
            "rx_lon_deg": self.rx_lon,
            "junction_model": self.junction_model(),
            "rx_filter": self.rx_filter.as_ref().map(|p| p.display().to_string()),
        })
    }
}

/// The frequency heard and the emitters that may make it.
#[derive(clap::Args, Debug)]
pub struct HeardArgs {
    /// The frequency heard: a bare number is MHz; units: 146.52MHz, 600kHz, 1.2GHz.
    #[arg(id = "freq", value_name = "FREQ", value_parser = heard_arg)]
    pub heard: Heard,
    /// Emitter file: CSV with a header, or a JSON array.
    #[arg(long, value_name = "FILE")]
    pub emitters: PathBuf,
    #[command(flatten)]
    pub columns: ColumnsArgs,
}

/// The frequency heard, and whether it was typed as a bare number (read as MHz).
#[derive(Clone, Copy, Debug)]
pub struct Heard {
    pub freq: Hz,
    pub bare: bool,
}

/// clap parser for the heard frequency: [`frequency_arg`], remembering a bare number.
pub fn heard_arg(text: &str) -> Result<Heard, String> {
    Ok(Heard {
        freq: frequency_arg(text)?,
        bare: text.trim().parse::<f64>().is_ok(),
    })
}

impl HeardArgs {
    /// The frequency heard.
    pub fn freq(&self) -> Hz {
        self.heard.freq
    }

    /// A note when a bare number was read far from every listed frequency, offering the
    /// reading that lands among them ("read as 14.634 GHz; did you mean 146.34 MHz?").
    pub fn note_far_reading(&self, listed: impl Iterator<Item = Hz>) {
        if !self.heard.bare {
            return;
        }
        if let Some(likely) = pim_core::freq::likely_reading(self.heard.freq, listed) {
            eprintln_safe!(
                "pim: note: the frequency was read as {}, far from every listed emitter; did you mean {}?",
                self.heard.freq.unit_text(),
                likely.unit_text()
            );
        }
    }
}

/// Which column of an emitter, receiver or structure file holds which field, where the
/// names do not say (every command that reads those files).
#[derive(clap::Args, Clone, Debug, Default)]
pub struct ColumnsArgs {
    /// Which column holds which field: `FIELD=COLUMN,…` (`freq_khz=Tx Freq`; `+` joins
    /// columns: `lat=LAT_DEG+LAT_MIN+LAT_SEC+LAT_HEM`), or a file of such pairs, one a
    /// line. Repeatable.
    #[arg(long = "columns", value_name = "FIELD=COLUMN,…|FILE")]
    pub columns: Vec<String>,
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

/// The evidence a listing can be narrowed and ranked by, shared by `explain` and
/// `ticket`: on-air and listening logs, and coefficients from power steps.
#[derive(clap::Args, Debug, Default)]
pub struct EvidenceArgs {
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
}

impl EvidenceArgs {
    /// The coefficients as emitter indices of `site` (`source` names the emitter file).
    pub fn coefficient_indices(
        &self,
        site: &pim_core::Site,
        source: &str,
    ) -> Result<Vec<(usize, u32)>, pim_core::Error> {
        crate::common::coefficient_indices(&self.coefficients, site, source)
    }

    /// The on-air and listening logs read against `emitters`, when both are given.
    pub fn logbook(
        &self,
        emitters: &[pim_core::Emitter],
    ) -> crate::common::CliResult<Option<pim_core::onair::Logbook>> {
        match (&self.on_air, &self.heard) {
            (Some(on_air), Some(heard)) => {
                Ok(Some(crate::common::load_logbook(on_air, heard, emitters)?))
            }
            _ => Ok(None),
        }
    }

    /// The files read, for a ticket's list of inputs.
    pub fn paths(&self) -> impl Iterator<Item = &std::path::Path> {
        self.on_air.iter().chain(&self.heard).map(PathBuf::as_path)
    }
}
