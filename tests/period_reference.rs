//! Periodicity statistics against reference libraries and published formulas.
//! Fixture: tests/fixtures/period/reference.json, made by make_fixtures.py beside it
//! with numpy 2.4.6, scipy 1.17.1 and astropy 8.0.2 (versions also stored in the file).

use burstbook::period::coherence::{
    h_test, harmonic_powers, phases, z2n, z2n_p_single, z2n_scan_fap,
};
use burstbook::period::divisor::common_divisor_period;
use burstbook::period::fold::fold_test;
use burstbook::period::lomb::{fap_baluev, lomb_scargle};
use burstbook::period::powerlaw::fit_power_law;
use burstbook::period::waiting::{group_by_session, waiting_time_stats, weibull_log_likelihood};
use serde_json::Value;

fn fixture() -> Value {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/period/reference.json"
    ))
    .expect("fixture present");
    serde_json::from_str(&text).expect("fixture is JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

fn fv(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(f).collect()
}

fn close(a: f64, b: f64, rel: f64, what: &str) {
    assert!(
        (a - b).abs() <= rel * b.abs().max(1e-300),
        "{what}: {a} vs {b}"
    );
}

#[test]
fn z2n_and_h_test_match_numpy_and_scipy() {
    // Buccheri et al. 1983 (Z²ₙ, χ²₂ₙ tail); de Jager et al. 1989 (H).
    let fx = fixture();
    let c = &fx["coherence"];
    let ph = fv(&c["phases"]);
    for n in [1usize, 2, 4, 20] {
        close(z2n(&ph, n), f(&c["z2n"][n.to_string()]), 1e-12, "Z²ₙ");
    }
    for n in [1usize, 2, 4] {
        let z = f(&c["z2n"][n.to_string()]);
        close(
            z2n_p_single(z, n),
            f(&c["z2n_p"][n.to_string()]),
            1e-10,
            "χ² tail",
        );
    }
    let h = h_test(&ph);
    close(h.h, f(&c["h"]), 1e-12, "H");
    assert_eq!(h.harmonics as u64, c["h_m"].as_u64().unwrap());
    let hr = h_test(&fv(&c["random_phases"]));
    close(hr.h, f(&c["random_h"]), 1e-10, "H random");
    assert_eq!(hr.harmonics as u64, c["random_h_m"].as_u64().unwrap());
    close(
        harmonic_powers(&fv(&c["random_phases"]), 3).iter().sum(),
        f(&c["random_z2n_3"]),
        1e-12,
        "Z²₃",
    );
    let t = fv(&c["event_times_s"]);
    close(
        z2n(&phases(&t, 0.0, f(&c["event_freq_hz"]), 0.0), 1),
        f(&c["event_z2_1"]),
        1e-10,
        "Z²₁ of events",
    );
}

#[test]
fn scan_bound_matches_formula_evaluated_with_scipy() {
    for case in fixture()["scan_fap"].as_array().unwrap() {
        let got = z2n_scan_fap(
            f(&case["z"]),
            case["n"].as_u64().unwrap() as usize,
            f(&case["band_hz"]),
            f(&case["var_t_s2"]),
        );
        close(got, f(&case["fap"]), 1e-9, "scan FAP");
    }
}

#[test]
fn fold_statistics_match_scipy_power_divergence() {
    let fx = fixture();
    let counts: Vec<u32> = fv(&fx["fold"]["counts"])
        .iter()
        .map(|&c| c as u32)
        .collect();
    for case in fx["fold"]["cases"].as_array().unwrap() {
        let t = fold_test(&counts, &fv(&case["exposure"]));
        close(t.chi2, f(&case["chi2"]), 1e-12, "Pearson χ²");
        close(t.chi2_p(), f(&case["chi2_p"]), 1e-8, "χ² p");
        close(t.g, f(&case["g"]), 1e-12, "G");
        close(t.g_p(), f(&case["g_p"]), 1e-8, "G p");
    }
}

#[test]
fn lomb_scargle_matches_astropy() {
    // astropy LombScargle, fit_mean=True, center_data=True, normalization='standard';
    // FAP method='baluev' (Baluev 2008).
    let fx = fixture();
    let l = &fx["lomb"];
    let t = fv(&l["t"]);
    let ones = vec![1.0; t.len()];
    let p = lomb_scargle(&t, &fv(&l["y"]), &ones, &fv(&l["freq"]));
    for (a, b) in p.iter().zip(fv(&l["power"])) {
        assert!((a - b).abs() < 1e-9, "{a} vs {b}");
    }
    let best = p.iter().cloned().fold(0.0, f64::max);
    close(
        fap_baluev(best, f(&l["f_max_grid"]), &t, &ones),
        f(&l["fap_baluev"]),
        1e-6,
        "Baluev FAP of peak",
    );
    for (z, want) in l["fap_baluev_levels"].as_object().unwrap() {
        close(
            fap_baluev(z.parse().unwrap(), f(&l["f_max"]), &t, &ones),
            f(want),
            1e-9,
            "Baluev FAP",
        );
    }
    let dy = fv(&l["dy"]);
    let pw = lomb_scargle(&t, &fv(&l["y_weighted"]), &dy, &fv(&l["freq_weighted"]));
    for (a, b) in pw.iter().zip(fv(&l["power_weighted"])) {
        assert!((a - b).abs() < 1e-9, "weighted {a} vs {b}");
    }
    let best_w = pw.iter().cloned().fold(0.0, f64::max);
    close(
        fap_baluev(best_w, 1.5, &t, &dy),
        f(&l["fap_baluev_weighted"]),
        1e-9,
        "weighted Baluev FAP",
    );
}

#[test]
fn waiting_time_likelihood_matches_scipy() {
    // Oppermann, Yu & Pen 2018 Weibull likelihood with observing gaps; scipy gammaincc.
    let fx = fixture();
    let w = &fx["waiting"];
    let bursts = fv(&w["bursts"]);
    let sessions: Vec<(f64, f64)> = w["sessions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| (f(&s[0]), f(&s[1])))
        .collect();
    let (grouped, _) = group_by_session(&bursts, &sessions);
    for case in w["lnl"].as_array().unwrap() {
        close(
            weibull_log_likelihood(&grouped, f(&case["k"]), f(&case["r"])),
            f(&case["lnl"]),
            1e-10,
            "ln L",
        );
    }
    let st = waiting_time_stats(&bursts, &sessions).unwrap();
    assert!(st.weibull.log_likelihood >= f(&w["grid_max"]["lnl"]) - 1e-9);
    close(
        st.poisson.rate_lo_per_day,
        f(&w["poisson_limits_n4_t06"][0]),
        1e-9,
        "Poisson lower",
    );
    close(
        st.poisson.rate_hi_per_day,
        f(&w["poisson_limits_n4_t06"][1]),
        1e-9,
        "Poisson upper",
    );
}

#[test]
fn power_law_index_matches_scipy_pareto_fit() {
    // Crawford et al. 1970 / Clauset et al. 2009 estimator = Pareto MLE (b = α − 1).
    let fx = fixture();
    let p = &fx["powerlaw"];
    let fit = fit_power_law(&fv(&p["values"]), Some(f(&p["s_min"])), 0, 0).unwrap();
    close(fit.alpha, f(&p["alpha"]), 1e-6, "α");
    close(fit.alpha_err, f(&p["alpha_err"]), 1e-6, "σα");
    close(fit.ks_distance, f(&p["ks"]), 1e-6, "KS D");
}

#[test]
fn sparse_pulse_period_matches_numpy_polyfit() {
    let fx = fixture();
    let d = &fx["divisor"];
    let r = common_divisor_period(&fv(&d["toas_s"]), 0.2, 0.05, 1_000_000).unwrap();
    close(r.solution.period_s, f(&d["period_s"]), 1e-10, "P");
    close(r.solution.rms_s, f(&d["rms_s"]), 1e-6, "rms");
    let n0 = r.solution.pulse_numbers[0];
    let turns: Vec<i64> = d["turns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_i64().unwrap())
        .collect();
    assert_eq!(
        r.solution
            .pulse_numbers
            .iter()
            .map(|n| n - n0)
            .collect::<Vec<_>>(),
        turns
    );
}
