//! What a maintenance ticket rests on, beyond the search and the fix: the site's
//! structures and emitters in or near the ellipse, how the ranking moves when the
//! junction is put at the fix rather than at the receiver, what to inspect on each
//! kind of structure (common practice of site maintenance), and which candidate is
//! credible enough to ask a licensee for a power step.

use serde::Serialize;

use crate::emitter::Emitter;
use crate::fix::Fix;
use crate::geo::{distance_and_azimuth, GeoPoint, LocalFrame};
use crate::intermod::{Product, SearchParams};
use crate::level::Mechanism;
use crate::rank::{Candidate, Outlook, Ranking};

/// A structure on the site: a tower, a fence, a shed, a guy anchor.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Structure {
    /// The structure's name in its file.
    pub id: String,
    /// Where it stands (WGS84).
    pub position: GeoPoint,
    /// What it is (tower, fence, shed, guy anchor …), as the file says.
    pub kind: Option<String>,
    /// Free text from the file.
    pub note: Option<String>,
    /// Its line in the file (the header is line 1).
    pub line: u64,
}

/// Whether something is a structure or an emitter's antenna.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ItemKind {
    /// A listed site structure.
    Structure,
    /// A listed emitter's antenna.
    Emitter,
}

/// Something on the ground in or near the ellipse.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct NearbyItem {
    /// Its id in its file.
    pub id: String,
    /// Whether it is a structure or an antenna.
    pub item: ItemKind,
    /// What it is, as its file says.
    pub kind: Option<String>,
    /// Free text from its file.
    pub note: Option<String>,
    /// Where it stands (WGS84).
    pub position: GeoPoint,
    /// Its distance from the fix, in metres.
    pub distance_m: f64,
    /// Bearing from the fix to the item.
    pub bearing_from_fix_deg: f64,
    /// The factor by which the ellipse must grow to reach the item (≤ 1: inside).
    pub ellipse_scale: f64,
}

impl NearbyItem {
    /// Whether it lies inside the claimed region.
    pub fn inside(&self) -> bool {
        self.ellipse_scale <= 1.0
    }
}

/// Items no further than twice the ellipse, or within `margin_m` of its major axis's
/// reach, nearest (in ellipse terms) first.
pub fn nearby(
    fix: &Fix,
    structures: &[Structure],
    emitters: &[Emitter],
    margin_m: f64,
) -> Vec<NearbyItem> {
    let frame = LocalFrame::new(fix.position);
    let e = &fix.ellipse;
    let t = e.orientation_deg.to_radians();
    let mut items = Vec::new();
    let candidates = structures
        .iter()
        .map(|s| {
            (
                s.id.clone(),
                ItemKind::Structure,
                s.kind.clone(),
                s.note.clone(),
                Some(s.position),
            )
        })
        .chain(emitters.iter().map(|em| {
            (
                em.id.clone(),
                ItemKind::Emitter,
                em.kind.clone(),
                em.note.clone(),
                em.position,
            )
        }));
    for (id, item, kind, note, position) in candidates {
        let Some(position) = position else { continue };
        let (x, y) = frame.to_local(position);
        let u = x * t.sin() + y * t.cos();
        let v = x * t.cos() - y * t.sin();
        let scale = ((u / e.semi_major_m.max(1e-9)).powi(2)
            + (v / e.semi_minor_m.max(1e-9)).powi(2))
        .sqrt();
        let (distance_m, az) = distance_and_azimuth(fix.position, position);
        if scale <= 2.0 || distance_m <= e.semi_major_m + margin_m {
            items.push(NearbyItem {
                id,
                item,
                kind,
                note,
                position,
                distance_m,
                bearing_from_fix_deg: az,
                ellipse_scale: scale,
            });
        }
    }
    items.sort_by(|a, b| {
        a.ellipse_scale
            .total_cmp(&b.ellipse_scale)
            .then(a.id.cmp(&b.id))
    });
    items
}

