//! `caravan inspect FILE`: what a recording holds, before any long run.

use super::InputArgs;
use caravan::params::SegmentParams;
use caravan::pipeline::resolve_diameter;
use caravan::stack::CalibrationSource;
use caravan::Result;
use clap::Args;

#[derive(Args)]
pub struct InspectArgs {
    #[command(flatten)]
    input: InputArgs,
}

pub fn run(args: InspectArgs) -> Result<()> {
    let path = args.input.path()?;
    if path.is_dir() {
        if let Some(l) = caravan::export::recognise_layout(path)? {
            println!("folder       {}", path.display());
            println!("layout       Cell Tracking Challenge, {} (Maška et al. 2014)", l.kind);
            println!(
                "frames       {} track masks, {} tracks",
                l.mask_files.len(),
                l.tracks.len()
            );
            if l.segmentation_frames > 0 {
                println!("segmentation {} frames", l.segmentation_frames);
            }
            return Ok(());
        }
    }
    let mut stack = args.input.open()?;
    let info = stack.info().clone();
    let c = info.calibration;
    let source = |s: CalibrationSource| {
        serde_json::to_value(s)
            .ok()
            .and_then(|v| v.as_str().map(String::from))
            .unwrap_or_default()
    };
    println!("file         {}", info.path.display());
    println!("container    {} ({}, {})", info.container, info.byte_order, info.layout);
    println!("frames       {} of {} x {} px", info.frames, info.width, info.height);
    println!(
        "samples      {:?}, {} per pixel, channel {} of {}, {} Z plane(s)",
        info.sample_type, info.samples_per_pixel, info.channel, info.channels, info.z_planes
    );
    println!("compression  {}", info.compression);
    println!("on disk      {:.1} MiB", info.bytes_on_disk as f64 / (1 << 20) as f64);
    match c.pixel_size_um {
        Some(p) => println!("pixel size   {p} µm ({})", source(c.pixel_size_source)),
        None => println!("pixel size   unknown (give --pixel-size)"),
    }
    match c.frame_interval_s {
        Some(t) => println!("interval     {t} s ({})", source(c.frame_interval_source)),
        None => println!("interval     unknown (give --interval)"),
    }
    match resolve_diameter(&mut stack, None, &SegmentParams::for_diameter) {
        Ok(d) => {
            let px = d.px();
            let um = c
                .pixel_size_um
                .map(|p| format!(" = {:.1} µm", px * p))
                .unwrap_or_default();
            println!("nucleus size {px:.1} px{um} ({})", super::describe_diameter(&d));
        }
        Err(e) => println!("nucleus size unknown: {e}"),
    }
    Ok(())
}
