//! Upper bounds on a product's level from its order, its form and its emitters' drives
//! (module docs of [`super`], "Exact bound").

use super::*;

/// An upper bound on the in-channel level (dBm) of any junction or receiver candidate
/// whose product involves each emitter and none of the `strong` ones, from its own drive
/// with every partner at the strongest drive of the others (module docs, "Exact bound"),
/// and for the receiver's own products from the strongest carrier at the receiver; −∞
/// where none can be levelled, +∞ where no bound holds. A transmitter's own products are
/// listed apart.
pub(super) fn emitter_bounds(
    ranker: &Ranker,
    query: &Query,
    emitters: &[Emitter],
    strong: &[bool],
    drive: &[Option<f64>],
    ground: &[Option<f64>],
) -> Vec<f64> {
    let n = emitters.len();
    let r = &ranker.shell;
    let (Some(_), Some(_)) = (r.receiver, r.junction) else {
        return vec![f64::NEG_INFINITY; n];
    };
    let m = &r.model;
    let params = &query.params;
    if m.drive_exponent < 0.0 || !m.drive_exponent.is_finite() {
        return vec![f64::INFINITY; n];
    }
    let max_order = params.max_order.min(MAX_ORDER);
    let path_floor = |slant: f64, f: f64| {
        free_space_loss_db(f, slant.max(wavelength_m(f) / (2.0 * std::f64::consts::PI)))
            - m.rx_antenna_gain_dbi
    };
    let form_max = form_max(params);
    // the receiver is at the junction: a lower bound on the distance to it
    let slant: Vec<Option<f64>> = emitters
        .iter()
        .zip(ground)
        .map(|(e, g)| {
            g.map(|g| {
                slant_distance_m(
                    g,
                    e.height_m.unwrap_or(m.junction_height_m),
                    m.junction_height_m,
                )
            })
        })
        .collect();
    let erp_at = |i: usize| emitters[i].position.and(emitters[i].erp_dbm);
    let fold_max = |it: &mut dyn Iterator<Item = f64>| it.fold(f64::NEG_INFINITY, f64::max);
    // the strong emitters' products are searched whole, apart: the partners of every
    // other product are among the rest
    let p_max = fold_max(
        &mut drive
            .iter()
            .zip(strong)
            .filter(|(_, s)| !**s)
            .filter_map(|(d, _)| *d),
    );
    let a = m.drive_exponent;
    // Junction: the path from the junction to a receiver at it is the λ/2π floor, 6.02 dB.
    let junction_path = 20.0 * 2f64.log10() - m.rx_antenna_gain_dbi;
    let junction_top = fold_max(&mut (2..=max_order).map(|order| {
        let n = order as f64;
        m.im3_dbm + form_max[order as usize]
            - m.order_step_db * (n - 3.0)
            - if order % 2 == 0 {
                m.even_order_penalty_db
            } else {
                0.0
            }
            + a * n * (p_max - m.reference_tone_dbm)
    })) - junction_path;
    let rx_input: Vec<Option<f64>> = (0..n)
        .map(|i| {
            let (erp, s) = (erp_at(i)?, slant[i]?);
            Some(erp + DIPOLE_GAIN_DBI - path_floor(s, emitters[i].freq.0 as f64))
        })
        .collect();
    let rx_max = fold_max(
        &mut rx_input
            .iter()
            .zip(strong)
            .filter(|(_, s)| !**s)
            .filter_map(|(i, _)| *i),
    );
    let receiver = match m.rx_iip3_dbm {
        Some(iip3) if ranker.receiver_modelled() && max_order >= 3 => {
            Some(2.0 * rx_max - 2.0 * iip3 + form_max[3])
        }
        _ => None,
    };
    (0..n)
        .map(|i| {
            let mut h = f64::NEG_INFINITY;
            if let Some(d) = drive[i] {
                h = h.max(junction_top - a * (p_max - d));
            }
            if let (Some(extra), Some(input)) = (receiver, rx_input[i]) {
                h = h.max(input + extra);
            }
            if h.is_nan() {
                f64::INFINITY
            } else {
                h + BOUND_MARGIN_DB
            }
        })
        .collect()
}

/// The least drive (dBm) a partner needs for a product to reach `level`, the product's
/// bound being `c` (dBm) plus α·`k` times the partner's drive.
pub(super) fn need(level: f64, c: f64, a: f64, k: i64) -> f64 {
    if level == f64::NEG_INFINITY {
        return f64::NEG_INFINITY;
    }
    if a <= 0.0 {
        return if c >= level {
            f64::NEG_INFINITY
        } else {
            f64::INFINITY
        };
    }
    let d = (level - c) / (a * k.abs() as f64);
    if d.is_nan() {
        return f64::NEG_INFINITY;
    }
    d - 1e-9 * (1.0 + d.abs())
}

/// The largest junction level of a product of each order less α·n times the drive its
/// emitters share at most: `(constant, n)` for each order (the receiver at the junction).
pub(super) fn junction_tops(
    m: &LevelModel,
    params: &SearchParams,
    path_db: f64,
) -> Vec<(f64, f64)> {
    let form_max = form_max(params);
    (2..form_max.len())
        .filter(|&order| form_max[order] > f64::NEG_INFINITY)
        .map(|order| {
            let n = order as f64;
            let c = m.im3_dbm + form_max[order]
                - m.order_step_db * (n - 3.0)
                - if order % 2 == 0 {
                    m.even_order_penalty_db
                } else {
                    0.0
                }
                - m.drive_exponent * n * m.reference_tone_dbm
                - path_db;
            (c, n)
        })
        .collect()
}

/// The largest form weight of each order (indexed by the order), over the shapes the
/// search makes (−∞ where it makes none).
pub(super) fn form_max(params: &SearchParams) -> Vec<f64> {
    let max_order = params.max_order.min(MAX_ORDER);
    let max_emitters = params.max_emitters.clamp(1, 3) as usize;
    let mut form_max = vec![f64::NEG_INFINITY; max_order as usize + 1];
    for parts in 1..=max_emitters {
        for ks in coefficient_sets(parts, max_order) {
            let ks: Vec<u32> = ks.iter().map(|k| k.unsigned_abs() as u32).collect();
            let order: u32 = ks.iter().sum();
            if order >= 2 {
                let f = form_weight_db(&ks);
                let slot = &mut form_max[order as usize];
                *slot = slot.max(f);
            }
        }
    }
    form_max
}
