//! The block API filling a DMA buffer half at a time, as a timer's DMA
//! burst would consume it.
//!
//! ```text
//! cargo run --example dma_half_buffer
//! ```
//!
//! A circular DMA buffer of two halves feeds the timer's compare registers
//! (one burst of words per update). When the DMA has read the first half it
//! raises "half done"; when it wraps, "all done". Each time, the firmware
//! refills the half the DMA just left, from the audio queue. On hardware the
//! two calls below run in the DMA interrupt; here a loop stands in for it.
//! The code in `refill` is what goes into the interrupt handler: no
//! allocation, no panics, one call to `process`.

use ticktone::{BridgeKind, BridgeSpec, Edge, Modulator, ModulatorSpec, TimerSpec, UpdateScheme};

/// Stereo.
const CH: usize = 2;
/// Input frames a half buffer holds.
const FRAMES_PER_HALF: usize = 16;

/// Refill one half of the DMA buffer from the next input frames. Returns
/// the frames used (fewer only if `audio` ran short: the rest of the half
/// keeps its old words, which the caller must replace with idle words).
fn refill(m: &mut Modulator<CH>, audio: &[i16], half: &mut [u16]) -> usize {
    m.process(audio, half)
}

fn main() -> Result<(), ticktone::ConfigError> {
    // Invented scenario: 98.304 MHz timer, 384 kHz carrier, two updates a
    // period, full bridges with the timer's dead-time generator, input at
    // the update rate (no oversampling in this example).
    let timer = TimerSpec::new(98.304e6, 384e3)
        .with_edge(Edge::Double)
        .with_update(UpdateScheme::Double);
    let spec = ModulatorSpec::new(timer, BridgeSpec::ideal(BridgeKind::Full3), 768e3);
    let mut m = Modulator::<CH>::try_new(spec)?;
    let words_per_half = FRAMES_PER_HALF * m.words_per_frame();
    let mut dma = vec![0u16; 2 * words_per_half];
    println!(
        "{} words per input frame ({} update(s) x {CH} channels x {} words), {} words per half buffer",
        m.words_per_frame(),
        m.updates_per_frame(),
        m.bridge().words_per_update(),
        words_per_half
    );
    println!("burst order per update: L leg A, L leg B, R leg A, R leg B\n");

    // A slow ramp on the left, its negative on the right.
    let audio: Vec<i16> = (0..4 * FRAMES_PER_HALF)
        .flat_map(|k| {
            let v = (k as i32 * 1000 - 32000) as i16;
            [v, v.saturating_neg()]
        })
        .collect();
    for (event, chunk) in audio.chunks(FRAMES_PER_HALF * CH).enumerate() {
        let (first, second) = dma.split_at_mut(words_per_half);
        let (name, half) = if event % 2 == 0 {
            ("half done", first)
        } else {
            ("all done", second)
        };
        let used = refill(&mut m, chunk, half);
        println!(
            "{name:>9}: refilled {used} frames; first update {:?}",
            &half[..4]
        );
    }
    Ok(())
}
