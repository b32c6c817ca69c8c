//! The Tikhonov inversion (`edgetherm::inverse`) against an independent dense reference.
//!
//! Source: `tests/fixtures/tikhonov/reference.json`, written by `scripts/tikhonov_reference.py`
//! with numpy/scipy (versions recorded in the fixture, pinned in
//! `scripts/requirements-reference.txt`). The script never uses the standard-form SVD: the
//! solution comes from the normal equations (numpy.linalg.solve, cross-checked by a QR of the
//! stacked system), GCV from the explicit hat matrix (Golub, Heath & Wahba 1979), the evidence
//! from a dense Gaussian density of the data projected off the null space (Wahba 1985), the
//! discrepancy λ from scipy's brentq (Morozov 1984), the L-curve curvature from implicit
//! differentiation of the normal equations (Hansen & O'Leary 1993), and the minimisers from
//! scipy.optimize.minimize_scalar. Two invented problems: overdetermined with a constant
//! null space (m = 12, p = 10, q = 1) and underdetermined with constant + slope (m = 8,
//! p = 14, q = 2).
//!
//! Tolerances: coefficients, fitted values and diagnostics to 1e-9 relative (the reference's
//! normal matrices have condition ≤ 1e5, so the reference itself is good to ~1e-11);
//! criterion curves to 1e-9 relative (curvature 1e-7); chosen λ to 1e-4 in log10 λ (both sides
//! locate a minimum of a smooth function, whose position is only determined to ~√ε relative).

use edgetherm::inverse::{
    Decomposition, EvidenceKind, Problem, SelectOptions, Strength, StrengthMethod,
};
use nalgebra::{DMatrix, DVector};
use serde_json::Value;

fn fixture() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/tikhonov/reference.json"
    );
    let text = std::fs::read_to_string(path).expect("reference fixture present");
    serde_json::from_str(&text).expect("reference fixture is JSON")
}

fn vector(v: &Value) -> DVector<f64> {
    DVector::from_iterator(
        v.as_array().unwrap().len(),
        v.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()),
    )
}

fn matrix(v: &Value) -> DMatrix<f64> {
    let rows = v.as_array().unwrap();
    let ncols = rows[0].as_array().unwrap().len();
    DMatrix::from_fn(rows.len(), ncols, |i, j| rows[i][j].as_f64().unwrap())
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap()
}

fn rel_vec(a: &DVector<f64>, b: &DVector<f64>) -> f64 {
    (a - b).norm() / b.norm()
}

fn rel_mat(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
    (a - b).norm() / b.norm()
}

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

fn decomposition(case: &Value) -> Decomposition {
    let problem = Problem::new(
        matrix(&case["a"]),
        vector(&case["d"]),
        vector(&case["sigma"]),
        vector(&case["penalty"]),
        true,
    )
    .unwrap();
    Decomposition::new(&problem).unwrap()
}

#[test]
fn solutions_match_dense_normal_equations() {
    let fx = fixture();
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let dec = decomposition(case);
        assert_eq!(dec.null_dimension(), case["q"].as_u64().unwrap() as usize);
        let mut worst = [0.0f64; 8];
        for s in case["solutions"].as_array().unwrap() {
            let lambda = f(&s["lambda"]);
            let sol = dec.solve(lambda).unwrap();
            let errs = [
                rel_vec(&sol.coefficients, &vector(&s["coefficients"])),
                rel_vec(&sol.fitted, &vector(&s["fitted"])),
                rel_vec(&sol.residuals, &vector(&s["residuals"])),
                rel(sol.effective_parameters, f(&s["effective_parameters"])),
                rel_vec(&sol.leverages, &vector(&s["leverages"])),
                rel(sol.chi_square, f(&s["chi_square"])),
                rel_mat(&sol.covariance, &matrix(&s["covariance"])),
                rel_mat(&sol.resolution, &matrix(&s["resolution"])),
            ];
            for (w, e) in worst.iter_mut().zip(errs) {
                *w = w.max(e);
            }
            assert!(rel(sol.penalty_norm2, f(&s["penalty_norm2"])) < 1e-9);
        }
        println!(
            "{name}: worst relative differences: coefficients {:.1e}, fitted {:.1e}, \
             residuals {:.1e}, trace H {:.1e}, leverages {:.1e}, chi2 {:.1e}, \
             covariance {:.1e}, resolution {:.1e}",
            worst[0], worst[1], worst[2], worst[3], worst[4], worst[5], worst[6], worst[7]
        );
        for (what, e) in [
            "coefficients",
            "fitted",
            "residuals",
            "trace H",
            "leverages",
            "chi-square",
            "covariance",
            "resolution",
        ]
        .iter()
        .zip(worst)
        {
            assert!(e < 1e-9, "{name}: {what} differs by {e:.2e} (relative)");
        }
    }
}

