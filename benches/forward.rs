//! Forward-model benchmarks (issue 2 bars): building the sensor map for 64 sensors × 64 terms
//! × 4 unknown edges (target < 1 ms), and evaluating a 201 × 201 field grid on the cold-plate
//! configuration (target < 50 ms), both on the 2-core CI machine.
//!
//! Run with `cargo bench --bench forward`; criterion prints the median and its interval.

use criterion::{Criterion, criterion_group, criterion_main};
use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::geometry::{EdgeCondition, EdgeProfile, Plate, Point, Shape};
use std::hint::black_box;

fn four_unknown_edges() -> (ForwardModel, Vec<Point>) {
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.15,
            height_m: 0.06,
        },
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Unknown),
        ],
        None,
    )
    .unwrap();
    let model = ForwardModel::new(
        &plate,
        SeriesOptions {
            unknown_terms: 64,
            ..SeriesOptions::default()
        },
    )
    .unwrap();
    let points = (0..64)
        .map(|i| {
            let fx = 0.05 + 0.9 * ((i % 8) as f64 + 0.5) / 8.0;
            let fy = 0.05 + 0.9 * ((i / 8) as f64 + 0.5) / 8.0;
            Point::new(0.15 * fx, 0.06 * fy)
        })
        .collect();
    (model, points)
}

fn cold_plate() -> (ForwardModel, Vec<f64>) {
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.15,
            height_m: 0.06,
        },
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Insulated),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(298.0))),
            Some(EdgeCondition::Insulated),
        ],
        Some(205.0),
    )
    .unwrap();
    let model = ForwardModel::new(&plate, SeriesOptions::default()).unwrap();
    let c: Vec<f64> = (0..model.parameter_count())
        .map(|n| 20.0 / (1.0 + n as f64).powi(2))
        .collect();
    (model, c)
}

fn bench(c: &mut Criterion) {
    let (model, points) = four_unknown_edges();
    assert_eq!(model.parameter_count(), 4 * 64 + 4);
    c.bench_function("sensor map 64 sensors x 64 terms x 4 unknown edges", |b| {
        b.iter(|| black_box(model.sensor_map(black_box(&points))))
    });
    let (model, coeffs) = cold_plate();
    let xs: Vec<f64> = (0..201).map(|i| 0.15 * i as f64 / 200.0).collect();
    let ys: Vec<f64> = (0..201).map(|j| 0.06 * j as f64 / 200.0).collect();
    c.bench_function("field grid 201 x 201, cold plate, 64 terms", |b| {
        b.iter(|| black_box(model.field_grid(black_box(&coeffs), &xs, &ys).unwrap()))
    });
    let (model4, _) = four_unknown_edges();
    let c4 = vec![0.5; model4.parameter_count()];
    c.bench_function("field grid 201 x 201, four unknown edges, 64 terms", |b| {
        b.iter(|| black_box(model4.field_grid(black_box(&c4), &xs, &ys).unwrap()))
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);