/// A candidate's rank with the junction at the fix, and where it stood with the junction
/// at the receiver.
#[derive(Clone, Debug, PartialEq)]
pub struct RankChange {
    /// The product.
    pub product: Product,
    /// Its rank with the junction at the fix.
    pub rank_at_fix: usize,
    /// Its rank with the junction at the receiver, when it was ranked there.
    pub rank_at_receiver: Option<usize>,
    /// Its level with the junction at the fix, dBm.
    pub level_at_fix_dbm: Option<f64>,
    /// Its level with the junction at the receiver, dBm.
    pub level_at_receiver_dbm: Option<f64>,
}

/// The first `top` candidates at the fix, each with its rank at the receiver.
pub fn rank_changes(at_fix: &Ranking, at_receiver: &Ranking, top: usize) -> Vec<RankChange> {
    at_fix
        .candidates
        .iter()
        .take(top)
        .map(|c| {
            let before = at_receiver
                .candidates
                .iter()
                .find(|r| r.product == c.product && r.mechanism == c.mechanism);
            RankChange {
                product: c.product,
                rank_at_fix: c.rank,
                rank_at_receiver: before.map(|b| b.rank),
                level_at_fix_dbm: c.level_dbm,
                level_at_receiver_dbm: before.and_then(|b| b.level_dbm),
            }
        })
        .collect()
}

/// Why a candidate is not put to a licensee for a power step.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum PowerStepDoubt {
    /// Calibrated to the level heard, it needs a junction no passive contact makes.
    Implausible,
    /// It is made away from the fix, where the bearings do not point.
    AwayFromFix,
    /// It was heard while one of its emitters was off the air.
    HeardOffAir,
    /// A product above the third order whose centre lies outside the receive channel:
    /// only the skirt of its spectrum reaches the channel.
    FarOffCentre,
    /// It is made inside the receiver: the attenuator test, not a power step, settles it.
    InReceiver,
}

/// Why `c` should not be put to a licensee for a power step, or `None` when it is
/// credible: not implausible once calibrated, made at the fix, never heard with one of
/// its emitters off the air, not made in the receiver, and either of the third order or
/// centred in the channel (|offset| ≤ B_rx/2 + tolerance). A high-order product of wide
/// carriers (a broadcaster's seventh-order product hundreds of kHz off centre) lands on
/// the channel only by its skirt, and a power step would not tell it from noise.
pub fn power_step_doubt(c: &Candidate, params: &SearchParams) -> Option<PowerStepDoubt> {
    let half_channel = params.rx_bandwidth.0 / 2 + params.tolerance.0;
    if c.implausible {
        Some(PowerStepDoubt::Implausible)
    } else if c.away_from_fix {
        Some(PowerStepDoubt::AwayFromFix)
    } else if c.evidence.is_some_and(|e| e.heard_off_air > 0) {
        Some(PowerStepDoubt::HeardOffAir)
    } else if c.mechanism == Mechanism::Receiver {
        Some(PowerStepDoubt::InReceiver)
    } else if c.product.order() > 3 && c.product.offset(params.target).0.abs() > half_channel {
        Some(PowerStepDoubt::FarOffCentre)
    } else {
        None
    }
}

/// The first candidate credible enough for a power step ([`power_step_doubt`]) among the
/// first `within` of the ranking; none when nothing credible lands.
pub fn power_step_candidate<'a>(
    ranking: &'a Ranking,
    params: &SearchParams,
    within: usize,
) -> Option<&'a Candidate> {
    if ranking.outlook != Outlook::Credible {
        return None;
    }
    ranking
        .candidates
        .iter()
        .take(within)
        .find(|c| power_step_doubt(c, params).is_none())
}

