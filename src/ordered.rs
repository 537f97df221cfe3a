//! Work on a sequence of frames read in order on one thread and handled in parallel on the
//! worker pool, with the results taken back in order: the movie pass (frames drawn and
//! compressed) reads a stack, which only one thread can do, and does more with each frame than
//! reading costs. (The diameter estimate, whose frames' work is itself parallel, cuts it into
//! pieces of its own instead: `segment::diameter::examine_frames`.)

use crate::error::Result;

/// Runs `finish` on `first` and each frame of `rest` as a task of its own on the worker pool,
/// a few frames ahead, and hands the results to `write` in frame order on the calling thread
/// (which reads the frames: `rest` is pulled here). Every worker takes the next frame as soon
/// as it is done with one, and the calling thread's reading and writing overlap the workers'.
/// Stops at the first error of reading or writing (frames in flight are finished and
/// dropped); the outputs are the same on any number of threads.
pub fn in_frame_order<F, R>(
    first: Option<F>,
    rest: impl Iterator<Item = Result<F>>,
    finish: &(dyn Fn(F) -> R + Sync),
    write: &mut dyn FnMut(R) -> Result<()>,
) -> Result<()>
where
    F: Send,
    R: Send,
{
    let window = 2 * rayon::current_num_threads().max(1);
    rayon::in_place_scope(|scope| {
        let mut in_flight = std::collections::VecDeque::new();
        let mut frames = first.map(Ok).into_iter().chain(rest);
        loop {
            while in_flight.len() < window {
                let Some(frame) = frames.next() else { break };
                let frame = frame?;
                let (sender, receiver) = std::sync::mpsc::sync_channel(1);
                scope.spawn(move |_| {
                    // The reader is gone only after an error; then nobody wants this frame.
                    let _ = sender.send(finish(frame));
                });
                in_flight.push_back(receiver);
            }
            let Some(arriving) = in_flight.pop_front() else {
                return Ok(());
            };
            // A task that panicked sends nothing; the scope raises its panic when it ends.
            let Ok(done) = arriving.recv() else { return Ok(()) };
            write(done)?;
        }
    })
}
