//! Writes the benchmark network (see `benches/network.rs`) as plain SPICE
//! decks for `benches/ngspice_side_by_side.sh`, one per grid:
//!
//! - `sweep_1000.cir`: the sweep benchmark's 1,000 points, 44 Hz to 44 kHz;
//! - `sweep_2.cir`: two points, to time ngspice's start and set-up alone;
//! - `montecarlo.cir`: the Monte Carlo grid, 201 points, 440 Hz to 44 kHz;
//! - `noise_1000.cir` and `noise_2.cir`: ngspice's `.noise` on the sweep's
//!   grids, the op-amps carrying the default input noise.
//!
//! Usage: `cargo run --release --example export_bench_deck -- DIR`

use std::path::PathBuf;

use nocoil::export::spice::{deck, noise_deck, AcSweep, DeckNoise};

#[path = "../benches/network.rs"]
mod network;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = PathBuf::from(
        std::env::args()
            .nth(1)
            .ok_or("usage: export_bench_deck DIR")?,
    );
    std::fs::create_dir_all(&dir)?;
    let netlist = network::fdnr_lowpass(network::OPAMP);
    let (from, to, _) = network::SWEEP;
    let (mc_from, mc_to, _) = network::MONTE_CARLO;
    let decks = [
        // 3 decades x 333 + 1 = 1,000 points, those of log_grid.
        (
            "sweep_1000.cir",
            AcSweep {
                points_per_decade: 333,
                start_hz: from,
                stop_hz: to,
            },
        ),
        (
            "sweep_2.cir",
            AcSweep {
                points_per_decade: 1,
                start_hz: from,
                stop_hz: 10.0 * from,
            },
        ),
        // 2 decades x 100 + 1 = 201 points.
        (
            "montecarlo.cir",
            AcSweep {
                points_per_decade: 100,
                start_hz: mc_from,
                stop_hz: mc_to,
            },
        ),
    ];
    let noise = DeckNoise {
        opamp: nocoil::spec::DEFAULT_OPAMP_NOISE,
        temperature_k: 300.0,
    };
    for (name, sweep) in decks {
        let path = dir.join(name);
        std::fs::write(&path, deck(&netlist, &sweep)?)?;
        println!("wrote {}", path.display());
        if let Some(points) = name.strip_prefix("sweep_") {
            let path = dir.join(format!("noise_{points}"));
            std::fs::write(&path, noise_deck(&netlist, &sweep, &noise)?)?;
            println!("wrote {}", path.display());
        }
    }
    Ok(())
}
