//! A minimal prover-side emitter in Rust (standard library only): the same proof as
//! samples/c/emit_deck_slots.c, the sum of a 3-variable multilinear table over BabyBear,
//! written as the JSON-lines event stream of transcripts/EVENTS.md.
//!
//! Build and record:  rustc -O emit_deck_slots.rs
//!                    stepper record -o deck.sumtr -- ./emit_deck_slots
//! Without STEPPER_EVENTS set it writes the lines to standard output instead.
//! In a real prover, call `emit` where your prover sends a round polynomial and where the
//! verifier's challenge is drawn; elements go out as decimal strings.
use std::env;
use std::fs::OpenOptions;
use std::io::{self, Write};

const P: u64 = 2013265921; // 2^31 - 2^27 + 1
const NUM_VARS: usize = 3;

fn add(a: u64, b: u64) -> u64 { (a + b) % P }
fn sub(a: u64, b: u64) -> u64 { (a + P - b) % P }
fn mul(a: u64, b: u64) -> u64 { (a * b) % P } // both below 2^31: no overflow

fn main() -> io::Result<()> {
    let mut out: Box<dyn Write> = match env::var("STEPPER_EVENTS") {
        Ok(path) => Box::new(OpenOptions::new().append(true).create(true).open(path)?),
        Err(_) => Box::new(io::stdout()),
    };
    // one write and flush per line, so a crash keeps every complete line
    let mut emit = |line: String| -> io::Result<()> { writeln!(out, "{line}")?; out.flush() };

    let mut table: Vec<u64> = vec![3, 1, 4, 1, 5, 9, 2, 6];
    let challenges: [u64; NUM_VARS] = [17, 1234567, 99991]; // stand-ins for Fiat-Shamir challenges
    let claim = table.iter().fold(0, |s, &v| add(s, v));

    emit(r#"{"type":"field","name":"babybear"}"#.to_string())?;
    emit(format!(r#"{{"type":"instance","name":"deck-slots","num_vars":{NUM_VARS},"degree":1,"claim":"{claim}"}}"#))?;
    for &r in challenges.iter() {
        // this round binds the lowest remaining index bit: g(0) sums even entries, g(1) odd ones
        let g0 = table.iter().step_by(2).fold(0, |s, &v| add(s, v));
        let g1 = table.iter().skip(1).step_by(2).fold(0, |s, &v| add(s, v));
        emit(format!(r#"{{"type":"round","evals":["{g0}","{g1}"]}}"#))?;
        emit(format!(r#"{{"type":"challenge","value":"{r}"}}"#))?;
        table = table.chunks(2).map(|t| add(t[0], mul(r, sub(t[1], t[0])))).collect();
    }
    emit(format!(r#"{{"type":"final","value":"{}"}}"#, table[0]))?;
    Ok(())
}
