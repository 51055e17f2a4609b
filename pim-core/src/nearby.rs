//! Where the emitters are, for the pruned search ([`crate::top`]): [`SiteIndex`], what
//! every pruned query on a site shares (it lives below both the site and the search),
//! and a tree over the emitters' positions: the
//! emitters in falling order of a key that never rises with the distance from a point and
//! never falls with the ERP (an emitter's drive at a junction, or the bound on its own
//! products at a receiver), the key worked out only for the members of the nodes that can
//! still lead.
//!
//! Each node is a cap on the sphere of the ellipsoid's unit normals (a centre and an
//! angular radius), so the tree holds anywhere on the Earth, the poles and the 180th
//! meridian included: the angle from a point's normal to any member's is at least the
//! angle to the centre less the radius, and [`ground_for_angle`] turns an angle into a
//! ground distance that bounds the geodesic from below.
//!
//! Written here rather than taken from a spatial-index crate: the order wanted rises with
//! the ERP as well as falling with the distance, so each node carries its strongest ERP
//! and highest frequency; the nearest-neighbour iterators of such crates (rstar's among
//! them) order by distance alone.

use std::cmp::Ordering;
use std::collections::BinaryHeap;

use crate::emitter::{Carrier, Emitter};
use crate::geo::GeoPoint;

/// What every pruned query on a site shares (see [`crate::top`]): it lives here, below
/// both [`crate::site`] and [`crate::top`], so that neither needs the other for it.
#[derive(Clone, Debug, Default)]
pub(crate) struct SiteIndex {
    /// The unit normal of the WGS 84 ellipsoid at each emitter's position (`None` without a
    /// position): the angle between two normals bounds the geodesic between the points
    /// from below ([`SiteIndex::ground_at_least_m`]).
    pub(crate) normals: Vec<Option<[f64; 3]>>,
    /// Emitter indices by carrier frequency, then index.
    pub(crate) by_freq: Vec<usize>,
    /// The frequencies in that order, Hz.
    pub(crate) freq_sorted: Vec<i64>,
    /// Each emitter's place in that order.
    pub(crate) place: Vec<usize>,
    /// The widest occupied bandwidth, Hz.
    pub(crate) max_bw: i64,
    /// The strongest ERP of an emitter with a position, dBm (−∞ without one).
    pub(crate) max_erp_dbm: f64,
    /// The emitters with a position, in a tree of where they are.
    pub(crate) tree: EmitterTree,
    /// The emitters without a position, by index.
    pub(crate) unplaced: Vec<usize>,
    /// How many emitters lack an ERP or a position (their products cannot be levelled).
    pub(crate) unlevelled: usize,
    /// Whether each emitter has both (its drive at a junction can be bounded).
    pub(crate) levelled: Vec<bool>,
    /// In the frequency order of `by_freq`, what a search by frequency reads of each
    /// emitter side by side (no indirection per partner looked at).
    pub(crate) sorted: Vec<Sorted>,
}

/// An emitter as a search by frequency reads it, in the frequency order.
#[derive(Clone, Copy, Debug, Default)]
pub(crate) struct Sorted {
    /// The unit normal at its position ([`SiteIndex::normals`]); zeros without one.
    pub(crate) normal: [f64; 3],
    /// Its ERP, dBm, where it has a position and an ERP; −∞ otherwise.
    pub(crate) erp_dbm: f64,
    /// Its occupied bandwidth, Hz.
    pub(crate) bandwidth_hz: i64,
}

/// The smallest radius of curvature of the WGS 84 ellipsoid (the meridian's at the
/// equator, b²/a), metres.
pub(crate) const MIN_CURVATURE_RADIUS_M: f64 =
    6_378_137.0 * (1.0 - 1.0 / 298.257_223_563) * (1.0 - 1.0 / 298.257_223_563);

