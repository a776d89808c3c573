//! The audio queue between the audio side (I2S, USB, codec interrupt) and
//! the timer side (update interrupt or DMA refill), with a defined
//! behaviour on underrun: the output fades to silence, which the modulator
//! turns into 50 % duty (2-level) or equal legs (3-level), never a rail held
//! on.
//!
//! Built on `heapless::spsc`, a lock-free single-producer single-consumer
//! queue of fixed capacity: the producer and the consumer can live in
//! different interrupts without a critical section.
//!
//! ```
//! use heapless::spsc::Queue;
//! use ticktone::queue::Feeder;
//! let mut q: Queue<[i32; 1], 8> = Queue::new();
//! let (mut audio_side, timer_side) = q.split();
//! let mut feed = Feeder::new(timer_side, 4); // fade over 4 frames
//! audio_side.enqueue([1 << 30]).unwrap();
//! assert_eq!(feed.next_frame(), [1 << 30]);
//! // The queue ran dry: the last frame fades linearly to zero, counted.
//! assert_eq!(feed.next_frame(), [3 << 28]);
//! assert_eq!(feed.next_frame(), [2 << 28]);
//! assert_eq!(feed.next_frame(), [1 << 28]);
//! assert_eq!(feed.next_frame(), [0]);
//! assert_eq!(feed.next_frame(), [0]);
//! assert_eq!(feed.underruns(), 5);
//! ```

use heapless::spsc::Consumer;

/// The timer side of the queue: hands out one frame (Q1.31, one value per
/// channel) per call, fading to silence when the queue is empty.
pub struct Feeder<'a, const CH: usize, const N: usize> {
    queue: Consumer<'a, [i32; CH], N>,
    fade_frames: u32,
    last: [i32; CH],
    step: [i32; CH],
    underruns: u32,
}

impl<'a, const CH: usize, const N: usize> Feeder<'a, CH, N> {
    /// A feeder that fades over `fade_frames` frames on underrun (at least 1;
    /// about 1 ms of frames is gentle on a speaker and quick enough to
    /// matter little when audio resumes).
    pub fn new(queue: Consumer<'a, [i32; CH], N>, fade_frames: u32) -> Self {
        Self {
            queue,
            fade_frames: fade_frames.max(1),
            last: [0; CH],
            step: [0; CH],
            underruns: 0,
        }
    }

    /// The next frame: from the queue, or on underrun the last frame moved
    /// one step toward zero (reaching it exactly after `fade_frames`).
    #[inline]
    pub fn next_frame(&mut self) -> [i32; CH] {
        if let Some(frame) = self.queue.dequeue() {
            self.last = frame;
            self.step = [0; CH];
            return frame;
        }
        self.underruns = self.underruns.wrapping_add(1);
        for (v, s) in self.last.iter_mut().zip(self.step.iter_mut()) {
            if *s == 0 && *v != 0 {
                // Fade length fixed at the start of the underrun; round the
                // step away from zero so zero is reached in time.
                let n = self.fade_frames as i64;
                let m = *v as i64;
                *s = ((m.abs() + n - 1) / n * m.signum()) as i32;
            }
            *v = if (*v as i64 - *s as i64).signum() == (*v as i64).signum() {
                *v - *s
            } else {
                0
            };
            if *v == 0 {
                *s = 0;
            }
        }
        self.last
    }

    /// Frames handed out while the queue was empty.
    pub const fn underruns(&self) -> u32 {
        self.underruns
    }
}
