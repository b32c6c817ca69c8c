//! Physical properties of the forward model on random plates (proptest).
//!
//! - Maximum principle: a harmonic function takes its extremes on the part of the boundary
//!   that holds a temperature (e.g. Evans, *Partial Differential Equations*, §2.2.3; with
//!   insulated edges, by the Hopf lemma the extremes are not on them).
//! - Insulated edges carry zero normal derivative.
//! - The temperature is affine in the unknowns, and the sensor map reproduces it.
//! - Steady state without sources: the heat flows through all edges sum to zero (Gauss's
//!   divergence theorem).

use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use proptest::prelude::*;

#[derive(Debug, Clone)]
enum Kind {
    Constant(f64),
    Profile(Vec<f64>),
    Insulated,
    Unknown,
}

fn kind() -> impl Strategy<Value = Kind> {
    prop_oneof![
        (250.0..400.0f64).prop_map(Kind::Constant),
        prop::collection::vec(250.0..400.0f64, 2..6).prop_map(Kind::Profile),
        Just(Kind::Insulated),
        Just(Kind::Unknown),
    ]
}

fn build(w: f64, h: f64, kinds: &[Kind; 4]) -> Option<Plate> {
    let shape = Shape::Rectangle {
        width_m: w,
        height_m: h,
    };
    let mut conditions: [Option<EdgeCondition>; 4] = Default::default();
    for edge in Edge::STRAIGHT {
        let len = shape.edge_length(edge).unwrap();
        conditions[edge.index()] = Some(match &kinds[edge.index()] {
            Kind::Constant(t) => EdgeCondition::Fixed(EdgeProfile::constant(*t)),
            Kind::Profile(ts) => {
                let n = ts.len();
                let pos = (0..n).map(|i| len * i as f64 / (n - 1) as f64).collect();
                EdgeCondition::Fixed(EdgeProfile::piecewise_linear(pos, ts.clone()).unwrap())
            }
            Kind::Insulated => EdgeCondition::Insulated,
            Kind::Unknown => EdgeCondition::Unknown,
        });
    }
    Plate::new(shape, conditions, Some(40.0)).ok()
}

/// Smooth random unknowns: mode n has size ~ 30/(1+n)², corners around 320 K.
fn unknowns(model: &ForwardModel, seed: &[f64]) -> Vec<f64> {
    use edgetherm::forward::Parameter;
    model
        .parameters()
        .iter()
        .enumerate()
        .map(|(j, p)| {
            let r = seed[j % seed.len()];
            match p {
                Parameter::Mode { n, .. } if *n < 12 => 30.0 * r / ((1 + n) as f64).powi(2),
                Parameter::Mode { .. } => 0.0,
                Parameter::Corner { .. } => 320.0 + 30.0 * r,
            }
        })
        .collect()
}