impl SiteIndex {
    pub(crate) fn new(emitters: &[Emitter], carriers: &[Carrier]) -> SiteIndex {
        let mut by_freq: Vec<usize> = (0..emitters.len()).collect();
        by_freq.sort_by_key(|&i| (carriers[i].freq, i));
        let mut place = vec![0; by_freq.len()];
        for (pos, &i) in by_freq.iter().enumerate() {
            place[i] = pos;
        }
        let normals: Vec<Option<[f64; 3]>> =
            emitters.iter().map(|e| e.position.map(normal)).collect();
        let erp: Vec<Option<f64>> = emitters.iter().map(|e| e.erp_dbm).collect();
        let freq: Vec<i64> = carriers.iter().map(|c| c.freq.0).collect();
        let sorted = by_freq
            .iter()
            .map(|&i| Sorted {
                normal: normals[i].unwrap_or([0.0; 3]),
                erp_dbm: match (normals[i], erp[i]) {
                    (Some(_), Some(e)) => e,
                    _ => f64::NEG_INFINITY,
                },
                bandwidth_hz: carriers[i].bandwidth.0,
            })
            .collect();
        SiteIndex {
            sorted,
            freq_sorted: by_freq.iter().map(|&i| carriers[i].freq.0).collect(),
            place,
            max_bw: carriers.iter().map(|c| c.bandwidth.0).max().unwrap_or(0),
            tree: EmitterTree::new(&normals, &erp, &freq),
            unplaced: (0..emitters.len())
                .filter(|&i| normals[i].is_none())
                .collect(),
            unlevelled: emitters
                .iter()
                .filter(|e| e.position.is_none() || e.erp_dbm.is_none())
                .count(),
            levelled: emitters
                .iter()
                .map(|e| e.position.is_some() && e.erp_dbm.is_some())
                .collect(),
            normals,
            by_freq,
            max_erp_dbm: emitters
                .iter()
                .filter(|e| e.position.is_some())
                .filter_map(|e| e.erp_dbm)
                .fold(f64::NEG_INFINITY, f64::max),
        }
    }

    /// A lower bound on the geodesic distance (m) between emitter `i` and the point whose
    /// normal is `at`: along any path on the ellipsoid the normal turns at most by the
    /// path's length over the smallest radius of curvature, so the geodesic is at least
    /// that radius times the angle between the end normals.
    pub(crate) fn ground_at_least_m(&self, i: usize, at: [f64; 3]) -> Option<f64> {
        let n = self.normals[i]?;
        Some(ground_for_angle(angle_between(&n, &at)))
    }
}

/// The unit normal of the WGS 84 ellipsoid at `p` (geodetic latitude and longitude).
pub(crate) fn normal(p: GeoPoint) -> [f64; 3] {
    let (lat, lon) = (p.lat_deg.to_radians(), p.lon_deg.to_radians());
    [lat.cos() * lon.cos(), lat.cos() * lon.sin(), lat.sin()]
}

/// The most emitters a leaf holds: opening a leaf works out every member's key, so small
/// leaves waste few (on the regional study 4 came out ahead of 8, 16 and 32, within the
/// machine's noise of about a tenth).
const LEAF: usize = 4;

/// Slack on every angle, radians (about 6 mm on the ground): rounding never puts a member
/// outside its node's cap.
const ANGLE_SLACK: f64 = 1e-9;

/// The emitters with a position, in caps of their normals (module docs).
#[derive(Clone, Debug, Default)]
pub(crate) struct EmitterTree {
    nodes: Vec<Node>,
    /// Emitter indices; each node holds a run of them.
    members: Vec<usize>,
}

#[derive(Clone, Debug)]
struct Node {
    /// The cap's centre, a unit vector.
    center: [f64; 3],
    /// The largest angle from the centre to a member's normal, radians.
    radius: f64,
    /// The strongest ERP among the members, dBm (−∞ where none has one).
    max_erp_dbm: f64,
    /// The highest carrier frequency among the members, Hz.
    max_freq_hz: i64,
    /// The members: `members[start..end]`.
    start: u32,
    end: u32,
    /// The two halves, or `None` for a leaf.
    children: Option<(u32, u32)>,
}

