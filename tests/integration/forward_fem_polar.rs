//! The polar forward model against independent finite-element solutions of disks and annuli
//! from scikit-fem (P2 isoparametric elements on a polar mesh; generator and mesh-convergence
//! record in `tests/fixtures/polar-fem/`): held profiles, insulated and convective circles.
//! Interior temperatures must agree within 1e-4 of each case's temperature range (the FEM's
//! own discretisation error, measured by halving the mesh, is at most about 1e-6 of it), and
//! the heat flows per unit length within 1e-4 of the largest.

use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::geometry::{
    Convection, Edge, EdgeCondition, EdgeProfile, HeatTransfer, Plate, Point, Shape,
};
use std::f64::consts::TAU;
use std::path::{Path, PathBuf};

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/polar-fem")
}

/// A fixture's periodic profile (`angle_deg,temperature_k`) on a circle of radius `r`.
fn profile(file: &str, r: f64) -> EdgeProfile {
    let text = std::fs::read_to_string(dir().join(file)).unwrap();
    let (mut pos, mut t) = (Vec::new(), Vec::new());
    for line in text.lines().skip(1).filter(|l| !l.trim().is_empty()) {
        let mut f = line.split(',').map(|v| v.trim().parse::<f64>().unwrap());
        pos.push(f.next().unwrap().to_radians() * r);
        t.push(f.next().unwrap());
    }
    EdgeProfile::periodic(pos, t, TAU * r).unwrap()
}

struct Fixture {
    plate: Plate,
    /// Edge, expected heat flow into the part (W/m).
    flows: Vec<(Edge, f64)>,
    /// Every boundary temperature (data, ambient), for the range.
    boundary: Vec<f64>,
}

fn load(name: &str) -> Fixture {
    let text = std::fs::read_to_string(dir().join(format!("{name}.toml"))).unwrap();
    let doc: toml::Table = toml::from_str(&text).unwrap();
    let num = |t: &toml::Table, k: &str| t[k].as_float().unwrap();
    let shape = match doc["shape"].as_str().unwrap() {
        "disk" => Shape::Disk {
            radius_m: num(&doc, "radius_m"),
        },
        _ => Shape::Annulus {
            inner_m: num(&doc, "inner_radius_m"),
            outer_m: num(&doc, "outer_radius_m"),
        },
    };
    let mut conditions = Vec::new();
    let mut flows = Vec::new();
    let mut boundary = Vec::new();
    for edge in shape.edges() {
        let t = doc[edge.name()].as_table().unwrap();
        let r = shape.radius_of(edge).unwrap();
        let condition = match t["condition"].as_str().unwrap() {
            "fixed" => match t.get("profile") {
                Some(p) => {
                    let p = profile(p.as_str().unwrap(), r);
                    boundary.extend_from_slice(p.temperatures());
                    EdgeCondition::Fixed(p)
                }
                None => {
                    let v = num(t, "temperature_k");
                    boundary.push(v);
                    EdgeCondition::Fixed(EdgeProfile::constant(v))
                }
            },
            "insulated" => EdgeCondition::Insulated,
            "convective" => {
                boundary.push(num(t, "ambient_k"));
                EdgeCondition::Convective(Convection {
                    h: HeatTransfer::Known(num(t, "h")),
                    ambient_k: num(t, "ambient_k"),
                })
            }
            other => panic!("unexpected condition {other}"),
        };
        conditions.push((edge, condition));
        flows.push((edge, num(t, "heat_flow_into_part_w_per_m")));
    }
    let plate = Plate::from_edges(shape, &conditions, Some(num(&doc, "conductivity"))).unwrap();
    Fixture {
        plate,
        flows,
        boundary,
    }
}

fn points(name: &str) -> Vec<(Point, f64)> {
    let text = std::fs::read_to_string(dir().join(format!("{name}.csv"))).unwrap();
    text.lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|x| x.trim().parse().unwrap()).collect();
            (Point::new(v[0], v[1]), v[2])
        })
        .collect()
}

fn check(name: &str) {
    let f = load(name);
    let model = ForwardModel::new(&f.plate, SeriesOptions::default()).unwrap();
    let lo = f.boundary.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = f.boundary.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let range = hi - lo;
    assert!(range > 0.0, "{name}: no range");
    let pts = points(name);
    assert!(pts.len() >= 150, "{name}: {} points", pts.len());
    let mut worst = 0.0_f64;
    for (p, t_fem) in &pts {
        let t = model.temperature(&[], *p).unwrap();
        worst = worst.max((t - t_fem).abs());
    }
    assert!(
        worst < 1e-4 * range,
        "{name}: worst difference {worst} K against a range of {range} K"
    );
    let scale = f.flows.iter().fold(0.0_f64, |m, (_, q)| m.max(q.abs()));
    for (edge, q_fem) in &f.flows {
        let q = model.heat_flow(*edge, &[]).unwrap().unwrap();
        // an insulated circle (and a held disk with no source) carries round-off only in the
        // FEM: compare against the largest flow, or an absolute 1e-3 W/m when all are zero
        let tol = (1e-4 * scale).max(1e-3);
        assert!(
            (q - q_fem).abs() < tol,
            "{name}: heat flow through the {edge} edge {q} W/m, FEM {q_fem} W/m"
        );
    }
}

#[test]
fn annulus_held_profile_and_held_outer_wall() {
    check("annulus-dirichlet");
}

#[test]
fn annulus_held_profile_and_convective_outer_wall() {
    check("annulus-convective-outer");
}

#[test]
fn annulus_held_profile_and_insulated_outer_wall() {
    check("annulus-insulated-outer");
}

#[test]
fn annulus_convective_inner_wall_and_held_outer_profile() {
    check("annulus-convective-inner");
}

#[test]
fn annulus_constant_walls() {
    check("annulus-ln");
}

#[test]
fn disk_held_rim_profile_with_ramps() {
    check("disk-dirichlet");
}

#[test]
fn disk_smooth_rim_profile() {
    check("disk-smooth");
}