fn options() -> SeriesOptions {
    SeriesOptions {
        unknown_terms: 24,
        known_terms: 512,
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn maximum_principle(
        w in 0.02..0.3f64, aspect in 0.3..2.0f64,
        kinds in [kind(), kind(), kind(), kind()],
        seed in prop::collection::vec(-1.0..1.0f64, 8),
        pts in prop::collection::vec((0.05..0.95f64, 0.05..0.95f64), 12),
    ) {
        let h = w * aspect;
        let Some(plate) = build(w, h, &kinds) else { return Ok(()); };
        let model = ForwardModel::new(&plate, options()).unwrap();
        let c = unknowns(&model, &seed);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for edge in Edge::STRAIGHT {
            if plate.is_insulated(edge) { continue; }
            let len = plate.shape().edge_length(edge).unwrap();
            let s: Vec<f64> = (0..=2000).map(|i| len * i as f64 / 2000.0).collect();
            for t in model.edge_profile(edge, &c, &s).unwrap() {
                lo = lo.min(t);
                hi = hi.max(t);
            }
        }
        let tol = 1e-6 * (hi - lo).max(1.0);
        for (fx, fy) in pts {
            let t = model.temperature(&c, Point::new(fx * w, fy * h)).unwrap();
            prop_assert!(t >= lo - tol && t <= hi + tol, "T = {t} outside [{lo}, {hi}]");
        }
    }

    #[test]
    fn insulated_edges_have_zero_normal_derivative(
        w in 0.02..0.3f64, aspect in 0.3..2.0f64,
        kinds in [kind(), kind(), kind(), kind()],
        seed in prop::collection::vec(-1.0..1.0f64, 8),
        fs in prop::collection::vec(0.1..0.9f64, 4),
    ) {
        let h = w * aspect;
        let Some(plate) = build(w, h, &kinds) else { return Ok(()); };
        let model = ForwardModel::new(&plate, options()).unwrap();
        let c = unknowns(&model, &seed);
        // gradient scale: the temperature range over the plate size
        let range = 130.0 + 60.0;
        for edge in Edge::STRAIGHT {
            if !plate.is_insulated(edge) { continue; }
            let shape = plate.shape();
            let len = shape.edge_length(edge).unwrap();
            let depth_len = if edge.runs_along_x() { h } else { w };
            let step = 1e-4 * depth_len;
            for &f in &fs {
                let p0 = shape.point_on(edge, f * len);
                let inward = |d: f64| match edge {
                    Edge::Bottom => Point::new(p0.x, d),
                    Edge::Top => Point::new(p0.x, h - d),
                    Edge::Left => Point::new(d, p0.y),
                    Edge::Right => Point::new(w - d, p0.y),
                    Edge::Inner | Edge::Outer | Edge::Rim => unreachable!("rectangles only"),
                };
                let t = |d: f64| model.temperature(&c, inward(d)).unwrap();
                // one-sided second-order difference
                let deriv = (-3.0 * t(0.0) + 4.0 * t(step) - t(2.0 * step)) / (2.0 * step);
                let scale = range / w.min(h);
                prop_assert!(deriv.abs() < 1e-4 * scale,
                    "{edge}: dT/dn = {deriv} (scale {scale})");
            }
        }
    }

    #[test]
    fn temperature_is_affine_in_the_unknowns(
        w in 0.02..0.3f64, aspect in 0.3..2.0f64,
        kinds in [kind(), kind(), kind(), kind()],
        s1 in prop::collection::vec(-1.0..1.0f64, 8),
        s2 in prop::collection::vec(-1.0..1.0f64, 8),
        alpha in -3.0..3.0f64,
        pts in prop::collection::vec((0.01..0.99f64, 0.01..0.99f64), 6),
    ) {
        let h = w * aspect;
        let Some(plate) = build(w, h, &kinds) else { return Ok(()); };
        let model = ForwardModel::new(&plate, options()).unwrap();
        let c1 = unknowns(&model, &s1);
        let c2 = unknowns(&model, &s2);
        let zero = vec![0.0; c1.len()];
        let mix: Vec<f64> = c1.iter().zip(&c2).map(|(a, b)| a + alpha * b).collect();
        let points: Vec<Point> = pts.iter().map(|&(fx, fy)| Point::new(fx * w, fy * h)).collect();
        let map = model.sensor_map(&points);
        let cm = nalgebra::DVector::from_vec(mix.clone());
        let via_map = &map.matrix * cm + &map.offset;
        for (i, &p) in points.iter().enumerate() {
            let t0 = model.temperature(&zero, p).unwrap();
            let t1 = model.temperature(&c1, p).unwrap();
            let t2 = model.temperature(&c2, p).unwrap();
            let tm = model.temperature(&mix, p).unwrap();
            let affine = t1 + alpha * (t2 - t0);
            prop_assert!((tm - affine).abs() < 1e-9 * tm.abs().max(1.0));
            prop_assert!((tm - via_map[i]).abs() < 1e-9 * tm.abs().max(1.0));
        }
    }
}

/// Heat balance on plates whose corners hold consistent temperatures (where two fixed edges
/// disagree at a corner the flux there is not integrable, so the balance is undefined).
#[test]
fn heat_flows_balance() {
    let shape = Shape::Rectangle {
        width_m: 0.12,
        height_m: 0.05,
    };
    let top =
        EdgeProfile::piecewise_linear(vec![0.0, 0.05, 0.12], vec![300.0, 310.0, 305.0]).unwrap();
    let cases: Vec<[Option<EdgeCondition>; 4]> = vec![
        // cold plate: hidden bottom, held top, insulated sides
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Insulated),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(295.0))),
            Some(EdgeCondition::Insulated),
        ],
        // hidden bottom and left; the others held (a profile on top)
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(305.0))),
            Some(EdgeCondition::Fixed(top)),
            Some(EdgeCondition::Unknown),
        ],
        // hidden bottom, one held side, one insulated
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Insulated),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(301.0))),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(301.0))),
        ],
    ];
    for conditions in cases {
        let plate = Plate::new(shape, conditions, Some(167.0)).unwrap();
        let model = ForwardModel::new(&plate, options()).unwrap();
        let c = unknowns(&model, &[0.3, -0.7, 0.5, 0.1, -0.2, 0.9, -0.4, 0.6]);
        let flows: Vec<f64> = Edge::STRAIGHT
            .iter()
            .map(|&e| model.heat_flow(e, &c).unwrap().unwrap())
            .collect();
        let sum: f64 = flows.iter().sum();
        let scale = flows.iter().fold(0.0_f64, |m, f| m.max(f.abs()));
        assert!(scale > 1.0, "flows {flows:?}");
        eprintln!(
            "flows {flows:?}: relative imbalance {:.2e}",
            sum.abs() / scale
        );
        assert!(sum.abs() < 1e-9 * scale, "flows {flows:?} sum to {sum}");
    }
}

/// An unknown edge's profile meets a neighbouring held temperature at the corner, and the
/// field approaches the profile at the edge.
#[test]
fn unknown_profile_meets_fixed_neighbours() {
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.1,
            height_m: 0.04,
        },
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(330.0))),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(300.0))),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(310.0))),
        ],
        None,
    )
    .unwrap();
    let model = ForwardModel::new(&plate, options()).unwrap();
    let c = unknowns(&model, &[0.3, -0.7, 0.5, 0.1]);
    let ends = model.edge_profile(Edge::Bottom, &c, &[0.0, 0.1]).unwrap();
    assert!((ends[0] - 310.0).abs() < 1e-9, "{ends:?}");
    assert!((ends[1] - 330.0).abs() < 1e-9, "{ends:?}");
    let on_edge = model.edge_profile(Edge::Bottom, &c, &[0.037]).unwrap()[0];
    let near = model.temperature(&c, Point::new(0.037, 1e-7)).unwrap();
    assert!((on_edge - near).abs() < 1e-3, "{on_edge} vs {near}");
}