/// What a node offers a bound on its members' keys: every member lies at least
/// `ground_m` from the point along the ground (and [`ground_for_chord`] gives no less), none has an ERP above `max_erp_dbm` (−∞
/// where none has one) or a carrier above `max_freq_hz`.
pub(crate) struct Reach {
    pub(crate) ground_m: f64,
    pub(crate) max_erp_dbm: f64,
    pub(crate) max_freq_hz: i64,
}

/// The angle between two unit vectors, radians, from their chord (accurate at small
/// angles, unlike the arc cosine of the dot product).
pub(crate) fn angle_between(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    let chord = ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt();
    2.0 * (chord / 2.0).min(1.0).asin()
}

/// A lower bound on the geodesic between two points whose normals are `angle` radians
/// apart, metres: along any path on the ellipsoid the normal turns at most by the path's
/// length over the smallest radius of curvature.
pub(crate) fn ground_for_angle(angle: f64) -> f64 {
    (MIN_CURVATURE_RADIUS_M * angle * (1.0 - 1e-9) - 1e-6).max(0.0)
}

/// [`ground_for_angle`] from the chord between the normals (never longer than the angle):
/// a little lower, without an arc sine.
pub(crate) fn ground_for_chord(a: &[f64; 3], b: &[f64; 3]) -> f64 {
    let chord = ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt();
    ground_for_angle(chord)
}

impl EmitterTree {
    /// The tree of the emitters with a normal (a position), with each one's ERP (dBm,
    /// where known) and carrier frequency (Hz).
    pub(crate) fn new(normals: &[Option<[f64; 3]>], erp_dbm: &[Option<f64>], freq: &[i64]) -> Self {
        let mut tree = EmitterTree {
            nodes: Vec::new(),
            members: (0..normals.len())
                .filter(|&i| normals[i].is_some())
                .collect(),
        };
        if !tree.members.is_empty() {
            let len = tree.members.len();
            tree.build(0, len, normals, erp_dbm, freq);
        }
        tree
    }

    /// Builds the node of `members[start..end]` and those below it; returns its number.
    fn build(
        &mut self,
        start: usize,
        end: usize,
        normals: &[Option<[f64; 3]>],
        erp_dbm: &[Option<f64>],
        freq: &[i64],
    ) -> u32 {
        let normal = |i: usize| normals[i].unwrap_or([0.0, 0.0, 1.0]);
        let run = &mut self.members[start..end];
        let mut sum = [0.0; 3];
        let (mut lo, mut hi) = ([f64::INFINITY; 3], [f64::NEG_INFINITY; 3]);
        for &i in run.iter() {
            let n = normal(i);
            for a in 0..3 {
                sum[a] += n[a];
                lo[a] = lo[a].min(n[a]);
                hi[a] = hi[a].max(n[a]);
            }
        }
        let norm = (sum[0] * sum[0] + sum[1] * sum[1] + sum[2] * sum[2]).sqrt();
        let center = if norm > 1e-9 {
            [sum[0] / norm, sum[1] / norm, sum[2] / norm]
        } else {
            normal(run[0])
        };
        let radius = run
            .iter()
            .map(|&i| angle_between(&center, &normal(i)))
            .fold(0.0, f64::max)
            + ANGLE_SLACK;
        let max_erp_dbm = run
            .iter()
            .filter_map(|&i| erp_dbm[i])
            .fold(f64::NEG_INFINITY, f64::max);
        let max_freq_hz = run.iter().map(|&i| freq[i]).max().unwrap_or(0);
        let id = self.nodes.len() as u32;
        self.nodes.push(Node {
            center,
            radius,
            max_erp_dbm,
            max_freq_hz,
            start: start as u32,
            end: end as u32,
            children: None,
        });
        if end - start > LEAF {
            // split at the median of the widest coordinate
            let axis = (0..3)
                .max_by(|&a, &b| (hi[a] - lo[a]).total_cmp(&(hi[b] - lo[b])))
                .unwrap_or(0);
            let mid = (end - start) / 2;
            run.select_nth_unstable_by(mid, |&a, &b| {
                normal(a)[axis].total_cmp(&normal(b)[axis]).then(a.cmp(&b))
            });
            let left = self.build(start, start + mid, normals, erp_dbm, freq);
            let right = self.build(start + mid, end, normals, erp_dbm, freq);
            self.nodes[id as usize].children = Some((left, right));
        }
        id
    }

