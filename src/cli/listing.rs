//! `cinegauge methods` and `cinegauge patterns`: what can be chosen, from the registry.

use clap::Args;
use serde_json::json;

use cinegauge::recon::REGISTRY;
use cinegauge::sampling::{Pattern, DEFAULT_ACS_LINES};

/// Arguments of `methods` and `patterns`.
#[derive(Debug, Args)]
pub struct ListArgs {
    /// Print the list as JSON on stdout.
    #[arg(long)]
    pub json: bool,
}

pub fn methods(a: ListArgs) -> anyhow::Result<()> {
    if a.json {
        let v: Vec<_> = REGISTRY
            .iter()
            .map(
                |m| json!({"id": m.id(), "description": m.description(), "parameters": m.params()}),
            )
            .collect();
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(());
    }
    for m in REGISTRY {
        println!("{}\n    {}", m.id(), m.description());
        for p in m.params() {
            println!(
                "    --set {}={}  ({} to {}) {}",
                p.name, p.default, p.min, p.max, p.help
            );
        }
    }
    println!("external:<label>\n    a reconstruction made elsewhere, measured with `cinegauge measure --method external:<label>`");
    Ok(())
}

pub fn patterns(a: ListArgs) -> anyhow::Result<()> {
    if a.json {
        let v: Vec<_> = Pattern::ALL
            .iter()
            .map(|p| json!({"id": p.id(), "description": p.description()}))
            .collect();
        println!("{}", serde_json::to_string_pretty(&v)?);
        return Ok(());
    }
    for p in Pattern::ALL {
        println!("{}\n    {}", p.id(), p.description());
    }
    println!(
        "\nR runs from 2 to 24 outside a fully sampled centre of --acs-lines lines (default {DEFAULT_ACS_LINES});\n\
         effective R = all lines / acquired lines, centre included."
    );
    Ok(())
}
