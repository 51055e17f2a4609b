//! The maintenance ticket a tower crew and a licensee act on, as a document model
//! (rendered to Markdown and HTML from one source) with its pictures and exports. The
//! candidates are re-ranked with the junction at the fix; the ticket lists what to
//! inspect near the fix, how to confirm the cause, and the cautions of tower and RF work.

use pim_core::emitter::{carriers, Carrier, Emitter, Receiver};
use pim_core::exposure::{exposure_at, Exposure};
use pim_core::fix::{Fix, RegionKind};
use pim_core::geo::{GeoPoint, LocalFrame};
use pim_core::intermod::SearchParams;
use pim_core::level::{LevelModel, Mechanism};
use pim_core::onair::Logbook;
use pim_core::rank::{display_terms, formula, HeardLevel, Outlook, Placement, RankInputs, Ranking};
use pim_core::slope::{judge, judge_power_steps, PowerSteps, PowerVerdict, SlopeAnswer, StepKind};
use pim_core::ticket::{
    inspection_points, nearby, power_step_candidate, power_step_doubt, rank_changes, ItemKind,
    NearbyItem, PowerStepDoubt, Structure,
};
use pim_core::trace::classify::PeakKind;
use pim_core::{Error, Query, Site};
use pim_io::export::{bearing_length_m, site_geojson, site_kml, SiteItems};
use pim_io::fieldlog::{Correction, FieldLog};
use pim_io::read_readings;

use crate::candidates::{
    calibrated_first_dbm, made_in, narrowing_text, next_step_text, outlook_text, write_csv, Listing,
};
use crate::document::{html, markdown, Block};
use crate::fix::method_name;
use crate::map::{map_svg, MapInput, Marker, MarkerKind, Observer};
use crate::picture::PHONE;
use crate::readings::ReadingNames;
use crate::spectrum::{spectrum_svg, EmitterMark, ProductMark, SpectrumInput};

/// Everything a ticket is made from.
pub struct TicketInputs {
    /// The site's name, for the title.
    pub site_name: String,
    /// When the ticket is dated, as shown (e.g. `2026-12-01 14:05 UTC`).
    pub prepared: String,
    /// The emitters that may make the carrier.
    pub site: Site,
    pub emitters_source: String,
    pub log: FieldLog,
    pub fix: Fix,
    pub corrections: Vec<Correction>,
    pub structures: Vec<Structure>,
    pub params: SearchParams,
    pub model: LevelModel,
    pub rx_site: Option<GeoPoint>,
    /// The level heard at the receiver, dBm; without it the model is calibrated against
    /// the field log's `level_dbm` at each reading's position.
    pub heard_dbm: Option<f64>,
    /// Candidates listed in the ticket (candidates.csv has them all).
    pub limit: usize,
    /// A trace of the receive band (`trace.svg` and the suspects over the band), if taken.
    pub band: Option<BandTrace>,
    /// What the crew has already measured: on-air logs, power steps, the attenuator test,
    /// coefficients, the affected receiver.
    pub evidence: FieldEvidence,
    /// The ticket's number and who it is assigned to, when given.
    pub work_order: WorkOrder,
}

/// The evidence gathered before the ticket, each item optional.
#[derive(Default)]
pub struct FieldEvidence {
    /// Keep only products in which emitter `i` carries |k| = K (a power step's answer).
    pub coefficients: Vec<(usize, u32)>,
    /// On-air and listening logs: the ranking puts their evidence first.
    pub logbook: Option<Logbook>,
    /// The on-air and listening log files, as named.
    pub logbook_sources: Option<(String, String)>,
    /// The attenuator test at the receiver, read from its file.
    pub attenuator: Option<AttenuatorTest>,
    /// The power steps, read from their file.
    pub power_steps: Option<PowerStepTest>,
    /// The receiver the carrier is heard on (its channel width and position are used).
    pub receiver: Option<(Receiver, String)>,
}

/// The ticket's number and assignee, and the site's own offset from UTC for its times.
#[derive(Clone, Debug, Default)]
pub struct WorkOrder {
    pub ticket_id: Option<String>,
    pub assignee: Option<String>,
    /// The site's offset from UTC, as stated (`--utc-offset`); without it times are UTC
    /// and the ticket says so.
    pub utc_offset: Option<pim_core::time::UtcOffset>,
}

/// An attenuator test read from its file (as `pim slope --kind attenuator` reads it).
pub struct AttenuatorTest {
    pub answer: SlopeAnswer,
    pub source: String,
}

/// Power steps read from their file (as `pim slope --kind power` reads it).
pub struct PowerStepTest {
    pub answer: PowerStepAnswer,
    pub source: String,
}

impl AttenuatorTest {
    /// Reads an attenuator test (`step_db,level_dbm`) and judges it as `pim slope --kind
    /// attenuator` does; also the columns not read.
    pub fn read(source: &str, reader: impl std::io::Read) -> Result<(Self, Vec<String>), Error> {
        let file = read_readings(source, reader, StepKind::Attenuator)?;
        let answer = judge(StepKind::Attenuator, &file.points())?;
        let test = AttenuatorTest {
            answer,
            source: source.to_string(),
        };
        Ok((test, file.ignored_columns))
    }
}

impl PowerStepTest {
    /// Reads power steps as `pim slope --kind power` does: with an `emitter` column naming
    /// several emitters, their slopes together (coefficients and drive exponent);
    /// otherwise one emitter's slope. Also the columns not read.
    pub fn read(source: &str, reader: impl std::io::Read) -> Result<(Self, Vec<String>), Error> {
        let file = read_readings(source, reader, StepKind::Power)?;
        let series = file.series("the emitter");
        let answer = if series.len() > 1 {
            PowerStepAnswer::Several {
                answer: judge_power_steps(&series)?,
                counts: series.iter().map(|(_, p)| p.len()).collect(),
            }
        } else {
            PowerStepAnswer::One {
                answer: judge(StepKind::Power, &file.points())?,
                emitter: file.readings.first().and_then(|r| r.emitter.clone()),
            }
        };
        let test = PowerStepTest {
            answer,
            source: source.to_string(),
        };
        Ok((test, file.ignored_columns))
    }
}

/// One emitter's steps, or the steps of several.
pub enum PowerStepAnswer {
    One {
        answer: SlopeAnswer,
        emitter: Option<String>,
    },
    Several {
        answer: PowerSteps,
        counts: Vec<usize>,
    },
}

impl PowerStepTest {
    /// What the steps found of each emitter, as indices of `site`: every |k| its slope
    /// fits (emitters not on the list are passed over).
    pub fn findings(&self, site: &pim_core::Site) -> Vec<pim_core::rank::StepFinding> {
        let mut out = Vec::new();
        match &self.answer {
            PowerStepAnswer::One { answer, emitter } => {
                if let Some(i) = emitter.as_deref().and_then(|id| site.index_of(id)) {
                    out.push(pim_core::rank::StepFinding {
                        emitter: i,
                        fits: answer.consistent_k.clone(),
                    });
                }
            }
            PowerStepAnswer::Several { answer, .. } => {
                for (j, c) in answer.coefficients.iter().enumerate() {
                    let Some(i) = site.index_of(&c.emitter) else {
                        continue;
                    };
                    let mut fits: Vec<u32> = answer.alternatives.iter().map(|k| k[j]).collect();
                    fits.sort_unstable();
                    fits.dedup();
                    out.push(pim_core::rank::StepFinding { emitter: i, fits });
                }
            }
        }
        out
    }