    /// The emitters of the tree by falling `key` from the point whose normal is `at`,
    /// ties by index; `bound` must bound the key of every member of a node from above
    /// (given the node's [`Reach`]), and an emitter whose key is `None` is left out.
    pub(crate) fn best_first<K, B>(&self, at: [f64; 3], key: K, bound: B) -> BestFirst<'_, K, B>
    where
        K: Fn(usize) -> Option<f64>,
        B: Fn(&Reach) -> f64,
    {
        let mut walk = BestFirst {
            tree: self,
            at,
            key,
            bound,
            heap: BinaryHeap::new(),
        };
        if !self.nodes.is_empty() {
            walk.push_node(0);
        }
        walk
    }
}

/// The emitters of an [`EmitterTree`] by falling key: each item is `(key, emitter)`.
pub(crate) struct BestFirst<'t, K, B> {
    tree: &'t EmitterTree,
    at: [f64; 3],
    key: K,
    bound: B,
    heap: BinaryHeap<Entry>,
}

#[derive(Clone, Copy, Debug)]
enum Item {
    Node(u32),
    Emitter(usize),
}

/// A heap entry: the greatest key first; at a tie a node before an emitter (it may hold
/// one of the same key and a lower index), then the lower index.
#[derive(Clone, Copy, Debug)]
struct Entry {
    key: f64,
    item: Item,
}

impl Ord for Entry {
    fn cmp(&self, other: &Self) -> Ordering {
        self.key
            .total_cmp(&other.key)
            .then(match (self.item, other.item) {
                (Item::Node(a), Item::Node(b)) => b.cmp(&a),
                (Item::Node(_), Item::Emitter(_)) => Ordering::Greater,
                (Item::Emitter(_), Item::Node(_)) => Ordering::Less,
                (Item::Emitter(a), Item::Emitter(b)) => b.cmp(&a),
            })
    }
}

impl PartialOrd for Entry {
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

impl PartialEq for Entry {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Ordering::Equal
    }
}

impl Eq for Entry {}

/// A key that cannot be ordered leads (nothing is pruned past it).
fn ordered(key: f64) -> f64 {
    if key.is_nan() {
        f64::INFINITY
    } else {
        key
    }
}

impl<K, B> BestFirst<'_, K, B>
where
    K: Fn(usize) -> Option<f64>,
    B: Fn(&Reach) -> f64,
{
    fn push_node(&mut self, id: u32) {
        let node = &self.tree.nodes[id as usize];
        let gap = (angle_between(&self.at, &node.center) - node.radius - ANGLE_SLACK).max(0.0);
        let reach = Reach {
            // the chord of the gap, so as to bound ground_for_chord too
            ground_m: ground_for_angle(2.0 * (gap / 2.0).sin()),
            max_erp_dbm: node.max_erp_dbm,
            max_freq_hz: node.max_freq_hz,
        };
        self.heap.push(Entry {
            key: ordered((self.bound)(&reach)),
            item: Item::Node(id),
        });
    }
}

