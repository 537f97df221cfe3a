//! Per-stage timings on a seeded synthetic 1024 x 1024 16-bit frame with ~300 nuclei of 14 px
//! (the size the speed targets talk about). Run: `cargo bench --bench stages`.

use caravan::image2d::Image;
use caravan::params::SegmentParams;
use caravan::preprocess::{gaussian_blur, prepare, tophat};
use caravan::segment::{choose_threshold, segment_frame, split_touching};
use caravan::synth::{Scenario, Scene, SynthParams};
use divan::{black_box, Bencher};
use std::sync::LazyLock;

static FRAME: LazyLock<Image> = LazyLock::new(|| {
    let mut p = SynthParams::new(Scenario::Dish, 1024, 1024, 1);
    p.nuclei = 300;
    let scene = Scene::simulate(&p);
    Image::from_shape_vec((1024, 1024), scene.render(0).into_iter().map(f32::from).collect()).unwrap()
});
static PARAMS: LazyLock<SegmentParams> = LazyLock::new(|| SegmentParams::for_diameter(14.0));

fn main() {
    // As the `caravan` binary: freed frame buffers are reused, not returned to the kernel.
    caravan::keep_freed_memory_for_reuse();
    divan::main();
}

#[divan::bench]
fn gaussian_sigma_1_4(b: Bencher) {
    b.bench(|| gaussian_blur(black_box(&FRAME), 1.4));
}

/// The same filter as a run's frame takes it, kept on the thread segmenting the frame (a band
/// of rows at a time).
#[divan::bench]
fn gaussian_sigma_1_4_on_its_thread(b: Bencher) {
    b.bench(|| caravan::preprocess::filters_on_this_thread(|| gaussian_blur(black_box(&FRAME), 1.4)));
}

#[divan::bench]
fn tophat_background(b: Bencher) {
    b.bench(|| tophat(black_box(&FRAME), 29, 7.0));
}

#[divan::bench]
fn otsu_on_prepared(b: Bencher) {
    let prepared = prepare(&FRAME, &PARAMS);
    b.bench(|| choose_threshold(black_box(prepared.as_slice().unwrap()), PARAMS.threshold));
}

#[divan::bench]
fn edt_seeds_watershed(b: Bencher) {
    let prepared = prepare(&FRAME, &PARAMS);
    let t = choose_threshold(prepared.as_slice().unwrap(), PARAMS.threshold);
    let mask: Vec<bool> = prepared.iter().map(|&v| v as f64 > t).collect();
    b.bench(|| {
        split_touching(
            black_box(&mask),
            1024,
            1024,
            PARAMS.seed_h_px,
            PARAMS.distance_smoothing_px,
        )
    });
}

#[divan::bench]
fn whole_frame(b: Bencher) {
    b.bench(|| segment_frame(black_box(&FRAME), 0, &PARAMS));
}

/// A frame as a run segments it: its filters kept on its thread, without the scan for NaN
/// (the benchmark frame's samples are whole numbers, as a 16-bit recording's), and its label
/// image given back once used (cleared where its objects are), as a run that writes no label
/// images does.
#[divan::bench]
fn whole_frame_as_a_run_does(b: Bencher) {
    b.bench(|| {
        let segmented = caravan::preprocess::filters_on_this_thread(|| {
            caravan::segment::segment_whole_number_frame(black_box(&FRAME), 0, &PARAMS)
        });
        let segmented = black_box(segmented);
        match segmented.object_pixels {
            Some(objects) => caravan::segment::label::give_back_label_image_of(segmented.labels, &objects),
            None => caravan::segment::label::give_back_label_image(segmented.labels),
        }
    });
}

/// One sampled frame of the diameter estimate (a run examines up to five, in parallel): to
/// compare with `whole_frame`, the per-frame cost it is paid once against.
#[divan::bench]
fn diameter_estimate_one_frame(b: Bencher) {
    b.bench(|| caravan::segment::diameter::examine_frame(black_box(&FRAME), 0, &SegmentParams::for_diameter));
}

/// The motion estimate over 100 frames of ~300 detections (the frame's nuclei, moved as a
/// persistent random walk of 3 px per frame).
#[divan::bench]
fn motion_estimate_100_frames(b: Bencher) {
    let mut p = SynthParams::new(Scenario::Dish, 1024, 1024, 100);
    p.nuclei = 300;
    p.motion = Some(caravan::synth::PersistentMotion {
        speed_px_per_frame: 3.0,
        persistence_frames: 5.0,
    });
    let scene = Scene::simulate(&p);
    let frames: Vec<Vec<[f64; 2]>> = (0..100)
        .map(|t| {
            scene
                .nuclei(t)
                .iter()
                .filter(|n| !n.hidden)
                .map(|n| [n.x, n.y])
                .collect()
        })
        .collect();
    b.bench(|| caravan::link::estimate::estimate_motion(black_box(&frames), 14.0));
}

/// The outline pixels of a segmented frame, as the first pass spools them for the movie.
#[divan::bench]
fn outline_of_a_segmented_frame(b: Bencher) {
    let labels = segment_frame(&FRAME, 0, &PARAMS).labels;
    b.bench(|| caravan::render::movie::outline_pairs(black_box(&labels), 1024, 1024));
}

/// The frame stretched to 8 bits, as the review page stores it at full resolution.
static GREYS: LazyLock<Vec<u8>> = LazyLock::new(|| caravan::render::stretch_to_u8(FRAME.as_slice().unwrap()));

/// A movie frame's LZW code stream: the frame's grey levels block-averaged 2 x 2 to 512 x 512
/// and stretched to the movie's 240 greys, as the QC movie's frames are before their overlay.
#[divan::bench]
fn movie_frame_lzw(b: Bencher) {
    let small = caravan::render::box_average(FRAME.as_slice().unwrap(), 1024, 1024, 2);
    let greys: Vec<u8> = caravan::render::stretch_to_u8(&small)
        .iter()
        .map(|&g| (g as u32 * 239 / 255) as u8)
        .collect();
    b.bench(|| caravan::render::lzw::gif_lzw(black_box(&greys)));
}

/// A review frame at full resolution, 1024 x 1024, quality 75: our encoder ...
#[divan::bench]
fn review_jpeg_ours(b: Bencher) {
    b.bench(|| caravan::render::jpeg::grey_jpeg(black_box(&GREYS), 1024, 1024, 75));
}

/// ... and the `image` crate's, which writes the same bytes (the ratio is the gain).
#[divan::bench]
fn review_jpeg_image_crate(b: Bencher) {
    b.bench(|| {
        let mut out = Vec::new();
        image::codecs::jpeg::JpegEncoder::new_with_quality(&mut out, 75)
            .encode(black_box(&GREYS), 1024, 1024, image::ExtendedColorType::L8)
            .unwrap();
        out
    });
}
