//! Test helper (not part of brink): a stage under test on a JACK server. It applies a known
//! transfer curve between its port `brink_curve:in` and `brink_curve:out`, and wires itself into
//! a sweep's loop: every output port `cpal_client…_out:out_0` that appears is connected to its
//! input, and its output to every `cpal_client…_in:in_0`. Build with `--features jack`; run as
//! `jack_curve CURVE`; stop it with a signal.
//!
//! Curves (x in full-scale units):
//!   `hardclip:C`   y = clamp(x, −C, C)          symmetric hard clip at C
//!   `square:B`     y = x + B·x²                 asymmetric (single-ended) square-law term
//!   `gain:G`       y = G·x                      a clean stage

use std::error::Error;
use std::time::Duration;

/// A transfer curve, run in the JACK process callback.
type Curve = Box<dyn Fn(f32) -> f32 + Send>;

fn curve(spec: &str) -> Result<Curve, Box<dyn Error>> {
    let (kind, value) = spec
        .split_once(':')
        .ok_or("usage: jack_curve hardclip:C | square:B | gain:G")?;
    let v: f32 = value.parse()?;
    Ok(match kind {
        "hardclip" => Box::new(move |x: f32| x.clamp(-v, v)),
        "square" => Box::new(move |x: f32| x + v * x * x),
        "gain" => Box::new(move |x: f32| v * x),
        other => return Err(format!("unknown curve '{other}'").into()),
    })
}

fn main() -> Result<(), Box<dyn Error>> {
    let spec = std::env::args()
        .nth(1)
        .ok_or("usage: jack_curve hardclip:C | square:B | gain:G")?;
    let f = curve(&spec)?;
    let (client, _) = jack::Client::new("brink_curve", jack::ClientOptions::NO_START_SERVER)?;
    let input = client.register_port("in", jack::AudioIn::default())?;
    let mut output = client.register_port("out", jack::AudioOut::default())?;
    let process = jack::contrib::ClosureProcessHandler::new(
        move |_: &jack::Client, ps: &jack::ProcessScope| -> jack::Control {
            for (o, i) in output.as_mut_slice(ps).iter_mut().zip(input.as_slice(ps)) {
                *o = f(*i);
            }
            jack::Control::Continue
        },
    );
    let active = client.activate_async((), process)?;
    println!("running {spec}");
    let mut wired: Vec<(String, String)> = Vec::new();
    loop {
        let c = active.as_client();
        let outs = c.ports(
            Some("^cpal_client.*_out:out_0$"),
            None,
            jack::PortFlags::IS_OUTPUT,
        );
        let ins = c.ports(
            Some("^cpal_client.*_in:in_0$"),
            None,
            jack::PortFlags::IS_INPUT,
        );
        let wanted = outs
            .iter()
            .map(|p| (p.clone(), "brink_curve:in".to_string()))
            .chain(
                ins.iter()
                    .map(|p| ("brink_curve:out".to_string(), p.clone())),
            );
        for (src, dst) in wanted {
            if wired.contains(&(src.clone(), dst.clone())) {
                continue;
            }
            // A port may be listed before its client is active: try again on the next round.
            match c.connect_ports_by_name(&src, &dst) {
                Ok(()) => {
                    println!("wired {src} -> {dst}");
                    wired.push((src, dst));
                }
                Err(e) => println!("not yet {src} -> {dst}: {e}"),
            }
        }
        // Ports that went away may come back under the same name (a new sweep).
        wired.retain(|(s, d)| outs.contains(s) || ins.contains(d));
        std::thread::sleep(Duration::from_millis(20));
    }
}