    /// The drive exponent α the steps measured, when two or more emitters' coefficients
    /// were settled: a ticket levels its candidates with it.
    pub fn measured_exponent(&self) -> Option<f64> {
        match &self.answer {
            PowerStepAnswer::Several { answer, .. }
                if answer.verdict == pim_core::slope::PowerVerdict::Coefficients =>
            {
                answer.exponent.map(|e| e.estimate)
            }
            _ => None,
        }
    }
}

/// An analyser trace of the receive band, swept for peaks, for the ticket's view of the
/// whole band.
pub struct BandTrace {
    /// The trace (held sweeps).
    pub trace: pim_core::trace::Trace,
    /// Its floor, peaks and suspects.
    pub sweep: pim_core::trace::Sweep,
    /// The peak threshold above the floor, dB.
    pub threshold_db: f64,
    /// The trace files, as named.
    pub sources: String,
}

/// The files of a ticket, by name, with what the summary line needs.
pub struct TicketFiles {
    /// File name and content, in the order they are listed.
    pub files: Vec<(&'static str, Vec<u8>)>,
    /// The first candidate's formula, if any product lands.
    pub top_formula: Option<String>,
    /// How many products land.
    pub total: usize,
    /// When nothing credible explains the carrier, the plain statement the ticket opens
    /// with.
    pub nothing_explains: Option<String>,
}

impl TicketFiles {
    /// What is said after the ticket is written into `paths`: the nothing-explains
    /// statement first when there is one, the first candidate, the fix and the files.
    pub fn summary(&self, t: &TicketInputs, paths: &[std::path::PathBuf]) -> String {
        let mut out = String::new();
        if let Some(statement) = &self.nothing_explains {
            out.push_str(&format!(
                "Written all the same, for the fix and the walk: {statement}.\n"
            ));
        }
        out.push_str(&format!(
            "{} land{} on {} MHz; first: {}.\n",
            crate::candidates::count(self.total, "product", "products"),
            if self.total == 1 { "s" } else { "" },
            t.params.target.mhz_text(),
            self.top_formula.as_deref().unwrap_or("none")
        ));
        out.push_str(&format!(
            "Junction at {:.6}, {:.6}; {}.\nWrote:\n",
            t.fix.position.lat_deg,
            t.fix.position.lon_deg,
            crate::fix::region_claimed(&t.fix)
        ));
        for p in paths {
            // a path is terminal text like any other: a line end or an escape in it is shown escaped
            out.push_str(&format!(
                "  {}\n",
                pim_io::text::terminal_escape(&p.display().to_string(), false)
            ));
        }
        out
    }
}

fn who(e: &Emitter) -> String {
    match (&e.kind, &e.owner) {
        (Some(k), Some(o)) => format!("{} ({k}, {o})", e.id),
        (Some(k), None) => format!("{} ({k})", e.id),
        (None, Some(o)) => format!("{} ({o})", e.id),
        (None, None) => e.id.clone(),
    }
}

fn level(x: Option<f64>) -> String {
    x.map(|v| format!("{v:.1}")).unwrap_or_else(|| "—".into())
}

/// How many distinct products the candidates of a ranking stand for.
fn distinct_products(r: &Ranking) -> usize {
    let mut seen = Vec::new();
    for c in &r.candidates {
        if !seen.contains(&c.product) {
            seen.push(c.product);
        }
    }
    seen.len()
}

/// The ticket as document blocks, plus the two pictures.
fn build(
    t: &TicketInputs,
    at_fix: &Ranking,
    at_rx: Option<&Ranking>,
    near: &[NearbyItem],
    (found, kept): (usize, usize),
) -> (Vec<Block>, String, String, Option<String>) {
    let carriers = carriers(t.site.emitters());
    let fix = &t.fix;
    let e = &fix.ellipse;
    let heard = t.params.target;
    let names = ReadingNames::new(&t.log, t.work_order.utc_offset);
    let mut doc = vec![
        Block::Heading(1, format!("PIM ticket: {}, carrier on {} MHz", t.site_name, heard.mhz_text())),
        Block::Para(format!(
            "Prepared {} by pim {} from {} ({} emitters) and {} ({} readings). Task: find and mend the junction that makes the carrier.",
            t.prepared,
            env!("CARGO_PKG_VERSION"),
            t.emitters_source,
            t.site.emitters().len(),
            t.log.source,
            t.log.rows.len()
        )),
    ];
    let mut header = Vec::new();
    if let Some(id) = &t.work_order.ticket_id {
        header.push(format!("Ticket: {id}."));
    }
    if let Some(who) = &t.work_order.assignee {
        header.push(format!("Assigned to: {who}."));
    }
    if let Some(visit) = visit_text(&t.log, t.work_order.utc_offset) {
        header.push(format!(
            "Site visit: {visit} (the field log's first and last readings)."
        ));
    }
    if let Some((rx, source)) = &t.evidence.receiver {
        header.push(receiver_text(rx, source, &t.params));
    }
    if !header.is_empty() {
        doc.push(Block::List(header));
    }
    let credible = at_fix.outlook == Outlook::Credible;
    let why = match at_fix.outlook {
        Outlook::NothingLands => Some("no product of the listed emitters lands in the channel"),
        Outlook::OnlyImplausible => Some("every product that lands would need a junction mixing more strongly than any passive contact, or is made away from the fix"),
        Outlook::Credible | Outlook::Unlevelled => None,
    };
    if let Some(why) = why {
        doc.push(Block::Para(format!(
            "Nothing explains the carrier: {why}. The fix and the walk below still show where it comes from; no power step is asked for, and \"How to confirm\" lists what to check instead."
        )));
    }
    doc.push(Block::Heading(2, "1. What was heard".into()));
    let mut heard_points = vec![format!(
        "An unexplained carrier at {} MHz in the {} kHz receive channel (tolerance {} kHz).",
        heard.mhz_text(),
        t.params.rx_bandwidth.khz_text(),
        t.params.tolerance.khz_text()
    )];
    let levels: Vec<(u64, f64)> = t
        .log
        .rows
        .iter()
        .filter_map(|r| r.level_dbm.map(|l| (r.line, l)))
        .collect();
    if let Some(&(line, strongest)) = levels.iter().max_by(|a, b| a.1.total_cmp(&b.1)) {
        let weakest = levels.iter().map(|l| l.1).fold(f64::INFINITY, f64::min);
        heard_points.push(format!(
            "Levels on the walk: {weakest:.1} to {strongest:.1} dBm, strongest at reading {}.",
            names.name_and_line(line)
        ));
    }
    if let Some(level) = t.heard_dbm {
        heard_points.push(format!(
            "Heard at {level:.1} dBm at the receiver input (the level the model is calibrated to)."
        ));
    }
    let narrowing = narrowing_text(
        t.site.emitters(),
        &t.evidence.coefficients,
        found,
        kept,
        t.evidence.logbook.as_ref(),
    );
    for line in narrowing.lines() {
        heard_points.push(
            if !t.evidence.coefficients.is_empty() && line.starts_with("Kept") {
                format!(
                    "{} (the coefficients a power step found, given with --coefficient).",
                    line.trim_end_matches('.')
                )
            } else {
                line.to_string()
            },
        );
    }
    if let Some((on_air, heard_log)) = &t.evidence.logbook_sources {
        heard_points.push(format!(
            "On-air log {on_air} and listening log {heard_log}: candidates are ranked first by that evidence."
        ));
    }
    doc.push(Block::List(heard_points));

    // 2. Candidates
    doc.push(Block::Heading(2, "2. Which emitters make it".into()));
    let total = at_fix.candidates.len();
    let products = distinct_products(at_fix);
    let listed = total.min(t.limit);
    doc.push(Block::Para(if total == 0 {
        format!(
            "No product of up to {} emitters and order up to {} lands in the channel.",
            t.params.max_emitters, t.params.max_order
        )
    } else {
        format!(
            "{products} product{} of up to {} emitters and order up to {} land{} in the channel, {total} candidate{} with the ways each can be made (a corroded junction, a transmitter's output stage or harmonic). With the junction placed at the fix, they are {}. {}",
            if products == 1 { "" } else { "s" },
            t.params.max_emitters,
            t.params.max_order,
            if products == 1 { "s" } else { "" },
            if total == 1 { "" } else { "s" },
            at_fix.basis(),
            match listed {
                0 => "candidates.csv lists them.".to_string(),
                1 if total == 1 => "It follows; candidates.csv lists it too.".to_string(),
                n if n == total => "They follow; candidates.csv lists them too.".to_string(),
                n => format!("The first {n} follow; candidates.csv lists them all."),
            }
        )
    }));
    if let Some(statement) = outlook_text(at_fix) {
        doc.push(Block::Para(statement));
    }
    let calibrated = at_fix.calibrated;
    let mut rows = Vec::new();
    let by_evidence = at_fix.by_evidence;
    for c in at_fix.candidates.iter().take(t.limit) {
        let before = at_rx
            .and_then(|r| {
                r.candidates
                    .iter()
                    .find(|x| x.product == c.product && x.mechanism == c.mechanism)
            })
            .map(|x| format!("#{}", x.rank))
            .unwrap_or_else(|| "—".into());
        let emitters: Vec<String> = display_terms(&c.product, t.site.emitters())
            .iter()
            .map(|term| who(&t.site.emitters()[term.emitter]))
            .collect();
        let mut note = Vec::new();
        match c.calibration.and_then(|k| k.plausibility) {
            Some(pim_core::level::Plausibility::Implausible) => note.push("implausible junction"),
            Some(pim_core::level::Plausibility::Unlikely) => note.push("unlikely junction"),
            _ if c.implausible => note.push("implausible junction"),
            _ => {}
        }
        if c.away_from_fix {
            note.push("away from the fix");
        }
        if c.cleared_by_steps {
            note.push("cleared by the power steps");
        }
        let mut row = vec![
            c.rank.to_string(),
            formula(&c.product, t.site.emitters()),
            made_in(c, t.site.emitters()),
            c.product.order().to_string(),
            format!("{:.4}", c.product.freq.mhz()),
            pim_io::precision::signed(c.product.offset(heard).khz(), 1),
            crate::candidates::relative_text(c),
        ];
        if calibrated {
            row.push(level(c.calibration.and_then(|k| k.required_im3_dbc)));
        }
        if by_evidence {
            let e = c.evidence.unwrap_or_default();
            row.extend([
                e.support.to_string(),
                e.contradictions.to_string(),
                e.heard_off_air.to_string(),
            ]);
        }
        row.extend([before, emitters.join("; "), note.join(", ")]);
        rows.push(row);
    }
    let mut headers = vec![
        "#",
        "product",
        "made in",
        "order",
        "at MHz",
        "offset kHz",
        "in channel at receiver, dB rel. #1",
    ];
    let mut right = vec![true, false, false, true, true, true, true];
    if calibrated {
        headers.push("junction needs, dBc at 2×43 dBm");
        right.push(true);
    }
    if by_evidence {
        headers.extend(["support", "contradictions", "heard off air"]);
        right.extend([true, true, true]);
    }
    headers.extend(["rank at receiver", "emitters", "note"]);
    right.extend([true, false, false]);
    if !rows.is_empty() {
        doc.push(Block::Table {
            headers: headers.iter().map(|s| s.to_string()).collect(),
            right,
            rows,
        });
    }
    if by_evidence {
        doc.push(Block::Para(
            crate::candidates::EVIDENCE_LEGEND
                .replace('\n', " ")
                .trim()
                .to_string(),
        ));
    }
    if let Some(rx) = at_rx.filter(|_| total > 0) {
        let changes = rank_changes(at_fix, rx, t.limit);
        let moved: Vec<String> = changes
            .iter()
            .filter(|c| c.rank_at_receiver != Some(c.rank_at_fix))
            .map(|c| {
                format!(
                    "{} is #{} at the fix, #{} at the receiver",
                    formula(&c.product, t.site.emitters()),
                    c.rank_at_fix,
                    c.rank_at_receiver
                        .map_or("—".to_string(), |r| r.to_string())
                )
            })
            .collect();
        doc.push(Block::Para(if moved.is_empty() {
            "Moving the junction from the receiver to the fix leaves the order of these candidates as it was.".into()
        } else {
            format!("Moving the junction from the receiver to the fix changes the order: {}.", moved.join("; "))
        }));
    }
    let m = &t.model;
    let mut levels = format!(
        "Levels: each emitter drives a junction by its field strength there (ITU-R P.525, EIRP = ERP + 2.15 dB), taken as the power a {:.0} m² aperture collects; a junction is a joint of {:.0} dBc at two +43 dBm tones (the IEC 62037-1 condition; corroded hardware measures about −80 to −120 dBc), its products following a power law of exponent α = {:.2} below that drive, weighted by the product's multinomial coefficient, each further order costing {:.0} dB and even orders {:.0} dB more, and bending to a passive ceiling: no product above its weakest drive less 20·log10 of its order (Page 1958). A product made in a transmitter (its harmonic at the ITU-R SM.329 limit of its service, or intermodulation in its output stage, from signals within its band) is levelled at that transmitter. Every candidate is compared by the part of its product inside the receive channel at the receiver (Gaussian spectra by emission class, widths added root-sum-square), in dB relative to the first; a real joint may differ from the model by tens of dB.",
        m.coupling_aperture_m2, m.im3_dbc(), m.drive_exponent, m.order_step_db, m.even_order_penalty_db
    );
    if calibrated {
        let first = at_fix.candidates.iter().find(|c| c.relative_db.is_some());
        let points = first.and_then(|c| c.calibration).map_or(0, |k| k.points);
        levels.push_str(&format!(
            " Calibrated against {}: the first candidate would be heard at {} at the receiver; \"junction needs, dBc\" is the third-order product each junction would need at two +43 dBm tones: stronger than {:.0} dBc is unlikely for corroded hardware, stronger than {:.0} dBc implausible for any (a level above the passive ceiling is implausible whatever the joint).",
            match t.heard_dbm {
                Some(l) => format!("{l:.1} dBm heard at the receiver"),
                None => format!("the {points} levels of the walk"),
            },
            calibrated_first_dbm(at_fix)
                .map(|v| format!("{v:.1} dBm"))
                .unwrap_or_else(|| "—".into()),
            m.unlikely_im3_dbc,
            m.max_im3_dbc
        ));
    }
    if at_fix
        .candidates
        .iter()
        .take(t.limit)
        .any(|c| c.away_from_fix)
    {
        let radius = fix_radius_m(&t.fix);
        levels.push_str(&format!(
            " \"Away from the fix\": made more than {radius:.0} m from the fix ({}), where the bearings do not point; such candidates rank after those made at the fix.",
            match (t.fix.region_kind, radius > t.fix.reach_m()) {
                (RegionKind::Ellipse, true) => format!(
                    "the ellipse's semi-major axis of {:.1} m raised to the {FIX_RADIUS_FLOOR_M:.0} m floor",
                    t.fix.ellipse.semi_major_m
                ),
                (RegionKind::Ellipse, false) => "the ellipse's semi-major axis".to_string(),
                (RegionKind::Likelihood, true) => format!(
                    "the likelihood contour's reach of {:.1} m raised to the {FIX_RADIUS_FLOOR_M:.0} m floor",
                    t.fix.reach_m()
                ),
                (RegionKind::Likelihood, false) => "the likelihood contour's reach".to_string(),
            }
        ));
    }
    doc.push(Block::Para(levels));
    let spectrum_in = spectrum_input(t, at_fix, &carriers);
    let spectrum = spectrum_svg(&spectrum_in);
    doc.push(Block::Picture {
        file: "spectrum.svg".into(),
        alt: format!(
            "The receive channel at {} MHz and the products that land in it, labelled by order",
            heard.mhz_text()
        ),
        svg: spectrum.clone(),
        phone_svg: Some(crate::spectrum::spectrum_svg_at(&spectrum_in, &PHONE)),
    });

    let band_svg = t.band.as_ref().map(|band| {
        let picture = crate::sweep::picture_input(
            &band.trace,
            &band.sweep,
            t.site.emitters(),
            band.threshold_db,
            &band.sources,
        );
        let svg = crate::trace::trace_svg(&picture);
        let phone = crate::trace::trace_svg_at(&picture, &PHONE);
        doc.extend(band_blocks(band, t.site.emitters(), svg.clone(), phone));
        svg
    });

    // 3. Where
    doc.push(Block::Heading(2, "3. Where the junction is".into()));
    let mut where_points = vec![
        format!("Fix: {:.6}, {:.6} (WGS84), by {} from {} of {} readings.", fix.position.lat_deg, fix.position.lon_deg, method_name(fix.method), fix.n_used, fix.readings.len() + fix.levels.len()),
        match fix.open_towards_deg() {
            Some(_) => format!("{}.", crate::fix::region_claimed(fix)),
            None => format!(
                "{}; circular error probable {:.1} m.",
                crate::fix::region_claimed(fix), fix.cep_m
            ),
        },
        match fix.region_kind {
            RegionKind::Likelihood if fix.open_towards_deg().is_some() => "The region claimed is the likelihood contour drawn on the map, open on one side: it runs on out of the map that way, and the levels say nothing of how far.".to_string(),
            RegionKind::Ellipse => "The ellipse is the region claimed (the bearings are close to linear over it).".to_string(),
            RegionKind::Likelihood => format!(
                "The region claimed is the likelihood contour drawn on the map, reaching {:.0} m from the fix: the ellipse does not hold in this geometry.",
                fix.reach_m()
            ),
        },
        format!("{}; {}.", upper_first(&crate::fix::sigma_words(fix)), crate::fix::accuracy_words(fix)),
    ];
    if !t.corrections.is_empty() {
        where_points.push(format!(
            "{} magnetic bearing{} turned to true north ({}).",
            t.corrections.len(),
            if t.corrections.len() == 1 { "" } else { "s" },
            t.corrections
                .iter()
                .map(|c| format!(
                    "{}: {:+.1}° {}",
                    names.name_and_line(c.line),
                    c.declination_deg,
                    c.source
                ))
                .collect::<Vec<_>>()
                .join("; ")
        ));
    }
    for r in fix.readings.iter().filter(|r| r.outlier) {
        let note = t
            .log
            .rows
            .iter()
            .find(|x| x.line == r.line)
            .and_then(|x| x.note.clone());
        where_points.push(format!(
            "Reading {} disagrees with the others by {:+.1}°{}{}.",
            names.name_and_line(r.line),
            r.residual_deg,
            note.map(|n| format!(" ({n})")).unwrap_or_default(),
            if r.weight < 0.5 { "; set aside" } else { "" }
        ));
    }
    for w in &fix.warnings {
        where_points.push(format!("Note: {w}."));
    }
    doc.push(Block::List(where_points));
    let mut map_in = map_input(t, near);
    crate::map::name_observers(&mut map_in, &t.fix, &names);
    let map = map_svg(&map_in);
    doc.push(Block::Picture {
        file: "map.svg".into(),
        alt: format!(
            "The walk, the lines of bearing, the fix and its {:.0}% ellipse",
            e.confidence * 100.0
        ),
        svg: map.clone(),
        phone_svg: Some(crate::map::map_svg_at(&map_in, &PHONE)),
    });
    if let Some(off) = off_map_text(t, at_fix) {
        doc.push(Block::Para(off));
    }
    if near.is_empty() {
        doc.push(Block::Para(
            "No listed structure or emitter lies in or near the ellipse.".into(),
        ));
    } else {
        doc.push(Block::Table {
            headers: ["in or near the ellipse", "what", "from the fix", "", "note"]
                .iter()
                .map(|s| s.to_string())
                .collect(),
            right: vec![false, false, true, false, false],
            rows: near
                .iter()
                .map(|n| {
                    vec![
                        n.id.clone(),
                        n.kind.clone().unwrap_or_else(|| match n.item {
                            ItemKind::Structure => "structure".into(),
                            ItemKind::Emitter => "antenna".into(),
                        }),
                        format!("{:.0} m at {:.0}°", n.distance_m, n.bearing_from_fix_deg),
                        if n.inside() {
                            "inside".into()
                        } else {
                            "near".into()
                        },
                        n.note.clone().unwrap_or_default(),
                    ]
                })
                .collect(),
        });
    }

    // 4. Cautions, before any work at the site
    doc.push(Block::Heading(2, "4. Cautions".into()));
    let exposure = exposure_at(t.site.emitters(), t.fix.position, t.model.junction_height_m);
    doc.extend(caution_blocks(t, &exposure));

    // 5. Inspect
    doc.push(Block::Heading(2, "5. What to inspect".into()));
    // Structures that call for the same checks share one point, nearest first.
    let mut groups: Vec<(&[&str], Vec<String>)> = Vec::new();
    for n in near.iter().filter(|n| n.item == ItemKind::Structure) {
        let points = inspection_points(n.kind.as_deref());
        let place = format!(
            "{} ({}, {:.0} m from the fix{})",
            n.id,
            n.kind.as_deref().unwrap_or("structure"),
            n.distance_m,
            if n.inside() {
                ", inside the ellipse"
            } else {
                ""
            }
        );
        match groups.iter_mut().find(|(p, _)| std::ptr::eq(*p, points)) {
            Some((_, places)) => places.push(place),
            None => groups.push((points, vec![place])),
        }
    }
    let mut inspect: Vec<String> = groups
        .iter()
        .map(|(points, places)| format!("{}: {}.", places.join(", "), points.join("; ")))
        .collect();
    inspect.push(format!(
        "Anything metal within {:.0} m of the fix{} that is not listed: fences, roofing, loose hardware, cable trays, abandoned antennas and brackets.",
        e.semi_major_m.max(10.0),
        if e.semi_major_m < 10.0 {
            " (the ellipse's semi-major axis, raised to 10 m)"
        } else {
            ""
        }
    ));
    if let Some(top) = at_fix.candidates.first() {
        let ids: Vec<String> = display_terms(&top.product, t.site.emitters())
            .iter()
            .map(|x| t.site.emitters()[x.emitter].id.clone())
            .collect();
        inspect.push(format!(
            "The antennas, feedlines and connectors of {} (the emitters of the first candidate): a junction can sit in their own hardware too.",
            ids.join(" and ")
        ));
    }
    doc.push(Block::List(inspect));

    // 6. Confirm
    doc.push(Block::Heading(2, "6. How to confirm".into()));
    let mut steps = Vec::new();
    match &t.evidence.attenuator {
        Some(test) => steps.push(attenuator_done(test)),
        None => steps.push(format!("Attenuator test at the receiver: insert a step attenuator ahead of the receiver, note the carrier's level at 0, 2, 4, 6, 8 and 10 dB in {ATTENUATOR_FILE} (`step_db,level_dbm`), and run `{}` (or give the file to the ticket with --attenuator-readings). About 1 dB less per dB inserted means it arrives over the air (a junction outside); n dB per dB means the receiver makes it itself (overload), which the receiver's filtering must cure first.", pim_io::text::pim_command(["slope", "--kind", "attenuator", "--readings", ATTENUATOR_FILE]))),
    }
    if let Some(test) = &t.evidence.power_steps {
        steps.push(power_steps_done(test, &t.carrier()));
    }
    let proposed = power_step_candidate(at_fix, &t.params, t.limit);
    if !credible {
        for step in at_fix.next_steps() {
            steps.push(format!(
                "Instead of a power step, {}.",
                next_step_text(*step)
            ));
        }
    } else if let Some(first) = at_fix.candidates.first() {
        if let Some(doubt) = power_step_doubt(first, &t.params) {
            steps.push(format!(
                "No power step for the first candidate, {}: {}.",
                formula(&first.product, t.site.emitters()),
                doubt_text(doubt)
            ));
        }
    }
    if let (Some(top), None) = (proposed, &t.evidence.power_steps) {
        let terms = display_terms(&top.product, t.site.emitters());
        let which = if top.rank == 1 {
            "the first candidate".to_string()
        } else {
            format!("#{}, the first credible candidate", top.rank)
        };
        for term in &terms {
            let em = &t.site.emitters()[term.emitter];
            steps.push(format!(
                "Power step with the licensee{}: have {} lowered by 1, 2, 3 and 4 dB for a few minutes each and back; the carrier should fall by up to about {} dB per dB if {} ({which}) is the cause (|k| = {}).",
                em.owner.as_deref().map(|o| format!(" ({o})")).unwrap_or_default(),
                em.id,
                term.coefficient.abs(),
                formula(&top.product, t.site.emitters()),
                term.coefficient.abs()
            ));
        }
        if terms.len() > 1 {
            steps.push(format!(
                "Log the steps of every emitter of {which} ({}) in one file, {POWER_STEPS_FILE} (`emitter,step_db,level_dbm`), and run `{}` (or give the file to the ticket with --power-steps): the ratio of their slopes gives the coefficients even when the junction rises less steeply than the ideal law, and the exponent with them.",
                terms
                    .iter()
                    .map(|x| t.site.emitters()[x.emitter].id.clone())
                    .collect::<Vec<_>>()
                    .join(", "),
                pim_io::text::pim_command([
                    "slope",
                    "--kind",
                    "power",
                    "--readings",
                    POWER_STEPS_FILE,
                    "--freq",
                    &t.params.target.mhz_text(),
                    "--emitters",
                    &t.emitters_source,
                ])
            ));
        }
        if top.mechanism != Mechanism::Junction {
            steps.push(format!(
                "{} is made in {}: have the licensee check the transmitter's output with a spectrum analyser (and its filtering or isolator) before anyone looks for a joint.",
                formula(&top.product, t.site.emitters()),
                made_in(top, t.site.emitters())
            ));
        }
    }
    match (&t.evidence.logbook, &t.evidence.logbook_sources) {
        (Some(book), Some((on_air, heard))) => steps.push(format!(
            "Done: on-air check ({on_air}, {heard}): {} listening times, heard at {}; the candidates above are ranked by it first (support, contradictions, heard off air).",
            book.observations.len(),
            book.heard_count()
        )),
        _ => steps.push(format!("On-air check: log the keying of each candidate's emitters in {ON_AIR_FILE} and the times the carrier is heard or not in {HEARD_FILE}, and run `{}` (or give the same options to the ticket); an emitter off the air while the carrier is heard rules its candidates out.", pim_io::text::pim_command([
            "explain",
            &t.params.target.mhz_text(),
            "--emitters",
            &t.emitters_source,
            "--on-air",
            ON_AIR_FILE,
            "--heard",
            HEARD_FILE,
        ]))),
    }
    steps.push(tap_test_text(&exposure, credible));
    doc.push(Block::Para(format!(
        "The commands name their files relative to this ticket's folder: run them there. {ATTENUATOR_FILE}, {POWER_STEPS_FILE}, {ON_AIR_FILE} and {HEARD_FILE} are the files the crew records."
    )));
    doc.push(Block::Steps(steps));

    (doc, map, spectrum, band_svg)
}

/// The files the crew records for the steps of "How to confirm", named in its commands.
const ATTENUATOR_FILE: &str = "attenuator-readings.csv";
const POWER_STEPS_FILE: &str = "power-steps.csv";
const ON_AIR_FILE: &str = "on-air.csv";
const HEARD_FILE: &str = "heard.csv";

/// The cautions the ticket gives before any work step: the exposure near the
/// antennas, climbing and guy anchors, arrangements with the licensees and local codes
/// first (common practice of site safety rules).
fn caution_blocks(t: &TicketInputs, exposure: &Exposure) -> Vec<Block> {
    let mut owners: Vec<String> = t
        .site
        .emitters()
        .iter()
        .filter_map(|e| e.owner.clone())
        .collect();
    owners.sort();
    owners.dedup();
    let mut doc = exposure_blocks(exposure, t.site.emitters(), t.limit);
    doc.push(Block::Cautions(vec![
        "RF exposure: transmitting antennas on and around the site exceed exposure limits close in. Keep farther from each antenna than its reference distance above unless that transmitter is switched off, locked out and tagged out; keep to the site's RF safety plan and the ICNIRP 2020 guidelines (FCC OET Bulletin 65 in the United States).".into(),
        "Stay out of guy-anchor areas and off structures unless the work calls for it: a guy or anchor under tension, ice falling from a tower and a structure's fall zone are hazards at ground level too.".into(),
        "Tower and guy work only by trained, authorised climbers under the site owner's rules, with fall protection. Do not climb a disused or damaged structure until its condition has been checked; do not loosen clamps on a tensioned guy without a rigger.".into(),
        format!(
            "Power changes and shutdowns (power steps, an antenna switched off for work) only by arrangement with the licensees{}, who make them; a transmitter switched off for work is locked out and tagged out (lock-out/tag-out) until the work is done and everyone is clear.",
            if owners.is_empty() { String::new() } else { format!(": {}", owners.join(", ")) }
        ),
        "This ticket points at likely causes; local codes, site rules and licensed practice come first.".into(),
    ]));
    doc
}

/// The tap test, with or without the transmitters on as the exposure at the fix allows.
fn tap_test_text(x: &Exposure, credible: bool) -> String {
    let test = if credible {
        "flex or tap each joint with an insulated tool, someone watching the receiver; the carrier jumps or drops when the bad joint moves. Clean, bond or replace it, then check the channel with the emitters on the air again"
    } else {
        "flex or tap the joints of the structures listed above with an insulated tool, someone watching the receiver; a junction the emitter list cannot explain still jumps or drops when it moves"
    };
    let share = format!("{:.1} %", x.total_fraction * 100.0);
    if x.within_reference_levels() {
        format!(
            "Tap test with the transmitters on the air (the carrier is there only while they are): the estimated exposure at the fix is {share} of the general-public reference level (see Cautions), so it can be done with them on, keeping farther from each antenna than its reference distance: {test}."
        )
    } else {
        format!(
            "Tap test: the carrier is there only while the transmitters are on, but the estimated exposure at the fix is {} (see Cautions). Do it with them on only as the site's RF safety plan allows (trained workers, a survey meter, the occupational limits); otherwise have the licensees lower the strongest contributors' power first, by arrangement, and lock out and tag out any transmitter switched off. Then {test}.",
            if x.unplaced.is_empty() {
                format!("{share} of the general-public reference level")
            } else {
                format!("at least {share} of the general-public reference level, with emitters whose field is unknown")
            }
        )
    }
}

/// The exposure at the fix: what it sums to and each emitter's share and reference
/// distance, the largest first.
fn exposure_blocks(x: &Exposure, emitters: &[Emitter], limit: usize) -> Vec<Block> {
    let mut said = format!(
        "RF exposure at the fix, estimated in the far field (E = √(30·EIRP)/d, EIRP = 1.64 × ERP, every antenna's main beam towards the fix, no reflections): {:.1} % of the ICNIRP 2020 general-public reference level (Table 5, whole body; the levels used are recalled from memory: check them against the table), summed over the emitters as Σ(E/E_ref)². ",
        x.total_fraction * 100.0
    );
    said.push_str(if x.within_reference_levels() {
        "Within the reference levels at the fix; closer to an antenna the field rises as 1/d."
    } else {
        "Not within the reference levels at the fix, or not known everywhere: see the tap test's step."
    });
    if !x.unplaced.is_empty() {
        let ids: Vec<&str> = x
            .unplaced
            .iter()
            .map(|&i| emitters[i].id.as_str())
            .collect();
        said.push_str(&format!(
            " Left out for want of an ERP or a position: {}.",
            ids.join(", ")
        ));
    }
    if x.terms.iter().any(|t| t.near_field) {
        said.push_str(" The fix lies within a wavelength of an antenna, where the far-field estimate does not hold: measure (FCC OET Bulletin 65's near-field methods).");
    }
    let mut blocks = vec![Block::Para(said)];
    if !x.terms.is_empty() {
        blocks.push(Block::Table {
            headers: [
                "emitter",
                "MHz",
                "from the fix, m",
                "E at the fix, V/m",
                "reference, V/m",
                "share",
                "reference reached within, m",
            ]
            .iter()
            .map(|s| s.to_string())
            .collect(),
            right: vec![false, true, true, true, true, true, true],
            rows: x
                .terms
                .iter()
                .take(limit.max(1))
                .map(|t| {
                    let e = &emitters[t.emitter];
                    vec![
                        e.id.clone(),
                        e.freq.mhz_text(),
                        format!("{:.0}", t.distance_m),
                        format!("{:.2}", t.field_v_per_m),
                        format!("{:.1}", t.reference_v_per_m),
                        format!("{:.2} %", t.fraction * 100.0),
                        format!("{:.1}", t.reference_distance_m),
                    ]
                })
                .collect(),
        });
    }
    blocks
}

/// An offset from UTC as written in the ticket: `+01:00`.
pub fn offset_text(o: pim_core::time::UtcOffset) -> String {
    let (h, m, _) = o.as_hms();
    format!(
        "{}{:02}:{:02}",
        if o.is_negative() { '-' } else { '+' },
        h.abs(),
        m.abs()
    )
}

/// The span of the field log's reading times: in the site's own offset with UTC beside
/// when it is given (`2026-11-28, 10:12–10:41 +01:00 (09:12–09:41 UTC)`), else in UTC
/// saying so; both dates when the walk ran over midnight; `None` when no reading has a
/// time.
pub fn visit_text(log: &FieldLog, site: Option<pim_core::time::UtcOffset>) -> Option<String> {
    let utc = pim_core::time::UtcOffset::UTC;
    let span = |offset: pim_core::time::UtcOffset, zone: &str| -> Option<String> {
        let times: Vec<_> = log
            .rows
            .iter()
            .filter_map(|r| r.time)
            .map(|x| x.to_offset(offset))
            .collect();
        let first = times.iter().min()?;
        let last = times.iter().max()?;
        let hm = |x: &pim_core::time::OffsetDateTime| format!("{:02}:{:02}", x.hour(), x.minute());
        Some(if first.date() == last.date() {
            format!("{}, {}–{} {zone}", first.date(), hm(first), hm(last))
        } else {
            format!(
                "{} {} {zone} to {} {} {zone}",
                first.date(),
                hm(first),
                last.date(),
                hm(last)
            )
        })
    };
    let in_utc = span(utc, "UTC")?;
    Some(match site {
        Some(o) if o != utc => format!("{} ({in_utc})", span(o, &offset_text(o))?),
        Some(_) => format!("{in_utc} (the site's own time)"),
        None => format!("{in_utc}, the site's own offset not given"),
    })
}

/// The affected receiver, named with what of it the ranking uses.
fn receiver_text(rx: &Receiver, source: &str, params: &SearchParams) -> String {
    format!(
        "Affected receiver: {} ({} MHz, line {} of {}); its {} kHz channel{} used.{}",
        rx.id,
        rx.freq.mhz_text(),
        rx.line,
        source,
        params.rx_bandwidth.khz_text(),
        match rx.position {
            Some(p) => format!(" and its position {:.6}, {:.6} are", p.lat_deg, p.lon_deg),
            None => " is".to_string(),
        },
        rx.note
            .as_deref()
            .map(|n| format!(" Its note: {n}."))
            .unwrap_or_default()
    )
}

/// Why a candidate is not put to a licensee for a power step, in words.
fn doubt_text(d: PowerStepDoubt) -> &'static str {
    match d {
        PowerStepDoubt::Implausible => "calibrated to the level heard, it needs a junction mixing more strongly than any passive contact",
        PowerStepDoubt::AwayFromFix => "it is made away from the fix, where the bearings do not point",
        PowerStepDoubt::HeardOffAir => "the carrier was heard while one of its emitters was off the air",
        PowerStepDoubt::FarOffCentre => "a product above the third order whose centre lies outside the channel reaches it only by the skirt of its spectrum, and a power step would not tell it from noise",
        PowerStepDoubt::InReceiver => "it is made in the receiver, which the attenuator test settles",
    }
}

