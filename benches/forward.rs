//! Forward-model benchmarks (issue 2 bars): building the sensor map for 64 sensors × 64 terms
//! × 4 unknown edges (target < 1 ms), and evaluating a 201 × 201 field grid on the cold-plate
//! configuration (target < 50 ms), both on the 2-core CI machine.
//!
//! Run with `cargo bench --bench forward`: a plain timing harness (as the other benchmarks)
//! that prints the median, minimum and maximum of 21 samples, each the mean of a batch of
//! calls sized to take about 50 ms.

use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::geometry::{EdgeCondition, EdgeProfile, Plate, Point, Shape};
use std::hint::black_box;
use std::time::{Duration, Instant};

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

/// Time `f`: a batch size that takes about 50 ms, then 21 batches; prints the median,
/// minimum and maximum time per call.
fn time(label: &str, mut f: impl FnMut()) {
    f();
    let t0 = Instant::now();
    let mut calls = 0u32;
    while t0.elapsed() < Duration::from_millis(50) {
        f();
        calls += 1;
    }
    let batch = calls.max(1);
    let mut per_call: Vec<f64> = (0..21)
        .map(|_| {
            let t = Instant::now();
            for _ in 0..batch {
                f();
            }
            t.elapsed().as_secs_f64() / f64::from(batch)
        })
        .collect();
    per_call.sort_by(f64::total_cmp);
    let show = |s: f64| {
        if s < 1e-3 {
            format!("{:.1} µs", s * 1e6)
        } else {
            format!("{:.2} ms", s * 1e3)
        }
    };
    println!(
        "{label}: median {}, min {}, max {} ({} calls per sample, 21 samples)",
        show(per_call[10]),
        show(per_call[0]),
        show(per_call[20]),
        batch
    );
}

fn main() {
    let (model, points) = four_unknown_edges();
    assert_eq!(model.parameter_count(), 4 * 64 + 4);
    time("sensor map 64 sensors x 64 terms x 4 unknown edges", || {
        black_box(model.sensor_map(black_box(&points)));
    });
    let (model, coeffs) = cold_plate();
    let xs: Vec<f64> = (0..201).map(|i| 0.15 * i as f64 / 200.0).collect();
    let ys: Vec<f64> = (0..201).map(|j| 0.06 * j as f64 / 200.0).collect();
    time("field grid 201 x 201, cold plate, 64 terms", || {
        black_box(model.field_grid(black_box(&coeffs), &xs, &ys).unwrap());
    });
    let (model4, _) = four_unknown_edges();
    let c4 = vec![0.5; model4.parameter_count()];
    time("field grid 201 x 201, four unknown edges, 64 terms", || {
        black_box(model4.field_grid(black_box(&c4), &xs, &ys).unwrap());
    });
}
