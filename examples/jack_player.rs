//! Test helper (not part of brink): play a WAV file in a loop through a JACK output, via cpal,
//! so the tests can feed brink's JACK capture from a real JACK client. Build with
//! `--features jack`; run as `jack_player FILE.wav`; stop it with a signal.

use std::error::Error;
use std::path::Path;
use std::time::Duration;

use brink::source::WavSource;
use cpal::traits::{DeviceTrait, HostTrait, StreamTrait};

fn main() -> Result<(), Box<dyn Error>> {
    let path = std::env::args()
        .nth(1)
        .ok_or("usage: jack_player FILE.wav")?;
    let mut src = WavSource::open(Path::new(&path))?;
    let info = src.info().clone();
    let mut samples = Vec::new();
    let mut block = Vec::new();
    while src.read_frames(&mut block, 4096)? > 0 {
        samples.extend_from_slice(&block);
    }
    if samples.is_empty() {
        return Err("the file holds no audio".into());
    }
    let host = cpal::host_from_id(cpal::HostId::Jack)?;
    let device = host
        .default_output_device()
        .ok_or("no JACK output: is a JACK server running?")?;
    let config = cpal::StreamConfig {
        channels: u16::try_from(info.channels)?,
        sample_rate: info.sample_rate,
        buffer_size: cpal::BufferSize::Default,
    };
    let mut pos = 0usize;
    let stream = device.build_output_stream(
        config,
        move |out: &mut [f32], _: &cpal::OutputCallbackInfo| {
            for s in out.iter_mut() {
                *s = samples[pos];
                pos = (pos + 1) % samples.len();
            }
        },
        |e| eprintln!("jack_player: {e}"),
        None,
    )?;
    stream.play()?;
    println!("playing");
    loop {
        std::thread::sleep(Duration::from_secs(1));
    }
}
