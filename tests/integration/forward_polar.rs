//! The polar forward model of round parts (disk, annulus) against closed forms from the
//! literature. Each check names its source.

use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::geometry::{
    Convection, Edge, EdgeCondition, EdgeProfile, HeatTransfer, Plate, Point, Shape,
};
use std::f64::consts::{PI, TAU};

fn model(plate: &Plate) -> ForwardModel {
    ForwardModel::new(plate, SeriesOptions::default()).unwrap()
}

fn fixed(t: f64) -> EdgeCondition {
    EdgeCondition::Fixed(EdgeProfile::constant(t))
}

/// A periodic profile tabulated at `n` even angles on a circle of radius `r`.
fn tabulated(r: f64, n: usize, f: impl Fn(f64) -> f64) -> EdgeProfile {
    let pos: Vec<f64> = (0..n).map(|i| r * TAU * i as f64 / n as f64).collect();
    let t: Vec<f64> = pos.iter().map(|s| f(s / r)).collect();
    EdgeProfile::periodic(pos, t, TAU * r).unwrap()
}

/// A hot sector: 300 K with a 45 K plateau from 40° to 100° and linear ramps of 20°.
fn sector(r: f64) -> EdgeProfile {
    let deg = [0.0, 20.0, 40.0, 100.0, 120.0, 250.0];
    let t = [300.0, 300.0, 345.0, 345.0, 300.0, 300.0];
    EdgeProfile::periodic(
        deg.iter().map(|d: &f64| d.to_radians() * r).collect(),
        t.to_vec(),
        TAU * r,
    )
    .unwrap()
}

fn at(r: f64, deg: f64) -> Point {
    let a = deg.to_radians();
    Point::new(r * a.cos(), r * a.sin())
}

// Mean value property of harmonic functions: the temperature at the centre of a disk equals
// the mean of its rim temperature (Evans, *Partial Differential Equations*, §2.2.2). The rim
// profile is piecewise linear, so its mean is exact by the trapezoid rule on its knots.
#[test]
fn disk_centre_is_the_rim_mean() {
    let radius = 0.06;
    let profile = sector(radius);
    let p = profile.positions();
    let t = profile.temperatures();
    let mean: f64 = p
        .windows(2)
        .zip(t.windows(2))
        .map(|(s, v)| 0.5 * (v[0] + v[1]) * (s[1] - s[0]))
        .sum::<f64>()
        / (TAU * radius);
    let plate = Plate::from_edges(
        Shape::Disk { radius_m: radius },
        &[(Edge::Rim, EdgeCondition::Fixed(profile))],
        None,
    )
    .unwrap();
    let centre = model(&plate)
        .temperature(&[], Point::new(0.0, 0.0))
        .unwrap();
    assert!((centre - mean).abs() < 1e-10 * 45.0, "{centre} vs {mean}");
}

