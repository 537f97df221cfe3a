//! `caravan preview FILE --frame N -o out.png`: one frame with its segmentation outlines.

use super::{describe_diameter, InputArgs, SegmentationArgs};
use caravan::output::write_atomic;
use caravan::render::outline_preview;
use caravan::segment::segment_frame;
use caravan::{Error, Result};
use clap::Args;
use std::path::PathBuf;

#[derive(Args)]
pub struct PreviewArgs {
    #[command(flatten)]
    input: InputArgs,
    /// Frame to show (0-based).
    #[arg(long, default_value_t = 0)]
    frame: usize,
    /// Output PNG.
    #[arg(short, long)]
    output: PathBuf,
    #[command(flatten)]
    segmentation: SegmentationArgs,
}

pub fn run(args: PreviewArgs) -> Result<()> {
    let mut stack = args.input.open()?;
    if args.frame >= stack.info().frames {
        return Err(Error::parameter(
            "--frame",
            args.frame,
            format!("the recording has frames 0..{}", stack.info().frames - 1),
        ));
    }
    let (diameter, params) = args.segmentation.resolve(&mut stack)?;
    let frame = stack.read_frame(args.frame)?;
    let image = frame.to_image();
    let seg = segment_frame(&image, args.frame, &params);
    let png = outline_preview(
        image.as_slice().expect("standard layout"),
        &seg.labels,
        frame.width,
        frame.height,
        args.frame,
        seg.detections.len(),
    );
    let mut bytes = Vec::new();
    png.write_to(&mut std::io::Cursor::new(&mut bytes), image::ImageFormat::Png)
        .map_err(|e| Error::output(&args.output, std::io::Error::other(e)))?;
    write_atomic(&args.output, &bytes)?;
    println!(
        "frame {}: {} objects, threshold {:.1}, diameter {}; wrote {}",
        args.frame,
        seg.detections.len(),
        seg.threshold,
        describe_diameter(&diameter),
        args.output.display()
    );
    Ok(())
}
