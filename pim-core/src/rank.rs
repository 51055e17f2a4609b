//! Ranking the products that hit a channel by what the receiver would hear: each product
//! becomes one candidate per mechanism that can make it ([`Mechanism`]), levelled by the
//! model of [`crate::level`], and the power inside the receive channel at the receiver
//! ranks them. Candidates without a level follow, by order then offset. Remaining ties
//! break on the emitter ids, coefficients and mechanism, so the same input always gives
//! the same list.
//!
//! **Candidates.** Every product is a [`Mechanism::Junction`] candidate; a harmonic (one
//! emitter, |k| ≥ 2) is also a [`Mechanism::Transmitter`] candidate; a two-emitter
//! third-order product 2f_A ± f_B is also a [`Mechanism::TransmitterIm`] candidate made in
//! A; a third-order product is also a [`Mechanism::Receiver`] candidate when the model has
//! an IIP3 and the receiver's location is known (otherwise [`Ranking::unmodelled`] says
//! so).
//!
//! **What the receiver hears.** The source level (the product at the junction, the EIRP
//! of a transmitter's output, or the level at the receiver's input) less the free-space
//! loss from the source to the receiver (ITU-R P.525, distance raised to λ/2π), plus the
//! receiving antenna's gain, plus 10·log10 of the channel fraction. With no separate
//! receiver location the receiver is taken at the junction.
//!
//! **What was heard.** With the heard width given ([`LevelModel::heard_width`]: a narrow
//! steady carrier, or a wide noise-like hump), each candidate ranks by its level less the
//! mismatch between its spread and that width ([`crate::level::width_mismatch_db`]).
//!
//! **Calibration.** Given heard levels ([`HeardLevel`], at the receiver or at points of a
//! walk), each candidate gets the shift that makes its prediction match (the median over
//! the points) and, for a junction, the strength it would need: its third-order product
//! at two +43 dBm tones (the IEC 62037-1 condition), in dBc of one tone, found by
//! inverting the level model at the drives the junction sees. A level at or above the
//! passive ceiling needs no strength at all: no junction makes it. The strength is then
//! [`Plausibility::Plausible`] (within corroded hardware, at most
//! [`LevelModel::unlikely_im3_dbc`]), [`Plausibility::Unlikely`] (up to
//! [`LevelModel::max_im3_dbc`]) or [`Plausibility::Implausible`]; implausible candidates
//! rank after the others.
//!
//! **Fix.** When the junction is a fix from bearings ([`Placement::fix_radius_m`]), candidates
//! made elsewhere (at a transmitter's antenna, or inside the receiver) disagree with the
//! bearings and rank after those made at the fix.
//!
//! With on-air evidence the evidence comes first, by the rule in [`crate::onair`]: fewest
//! times heard while one of the candidate's emitters was off the air, then most times
//! heard with all of them on, then fewest times silent with all of them on; the keys above
//! follow among equals.

use std::cmp::Ordering;

use serde::Serialize;

use crate::emitter::{carriers, Emitter};
use crate::geo::GeoPoint;
use crate::intermod::{Product, SearchParams, Term};
use crate::level::{
    channel_fraction, product_spread, Incidence, JunctionTerms, LevelModel, Mechanism,
    Plausibility, Service, Shape,
};
use crate::onair::{Evidence, Logbook};

pub use crate::level::IEC_62037_TONE_DBM;

/// Where the mixing is assumed to happen and where it is heard.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Placement {
    /// The junction: the receiver site until a fix is known.
    pub junction: Option<GeoPoint>,
    /// The receiver; the junction when `None`.
    pub receiver: Option<GeoPoint>,
    /// When the junction is a fix from bearings: how far from it (m) a source may lie and
    /// still agree with them. A candidate made elsewhere (at a transmitter, or in the
    /// receiver) is then `away_from_fix` and ranks after those that agree.
    pub fix_radius_m: Option<f64>,
}

impl Placement {
    /// The junction at the receiver.
    pub fn at(point: Option<GeoPoint>) -> Placement {
        Placement {
            junction: point,
            receiver: None,
            fix_radius_m: None,
        }
    }

    fn receiver(&self) -> Option<GeoPoint> {
        self.receiver.or(self.junction)
    }
}

/// A level heard: at the receiver (`position` `None`) or at a point of a walk.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct HeardLevel {
    /// Where it was heard; `None` at the receiver.
    pub position: Option<GeoPoint>,
    /// The level heard, dBm.
    pub level_dbm: f64,
}

/// Why a candidate (or a whole mechanism) has no level.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Missing {
    /// No junction or receiver location was given.
    Location,
    /// An emitter of the product lacks its ERP or location.
    ErpOrLocation,
    /// The receiver's IIP3 was not given.
    Iip3,
    /// A carrier at the receiver's input lies above its 1 dB compression point (IIP3 less
    /// 9.6 dB): the receiver is overloaded, and its third-order law no longer holds.
    ReceiverOverload,
}

/// The terms of a candidate's level, for a practitioner to check.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LevelBreakdown {
    /// The junction's terms (junction candidates only).
    pub junction: Option<JunctionTerms>,
    /// The level at the source, dBm: the product at the junction, a transmitter's EIRP,
    /// or the receiver's input.
    pub source_level_dbm: f64,
    /// Loss from the source to the receiver less the receiving antenna's gain, dB.
    pub path_to_receiver_db: f64,
    /// The slant distance from the source to the receiver, m (`None` for a product
    /// made in the receiver).
    pub path_distance_m: Option<f64>,
    /// When that distance is under λ/2π, the loss is taken at this floor, m.
    pub path_floor_m: Option<f64>,
    /// The width that spreads the product's power (root-sum-square of |kᵢ|·Bᵢ over the
    /// emitters whose emission spreads), Hz.
    pub spread_hz: i64,
    /// The fraction of the product inside the receive channel.
    pub channel_fraction: f64,
    /// 10·log10 of it, dB.
    pub channel_db: f64,
    /// What the receiver would hear in its channel, dBm (the ranking's key; outputs show
    /// it no lower than [`crate::level::LEVEL_FLOOR_DBM`]).
    pub in_channel_dbm: f64,
    /// The prediction lies below [`crate::level::LEVEL_FLOOR_DBM`]: outputs show it at the
    /// floor, marked.
    pub below_floor: bool,
    /// With the heard width given: how far the product's spread is from it, dB
    /// ([`crate::level::width_mismatch_db`]), taken off its level for the ranking.
    pub width_mismatch_db: f64,
}

/// What a heard level says of a candidate.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Calibration {
    /// Heard minus predicted, dB (the median over the heard levels that apply).
    pub shift_db: f64,
    /// How many heard levels it rests on.
    pub points: usize,
    /// Junction only: the third-order product the junction would need at two +43 dBm
    /// tones (IEC 62037-1), dBc of one tone; `None` when the level heard is at or above
    /// the passive ceiling.
    pub required_im3_dbc: Option<f64>,
    /// Junction only: how that strength compares with real joints.
    pub plausibility: Option<Plausibility>,
}

