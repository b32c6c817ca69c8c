//! The layout search against exhaustive search on small cases, and the greedy guarantee.
//!
//! For a monotone submodular set function with f(∅) = 0, greedy selection of K elements is
//! within a factor (1 − 1/e) of the best K-subset (Nemhauser, Wolsey & Fisher 1978, Math.
//! Program. 14:265–294). The D-optimal value log det(I + Σ₀^{1/2} Hᵀ H Σ₀^{1/2}) is such a
//! function of the set of sensors (Krause, Singh & Guestrin 2008, JMLR 9:235–284, and
//! `docs/design.md`). The test asserts the bound for the greedy stage alone and prints how close
//! greedy + exchange gets to the exhaustive optimum for every criterion.

use edgetherm::case::CandidateSource;
use edgetherm::case::{CaseFiles, Smoothing};
use edgetherm::design::{Criterion, DesignSpace, LayoutSensor};
use edgetherm::geometry::Point;
use edgetherm::io::case::load_design_case;

/// A small version of the sample cold plate: 10 series terms and a few candidates.
fn small_space(criterion: Criterion, spacing_mm: f64) -> (DesignSpace, Vec<Point>) {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    let mut case = load_design_case(&CaseFiles::in_dir(dir)).unwrap();
    case.fit.terms = 10;
    case.fit.smoothing = Smoothing::Curvature;
    case.design.sensor_spacing_m = spacing_mm * 1e-3;
    case.design.keep_out.clear();
    case.design.candidates = CandidateSource::File("candidates.csv".into());
    // 14 candidates: two rows at 4 and 12 mm depth, staggered
    let points: Vec<(Point, usize)> = (0..14)
        .map(|i| {
            let x = 0.006 + 0.168 * i as f64 / 13.0;
            let y = if i % 2 == 0 { 0.004 } else { 0.012 };
            (Point::new(x, y), i + 2)
        })
        .collect();
    let space = DesignSpace::new(&case, Some(&points), Some(criterion)).unwrap();
    let cands = space.candidates().to_vec();
    assert_eq!(cands.len(), 14);
    (space, cands)
}

fn layout(points: &[Point], idx: &[usize]) -> Vec<LayoutSensor> {
    idx.iter()
        .map(|&i| LayoutSensor {
            id: format!("C{i}"),
            position: points[i],
            sigma_k: None,
            fixed: false,
        })
        .collect()
}

/// All k-subsets of 0..n, in lexicographic order.
fn subsets(n: usize, k: usize) -> Vec<Vec<usize>> {
    let mut out = Vec::new();
    let mut idx: Vec<usize> = (0..k).collect();
    loop {
        out.push(idx.clone());
        let mut i = k;
        while i > 0 && idx[i - 1] == n - k + i - 1 {
            i -= 1;
        }
        if i == 0 {
            return out;
        }
        idx[i - 1] += 1;
        for j in i..k {
            idx[j] = idx[j - 1] + 1;
        }
    }
}

/// Larger is better for every criterion, as a positive number.
fn merit(c: Criterion, v: f64) -> f64 {
    match c {
        Criterion::Information => v,
        Criterion::Edge | Criterion::Worst => 1.0 / v,
    }
}

#[test]
fn greedy_and_exchange_against_exhaustive_search() {
    for spacing in [0.0, 25.0] {
        for criterion in [Criterion::Information, Criterion::Edge, Criterion::Worst] {
            let (space, points) = small_space(criterion, spacing);
            for k in [2, 3, 4] {
                let c = space.constraints();
                let mut best = f64::NEG_INFINITY;
                let mut feasible = 0;
                for s in subsets(points.len(), k) {
                    let ok = s
                        .iter()
                        .enumerate()
                        .all(|(a, &i)| s[a + 1..].iter().all(|&j| c.spaced(points[i], points[j])));
                    if !ok {
                        continue;
                    }
                    feasible += 1;
                    let v = space
                        .evaluate(&layout(&points, &s))
                        .unwrap()
                        .value(criterion);
                    best = best.max(merit(criterion, v));
                }
                let (chosen, summary) = space.design(&[], k, "--count", &|_, _| {}).unwrap();
                let found = merit(criterion, space.evaluate(&chosen).unwrap().value(criterion));
                let greedy = merit(criterion, summary.greedy_value);
                println!(
                    "{:<11} spacing {spacing:>4} mm  K = {k}  ({feasible:>4} feasible subsets): \
                     greedy/optimum = {:.5}, greedy + exchange/optimum = {:.5}, {} swaps",
                    criterion.name(),
                    greedy / best,
                    found / best,
                    summary.swaps
                );
                // the search's own value agrees with an independent evaluation
                assert!(
                    (merit(criterion, summary.value) - found).abs() <= 1e-6 * found,
                    "{} vs {found}",
                    merit(criterion, summary.value)
                );
                // no subset beats the optimum; exchange never loses what greedy found
                assert!(found <= best * (1.0 + 1e-9));
                assert!(found >= greedy * (1.0 - 1e-9));
                if criterion == Criterion::Information {
                    // Nemhauser–Wolsey–Fisher: f(greedy) ≥ (1 − 1/e) f(optimum)
                    let bound = 1.0 - (-1.0f64).exp();
                    assert!(
                        greedy >= bound * best,
                        "greedy {greedy} below (1 - 1/e) x optimum {best}"
                    );
                }
                // every constraint honoured
                for (a, s) in chosen.iter().enumerate() {
                    assert!(c.feasible(s.position));
                    for t in &chosen[a + 1..] {
                        assert!(c.spaced(s.position, t.position));
                    }
                }
            }
        }
    }
}

#[test]
fn the_search_is_deterministic() {
    let (space, _) = small_space(Criterion::Edge, 10.0);
    let a = space.design(&[], 4, "--count", &|_, _| {}).unwrap();
    let b = space.design(&[], 4, "--count", &|_, _| {}).unwrap();
    assert_eq!(a, b);
}

#[test]
fn sensors_kept_fixed_stay_and_are_spaced_from() {
    let (space, points) = small_space(Criterion::Information, 20.0);
    let fixed = vec![LayoutSensor {
        id: "TC01".into(),
        position: points[6],
        sigma_k: None,
        fixed: true,
    }];
    let (layout, _) = space.design(&fixed, 3, "--add", &|_, _| {}).unwrap();
    assert_eq!(layout.len(), 4);
    assert_eq!(layout[0], fixed[0]);
    for s in &layout[1..] {
        assert!(!s.fixed);
        assert!(space.constraints().spaced(s.position, points[6]));
    }
    // a fixed sensor adds information: the best 3 beside it beat the best 3 alone only
    // together, never lose the fixed one's share
    let alone = space.design(&[], 3, "--count", &|_, _| {}).unwrap().0;
    let with = space.evaluate(&layout).unwrap().information;
    let without = space.evaluate(&alone).unwrap().information;
    assert!(with > without - 1e-9, "{with} vs {without}");
}

#[test]
fn too_many_sensors_for_the_spacing_is_an_input_error() {
    let (space, _) = small_space(Criterion::Edge, 60.0);
    // 174 mm of candidates, 60 mm apart: at most 3 fit
    let e = space.design(&[], 4, "--count", &|_, _| {}).unwrap_err();
    assert_eq!(e.exit_code(), 2, "{e}");
    assert!(
        e.to_string().contains("could place only 3 new sensors"),
        "{e}"
    );
    let e = space.design(&[], 15, "--count", &|_, _| {}).unwrap_err();
    assert_eq!(e.exit_code(), 2, "{e}");
    assert!(e.to_string().contains("only 14 candidate"), "{e}");
}
