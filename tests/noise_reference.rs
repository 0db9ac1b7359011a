//! cairn's clipped noise estimate against astropy 8.0.2 `sigma_clipped_stats(sigma=3,
//! maxiters=10, cenfunc='median', stdfunc='mad_std')` and `mad_std`
//! (fixtures/noise/sigma_clipped.json, made by tests/oracle/noise_astropy.py).

mod common;

use cairn::noise;
use common::{assert_close, fixture_json, num, nums};
use ndarray::Array2;

#[test]
fn clipped_statistics_match_astropy() {
    let v = fixture_json("noise/sigma_clipped.json");
    let cases = v["cases"].as_object().unwrap();
    assert!(cases.len() >= 4);
    for (name, c) in cases {
        let shape = nums(&c["shape"]);
        let values: Vec<f32> = nums(&c["values"]).into_iter().map(|x| x as f32).collect();
        let map = Array2::from_shape_vec((shape[0] as usize, shape[1] as usize), values).unwrap();
        let s = noise::clipped_stats(map.view()).unwrap();
        // astropy 8.0.2 sigma_clipped_stats: mean, median, std of the clipped pixels.
        assert_close(
            s.mean,
            num(&c["clipped_mean"]),
            1e-12,
            0.0,
            &format!("{name} mean"),
        );
        assert_close(
            s.median,
            num(&c["clipped_median"]),
            1e-12,
            0.0,
            &format!("{name} median"),
        );
        assert_close(
            s.std,
            num(&c["clipped_std"]),
            1e-12,
            0.0,
            &format!("{name} std"),
        );
        // astropy 8.0.2 mad_std of all finite pixels.
        let sample = noise::finite_sample(map.view());
        assert_close(
            noise::mad_std(&sample),
            num(&c["mad_std"]),
            1e-12,
            0.0,
            &format!("{name} mad_std"),
        );
    }
}