/// A product, the mechanism that would make it, and its place in the ranking.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Candidate {
    /// 1 for the most plausible.
    pub rank: usize,
    /// The product.
    pub product: Product,
    /// Where and how it is made.
    pub mechanism: Mechanism,
    /// Transmitter intermodulation: the emitter whose output stage makes it.
    pub formed_in: Option<usize>,
    /// The model's level at the source (the junction for a junction), dBm.
    pub level_dbm: Option<f64>,
    /// The terms of its level, when it has one.
    pub breakdown: Option<LevelBreakdown>,
    /// Why there is no level, when there is none.
    pub missing: Option<Missing>,
    /// In-channel level relative to the first levelled candidate, dB.
    pub relative_db: Option<f64>,
    /// The shift that matches it to the levels heard, when levels were given.
    pub calibration: Option<Calibration>,
    /// A junction needing more than the model's plausible bound.
    pub implausible: bool,
    /// Made farther from the fix than the bearings allow ([`Placement::fix_radius_m`]).
    pub away_from_fix: bool,
    /// Cleared by power steps ([`Ranking::demote_cleared`]): a stepped emitter moved
    /// the level and takes no part in it, or carries a |k| its slope does not fit.
    pub cleared_by_steps: bool,
    /// What the on-air log says about it, when a log was given.
    pub evidence: Option<Evidence>,
}

impl Candidate {
    /// The |k| a power step of `emitter` should find in this candidate: the law its
    /// mechanism's level follows in that emitter's power. A junction or the receiver
    /// follows each emitter by its |k| (with the drive exponent); a product made in
    /// transmitter A's output stage is levelled from the other emitter's coupled power
    /// alone, one for one, and not from A's own (a saturated stage; the model's
    /// [`crate::level::LevelModel::transmitter_im_eirp_dbm`]), so A's step should not
    /// move it (0) and the other's moves it 1 dB/dB; a transmitter's own harmonic, held
    /// at its spurious limit relative to its power, moves 1 dB/dB.
    pub fn step_k(&self, emitter: usize) -> u32 {
        let k = self.product.coefficient_of(emitter).unsigned_abs();
        match self.mechanism {
            Mechanism::Junction | Mechanism::Receiver => k,
            Mechanism::TransmitterIm if self.formed_in == Some(emitter) => 0,
            Mechanism::TransmitterIm | Mechanism::Transmitter => k.min(1),
        }
    }

    /// The level it ranks by: what the receiver would hear in its channel, less the
    /// width mismatch when the heard width was given (`None` without a level).
    pub fn ranking_level_dbm(&self) -> Option<f64> {
        self.breakdown
            .map(|b| b.in_channel_dbm - b.width_mismatch_db)
    }
}

/// The breakdown of a junction product's level in the earlier three-term form.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LevelTerms {
    /// The drive term Σ α·|kᵢ|·(Pᵢ − P_ref), dB.
    pub power_sum_db: f64,
    /// Everything else: L₃ + F − s·(n − 3) − e·[n even], dB.
    pub conversion_db: f64,
    /// The level, dBm.
    pub level_dbm: f64,
}

/// What the ranking as a whole says.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Outlook {
    /// At least one levelled candidate that is not implausible.
    Credible,
    /// No product lands in the channel.
    NothingLands,
    /// Every levelled candidate needs an implausible junction (or is made away from the
    /// fix).
    OnlyImplausible,
    /// Products land, but none could be levelled.
    Unlevelled,
}

/// The usual next steps when nothing credible lands.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum NextStep {
    /// Look for emitters missing from the list (new licences, unlicensed, mobiles).
    UnlistedEmitters,
    /// Check for receiver overload with the attenuator test.
    ReceiverOverload,
    /// Check a transmitter's own spurious output.
    TransmitterSpurious,
}

/// Emitters' fields at the junction, by emitter index, where worked out.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Fields(std::collections::BTreeMap<usize, Incidence>);

impl Fields {
    /// Emitter `i`'s field (`None` without ERP, location or junction, or where it was
    /// not worked out).
    pub fn get(&self, i: usize) -> Option<Incidence> {
        self.0.get(&i).copied()
    }

    /// The fields worked out, by emitter index.
    pub fn iter(&self) -> impl Iterator<Item = (usize, &Incidence)> {
        self.0.iter().map(|(i, inc)| (*i, inc))
    }
}

impl FromIterator<(usize, Incidence)> for Fields {
    fn from_iter<T: IntoIterator<Item = (usize, Incidence)>>(iter: T) -> Self {
        Fields(iter.into_iter().collect())
    }
}

/// Ranked candidates and what the ranking rested on.
#[derive(Clone, Debug)]
pub struct Ranking {
    /// The candidates kept, in ranking order (the first K when a limit was given).
    pub candidates: Vec<Candidate>,
    /// How many candidates were weighed: every one when no limit was given; with a
    /// limit, those of the products the search examined (see [`crate::site::Explanation`]).
    pub total: usize,
    /// The junction location used for fields (the receiver site, or a fix).
    pub junction: Option<GeoPoint>,
    /// Where the candidates are heard.
    pub receiver: Option<GeoPoint>,
    /// The level model used.
    pub model: LevelModel,
    /// The field of each emitter at the junction, by emitter index. A listing of the
    /// first K holds it for the emitters of its candidates only, so that a study of many
    /// receivers over a long emitter list holds little per receiver.
    pub incidence: Fields,
    /// How many candidates lack a level (ranked after the others by order, then offset).
    pub unlevelled: usize,
    /// Whether on-air evidence took part (it then comes first).
    pub by_evidence: bool,
    /// Whether heard levels calibrated the candidates.
    pub calibrated: bool,
    /// Mechanisms left out for want of data.
    pub unmodelled: Vec<(Mechanism, Missing)>,
    /// Whether anything credible lands, and what to try next if not.
    pub outlook: Outlook,
}

impl Ranking {
    /// The junction terms of a product in the three-term form, when it can be levelled.
    pub fn level_terms(&self, product: &Product) -> Option<LevelTerms> {
        let t = self.junction_terms(product)?;
        Some(LevelTerms {
            power_sum_db: t.drive_db,
            conversion_db: t.level_dbm - t.drive_db,
            level_dbm: t.level_dbm,
        })
    }

    /// The junction model's terms for a product, when every emitter has a field.
    pub fn junction_terms(&self, product: &Product) -> Option<JunctionTerms> {
        let mut drives = Vec::with_capacity(3);
        for t in product.terms() {
            drives.push((
                t.coefficient.unsigned_abs(),
                self.incidence.get(t.emitter)?.incident_dbm,
            ));
        }
        Some(self.model.junction_level(&drives))
    }