/// What to look at on a kind of structure when hunting a corroded or loose junction
/// (common practice of site maintenance).
pub fn inspection_points(kind: Option<&str>) -> &'static [&'static str] {
    let k = kind.unwrap_or("").to_ascii_lowercase();
    if k.contains("guy") {
        &[
            "guy-wire cable clamps and thimbles: rust between the wires, loose nuts",
            "turnbuckles and shackles: corrosion at the threads and pins",
            "the guy's anchor rod and any bonding jumper",
        ]
    } else if k.contains("fence") {
        &[
            "chain-link ties and tension bands: rusty wire-on-wire contacts",
            "gate hinges and latches",
            "barbed wire on the top rail",
        ]
    } else if k.contains("shed") || k.contains("roof") || k.contains("building") {
        &[
            "roof and wall panel fasteners, overlapping corrugated sheets",
            "gutters, downpipes and their brackets",
            "loose flashing and vent caps",
        ]
    } else if k.contains("tower") || k.contains("mast") {
        &[
            "bolted bracing and leg joints: rust streaks, loose bolts",
            "antenna mounts and side-arm clamps",
            "feedline hangers, connectors and weatherproofing; ground kits and straps",
            "the ice bridge and its bonding",
        ]
    } else {
        &["metal-to-metal joints that are loose or corroded: bolts, clamps, straps"]
    }
}

/// An emitter's antenna within this many metres of a structure is taken as mounted on
/// it (our choice: the spread of a site survey's positions).
pub const MOUNTED_WITHIN_M: f64 = 5.0;
/// The reach of a structure whose height is not known, metres (our choice: a margin
/// around a hut, a fence or an anchor, not a fall zone).
pub const REACH_WITHOUT_HEIGHT_M: f64 = 10.0;

/// A structure a spot lies within reach of.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct InReach {
    /// The structure's id.
    pub id: String,
    /// What it is, as its file says.
    pub kind: Option<String>,
    /// From the spot to the structure, metres.
    pub distance_m: f64,
    /// How far the structure's reach goes, metres.
    pub reach_m: f64,
    /// Where the reach comes from.
    pub rule: ReachRule,
}

/// What a structure's reach rests on.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ReachRule {
    /// Its height: the highest antenna mounted on it (a structure is at least as tall
    /// as what it carries), or its guy radius (the furthest guy anchor listed within
    /// that height) when that is further.
    Height,
    /// No height known: [`REACH_WITHOUT_HEIGHT_M`].
    Margin,
}

