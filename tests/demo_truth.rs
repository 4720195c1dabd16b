//! The demo job's change record against the generator's known truth (demo-data/truth.json).
//!
//! The truth is computed from the noise-free model that made the demo surveys; the surveys add
//! noise at their stated σ and a little roughness, so every comparison carries a tolerance that
//! follows from that noise.

use dunereel::{job, run_job, RunOptions};
use serde_json::Value;

fn read_json(path: &std::path::Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn demo_record_matches_the_generator_truth() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut job = job::load(&root.join("jobs/demo.yaml")).unwrap();
    // Small frames keep the test quick; the figures do not depend on the view.
    job.view.width = 160;
    job.view.height = 90;
    job.view.supersample = 1;
    job.output.png_frames = false;
    job.output.poster = false;
    let d = tempfile::tempdir().unwrap();
    let out = d.path().join("demo");
    run_job(
        &job,
        &RunOptions {
            output_folder: Some(out.clone()),
            ..Default::default()
        },
    )
    .unwrap();
    assert!(dunereel::archive::verify(&out).unwrap().is_intact());

    let truth = read_json(&root.join("demo-data/truth.json"));
    let pairs = read_json(&out.join("data/tables/pairs.json"));
    let surveys = read_json(&out.join("data/tables/surveys.json"));
    let landforms = read_json(&out.join("data/tables/landforms.json"));
    let intervals = truth["intervals"].as_array().unwrap();
    assert_eq!(intervals.len(), 4);
    for (i, t) in intervals.iter().enumerate() {
        let p = &pairs[i];
        assert_eq!(p["pair_kind"], "consecutive");
        let f = |v: &Value| v.as_f64().unwrap();
        // Net volume change of the whole grid vs the model's change of dune volume (the base plane
        // and the secondary dune's volume do not change). Two error sources, combined in quadrature:
        // Check: Lane et al. (2003) — σ_V = A·σ_DoD·√n for independent cell errors; REFERENCES.md §7
        let sigma_v = f(&p["volume_sigma_independent_m3"]);
        // Check: analytic — the generator's roughness is value noise on a 4-cell lattice with values
        // uniform in ±0.06 m (σ = 0.06/√3); over 80×60 lattice points its mean has σ = 0.0346/√4800 m,
        // √2 of that for a difference of two surveys, times the 76 800 m² area ≈ 54 m³
        let sigma_rough = 76_800.0 * (0.06 / 3f64.sqrt()) * 2f64.sqrt() / 4800f64.sqrt();
        let tolerance = 3.0 * sigma_v.hypot(sigma_rough);
        let net = f(&p["net_volume_raw_m3"]);
        let want = f(&t["volume_change_m3"]);
        assert!(
            (net - want).abs() < tolerance,
            "pair {i}: {net} vs {want} (tolerance {tolerance})"
        );
        // Migration of the largest moving landform (the main dune) vs the model's translation.
        // Check: demo generator truth (analytic translation of the model) — rate within 0.4 m/yr,
        // direction within 3°, or within asin(0.5 m / distance) for a short move (0.5 m across
        // the move, the acceptance bound for a landform's migration); survey noise, the
        // roughness and the dune's loss of height set these bounds
        let main = landforms
            .as_array()
            .unwrap()
            .iter()
            .find(|l| {
                l["from_id"] == p["from_id"] && l["to_id"] == p["to_id"] && l["landform_id"] == "1"
            })
            .expect("a landform row for the main dune");
        let (te, tn) = (f(&t["crest_shift_east_m"]), f(&t["crest_shift_north_m"]));
        let rate = f(&main["migration_rate_m_per_yr"]);
        assert!(
            (rate - f(&t["crest_rate_m_per_yr"])).abs() < 0.4,
            "pair {i}: rate {rate} vs {}",
            t["crest_rate_m_per_yr"]
        );
        let az = f(&main["migration_azimuth_deg"]);
        let az_tol = (0.5 / te.hypot(tn)).asin().to_degrees().max(3.0);
        assert!(
            (az - f(&t["crest_azimuth_deg"])).abs() < az_tol,
            "pair {i}: azimuth {az} vs {} (tolerance {az_tol:.1} deg)",
            t["crest_azimuth_deg"]
        );
    }
    for (i, t) in truth["surveys"].as_array().unwrap().iter().enumerate() {
        let s = &surveys[i];
        let peak = s["max_elevation_m"].as_f64().unwrap();
        let want = t["main_dune"]["surface_peak_elevation_m"].as_f64().unwrap();
        let sigma = t["sigma_z_m"].as_f64().unwrap();
        // Check: demo generator truth — the highest cell is the model's peak plus noise: within
        // 3σ of the survey plus 0.06 m roughness plus 0.1 m for the cell grid missing the exact top
        assert!(
            (peak - want).abs() < 3.0 * sigma + 0.16,
            "survey {i}: {peak} vs {want}"
        );
        // Check: demo generator truth — the crest fit averages the noise away: within 3 standard
        // errors of the fit plus the 0.06 m roughness, which the fit cannot tell from relief
        let crest = s["crest_elevation_m"].as_f64().unwrap();
        let se = s["crest_standard_error_m"].as_f64().unwrap();
        assert!(
            (crest - want).abs() < 3.0 * se + 0.06,
            "survey {i}: crest {crest} (se {se}) vs {want}"
        );
        let x = s["crest_x_crs"].as_f64().unwrap();
        let y = s["crest_y_crs"].as_f64().unwrap();
        let (tx, ty) = (
            t["main_dune"]["surface_peak_x"].as_f64().unwrap(),
            t["main_dune"]["surface_peak_y"].as_f64().unwrap(),
        );
        // The crest is broad, so noise and roughness move its top along it by a few metres.
        assert!(
            (x - tx).hypot(y - ty) < 8.0,
            "survey {i}: peak at ({x}, {y}) vs ({tx}, {ty})"
        );
    }
}