// Poisson integral for the disk (Strauss, *Partial Differential Equations*, §6.3):
// T(r, θ) = (1/2π) ∫ (R² − r²) / (R² − 2 R r cos(θ − φ) + r²) f(φ) dφ, evaluated here by the
// composite Simpson rule on 200 000 panels (the kernel is smooth for r ≤ 0.9 R; the kinks of
// the piecewise-linear data cost O(h²) there, far below the tolerance).
#[test]
fn disk_matches_the_poisson_integral() {
    let radius = 0.05;
    let profile = sector(radius);
    let plate = Plate::from_edges(
        Shape::Disk { radius_m: radius },
        &[(Edge::Rim, EdgeCondition::Fixed(profile.clone()))],
        None,
    )
    .unwrap();
    let m = model(&plate);
    let n = 200_000;
    let h = TAU / n as f64;
    for &(fr, deg) in &[
        (0.3, 10.0),
        (0.6, 70.0),
        (0.75, 200.0),
        (0.9, 95.0),
        (0.5, 300.0),
    ] {
        let (r, theta) = (fr * radius, f64::to_radians(deg));
        let integrand = |phi: f64| {
            let k = (radius * radius - r * r)
                / (radius * radius - 2.0 * radius * r * (theta - phi).cos() + r * r);
            k * profile.value(phi * radius)
        };
        let mut sum = integrand(0.0) + integrand(TAU);
        for i in 1..n {
            sum += integrand(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
        }
        let poisson = sum * h / 3.0 / TAU;
        let series = m.temperature(&[], at(r, deg)).unwrap();
        assert!(
            (series - poisson).abs() < 1e-6 * 45.0,
            "r = {fr} R, {deg}°: series {series}, Poisson {poisson}"
        );
    }
}

// Hollow cylinder with constant wall temperatures: T = Ta + (Tb − Ta) ln(r/a) / ln(b/a), and
// the heat flow per unit length Q = 2π κ (Ta − Tb) / ln(b/a) in at the inner wall
// (Incropera et al., *Fundamentals of Heat and Mass Transfer*, §3.3.1; Carslaw & Jaeger §7.2).
#[test]
fn annulus_with_constant_walls_is_the_log_solution() {
    let (a, b, k) = (0.040, 0.052, 16.0);
    let (ta, tb) = (373.15, 293.15);
    let plate = Plate::from_edges(
        Shape::Annulus {
            inner_m: a,
            outer_m: b,
        },
        &[(Edge::Inner, fixed(ta)), (Edge::Outer, fixed(tb))],
        Some(k),
    )
    .unwrap();
    let m = model(&plate);
    for &(f, deg) in &[(0.01, 0.0), (0.3, 45.0), (0.5, 181.0), (0.99, 359.0)] {
        let r = a + f * (b - a);
        let exact = ta + (tb - ta) * (r / a).ln() / (b / a).ln();
        let t = m.temperature(&[], at(r, deg)).unwrap();
        assert!((t - exact).abs() < 1e-9 * (ta - tb), "{t} vs {exact}");
    }
    let q = 2.0 * PI * k * (ta - tb) / (b / a).ln();
    let q_in = m.heat_flow(Edge::Inner, &[]).unwrap().unwrap();
    let q_out = m.heat_flow(Edge::Outer, &[]).unwrap().unwrap();
    assert!((q_in - q).abs() < 1e-9 * q, "{q_in} vs {q}");
    assert!((q_out + q).abs() < 1e-9 * q, "{q_out} vs {}", -q);
}

// Hollow cylinder with a convective inner wall and a held outer wall: the series thermal
// resistances 1/(2π a h) + ln(b/a)/(2π κ) carry Q = (T∞ − Tb) / R_total per unit length
// (Incropera et al., §3.3.1, the composite cylindrical wall).
#[test]
fn annulus_with_a_convective_wall_matches_the_resistance_network() {
    let (a, b, k, h) = (0.030, 0.050, 45.0, 2500.0);
    let (t_fluid, tb) = (353.15, 300.0);
    let plate = Plate::from_edges(
        Shape::Annulus {
            inner_m: a,
            outer_m: b,
        },
        &[
            (
                Edge::Inner,
                EdgeCondition::Convective(Convection {
                    h: HeatTransfer::Known(h),
                    ambient_k: t_fluid,
                }),
            ),
            (Edge::Outer, fixed(tb)),
        ],
        Some(k),
    )
    .unwrap();
    let m = model(&plate);
    let r_conv = 1.0 / (TAU * a * h);
    let r_wall = (b / a).ln() / (TAU * k);
    let q = (t_fluid - tb) / (r_conv + r_wall);
    let q_in = m.heat_flow(Edge::Inner, &[]).unwrap().unwrap();
    let q_out = m.heat_flow(Edge::Outer, &[]).unwrap().unwrap();
    assert!((q_in - q).abs() < 1e-9 * q, "{q_in} vs {q}");
    assert!((q_out + q).abs() < 1e-9 * q, "{q_out} vs {}", -q);
    // the inner wall temperature sits one convective resistance below the fluid
    let t_wall = t_fluid - q * r_conv;
    let t = m.temperature(&[], at(a * (1.0 + 1e-13), 123.0)).unwrap();
    assert!(
        (t - t_wall).abs() < 1e-8 * (t_fluid - tb),
        "{t} vs {t_wall}"
    );
}

// One Fourier mode across a hollow cylinder: inner data cos nθ, outer held at 0 gives
// R(r) = ((b/r)^n − (r/b)^n) / ((b/a)^n − (a/b)^n) (separation of variables in polar
// coordinates, Carslaw & Jaeger §7.2). The inner data are tabulated at 0.5° and linearly
// interpolated, whose mode-n coefficient is the sample's times sinc²(n h/2) exactly; aliases
// sit at orders near 720 and vanish inside the wall.
#[test]
fn annulus_single_mode_matches_the_power_law_pair() {
    let (a, b) = (0.045, 0.057);
    let n = 5;
    let samples = 720;
    let plate = Plate::from_edges(
        Shape::Annulus {
            inner_m: a,
            outer_m: b,
        },
        &[
            (
                Edge::Inner,
                EdgeCondition::Fixed(tabulated(a, samples, |t| (n as f64 * t).cos())),
            ),
            (Edge::Outer, fixed(0.0)),
        ],
        None,
    )
    .unwrap();
    let m = model(&plate);
    let hstep = TAU / samples as f64;
    let x = 0.5 * n as f64 * hstep;
    let attenuation = (x.sin() / x).powi(2);
    let nf = n as f64;
    for &(f, deg) in &[(0.1, 10.0), (0.4, 100.0), (0.7, 222.0), (0.95, 300.0)] {
        let r = a + f * (b - a);
        let radial = ((b / r).powf(nf) - (r / b).powf(nf)) / ((b / a).powf(nf) - (a / b).powf(nf));
        let exact = attenuation * radial * (nf * f64::to_radians(deg)).cos();
        let t = m.temperature(&[], at(r, deg)).unwrap();
        assert!((t - exact).abs() < 1e-10, "r = {r}, {deg}°: {t} vs {exact}");
    }
}

// A very thin wall and many unknown modes: the scaled radial functions keep every entry of
// the sensor map finite where r^n and r^−n would overflow (n up to 256 on a wall 0.1 % of the
// radius thick, and a disk with 1024 modes).
#[test]
fn thin_walls_and_high_modes_stay_finite() {
    let plate = Plate::from_edges(
        Shape::Annulus {
            inner_m: 0.999,
            outer_m: 1.0,
        },
        &[
            (Edge::Inner, EdgeCondition::Unknown),
            (Edge::Outer, EdgeCondition::Insulated),
        ],
        None,
    )
    .unwrap();
    let m = ForwardModel::new(
        &plate,
        SeriesOptions {
            unknown_terms: 513,
            known_terms: 512,
        },
    )
    .unwrap();
    let map = m.sensor_map(&[at(0.9995, 33.0), at(0.99999, 200.0)]);
    assert!(map.matrix.iter().all(|v| v.is_finite()));
    // an insulated outer wall: the mean mode reaches the outer wall undamped
    assert!((map.matrix[(0, 0)] - 1.0).abs() < 1e-12);
    let disk = Plate::from_edges(
        Shape::Disk { radius_m: 0.2 },
        &[(Edge::Rim, EdgeCondition::Unknown)],
        None,
    )
    .unwrap();
    let m = ForwardModel::new(
        &disk,
        SeriesOptions {
            unknown_terms: 2049,
            known_terms: 512,
        },
    )
    .unwrap();
    let map = m.sensor_map(&[at(0.199_999, 1.0), Point::new(0.0, 0.0)]);
    assert!(map.matrix.iter().all(|v| v.is_finite()));
    // at the centre only the mean survives
    assert!((map.matrix[(1, 0)] - 1.0).abs() < 1e-15);
    assert!(map.matrix.row(1).iter().skip(1).all(|v| v.abs() < 1e-15));
}

// An unknown circle reproduces its own coefficients on the circle (the profile map is the
// Fourier synthesis), and a fixed profile is returned exactly on its circle.
#[test]
fn unknown_circle_profile_is_its_fourier_series() {
    let (a, b) = (0.02, 0.035);
    let plate = Plate::from_edges(
        Shape::Annulus {
            inner_m: a,
            outer_m: b,
        },
        &[
            (Edge::Inner, fixed(350.0)),
            (Edge::Outer, EdgeCondition::Unknown),
        ],
        None,
    )
    .unwrap();
    let m = model(&plate);
    let mut c = vec![0.0; m.parameter_count()];
    c[0] = 310.0;
    c[3] = 4.0; // cos 2θ
    c[6] = -2.5; // sin 3θ
    let s: Vec<f64> = (0..37).map(|i| b * TAU * i as f64 / 36.0).collect();
    let prof = m.edge_profile(Edge::Outer, &c, &s).unwrap();
    for (si, t) in s.iter().zip(&prof) {
        let th = si / b;
        let exact = 310.0 + 4.0 * (2.0 * th).cos() - 2.5 * (3.0 * th).sin();
        assert!((t - exact).abs() < 1e-10, "{t} vs {exact}");
    }
    let inner = m.edge_profile(Edge::Inner, &c, &[0.0, 0.05]).unwrap();
    assert!(inner.iter().all(|t| (t - 350.0).abs() < 1e-12));
}
