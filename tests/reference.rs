//! Per-pixel stages against scikit-image 0.26 / scipy 1.17.1 on the arrays in
//! fixtures/reference.json (made by fixtures/make_fixtures.py, versions recorded in the file).

use caravan::image2d::Image;
use caravan::preprocess::{gaussian_blur, gaussian_laplace, grey_opening_square};
use caravan::segment::distance_transform::squared_edt;
use caravan::segment::hmaxima::h_maxima;
use caravan::segment::label::label_components;
use caravan::segment::threshold::{li_threshold, otsu_threshold, triangle_threshold, Histogram};
use serde_json::Value;

fn reference() -> Value {
    let text = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures/reference.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn floats(v: &Value, key: &str) -> Vec<f64> {
    v[key].as_array().unwrap().iter().map(|x| x.as_f64().unwrap()).collect()
}

fn shape(v: &Value) -> (usize, usize) {
    let s = v["blobs_shape"].as_array().unwrap();
    (s[0].as_u64().unwrap() as usize, s[1].as_u64().unwrap() as usize)
}

fn image(v: &Value, key: &str) -> Image {
    let (h, w) = shape(v);
    Image::from_shape_vec((h, w), floats(v, key).into_iter().map(|x| x as f32).collect()).unwrap()
}

fn mask(v: &Value) -> Vec<bool> {
    floats(v, "mask").into_iter().map(|x| x != 0.0).collect()
}

#[test]
fn thresholds_match_scikit_image_exactly() {
    let r = reference();
    // Source: skimage.filters.threshold_{otsu,triangle,li} on the uint16 blobs image.
    let ints: Vec<u32> = floats(&r, "blobs_uint16").into_iter().map(|x| x as u32).collect();
    let h = Histogram::of_integers(&ints).unwrap();
    assert_eq!(otsu_threshold(&h), r["thresholds_uint16"]["otsu"].as_f64().unwrap());
    assert_eq!(
        triangle_threshold(&h),
        r["thresholds_uint16"]["triangle"].as_f64().unwrap()
    );
    assert!((li_threshold(&h) - r["thresholds_uint16"]["li"].as_f64().unwrap()).abs() < 1e-9);
    // Source: the same functions on the float64 image (256-bin histogram).
    let f = Histogram::of_floats(floats(&r, "blobs_float").into_iter(), 256).unwrap();
    assert_eq!(otsu_threshold(&f), r["thresholds_float"]["otsu"].as_f64().unwrap());
    assert_eq!(
        triangle_threshold(&f),
        r["thresholds_float"]["triangle"].as_f64().unwrap()
    );
    // Source: skimage.filters.threshold_li on the float64 image, which iterates on the pixel
    // values themselves; the pipeline iterates on the 256-bin histogram of the frame (as it
    // does for every float frame), so the two agree to within one bin width, (max − min)/256.
    let bin = (f.centers[1] - f.centers[0]).abs();
    let li = r["thresholds_float"]["li"].as_f64().unwrap();
    assert!(
        (li_threshold(&f) - li).abs() <= bin,
        "{} vs {li} (bin {bin})",
        li_threshold(&f)
    );
}

#[test]
fn gaussian_and_opening_match_scipy() {
    let r = reference();
    let img = image(&r, "blobs_float");
    // Source: scipy.ndimage.gaussian_filter(img, 2.0, mode="reflect"); f32 arithmetic here.
    let ours = gaussian_blur(&img, 2.0);
    assert_eq!(
        ours.len(),
        floats(&r, "gaussian_sigma2").len(),
        "one reference value per pixel"
    );
    for (a, b) in ours.iter().zip(floats(&r, "gaussian_sigma2")) {
        assert!((*a as f64 - b).abs() < 1e-3 * b.abs().max(1.0), "{a} vs {b}");
    }
    // Source: scipy.ndimage.grey_opening(img, size=(9, 9), mode="reflect"): min/max only, so
    // equal to the f32 rounding of the input.
    let ours = grey_opening_square(&img, 9);
    assert_eq!(
        ours.len(),
        floats(&r, "grey_opening_9").len(),
        "one reference value per pixel"
    );
    for (a, b) in ours.iter().zip(floats(&r, "grey_opening_9")) {
        assert_eq!(*a, b as f32);
    }
}

#[test]
fn laplacian_of_gaussian_matches_scipy() {
    let r = reference();
    let img = image(&r, "blobs_float");
    // Source: scipy.ndimage.gaussian_laplace(img, sigma, mode="reflect") in float64; here f32
    // sums of up to 73 x 73 taps over values up to ~300, so agreement to 1e-3 grey levels
    // (the largest difference measured was 6.4e-6).
    for (key, sigma) in [("gaussian_laplace_sigma1.7", 1.7), ("gaussian_laplace_sigma9", 9.0)] {
        let want = floats(&r, key);
        let ours = gaussian_laplace(&img, sigma);
        assert_eq!(ours.len(), want.len(), "{key}: one reference value per pixel");
        for (a, b) in ours.iter().zip(want) {
            assert!((*a as f64 - b).abs() < 1e-3, "{key}: {a} vs {b}");
        }
    }
}

#[test]
fn distance_transform_matches_scipy() {
    let r = reference();
    let (h, w) = shape(&r);
    let m = mask(&r);
    // Source: scipy.ndimage.distance_transform_edt(mask) and with sampling=(2, 1).
    for (key, spacing) in [("edt", (1.0, 1.0)), ("edt_sampling_2_1", (2.0, 1.0))] {
        let ours = squared_edt(&m, w, h, spacing);
        assert_eq!(
            ours.len(),
            floats(&r, key).len(),
            "{key}: one reference value per pixel"
        );
        for (a, b) in ours.iter().zip(floats(&r, key)) {
            assert!((a.sqrt() - b).abs() < 1e-9, "{key}: {} vs {b}", a.sqrt());
        }
    }
}

#[test]
fn seeds_and_components_match_scikit_image() {
    let r = reference();
    let (h, w) = shape(&r);
    let m = mask(&r);
    let d: Vec<f32> = squared_edt(&m, w, h, (1.0, 1.0))
        .iter()
        .map(|x| x.sqrt() as f32)
        .collect();
    // Source: skimage.measure.label(mask, connectivity=2).max().
    assert_eq!(
        label_components(&m, w, h).1 as i64,
        r["mask_components"].as_i64().unwrap()
    );
    // Seed counts of `values` inside `mask` for every h of a fixture table `h -> count`.
    let check_seeds = |values: &[f32], mask: &[bool], table: &str| {
        let counts = r[table].as_object().unwrap();
        for (key, count) in counts {
            let hv: f64 = key.parse().unwrap();
            let seeds = h_maxima(values, mask, w, h, hv);
            assert_eq!(
                label_components(&seeds, w, h).1 as i64,
                count.as_i64().unwrap(),
                "{table}, h={hv}"
            );
        }
        counts.len()
    };
    // Source: skimage.morphology.h_maxima(edt, h), labelled with connectivity 2.
    check_seeds(&d, &m, "hmaxima_seed_counts");
    // Source: skimage.morphology.h_maxima(blobs_float, h), labelled with connectivity 2: 107,
    // 86, 5 and 4 seeds for h = 1, 5, 10 and 100 (the ripple's maxima go first, then the
    // faintest blob), so a wrong h would show.
    let blobs: Vec<f32> = floats(&r, "blobs_float").iter().map(|&v| v as f32).collect();
    let everywhere = vec![true; blobs.len()];
    assert_eq!(check_seeds(&blobs, &everywhere, "hmaxima_blobs_seed_counts"), 4);
}