fn interval_text(interval: Option<(f64, f64)>) -> String {
    interval
        .map(|(lo, hi)| format!(" (95 % interval {lo:.2} to {hi:.2})"))
        .unwrap_or_default()
}

/// The attenuator test, marked as done with its figures and verdict.
fn attenuator_done(test: &AttenuatorTest) -> String {
    let a = &test.answer;
    format!(
        "Done: attenuator test ({}, {} readings): the level drops {:.2} dB per dB of attenuation{}; {}",
        test.source,
        a.fit.n,
        a.slope_db_per_db,
        interval_text(a.interval),
        crate::slope::advice(a, None, None)
    )
}

/// The power steps, marked as done with each emitter's slope and coefficient.
fn power_steps_done(test: &PowerStepTest, carrier: &crate::slope::Carrier) -> String {
    match &test.answer {
        PowerStepAnswer::One { answer, emitter } => format!(
            "Done: power step of {} ({}, {} readings): the level changes {:.2} dB per dB of its power{}; {}{}",
            emitter.as_deref().unwrap_or("one emitter"),
            test.source,
            answer.fit.n,
            answer.slope_db_per_db,
            interval_text(answer.interval),
            crate::slope::advice(answer, emitter.as_deref(), Some(carrier)),
            if answer.unsettled.is_none() {
                format!(" Note: {}", crate::slope::SINGLE_EMITTER_CAVEAT)
            } else {
                String::new()
            }
        ),
        PowerStepAnswer::Several { answer, counts } => {
            let each: Vec<String> = answer
                .coefficients
                .iter()
                .zip(counts)
                .map(|(c, n)| {
                    format!(
                        "{} {:.2} dB/dB over {n} readings, |k| = {}",
                        c.emitter,
                        c.slope_db_per_db,
                        c.k.map_or("unsettled".to_string(), |k| k.to_string())
                    )
                })
                .collect();
            let verdict = match answer.verdict {
                PowerVerdict::Coefficients => {
                    let order: u32 = answer.coefficients.iter().filter_map(|c| c.k).sum();
                    format!(
                        "coefficients settled (order {order}){}",
                        answer
                            .exponent
                            .map(|e| format!(
                                ", drive exponent α = {:.2} (95 % interval {:.2} to {:.2})",
                                e.estimate, e.interval.0, e.interval.1
                            ))
                            .unwrap_or_default()
                    )
                }
                PowerVerdict::Ambiguous => "ambiguous".to_string(),
                PowerVerdict::NoneConsistent => "no set of coefficients consistent".to_string(),
                PowerVerdict::TooFewReadings => "too few readings".to_string(),
                PowerVerdict::SingleEmitter => "one emitter only".to_string(),
            };
            format!(
                "Done: power steps ({}): {}; {verdict}. {}",
                test.source,
                each.join("; "),
                crate::slope::power_steps_advice(answer, Some(carrier))
            )
        }
    }
}

