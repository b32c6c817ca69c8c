//! The forward model against closed-form solutions from the literature.

use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use std::f64::consts::PI;

fn fixed(t: f64) -> Option<EdgeCondition> {
    Some(EdgeCondition::Fixed(EdgeProfile::constant(t)))
}

fn model(plate: &Plate) -> ForwardModel {
    ForwardModel::new(plate, SeriesOptions::default()).unwrap()
}

// Square with one edge at T1 and three at T0: by superposition of the four rotations of the
// problem the centre is exactly (3 T0 + T1)/4 (standard textbook argument).
#[test]
fn square_centre_is_the_mean_of_its_edges() {
    let (t0, t1) = (291.4, 347.9);
    let side = 0.083;
    for hot in Edge::STRAIGHT {
        let mut conditions = [fixed(t0), fixed(t0), fixed(t0), fixed(t0)];
        conditions[hot.index()] = fixed(t1);
        let plate = Plate::new(
            Shape::Rectangle {
                width_m: side,
                height_m: side,
            },
            conditions,
            None,
        )
        .unwrap();
        let m = model(&plate);
        let t = m
            .temperature(&[], Point::new(side / 2.0, side / 2.0))
            .unwrap();
        let expected = (3.0 * t0 + t1) / 4.0;
        assert!(
            (t - expected).abs() < 1e-10 * (t1 - t0),
            "hot {hot}: {t} vs {expected}"
        );
    }
}

// Long strip 0<x<W, y>0, base at T0, sides at 0:
// T = (2 T0/π) atan(sin(πx/W) / sinh(πy/W)) (Brown & Churchill, Complex Variables and
// Applications, steady temperatures in a semi-infinite strip).
#[test]
fn semi_infinite_strip_matches_closed_form() {
    let w = 0.042;
    let t0 = 38.0;
    let plate = Plate::new(
        Shape::Strip { width_m: w },
        [fixed(t0), fixed(0.0), None, fixed(0.0)],
        None,
    )
    .unwrap();
    let m = model(&plate);
    for &(fx, fy) in &[
        (0.5, 0.5),
        (0.25, 0.1),
        (0.5, 1.0),
        (0.03, 0.02),
        (0.9, 0.05),
        (0.5, 3.0),
    ] {
        let (x, y) = (fx * w, fy * w);
        let exact = 2.0 * t0 / PI * ((PI * x / w).sin() / (PI * y / w).sinh()).atan();
        let t = m.temperature(&[], Point::new(x, y)).unwrap();
        assert!(
            (t - exact).abs() < 1e-6 * t0,
            "({fx},{fy}): series {t}, closed form {exact}"
        );
    }
    // Check values recomputed from the closed form with W = 1, T0 = 1 (recomputed from the closed form).
    let unit = Plate::new(
        Shape::Strip { width_m: 1.0 },
        [fixed(1.0), fixed(0.0), None, fixed(0.0)],
        None,
    )
    .unwrap();
    let m = model(&unit);
    for &(x, y, v) in &[
        (0.5, 0.5, 0.260964),
        (0.25, 0.1, 0.729939),
        (0.5, 1.0, 0.054987),
    ] {
        let t = m.temperature(&[], Point::new(x, y)).unwrap();
        assert!((t - v).abs() < 1e-6, "({x},{y}): {t} vs {v}");
    }
}

// Rectangle 0<x<L, 0<y<W with T2 on y = W and T1 elsewhere (Incropera et al., Fundamentals of
// Heat and Mass Transfer, eq. 4.19): at L = 2, W = 1, midpoint (1, 0.5), θ = 0.44512
// (recomputed from the closed form).
#[test]
fn rectangle_matches_incropera_eq_4_19() {
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 2.0,
            height_m: 1.0,
        },
        [fixed(0.0), fixed(0.0), fixed(1.0), fixed(0.0)],
        None,
    )
    .unwrap();
    let theta = model(&plate)
        .temperature(&[], Point::new(1.0, 0.5))
        .unwrap();
    assert!((theta - 0.44512).abs() < 1e-5, "θ = {theta}");
}

// One-dimensional conduction through a slab (Fourier's law; Incropera et al., Fundamentals
// of Heat and Mass Transfer, §3.1): with insulated sides, a bottom at T1 and a top at T0, the
// heat flow into the plate through the bottom per unit depth is k (T1 − T0) W / H, and the
// same flow leaves through the top.
#[test]
fn slab_heat_flow_follows_fouriers_law() {
    let (w, h, k, t1, t0) = (0.12, 0.03, 167.0, 340.0, 300.0);
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: w,
            height_m: h,
        },
        [
            fixed(t1),
            Some(EdgeCondition::Insulated),
            fixed(t0),
            Some(EdgeCondition::Insulated),
        ],
        Some(k),
    )
    .unwrap();
    let m = model(&plate);
    let expected = k * (t1 - t0) * w / h;
    let bottom = m.heat_flow(Edge::Bottom, &[]).unwrap().unwrap();
    let top = m.heat_flow(Edge::Top, &[]).unwrap().unwrap();
    assert!(
        (bottom - expected).abs() < 1e-9 * expected,
        "{bottom} vs {expected}"
    );
    assert!(
        (top + expected).abs() < 1e-9 * expected,
        "{top} vs {}",
        -expected
    );
    let q = m
        .edge_flux(Edge::Bottom, &[], &[0.03, 0.06])
        .unwrap()
        .unwrap();
    for v in q {
        assert!((v - k * (t1 - t0) / h).abs() < 1e-9 * v, "{v}");
    }
}