    /// The usual next steps when the outlook is not credible (empty otherwise).
    pub fn next_steps(&self) -> &'static [NextStep] {
        match self.outlook {
            Outlook::Credible | Outlook::Unlevelled => &[],
            Outlook::NothingLands | Outlook::OnlyImplausible => &[
                NextStep::UnlistedEmitters,
                NextStep::ReceiverOverload,
                NextStep::TransmitterSpurious,
            ],
        }
    }

    /// A one-line statement of how the list is ordered.
    pub fn basis(&self) -> String {
        let rest = self.basis_after_evidence();
        if self.by_evidence {
            format!("ranked first by on-air evidence (fewest times heard with an emitter off air, most heard with all on air, fewest silent with all on air), then {}", rest.trim_start_matches("ranked "))
        } else {
            rest
        }
    }

    fn basis_after_evidence(&self) -> String {
        let total = self.total;
        match (self.junction, self.unlevelled) {
            (None, _) => "ranked by order, then offset: no junction location given, so no levels".to_string(),
            (Some(_), 0) => "ranked by predicted level in the receive channel".to_string(),
            (Some(_), u) if u == total => "ranked by order, then offset: no candidate has ERP and location for every emitter".to_string(),
            (Some(_), u) => format!(
                "ranked by predicted level in the receive channel; {u} of {total} lack an emitter's ERP or location and follow, by order then offset"
            ),
        }
    }
}

/// What a power step found of one emitter: every |k| its slope fits (with a drive
/// exponent in [`crate::slope::DRIVE_EXPONENT_RANGE`]); 0 among them when the level did
/// not clearly follow it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct StepFinding {
    /// The emitter stepped (index in the site).
    pub emitter: usize,
    /// The |k| that fit its slope.
    pub fits: Vec<u32>,
}

impl Ranking {
    /// Ranks the candidates anew from 1 in their present order, their levels relative to
    /// the first levelled one (after candidates were taken out or moved).
    pub fn renumber(&mut self) {
        let first = self
            .candidates
            .iter()
            .find_map(|c| c.breakdown.map(|b| b.in_channel_dbm));
        for (i, c) in self.candidates.iter_mut().enumerate() {
            c.rank = i + 1;
            c.relative_db = match (c.breakdown, first) {
                (Some(b), Some(f)) => Some(b.in_channel_dbm - f),
                _ => None,
            };
        }
    }

    /// Demotes the candidates the power steps cleared, keeping the order within the two
    /// groups: a candidate is cleared when a stepped emitter carries in it a |k| its
    /// slope does not fit (|k| = 0 where it takes no part, so a candidate without an
    /// emitter that moved the level is cleared; the |k| by mechanism of
    /// [`Candidate::step_k`], so a product made in a transmitter whose own step moved
    /// the level is cleared too). Returns how many were cleared. The
    /// crew is never sent to hardware the tests cleared; nothing is dropped.
    pub fn demote_cleared(&mut self, findings: &[StepFinding]) -> usize {
        if findings.iter().all(|f| f.fits.is_empty()) {
            return 0;
        }
        for c in &mut self.candidates {
            c.cleared_by_steps = findings
                .iter()
                .any(|f| !f.fits.is_empty() && !f.fits.contains(&c.step_k(f.emitter)));
        }
        self.candidates.sort_by_key(|c| c.cleared_by_steps);
        self.renumber();
        self.candidates
            .iter()
            .filter(|c| c.cleared_by_steps)
            .count()
    }
}

/// Orders two terms for display: positive coefficients first, larger |k| first, then by
/// frequency and id.
fn display_order(emitters: &[Emitter]) -> impl Fn(&Term, &Term) -> Ordering + '_ {
    move |a, b| {
        (b.coefficient > 0)
            .cmp(&(a.coefficient > 0))
            .then(b.coefficient.abs().cmp(&a.coefficient.abs()))
            .then(emitters[a.emitter].freq.cmp(&emitters[b.emitter].freq))
            .then(emitters[a.emitter].id.cmp(&emitters[b.emitter].id))
    }
}

/// The terms of a product in the order a formula shows them.
pub fn display_terms(product: &Product, emitters: &[Emitter]) -> Vec<Term> {
    let mut terms: Vec<Term> = product.terms().collect();
    terms.sort_by(display_order(emitters));
    terms
}

/// The product in trade notation, such as `2·PAGER − LMR2` or `A + B − C`.
pub fn formula(product: &Product, emitters: &[Emitter]) -> String {
    let mut out = String::new();
    for (i, t) in display_terms(product, emitters).iter().enumerate() {
        let m = t.coefficient.abs();
        match (i, t.coefficient > 0) {
            (0, true) => {}
            (0, false) => out.push('−'),
            (_, true) => out.push_str(" + "),
            (_, false) => out.push_str(" − "),
        }
        if m != 1 {
            out.push_str(&format!("{m}·"));
        }
        out.push_str(&emitters[t.emitter].id);
    }
    out
}

fn tie_break(a: &Product, b: &Product, emitters: &[Emitter]) -> Ordering {
    let ta = display_terms(a, emitters);
    let tb = display_terms(b, emitters);
    for (x, y) in ta.iter().zip(&tb) {
        let o = emitters[x.emitter]
            .id
            .cmp(&emitters[y.emitter].id)
            .then(y.coefficient.cmp(&x.coefficient));
        if o != Ordering::Equal {
            return o;
        }
    }
    ta.len().cmp(&tb.len())
}

/// Everything a ranking takes besides the products.
#[derive(Clone, Copy, Debug, Default)]
pub struct RankInputs<'a> {
    /// Where the junction and the receiver are.
    pub placement: Placement,
    /// The level model.
    pub model: LevelModel,
    /// On-air evidence to rank first, when given.
    pub logbook: Option<&'a Logbook>,
    /// Heard levels to calibrate against (empty: uncalibrated).
    pub heard: &'a [HeardLevel],
}

/// Ranks products hitting the channel of `params`. `junction` is where the mixing is
/// assumed to happen: the receiver site until a fix is known (also taken as the receiver).
pub fn rank(
    products: Vec<Product>,
    emitters: &[Emitter],
    params: &SearchParams,
    junction: Option<GeoPoint>,
    model: &LevelModel,
) -> Ranking {
    rank_with_evidence(products, emitters, params, junction, model, None)
}

/// [`rank`], with the on-air evidence of `logbook` (when given) as the first key.
pub fn rank_with_evidence(
    products: Vec<Product>,
    emitters: &[Emitter],
    params: &SearchParams,
    junction: Option<GeoPoint>,
    model: &LevelModel,
    logbook: Option<&Logbook>,
) -> Ranking {
    rank_candidates(
        products,
        emitters,
        params,
        &RankInputs {
            placement: Placement::at(junction),
            model: *model,
            logbook,
            heard: &[],
        },
    )
}