/// The structures `spot` lies within reach of, nearest first. A structure's reach is
/// its height, taken as the highest antenna mounted on it (emitters within
/// [`MOUNTED_WITHIN_M`]), or its guy radius (the furthest structure whose kind names a
/// guy, within that height) when further; a structure of unknown height reaches
/// [`REACH_WITHOUT_HEIGHT_M`]. A tower's fall zone is its height (common practice).
pub fn structures_in_reach(
    spot: GeoPoint,
    structures: &[Structure],
    emitters: &[Emitter],
) -> Vec<InReach> {
    let mut out: Vec<InReach> = structures
        .iter()
        .filter_map(|s| {
            let height = emitters
                .iter()
                .filter_map(|e| Some((e.position?, e.height_m?)))
                .filter(|(p, h)| {
                    h.is_finite()
                        && *h > 0.0
                        && distance_and_azimuth(*p, s.position).0 <= MOUNTED_WITHIN_M
                })
                .map(|(_, h)| h)
                .fold(None, |m: Option<f64>, h| Some(m.map_or(h, |m| m.max(h))));
            let (reach_m, rule) = match height {
                Some(h) => {
                    let guys = structures
                        .iter()
                        .filter(|g| {
                            g.kind
                                .as_deref()
                                .is_some_and(|k| k.to_ascii_lowercase().contains("guy"))
                        })
                        .map(|g| distance_and_azimuth(g.position, s.position).0)
                        .filter(|d| *d <= h)
                        .fold(0.0, f64::max);
                    (h.max(guys), ReachRule::Height)
                }
                None => (REACH_WITHOUT_HEIGHT_M, ReachRule::Margin),
            };
            let distance_m = distance_and_azimuth(spot, s.position).0;
            (distance_m <= reach_m).then(|| InReach {
                id: s.id.clone(),
                kind: s.kind.clone(),
                distance_m,
                reach_m,
                rule,
            })
        })
        .collect();
    out.sort_by(|a, b| a.distance_m.total_cmp(&b.distance_m));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn guy_anchors_get_guy_points() {
        assert!(inspection_points(Some("guy anchor"))[0].contains("clamps"));
        assert!(inspection_points(Some("Guyed tower"))[0].contains("clamps"));
        assert!(inspection_points(None)[0].contains("metal-to-metal"));
    }

    /// The case: a seventh-order product 435 kHz off the centre of a 12.5 kHz
    /// channel is not put to a broadcaster for a power step; a centred third-order one is.
    #[test]
    fn only_credible_candidates_get_a_power_step() {
        use crate::freq::Hz;
        use crate::intermod::Term;
        let params = SearchParams {
            target: Hz(146_340_000),
            rx_bandwidth: Hz(12_500),
            ..SearchParams::default()
        };
        let t = |emitter, coefficient| Term {
            emitter,
            coefficient,
        };
        let mk = |product| Candidate {
            rank: 1,
            product,
            mechanism: Mechanism::Junction,
            formed_in: None,
            level_dbm: Some(-100.0),
            breakdown: None,
            missing: None,
            relative_db: Some(0.0),
            calibration: None,
            implausible: false,
            away_from_fix: false,
            cleared_by_steps: false,
            evidence: None,
        };
        let seventh = mk(Product::new(&[t(0, 4), t(1, -3)], Hz(146_775_000)));
        assert_eq!(
            power_step_doubt(&seventh, &params),
            Some(PowerStepDoubt::FarOffCentre)
        );
        let third = mk(Product::new(&[t(0, 2), t(1, -1)], Hz(146_341_000)));
        assert_eq!(power_step_doubt(&third, &params), None);
        let implausible = Candidate {
            implausible: true,
            ..third
        };
        assert_eq!(
            power_step_doubt(&implausible, &params),
            Some(PowerStepDoubt::Implausible)
        );
    }

    /// A tower carrying an antenna at 46 m reaches 46 m; a hut of unknown height 10 m.
    #[test]
    fn a_spot_within_a_structures_reach() {
        let tower = GeoPoint::new(45.104620, -122.414033);
        let structure = |id: &str, p: GeoPoint, kind: &str| Structure {
            id: id.into(),
            position: p,
            kind: Some(kind.into()),
            note: None,
            line: 2,
        };
        let hut = GeoPoint::new(45.104548, -122.414033);
        let structures = [
            structure("TWR", tower, "guyed tower"),
            structure("HUT", hut, "equipment hut"),
        ];
        let mut e = Emitter::new("R", crate::freq::Hz(146_940_000), crate::freq::Hz(16_000));
        e.position = Some(tower);
        e.height_m = Some(46.0);
        // 40 m north of the tower: within its 46 m, 48 m from the hut
        let spot = GeoPoint::new(45.104620 + 40.0 / 111_140.0, -122.414033);
        let near = structures_in_reach(spot, &structures, &[e.clone()]);
        assert_eq!(near.len(), 1, "{near:?}");
        assert_eq!(
            (near[0].id.as_str(), near[0].reach_m, near[0].rule),
            ("TWR", 46.0, ReachRule::Height)
        );
        // 60 m away: out of reach; beside the hut: the hut's margin and the tower
        let far = GeoPoint::new(45.104620 + 60.0 / 111_140.0, -122.414033);
        assert!(structures_in_reach(far, &structures, &[e.clone()]).is_empty());
        let ids: Vec<String> = structures_in_reach(hut, &structures, &[e])
            .into_iter()
            .map(|r| r.id)
            .collect();
        assert_eq!(ids, ["HUT", "TWR"]);
    }
}