/// The whole receive band: the trace picture, what its peaks are, and the emitter sets
/// whose products explain several of them.
fn band_blocks(
    band: &BandTrace,
    emitters: &[Emitter],
    svg: String,
    phone_svg: String,
) -> Vec<Block> {
    let sweep = &band.sweep;
    let count = |k| sweep.peaks.iter().filter(|p| p.kind == k).count();
    let (e, p, u) = (
        count(PeakKind::Emitter),
        count(PeakKind::Product),
        count(PeakKind::Unexplained),
    );
    let mut blocks = vec![
        Block::Heading(3, "Over the whole receive band".into()),
        Block::Para(format!(
            "The trace {} ({:.4}–{:.4} MHz) shows {} peak{} at least {} dB above its floor: {e} a listed emitter's carrier, {p} explained as products, {u} unexplained.",
            band.sources,
            band.trace.start.mhz(),
            band.trace.stop().mhz(),
            sweep.peaks.len(),
            if sweep.peaks.len() == 1 { "" } else { "s" },
            band.threshold_db,
        )),
        Block::Picture {
            file: "trace.svg".into(),
            alt: "The receive band trace, its noise floor, and each peak marked by kind".into(),
            svg,
            phone_svg: Some(phone_svg),
        },
    ];
    let suspects: Vec<String> = sweep
        .suspects
        .iter()
        .take(5)
        .map(|s| {
            let ids: Vec<&str> = s
                .emitters
                .iter()
                .map(|&i| emitters[i].id.as_str())
                .collect();
            format!(
                "{} explain {} peaks: {}.",
                ids.join(" + "),
                s.explains.len(),
                crate::sweep::suspect_explains(s, sweep, emitters).join("; ")
            )
        })
        .collect();
    blocks.push(if suspects.is_empty() {
        Block::Para("No emitter set explains more than one peak of the band.".into())
    } else {
        Block::Para("Emitter sets whose products explain several peaks (a junction fed by them makes them all; the strongest evidence a trace gives):".into())
    });
    if !suspects.is_empty() {
        blocks.push(Block::List(suspects));
    }
    let unexplained: Vec<String> = sweep
        .peaks
        .iter()
        .filter(|p| p.kind == PeakKind::Unexplained)
        .map(|p| {
            format!(
                "{:.4} MHz, {:.1} dB above the floor",
                p.peak.freq.mhz(),
                p.peak.above_floor_db
            )
        })
        .collect();
    if !unexplained.is_empty() {
        blocks.push(Block::Para(format!(
            "Unexplained peaks (an unlisted emitter, a transmitter's own spurious output, or a product beyond the search's order): {}.",
            unexplained.join("; ")
        )));
    }
    blocks
}