/// One candidate before ranking.
fn candidate(product: Product, mechanism: Mechanism, formed_in: Option<usize>) -> Candidate {
    Candidate {
        rank: 0,
        product,
        mechanism,
        formed_in,
        level_dbm: None,
        breakdown: None,
        missing: None,
        relative_db: None,
        calibration: None,
        implausible: false,
        away_from_fix: false,
        cleared_by_steps: false,
        evidence: None,
    }
}

/// The mechanisms that can make `product`, each as a candidate (module docs).
/// How many candidates [`mechanisms_of`] makes of `product`, without making them.
pub(crate) fn mechanism_count(product: &Product, receiver_modelled: bool) -> usize {
    let third = product.order() == 3;
    1 + usize::from(product.is_harmonic())
        + usize::from(
            third
                && product.emitter_count() == 2
                && product.terms().any(|t| t.coefficient.abs() == 2),
        )
        + usize::from(receiver_modelled && third)
}

fn mechanisms_of(product: &Product, receiver_modelled: bool) -> Vec<Candidate> {
    let mut out = vec![candidate(*product, Mechanism::Junction, None)];
    let terms: Vec<Term> = product.terms().collect();
    if product.is_harmonic() {
        out.push(candidate(*product, Mechanism::Transmitter, None));
    }
    if terms.len() == 2 && product.order() == 3 {
        if let Some(a) = terms.iter().find(|t| t.coefficient.abs() == 2) {
            out.push(candidate(
                *product,
                Mechanism::TransmitterIm,
                Some(a.emitter),
            ));
        }
    }
    if receiver_modelled && product.order() == 3 {
        out.push(candidate(*product, Mechanism::Receiver, None));
    }
    out
}

/// Where a candidate's product comes from: the point and height the path to a listener
/// starts at (`None` for the receiver's own products).
fn source_of(
    c: &Candidate,
    emitters: &[Emitter],
    junction: GeoPoint,
) -> Option<(GeoPoint, Option<f64>)> {
    match c.mechanism {
        Mechanism::Junction => Some((junction, None)),
        Mechanism::Transmitter | Mechanism::TransmitterIm => {
            let i = c
                .formed_in
                .or_else(|| c.product.terms().next().map(|t| t.emitter))?;
            Some((emitters[i].position?, emitters[i].height_m))
        }
        Mechanism::Receiver => None,
    }
}

/// The source level of a candidate (dBm) and the junction terms, or why there is none.
fn source_level(
    c: &Candidate,
    emitters: &[Emitter],
    ranking: &Ranking,
    receiver: GeoPoint,
    drive: &dyn Fn(usize) -> Option<f64>,
) -> Result<(f64, Option<JunctionTerms>), Missing> {
    let m = &ranking.model;
    match c.mechanism {
        Mechanism::Junction => {
            let mut drives = Vec::with_capacity(3);
            for t in c.product.terms() {
                drives.push((
                    t.coefficient.unsigned_abs(),
                    drive(t.emitter).ok_or(Missing::ErpOrLocation)?,
                ));
            }
            let t = m.junction_level(&drives);
            Ok((t.level_dbm, Some(t)))
        }
        Mechanism::Transmitter => {
            let e = c.product.terms().next().map(|t| &emitters[t.emitter]);
            let e = e.filter(|e| e.position.is_some());
            let erp = e.and_then(|e| e.erp_dbm).ok_or(Missing::ErpOrLocation)?;
            let service = Service::of_kind(e.and_then(|e| e.kind.as_deref()));
            Ok((m.spurious_limit_eirp_dbm(erp, service), None))
        }
        Mechanism::TransmitterIm => {
            let a = c.formed_in.ok_or(Missing::ErpOrLocation)?;
            let b = c
                .product
                .terms()
                .find(|t| t.emitter != a)
                .ok_or(Missing::ErpOrLocation)?
                .emitter;
            let (ea, eb) = (&emitters[a], &emitters[b]);
            let (Some(pa), Some(pb), Some(erp_b)) = (ea.position, eb.position, eb.erp_dbm) else {
                return Err(Missing::ErpOrLocation);
            };
            let d = crate::level::slant_distance_m(
                crate::geo::distance_m(pa, pb),
                ea.height_m.unwrap_or(m.junction_height_m),
                eb.height_m.unwrap_or(m.junction_height_m),
            );
            // the output network passes only its own band: B's carrier in, the product out
            let fa = ea.freq.0 as f64;
            let rejection = m.tx_band_rejection_db(fa, eb.freq.0 as f64)
                + m.tx_band_rejection_db(fa, c.product.freq.0 as f64);
            Ok((
                m.transmitter_im_eirp_dbm(erp_b, eb.freq.0 as f64, d) - rejection,
                None,
            ))
        }
        Mechanism::Receiver => {
            let iip3 = m.rx_iip3_dbm.ok_or(Missing::Iip3)?;
            let p1db = iip3 - crate::level::P1DB_BELOW_IIP3_DB;
            let mut sum = 0.0;
            let mut ks = Vec::with_capacity(3);
            for t in c.product.terms() {
                let e = &emitters[t.emitter];
                let (Some(p), Some(erp)) = (e.position, e.erp_dbm) else {
                    return Err(Missing::ErpOrLocation);
                };
                let rejection = m.rx_filter.map_or(0.0, |f| {
                    f.rejection_db((e.freq - c.product.freq).0 as f64 / 1e6)
                });
                let input = erp + crate::level::DIPOLE_GAIN_DBI
                    - m.path_to_receiver_db(e.freq.0 as f64, p, e.height_m, receiver)
                    - rejection;
                if input > p1db {
                    return Err(Missing::ReceiverOverload);
                }
                let k = t.coefficient.unsigned_abs();
                sum += k as f64 * input;
                ks.push(k);
            }
            Ok((sum - 2.0 * iip3 + crate::level::form_weight_db(&ks), None))
        }
    }
}

/// Raises a candidate's levels that lie below [`crate::level::LEVEL_FLOOR_DBM`] to it,
/// marking the breakdown, and moves its calibration shift alike (so that level + shift is
/// still the level heard).
fn show_at_floor(c: &mut Candidate) {
    let floor = crate::level::LEVEL_FLOOR_DBM;
    let Some(b) = c.breakdown.as_mut() else {
        return;
    };
    if b.in_channel_dbm < floor {
        if let Some(k) = c.calibration.as_mut() {
            k.shift_db -= floor - b.in_channel_dbm;
        }
        b.in_channel_dbm = floor;
        b.below_floor = true;
    }
    if b.source_level_dbm < floor {
        b.source_level_dbm = floor;
        c.level_dbm = Some(floor);
        if let Some(j) = b.junction.as_mut() {
            j.level_dbm = j.level_dbm.max(floor);
            j.law_dbm = j.law_dbm.max(floor);
        }
    }
}

