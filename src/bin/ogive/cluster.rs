//! `ogive scheduler` and `ogive executor`: the two kinds of Ballista process, with ogive's
//! functions registered (see `ogive::ballista`). Each runs until it is stopped.

use std::net::SocketAddr;

use crate::Failure;

#[cfg(feature = "ballista")]
fn runtime() -> Result<tokio::runtime::Runtime, Failure> {
    tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .map_err(|e| Failure::failed(format!("cannot start the runtime: {e}")))
}

/// Runs a scheduler on `bind`.
#[cfg(feature = "ballista")]
pub fn scheduler(bind: SocketAddr) -> Result<i32, Failure> {
    eprintln!("ogive: Ballista scheduler on {bind}");
    runtime()?
        .block_on(ogive::ballista::scheduler(bind))
        .map_err(|e| Failure::failed(format!("scheduler on {bind}: {e}")))?;
    Ok(0)
}

/// Runs an executor on `bind` for the scheduler at `scheduler`.
#[cfg(feature = "ballista")]
pub fn executor(
    scheduler: SocketAddr,
    bind: SocketAddr,
    control_port: Option<u16>,
    slots: Option<usize>,
) -> Result<i32, Failure> {
    let control = match control_port {
        Some(p) => p,
        None => bind.port().checked_add(1).ok_or_else(|| {
            Failure::usage(format!(
                "--bind {bind}: give --control-port, the port after it is past 65535"
            ))
        })?,
    };
    let slots =
        slots.unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
    if slots == 0 {
        return Err(Failure::usage(
            "--slots 0: an executor needs at least one slot",
        ));
    }
    eprintln!(
        "ogive: Ballista executor on {bind} (control port {control}, {slots} slots) for {scheduler}"
    );
    runtime()?
        .block_on(ogive::ballista::executor(scheduler, bind, control, slots))
        .map_err(|e| Failure::failed(format!("executor on {bind}: {e}")))?;
    Ok(0)
}

#[cfg(not(feature = "ballista"))]
const WITHOUT: &str = "this ogive was built without Ballista: build it with `cargo build --release --features ballista`";

#[cfg(not(feature = "ballista"))]
pub fn scheduler(_: SocketAddr) -> Result<i32, Failure> {
    Err(Failure::usage(WITHOUT))
}

#[cfg(not(feature = "ballista"))]
pub fn executor(
    _: SocketAddr,
    _: SocketAddr,
    _: Option<u16>,
    _: Option<usize>,
) -> Result<i32, Failure> {
    Err(Failure::usage(WITHOUT))
}