fn map_input(t: &TicketInputs, near: &[NearbyItem]) -> MapInput {
    fix_map_input(
        &t.fix,
        &t.structures,
        t.site.emitters(),
        near,
        format!(
            "{}: the junction of the {} MHz carrier",
            t.site_name,
            t.params.target.mhz_text()
        ),
    )
}

/// How far from the fix the map shows structures and emitters, m: the walk's farthest
/// reading's distance and 30 % more, at least 100 m.
fn map_reach_m(fix: &Fix) -> f64 {
    (fix.readings
        .iter()
        .map(|r| r.distance_m)
        .fold(0.0, f64::max)
        * 1.3)
        .max(100.0)
}

/// The emitters of the listed candidates that lie beyond the map, each with its distance
/// and bearing from the fix, so that none is left off without notice.
fn off_map_text(t: &TicketInputs, at_fix: &Ranking) -> Option<String> {
    let reach = map_reach_m(&t.fix);
    let mut seen: Vec<usize> = Vec::new();
    let mut off = Vec::new();
    for c in at_fix.candidates.iter().take(t.limit) {
        for term in c.product.terms() {
            if seen.contains(&term.emitter) {
                continue;
            }
            seen.push(term.emitter);
            let e = &t.site.emitters()[term.emitter];
            match e.position {
                Some(p) => {
                    let (d, az) = pim_core::geo::distance_and_azimuth(t.fix.position, p);
                    if d > reach {
                        off.push(format!("{} ({:.0} m at {:.0}°)", e.id, d, az));
                    }
                }
                None => off.push(format!("{} (no position listed)", e.id)),
            }
        }
    }
    (!off.is_empty()).then(|| {
        format!(
            "Emitters of the listed candidates beyond the map's {reach:.0} m, with their distance and true bearing from the fix: {}.",
            off.join("; ")
        )
    })
}