impl<K, B> Iterator for BestFirst<'_, K, B>
where
    K: Fn(usize) -> Option<f64>,
    B: Fn(&Reach) -> f64,
{
    type Item = (f64, usize);

    fn next(&mut self) -> Option<(f64, usize)> {
        loop {
            let entry = self.heap.pop()?;
            match entry.item {
                Item::Emitter(i) => return Some((entry.key, i)),
                Item::Node(id) => {
                    let node = &self.tree.nodes[id as usize];
                    match node.children {
                        Some((left, right)) => {
                            self.push_node(left);
                            self.push_node(right);
                        }
                        None => {
                            let (start, end) = (node.start as usize, node.end as usize);
                            for &i in &self.tree.members[start..end] {
                                if let Some(k) = (self.key)(i) {
                                    self.heap.push(Entry {
                                        key: ordered(k),
                                        item: Item::Emitter(i),
                                    });
                                }
                            }
                        }
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geo::{destination, GeoPoint};

    /// Normals, ERPs (dBm) and frequencies (Hz) of a scatter of emitters.
    type Scatter = (Vec<Option<[f64; 3]>>, Vec<Option<f64>>, Vec<i64>);

    /// Points round the world (both poles, both sides of the 180th meridian) and a
    /// cluster, some without a position or an ERP.
    fn scatter() -> Scatter {
        let mut points = vec![
            GeoPoint::new(89.9, 10.0),
            GeoPoint::new(-89.9, -170.0),
            GeoPoint::new(0.0, 179.99),
            GeoPoint::new(0.0, -179.99),
        ];
        let mut s = 7u64;
        let mut unit = || {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            (s >> 11) as f64 / (1u64 << 53) as f64
        };
        for _ in 0..700 {
            points.push(GeoPoint::new(170.0 * unit() - 85.0, 360.0 * unit() - 180.0));
        }
        let hub = GeoPoint::new(45.0, -122.5);
        for _ in 0..300 {
            points.push(destination(hub, 360.0 * unit(), 20_000.0 * unit()));
        }
        let normals: Vec<Option<[f64; 3]>> = points
            .iter()
            .enumerate()
            .map(|(i, p)| (i % 17 != 3).then(|| normal(*p)))
            .collect();
        let erp = (0..points.len())
            .map(|i| (i % 11 != 5).then_some(30.0 + (i % 23) as f64))
            .collect();
        let freq = (0..points.len() as i64)
            .map(|i| 100_000_000 + i * 1_000)
            .collect();
        (normals, erp, freq)
    }

    #[test]
    fn best_first_gives_every_keyed_emitter_once_in_falling_key_order() {
        let (normals, erp, freq) = scatter();
        let tree = EmitterTree::new(&normals, &erp, &freq);
        for at in [
            GeoPoint::new(45.01, -122.49),
            GeoPoint::new(-89.0, 0.0),
            GeoPoint::new(0.0, 180.0),
        ] {
            let at = normal(at);
            // the ERP less 20·log10 of the least ground distance, as a drive falls
            let key = |i: usize| {
                let n = normals[i]?;
                let g = ground_for_angle(angle_between(&at, &n));
                Some(erp[i]? - 20.0 * g.max(1.0).log10())
            };
            let bound = |r: &Reach| r.max_erp_dbm - 20.0 * r.ground_m.max(1.0).log10();
            let walked: Vec<(f64, usize)> = tree.best_first(at, key, bound).collect();
            let mut expected: Vec<(f64, usize)> = (0..normals.len())
                .filter_map(|i| key(i).map(|k| (k, i)))
                .collect();
            expected.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            assert_eq!(walked, expected);
        }
    }

    #[test]
    fn caps_hold_their_members() {
        let (normals, erp, freq) = scatter();
        let tree = EmitterTree::new(&normals, &erp, &freq);
        assert!(tree.nodes.len() > 30);
        for node in &tree.nodes {
            for &i in &tree.members[node.start as usize..node.end as usize] {
                let n = normals[i].unwrap();
                assert!(angle_between(&node.center, &n) <= node.radius);
                assert!(erp[i].is_none_or(|e| e <= node.max_erp_dbm));
                assert!(freq[i] <= node.max_freq_hz);
            }
        }
    }
}