#[test]
fn criterion_curves_match_dense_formulas() {
    let fx = fixture();
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let dec = decomposition(case);
        let proj = dec.data_projection();
        let mut opts = SelectOptions::default();
        let check = |key: &str, method: StrengthMethod, opts: &SelectOptions, tol: f64| {
            let c = &case[key];
            let values_key = if key == "lcurve" {
                "curvature"
            } else {
                "value"
            };
            let mut worst = 0.0f64;
            for (l, v) in c["lambda"]
                .as_array()
                .unwrap()
                .iter()
                .zip(c[values_key].as_array().unwrap())
            {
                let got = dec.criterion(proj, method, f(l), opts);
                // Evidence values can pass near zero: compare relative to max(1, |v|).
                let e = (got - f(v)).abs() / f(v).abs().max(1.0);
                worst = worst.max(e);
            }
            println!("{name}: {key} curve, worst relative difference {worst:.1e}");
            assert!(worst < tol, "{name}: {key} curve differs by {worst:.2e}");
        };
        check("gcv", StrengthMethod::Gcv, &opts, 1e-9);
        check("lcurve", StrengthMethod::LCurve, &opts, 1e-7);
        opts.evidence = Some(EvidenceKind::KnownSigma);
        check(
            "evidence_known_sigma",
            StrengthMethod::Evidence,
            &opts,
            1e-9,
        );
        opts.evidence = Some(EvidenceKind::ProfiledScale);
        check(
            "evidence_profiled_scale",
            StrengthMethod::Evidence,
            &opts,
            1e-9,
        );
    }
}

#[test]
fn chosen_strengths_match_scipy_minimisers() {
    let fx = fixture();
    for case in fx["cases"].as_array().unwrap() {
        let name = case["name"].as_str().unwrap();
        let dec = decomposition(case);
        let rules: [(&str, &str, StrengthMethod, Option<EvidenceKind>); 5] = [
            ("gcv", "argmin", StrengthMethod::Gcv, None),
            (
                "evidence_known_sigma",
                "argmin",
                StrengthMethod::Evidence,
                Some(EvidenceKind::KnownSigma),
            ),
            (
                "evidence_profiled_scale",
                "argmin",
                StrengthMethod::Evidence,
                Some(EvidenceKind::ProfiledScale),
            ),
            ("discrepancy", "lambda", StrengthMethod::Discrepancy, None),
            ("lcurve", "argmax", StrengthMethod::LCurve, None),
        ];
        for (key, field, method, kind) in rules {
            let opts = SelectOptions {
                evidence: kind,
                ..SelectOptions::default()
            };
            let sel = dec.select(Strength::Rule(method), &opts).unwrap();
            let want = f(&case[key][field]);
            let diff = (sel.lambda.log10() - want.log10()).abs();
            println!(
                "{name}: {key}: λ = {:.9e} (reference {want:.9e}), |Δ log10 λ| = {diff:.1e}",
                sel.lambda
            );
            assert!(!sel.at_grid_end, "{name}: {key} at the grid end");
            assert!(diff < 1e-4, "{name}: {key} λ {} vs {want}", sel.lambda);
            if method == StrengthMethod::Discrepancy {
                assert_eq!(sel.target, Some(f(&case["discrepancy"]["target"])));
            }
        }
    }
}