/// The ticket's map of a fix: spots, lines of bearing, the ellipse, and the structures
/// and emitters within reach of the walk (shared with the walk page).
pub fn fix_map_input(
    fix: &Fix,
    structures: &[Structure],
    emitters: &[Emitter],
    near: &[NearbyItem],
    title: String,
) -> MapInput {
    let frame = LocalFrame::new(fix.position);
    let reach = map_reach_m(fix);
    let observers = fix
        .readings
        .iter()
        .map(|r| {
            let (east_m, north_m) = frame.to_local(r.observer);
            Observer {
                east_m,
                north_m,
                bearing_deg: r.bearing_deg,
                line_length_m: bearing_length_m(r.distance_m),
                label: format!("line {}", r.line),
                outlier: r.outlier,
            }
        })
        .collect();
    let mut markers: Vec<Marker> = Vec::new();
    let mut add = |id: &str, p: GeoPoint, kind: MarkerKind| {
        let (east_m, north_m) = frame.to_local(p);
        if east_m.hypot(north_m) <= reach && !markers.iter().any(|m| m.label == id) {
            markers.push(Marker {
                east_m,
                north_m,
                label: id.to_string(),
                kind,
            });
        }
    };
    for s in structures {
        add(&s.id, s.position, MarkerKind::Structure);
    }
    for e in emitters {
        if let Some(p) = e.position {
            add(&e.id, p, MarkerKind::Emitter);
        }
    }
    for n in near {
        let kind = if n.item == ItemKind::Emitter {
            MarkerKind::Emitter
        } else {
            MarkerKind::Structure
        };
        add(&n.id, n.position, kind);
    }
    MapInput {
        title,
        confidence: fix.ellipse.confidence,
        fix: Some((0.0, 0.0)),
        ellipse: Some(crate::map::Ellipse {
            semi_major_m: fix.ellipse.semi_major_m,
            semi_minor_m: fix.ellipse.semi_minor_m,
            orientation_deg: fix.ellipse.orientation_deg,
        }),
        region_m: Some(fix.region.iter().map(|p| frame.to_local(*p)).collect()),
        region_open_towards_deg: fix.open_towards_deg(),
        observers,
        markers,
        ..MapInput::default()
    }
}