/// The median of a non-empty list.
fn median(values: &mut [f64]) -> f64 {
    values.sort_by(f64::total_cmp);
    let n = values.len();
    if n % 2 == 1 {
        values[n / 2]
    } else {
        (values[n / 2 - 1] + values[n / 2]) / 2.0
    }
}

/// The calibration of a levelled candidate against `heard` (module docs).
fn calibrate(
    c: &Candidate,
    b: &LevelBreakdown,
    emitters: &[Emitter],
    ranking: &Ranking,
    junction: GeoPoint,
    heard: &[HeardLevel],
    drives: &[(u32, f64)],
) -> Option<Calibration> {
    let m = &ranking.model;
    let source = source_of(c, emitters, junction);
    let f = c.product.freq.0 as f64;
    let mut shifts: Vec<f64> = heard
        .iter()
        .filter_map(|h| match (h.position, source) {
            (None, _) => Some(h.level_dbm - b.in_channel_dbm),
            (Some(p), Some((from, height))) => Some(
                h.level_dbm
                    - (b.source_level_dbm - m.path_to_receiver_db(f, from, height, p)
                        + b.channel_db),
            ),
            (Some(_), None) => None,
        })
        .collect();
    if shifts.is_empty() {
        return None;
    }
    let points = shifts.len();
    let shift_db = median(&mut shifts);
    let (mut dbc, mut plausibility) = (None, None);
    if c.mechanism == Mechanism::Junction {
        dbc = m.required_im3_dbc(drives, b.source_level_dbm + shift_db);
        plausibility = Some(m.plausibility(dbc));
    }
    Some(Calibration {
        shift_db,
        points,
        required_im3_dbc: dbc,
        plausibility,
    })
}

/// Ranks products hitting the channel of `params` with everything of `inputs`.
pub fn rank_candidates(
    products: Vec<Product>,
    emitters: &[Emitter],
    params: &SearchParams,
    inputs: &RankInputs,
) -> Ranking {
    let ranker = Ranker::new(emitters, params, inputs);
    let mut tally = Tally::default();
    let mut candidates = Vec::with_capacity(ranker.candidate_count(&products));
    for product in &products {
        let from = candidates.len();
        ranker.evaluate(product, &mut candidates);
        for c in &candidates[from..] {
            tally.count(c);
        }
    }
    candidates.sort_by(|a, b| ranker.cmp(a, b));
    tally.first_levelled = candidates.iter().find(|c| c.breakdown.is_some()).copied();
    ranker.finish(candidates, tally)
}

/// What a ranking counts over every candidate it weighs, kept or not.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Tally {
    pub(crate) total: usize,
    pub(crate) unlevelled: usize,
    pub(crate) calibrated: bool,
    pub(crate) credible: bool,
    pub(crate) levelled: bool,
    /// The first levelled candidate in ranking order, for the relative levels.
    pub(crate) first_levelled: Option<Candidate>,
}

impl Tally {
    pub(crate) fn count(&mut self, c: &Candidate) {
        self.total += 1;
        self.calibrated |= c.calibration.is_some();
        if c.level_dbm.is_none() {
            self.unlevelled += 1;
        } else {
            self.levelled = true;
            self.credible |= !c.implausible && !c.away_from_fix;
        }
    }
}

/// Everything ranking one product needs, worked out once per ranking: the fields of the
/// emitters at the junction, which mechanisms are modelled, the carriers.
pub(crate) struct Ranker<'a> {
    emitters: &'a [Emitter],
    params: &'a SearchParams,
    inputs: &'a RankInputs<'a>,
    carriers: std::borrow::Cow<'a, [crate::emitter::Carrier]>,
    /// Ground distance from each emitter, and from the junction, to the receiver, metres:
    /// worked out once, when first needed.
    to_receiver_m: std::cell::RefCell<std::collections::HashMap<usize, f64>>,
    junction_to_receiver_m: std::cell::OnceCell<f64>,
    /// Each emitter's field at the junction, worked out when first needed (a ranking of
    /// the first K only), or `None` when the shell holds every emitter's.
    lazy: Option<std::cell::RefCell<std::collections::HashMap<usize, Option<Incidence>>>>,
    receiver_modelled: bool,
    /// The ranking's frame: everything but the candidates and the counts.
    pub(crate) shell: Ranking,
}