fn spectrum_input(t: &TicketInputs, at_fix: &Ranking, carriers: &[Carrier]) -> SpectrumInput {
    // One mark per product: its best-ranked way of being made.
    let mut seen = Vec::new();
    let shown: Vec<&pim_core::rank::Candidate> = at_fix
        .candidates
        .iter()
        .filter(|c| {
            let first = !seen.contains(&c.product);
            seen.push(c.product);
            first
        })
        .take(30)
        .collect();
    let products = shown
        .iter()
        .map(|c| ProductMark {
            freq_mhz: c.product.freq.mhz(),
            bandwidth_khz: c.product.bandwidth(carriers).khz(),
            order: c.product.order(),
            level_db: c.relative_db,
            rank: c.rank,
            formula: formula(&c.product, t.site.emitters()),
        })
        .collect();
    let mut ids: Vec<usize> = Vec::new();
    for c in at_fix.candidates.iter().take(t.limit) {
        for term in c.product.terms() {
            if !ids.contains(&term.emitter) {
                ids.push(term.emitter);
            }
        }
    }
    SpectrumInput {
        title: format!(
            "{}: products in the {} MHz channel",
            t.site_name,
            t.params.target.mhz_text()
        ),
        target_mhz: t.params.target.mhz(),
        rx_bw_khz: t.params.rx_bandwidth.khz(),
        calibrated_first_dbm: calibrated_first_dbm(at_fix),
        products,
        emitters: ids
            .iter()
            .map(|&i| EmitterMark {
                id: t.site.emitters()[i].id.clone(),
                freq_mhz: t.site.emitters()[i].freq.mhz(),
            })
            .collect(),
    }
}