impl<'a> Ranker<'a> {
    pub(crate) fn new(
        emitters: &'a [Emitter],
        params: &'a SearchParams,
        inputs: &'a RankInputs<'a>,
    ) -> Ranker<'a> {
        let junction = inputs.placement.junction;
        let mut ranker = Ranker::lazy(emitters, &[], params, inputs);
        ranker.carriers = std::borrow::Cow::Owned(carriers(emitters));
        ranker.shell.incidence = emitters
            .iter()
            .enumerate()
            .filter_map(|(i, e)| Some((i, inputs.model.incidence(e, junction?)?)))
            .collect();
        ranker.lazy = None;
        ranker
    }

    /// A ranker that works out an emitter's field at the junction only when a candidate
    /// needs it; [`Ranker::finish`] gives the ranking the fields of its candidates'
    /// emitters.
    pub(crate) fn lazy(
        emitters: &'a [Emitter],
        carriers: &'a [crate::emitter::Carrier],
        params: &'a SearchParams,
        inputs: &'a RankInputs<'a>,
    ) -> Ranker<'a> {
        let model = inputs.model;
        let junction = inputs.placement.junction;
        let receiver = inputs.placement.receiver();
        let incidence = Fields::default();
        let receiver_modelled = model.rx_iip3_dbm.is_some() && receiver.is_some();
        let mut unmodelled = Vec::new();
        if model.rx_iip3_dbm.is_none() {
            unmodelled.push((Mechanism::Receiver, Missing::Iip3));
        } else if receiver.is_none() {
            unmodelled.push((Mechanism::Receiver, Missing::Location));
        }
        Ranker {
            emitters,
            params,
            inputs,
            carriers: std::borrow::Cow::Borrowed(carriers),
            to_receiver_m: Default::default(),
            junction_to_receiver_m: std::cell::OnceCell::new(),
            lazy: Some(Default::default()),
            receiver_modelled,
            shell: Ranking {
                candidates: Vec::new(),
                total: 0,
                junction,
                receiver,
                model,
                incidence,
                unlevelled: 0,
                by_evidence: inputs.logbook.is_some(),
                calibrated: false,
                unmodelled,
                outlook: Outlook::NothingLands,
            },
        }
    }

    pub(crate) fn receiver_modelled(&self) -> bool {
        self.receiver_modelled
    }

    /// Emitter `i`'s field at the junction (`None` without ERP, location or junction).
    pub(crate) fn incidence(&self, i: usize) -> Option<Incidence> {
        match &self.lazy {
            Some(cells) => {
                if let Some(known) = cells.borrow().get(&i) {
                    return *known;
                }
                let inc = self
                    .shell
                    .junction
                    .and_then(|j| self.shell.model.incidence(&self.emitters[i], j));
                cells.borrow_mut().insert(i, inc);
                inc
            }
            None => self.shell.incidence.get(i),
        }
    }

    /// The width that spreads `product`'s power for its channel share (module docs of
    /// [`crate::level`]).
    fn spread(&self, product: &Product) -> crate::freq::Hz {
        product_spread(product.terms().map(|t| {
            let e = &self.emitters[t.emitter];
            let shape = Shape::of_emitter(e);
            (t.coefficient.unsigned_abs(), shape.spread(e.bandwidth))
        }))
    }

    /// How many candidates ranking `products` makes.
    pub(crate) fn candidate_count(&self, products: &[Product]) -> usize {
        products
            .iter()
            .map(|p| mechanism_count(p, self.receiver_modelled))
            .sum()
    }

    /// Appends the candidates of `product`, each levelled where it can be.
    pub(crate) fn evaluate(&self, product: &Product, out: &mut Vec<Candidate>) {
        self.evaluate_only(product, out, &|_| true)
    }

    /// [`Ranker::evaluate`] for the mechanisms `keep` accepts.
    pub(crate) fn evaluate_only(
        &self,
        product: &Product,
        out: &mut Vec<Candidate>,
        keep: &dyn Fn(Mechanism) -> bool,
    ) {
        let (emitters, inputs, params) = (self.emitters, self.inputs, self.params);
        let ranking = &self.shell;
        let model = ranking.model;
        let (junction, receiver) = (ranking.junction, ranking.receiver);
        for mut c in mechanisms_of(product, self.receiver_modelled) {
            if !keep(c.mechanism) {
                continue;
            }
            c.evidence = inputs.logbook.map(|book| book.evidence(product));
            if let (Some(j), Some(radius)) = (junction, inputs.placement.fix_radius_m) {
                let at = match source_of(&c, emitters, j) {
                    Some((p, _)) => Some(p),
                    None => receiver,
                };
                c.away_from_fix = at.is_some_and(|p| crate::geo::distance_m(p, j) > radius);
            }
            match (junction, receiver) {
                (Some(j), Some(rx)) => match source_level(&c, emitters, ranking, rx, &|i| {
                    self.incidence(i).map(|inc| inc.incident_dbm)
                }) {
                    Ok((level, junction_terms)) => {
                        let f = product.freq.0 as f64;
                        let route = match (source_of(&c, emitters, j), c.mechanism) {
                            (None, _) => None,
                            (Some((from, h)), Mechanism::Junction) => {
                                let ground = *self
                                    .junction_to_receiver_m
                                    .get_or_init(|| crate::geo::distance_m(from, rx));
                                Some(model.path_over_ground(f, ground, h))
                            }
                            (Some((from, h)), _) => {
                                let i = c
                                    .formed_in
                                    .or_else(|| c.product.terms().next().map(|t| t.emitter));
                                let ground = match i {
                                    Some(i) => {
                                        let known = self.to_receiver_m.borrow().get(&i).copied();
                                        known.unwrap_or_else(|| {
                                            let d = crate::geo::distance_m(from, rx);
                                            self.to_receiver_m.borrow_mut().insert(i, d);
                                            d
                                        })
                                    }
                                    None => crate::geo::distance_m(from, rx),
                                };
                                Some(model.path_over_ground(f, ground, h))
                            }
                        };
                        let path = route.map_or(0.0, |r| r.loss_db);
                        let spread = self.spread(product);
                        let fraction = channel_fraction(
                            product.offset(params.target),
                            spread,
                            params.rx_bandwidth,
                        );
                        let channel_db = 10.0 * fraction.log10();
                        let b = LevelBreakdown {
                            junction: junction_terms,
                            source_level_dbm: level,
                            path_to_receiver_db: path,
                            path_distance_m: route.map(|r| r.distance_m),
                            path_floor_m: route.and_then(|r| r.floor_m),
                            spread_hz: spread.0,
                            channel_fraction: fraction,
                            channel_db,
                            in_channel_dbm: level - path + channel_db,
                            below_floor: false,
                            width_mismatch_db: model
                                .heard_width
                                .map_or(0.0, |w| crate::level::width_mismatch_db(spread, w)),
                        };
                        c.level_dbm = Some(level);
                        let drives: Vec<(u32, f64)> = if c.mechanism == Mechanism::Junction {
                            c.product
                                .terms()
                                .filter_map(|t| {
                                    let p = self.incidence(t.emitter)?.incident_dbm;
                                    Some((t.coefficient.unsigned_abs(), p))
                                })
                                .collect()
                        } else {
                            Vec::new()
                        };
                        c.calibration =
                            calibrate(&c, &b, emitters, ranking, j, inputs.heard, &drives);
                        let b = LevelBreakdown {
                            below_floor: b.in_channel_dbm < crate::level::LEVEL_FLOOR_DBM,
                            ..b
                        };
                        c.implausible = c
                            .calibration
                            .and_then(|k| k.plausibility)
                            .is_some_and(|p| p == Plausibility::Implausible);
                        c.breakdown = Some(b);
                    }
                    Err(missing) => c.missing = Some(missing),
                },
                _ => c.missing = Some(Missing::Location),
            }
            out.push(c);
        }
    }

    /// The ranking order (module docs): `Less` when `a` ranks before `b`.
    pub(crate) fn cmp(&self, a: &Candidate, b: &Candidate) -> Ordering {
        let heard_key = Candidate::ranking_level_dbm;
        let by_evidence = match (&a.evidence, &b.evidence) {
            (Some(x), Some(y)) => x.ranking_cmp(y),
            _ => Ordering::Equal,
        };
        let by_level = match (heard_key(a), heard_key(b)) {
            (Some(x), Some(y)) => a.implausible.cmp(&b.implausible).then(y.total_cmp(&x)),
            (Some(_), None) => Ordering::Less,
            (None, Some(_)) => Ordering::Greater,
            (None, None) => Ordering::Equal,
        };
        let target = self.params.target;
        by_evidence
            .then(a.away_from_fix.cmp(&b.away_from_fix))
            .then(by_level)
            .then(a.product.order().cmp(&b.product.order()))
            .then(
                a.product
                    .offset(target)
                    .0
                    .abs()
                    .cmp(&b.product.offset(target).0.abs()),
            )
            .then_with(|| tie_break(&a.product, &b.product, self.emitters))
            .then(a.mechanism.cmp(&b.mechanism))
    }

    /// The ranking of `candidates`, already in ranking order, with the counts of every
    /// candidate weighed.
    pub(crate) fn finish(self, mut candidates: Vec<Candidate>, tally: Tally) -> Ranking {
        if self.lazy.is_some() {
            for c in &candidates {
                for t in c.product.terms() {
                    self.incidence(t.emitter);
                }
            }
        }
        let mut ranking = self.shell;
        if let Some(cells) = self.lazy {
            // the fields of the candidates' emitters only: a study holds many rankings
            let cells = cells.into_inner();
            ranking.incidence = candidates
                .iter()
                .flat_map(|c| c.product.terms())
                .filter_map(|t| Some((t.emitter, cells.get(&t.emitter).copied().flatten()?)))
                .collect();
        }
        let heard_key = |c: &Candidate| c.breakdown.map(|b| b.in_channel_dbm);
        let floor = crate::level::LEVEL_FLOOR_DBM;
        let first = tally
            .first_levelled
            .as_ref()
            .and_then(heard_key)
            .map(|f| f.max(floor));
        for (i, c) in candidates.iter_mut().enumerate() {
            c.rank = i + 1;
            // ranked on the model's values; shown no lower than the floor
            show_at_floor(c);
            c.relative_db = match (heard_key(c), first) {
                (Some(x), Some(f)) => Some(x - f),
                _ => None,
            };
        }
        ranking.calibrated = tally.calibrated;
        ranking.unlevelled = tally.unlevelled;
        ranking.total = tally.total;
        ranking.outlook = if tally.total == 0 {
            Outlook::NothingLands
        } else if tally.credible {
            Outlook::Credible
        } else if tally.levelled {
            Outlook::OnlyImplausible
        } else {
            Outlook::Unlevelled
        };
        // a bounded list grew to 2K + 64 before it was cut to K
        candidates.shrink_to_fit();
        ranking.candidates = candidates;
        ranking
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::freq::Hz;
    use crate::onair::{Interval, Observation, Schedule};
    use time::macros::datetime;

    #[test]
    fn mechanism_count_matches_the_candidates_made() {
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        for p in [
            Product::new(&[t(0, 3)], Hz(1)),
            Product::new(&[t(0, 2), t(1, -1)], Hz(1)),
            Product::new(&[t(0, 1), t(1, 2)], Hz(1)),
            Product::new(&[t(0, 1), t(1, 1), t(2, -1)], Hz(1)),
            Product::new(&[t(0, 3), t(1, -2)], Hz(1)),
        ] {
            for modelled in [false, true] {
                assert_eq!(
                    mechanism_count(&p, modelled),
                    mechanisms_of(&p, modelled).len()
                );
            }
        }
    }

    /// A power step of transmitter A leaves a product made in A's output stage where it
    /// was (the model levels it from B's coupled power alone), so a step of A that moved
    /// the level clears it, while the junction making the same product stays.
    #[test]
    fn a_step_of_the_transmitter_that_makes_a_product_clears_it() {
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let p = Product::new(&[t(0, 2), t(1, -1)], Hz(146_340_000));
        let mut junction = candidate(p, Mechanism::Junction, None);
        let mut in_a = candidate(p, Mechanism::TransmitterIm, Some(0));
        assert_eq!((junction.step_k(0), junction.step_k(1)), (2, 1));
        assert_eq!((in_a.step_k(0), in_a.step_k(1)), (0, 1));
        in_a.rank = 1;
        junction.rank = 2;
        let mut r = rank_candidates(Vec::new(), &[], &channel(), &RankInputs::default());
        r.candidates = vec![in_a, junction];
        // A rose 1.8 dB/dB (|k| = 2 fits), B 0.9 dB/dB (|k| = 1 fits)
        let found = [
            StepFinding {
                emitter: 0,
                fits: vec![2],
            },
            StepFinding {
                emitter: 1,
                fits: vec![1],
            },
        ];
        assert_eq!(r.demote_cleared(&found), 1);
        assert_eq!(r.candidates[0].mechanism, Mechanism::Junction);
        assert!(r.candidates[1].cleared_by_steps);
    }

    #[test]
    fn evidence_comes_before_order_and_level() {
        let e = vec![
            Emitter::new("A", Hz(150_000_000), Hz(0)),
            Emitter::new("B", Hz(153_600_000), Hz(0)),
            Emitter::new("C", Hz(151_800_000), Hz(0)),
        ];
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let third = Product::new(&[t(0, 2), t(1, -1)], Hz(146_400_000));
        let fifth = Product::new(&[t(0, 3), t(2, -2)], Hz(146_400_000));
        let model = LevelModel::default();
        let params = SearchParams {
            target: Hz(146_400_000),
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(0),
            max_order: 5,
            max_emitters: 3,
        };
        let plain = rank(vec![fifth, third], &e, &params, None, &model);
        assert_eq!(plain.candidates[0].product, third);
        assert!(!plain.by_evidence && plain.candidates[0].evidence.is_none());
        // Heard at 09:30 while B was off the air and A and C were on.
        let on = |i, h0, h1| {
            (
                i,
                Interval {
                    start: datetime!(2025-06-14 00:00 UTC).replace_hour(h0).unwrap(),
                    end: datetime!(2025-06-14 00:00 UTC).replace_hour(h1).unwrap(),
                },
            )
        };
        let schedule = Schedule::new(&e, &[on(0, 9, 11), on(1, 10, 11), on(2, 9, 11)]);
        let book = Logbook::new(
            schedule,
            vec![Observation {
                at: datetime!(2025-06-14 09:30 UTC),
                heard: true,
            }],
        );
        let r = rank_with_evidence(vec![third, fifth], &e, &params, None, &model, Some(&book));
        assert_eq!(r.candidates[0].product, fifth);
        assert_eq!(r.candidates[0].evidence.map(|v| v.support), Some(1));
        assert_eq!(r.candidates[1].evidence.map(|v| v.heard_off_air), Some(1));
        assert!(
            r.basis().starts_with("ranked first by on-air evidence"),
            "{}",
            r.basis()
        );
    }

    #[test]
    fn formula_reads_in_trade_notation() {
        let e = vec![
            Emitter::new("LMR2", Hz(159_340_000), Hz(0)),
            Emitter::new("PAGER", Hz(152_840_000), Hz(0)),
            Emitter::new("FM", Hz(98_700_000), Hz(0)),
        ];
        let p = Product::new(
            &[
                Term {
                    emitter: 0,
                    coefficient: -1,
                },
                Term {
                    emitter: 1,
                    coefficient: 2,
                },
            ],
            Hz(146_340_000),
        );
        assert_eq!(formula(&p, &e), "2·PAGER − LMR2");
        let q = Product::new(
            &[
                Term {
                    emitter: 0,
                    coefficient: 1,
                },
                Term {
                    emitter: 1,
                    coefficient: -1,
                },
                Term {
                    emitter: 2,
                    coefficient: 1,
                },
            ],
            Hz(105_200_000),
        );
        assert_eq!(formula(&q, &e), "FM + LMR2 − PAGER");
    }

    fn site_emitters() -> (Vec<Emitter>, GeoPoint) {
        let j = GeoPoint::new(45.0, -122.0);
        let mk = |id: &str, hz: i64, az: f64, erp_w: f64| {
            let mut e = Emitter::new(id, Hz(hz), Hz(16_000));
            e.erp_dbm = Some(crate::emitter::watts_to_dbm(erp_w));
            e.position = Some(crate::geo::destination(j, az, 300.0));
            e
        };
        (
            vec![
                mk("A", 150_000_000, 0.0, 100.0),
                mk("B", 153_600_000, 120.0, 100.0),
                mk("H", 73_200_000, 240.0, 100.0),
            ],
            j,
        )
    }

    fn channel() -> SearchParams {
        SearchParams {
            target: Hz(146_400_000),
            rx_bandwidth: Hz(12_500),
            tolerance: Hz(0),
            max_order: 3,
            max_emitters: 2,
        }
    }

    #[test]
    fn mechanisms_are_levelled_by_their_own_models() {
        let (e, j) = site_emitters();
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let im3 = Product::new(&[t(0, 2), t(1, -1)], Hz(146_400_000));
        let harmonic = Product::new(&[t(2, 2)], Hz(146_400_000));
        // IIP3 +10 dBm: the carriers at the input (about −13 dBm) stay below its
        // compression point (+0.4 dBm).
        let model = LevelModel {
            rx_iip3_dbm: Some(10.0),
            ..LevelModel::default()
        };
        let r = rank_candidates(
            vec![im3, harmonic],
            &e,
            &channel(),
            &RankInputs {
                placement: Placement::at(Some(j)),
                model,
                ..RankInputs::default()
            },
        );
        let find = |m: Mechanism, p: Product| {
            r.candidates
                .iter()
                .find(|c| c.mechanism == m && c.product == p)
                .copied()
                .unwrap()
        };
        // The harmonic at the ITU-R SM.329 limit is far stronger than any junction's.
        let tx = find(Mechanism::Transmitter, harmonic);
        let junction = find(Mechanism::Junction, harmonic);
        assert!(tx.rank < junction.rank);
        assert!((tx.level_dbm.unwrap() - (-13.0 + crate::level::DIPOLE_GAIN_DBI)).abs() < 1e-9);
        // The receiver's own IM3: 2·P_A + P_B − 2·IIP3 (Pozar), from the powers at its input.
        let rx = find(Mechanism::Receiver, im3);
        let input = |i: usize| {
            let em = &e[i];
            em.erp_dbm.unwrap() + crate::level::DIPOLE_GAIN_DBI
                - model.path_to_receiver_db(em.freq.0 as f64, em.position.unwrap(), None, j)
        };
        let want = 2.0 * input(0) + input(1) - 20.0;
        assert!((rx.level_dbm.unwrap() - want).abs() < 1e-9);
        assert!(r.unmodelled.is_empty());
        // IIP3 −10 dBm: compression at −19.6 dBm, below the carriers: the receiver is
        // overloaded, and no third-order level is given (Razavi).
        let overloaded = rank_candidates(
            vec![im3],
            &e,
            &channel(),
            &RankInputs {
                placement: Placement::at(Some(j)),
                model: LevelModel {
                    rx_iip3_dbm: Some(-10.0),
                    ..LevelModel::default()
                },
                ..RankInputs::default()
            },
        );
        let rx = overloaded
            .candidates
            .iter()
            .find(|c| c.mechanism == Mechanism::Receiver)
            .unwrap();
        assert_eq!(rx.missing, Some(Missing::ReceiverOverload));
        assert_eq!(rx.level_dbm, None);
        let plain = rank(vec![im3], &e, &channel(), Some(j), &LevelModel::default());
        assert_eq!(plain.unmodelled, vec![(Mechanism::Receiver, Missing::Iip3)]);
        assert!(plain
            .candidates
            .iter()
            .all(|c| c.mechanism != Mechanism::Receiver));
    }

    #[test]
    fn outlook_says_when_nothing_credible_lands() {
        let (mut e, j) = site_emitters();
        // 1 kW ERP 20 m from the junction: drives of about +25 dBm.
        for (x, az) in e.iter_mut().zip([0.0, 120.0, 240.0]) {
            x.erp_dbm = Some(60.0);
            x.position = Some(crate::geo::destination(j, az, 20.0));
        }
        let none = rank(vec![], &e, &channel(), Some(j), &LevelModel::default());
        assert_eq!(none.outlook, Outlook::NothingLands);
        assert_eq!(none.next_steps().len(), 3);
        let im3 = Product::new(
            &[
                Term {
                    emitter: 0,
                    coefficient: 2,
                },
                Term {
                    emitter: 1,
                    coefficient: -1,
                },
            ],
            Hz(146_400_000),
        );
        let inputs = |heard| RankInputs {
            placement: Placement::at(Some(j)),
            heard,
            ..RankInputs::default()
        };
        // Heard at +10 dBm on the receiver: no passive joint makes that.
        let loud = [HeardLevel {
            position: None,
            level_dbm: 10.0,
        }];
        let r = rank_candidates(vec![im3], &e, &channel(), &inputs(&loud));
        let c = r
            .candidates
            .iter()
            .find(|c| c.mechanism == Mechanism::Junction)
            .unwrap();
        assert!(c.implausible);
        // above the passive ceiling: no junction strength makes it
        assert_eq!(c.calibration.unwrap().required_im3_dbc, None);
        // The same product made in A's output stage stays credible: that is not a junction.
        assert_eq!(r.outlook, Outlook::Credible);
        let quiet = [HeardLevel {
            position: None,
            level_dbm: -110.0,
        }];
        let r = rank_candidates(vec![im3], &e, &channel(), &inputs(&quiet));
        assert!(r.candidates.iter().all(|c| !c.implausible));
        let c = r
            .candidates
            .iter()
            .find(|c| c.mechanism == Mechanism::Junction)
            .unwrap();
        let k = c.calibration.unwrap();
        assert_eq!(k.plausibility, Some(Plausibility::Plausible), "{k:?}");
        assert!(r.calibrated && r.next_steps().is_empty());
        let shift = r.candidates[0].calibration.unwrap().shift_db;
        let heard = r.candidates[0].breakdown.unwrap().in_channel_dbm + shift;
        assert!((heard + 110.0).abs() < 1e-9);
    }
}