/// What the ranking at the fix is calibrated against: the level heard at the receiver
/// when given, else the walk's levels at the readings' positions.
pub fn heard_levels(t: &TicketInputs) -> Vec<HeardLevel> {
    if let Some(level_dbm) = t.heard_dbm {
        return vec![HeardLevel {
            position: None,
            level_dbm,
        }];
    }
    t.log
        .rows
        .iter()
        .filter_map(|r| {
            Some(HeardLevel {
                position: Some(r.position?),
                level_dbm: r.level_dbm?,
            })
        })
        .collect()
}

/// Sources closer than this to the fix agree with the bearings whatever the ellipse, m.
const FIX_RADIUS_FLOOR_M: f64 = 30.0;

/// How far from the fix a source may lie and still agree with the bearings, m: the
/// reach of the region claimed (the ellipse's semi-major axis, or the likelihood
/// contour's farthest point), at least 30 m.
pub fn fix_radius_m(fix: &Fix) -> f64 {
    fix.reach_m().max(FIX_RADIUS_FLOOR_M)
}

impl TicketInputs {
    /// The carrier and emitter file, as the ticket's commands name them.
    pub fn carrier(&self) -> crate::slope::Carrier {
        crate::slope::Carrier {
            freq: self.params.target,
            emitters: self.emitters_source.clone(),
        }
    }

    /// The junction at the fix, heard at the receiver: where the ticket ranks, and so
    /// where its band trace's peaks are explained.
    pub fn placement(&self) -> Placement {
        Placement {
            junction: Some(self.fix.position),
            receiver: self.rx_site,
            fix_radius_m: Some(fix_radius_m(&self.fix)),
        }
    }
}

/// Searches, ranks at the receiver and at the fix, and makes the seven files of the
/// ticket: ticket.md, ticket.html, map.svg, spectrum.svg, fix.geojson, fix.kml and
/// candidates.csv.
pub fn ticket_files(t: &TicketInputs) -> Result<TicketFiles, Error> {
    let answer = t.site.explain(&Query {
        params: t.params,
        junction: t.rx_site,
        model: t.model,
        coefficients: t.evidence.coefficients.clone(),
        logbook: t.evidence.logbook.clone(),
        ..Query::new(t.params.target)
    })?;
    let mut at_rx = t.rx_site.map(|_| answer.ranking.clone());
    let heard = heard_levels(t);
    let mut at_fix = answer.ranked_with(
        &t.site,
        &RankInputs {
            placement: t.placement(),
            model: t.model,
            logbook: t.evidence.logbook.as_ref(),
            heard: &heard,
        },
    )?;
    // What the steps cleared is cleared wherever the junction is placed.
    if let Some(steps) = &t.evidence.power_steps {
        let findings = steps.findings(&t.site);
        at_fix.demote_cleared(&findings);
        if let Some(rx) = &mut at_rx {
            rx.demote_cleared(&findings);
        }
    }
    let near = nearby(&t.fix, &t.structures, t.site.emitters(), 30.0);
    let (doc, map, spectrum, band_svg) = build(
        t,
        &at_fix,
        at_rx.as_ref(),
        &near,
        (answer.found, answer.kept),
    );
    let title = format!(
        "PIM ticket: {}, {} MHz",
        t.site_name,
        t.params.target.mhz_text()
    );
    let mut csv = Vec::new();
    let listing = Listing {
        emitters: t.site.emitters(),
        params: &t.params,
        ranking: &at_fix,
        co_channel: &answer.co_channel,
    };
    write_csv(&mut csv, &listing, None, None, true)
        .map_err(|_| Error::refused("could not format candidates.csv"))?;
    let items = SiteItems {
        structures: &t.structures,
        emitters: t.site.emitters(),
    };
    let geojson =
        pim_io::precision::json_text(&site_geojson(&t.fix, &items), true).unwrap_or_default();
    let mut files: Vec<(&'static str, Vec<u8>)> = vec![
        ("ticket.md", markdown(&doc).into_bytes()),
        ("ticket.html", html(&title, &doc).into_bytes()),
        ("map.svg", map.into_bytes()),
        ("spectrum.svg", spectrum.into_bytes()),
        ("fix.geojson", geojson.into_bytes()),
        ("fix.kml", site_kml(&t.fix, &items, &title).into_bytes()),
        ("candidates.csv", csv),
    ];
    if let Some(svg) = band_svg {
        files.push(("trace.svg", svg.into_bytes()));
    }
    Ok(TicketFiles {
        files,
        top_formula: at_fix
            .candidates
            .first()
            .map(|c| formula(&c.product, t.site.emitters())),
        total: distinct_products(&at_fix),
        nothing_explains: crate::candidates::nothing_explains_text(&at_fix, &t.params),
    })
}

/// The text with its first letter upper case.
fn upper_first(text: &str) -> String {
    let mut c = text.chars();
    match c.next() {
        Some(f) => f.to_uppercase().chain(c).collect(),
        None => String::new(),
    }
}
