//! The DataFusion catalogue on an Apache Ballista cluster (feature `ballista`).
//!
//! Ballista runs DataFusion plans on a scheduler and its executors. A plan travels as
//! protobuf, and a function in it travels by name only; every process that decodes a
//! plan looks the name up in its own function registry. So this module only makes each
//! process's session the [`crate::datafusion::register`] one: the scheduler's sessions
//! ([`scheduler`]), an executor's registry ([`executor`]) and the client's context
//! ([`connect`]). Nothing here is per function: a new registry row is on Ballista as
//! soon as it is on DataFusion.
//!
//! What travels: every kind ogive has. Scalars; aggregates (their partial state is the
//! catalogue's saved form in one BINARY column, which Ballista's shuffle carries like any
//! other column); the aggregates used over window frames (ogive defines no separate window
//! UDFs); `->>` and `->` (the client plans them into ordinary function calls); and table
//! functions with constant or subquery arguments, as on DataFusion (the client evaluates
//! them while planning, and the plan carries their rows as a `VALUES` list:
//! [`crate::datafusion::table::TravellingPlans`]). `tests/ballista.rs` runs each kind on a
//! scheduler with two executors against SQLite.

use std::net::SocketAddr;
use std::sync::Arc;

use ballista_core::error::BallistaError;
use ballista_core::extension::SessionStateExt;
use ballista_core::registry::BallistaFunctionRegistry;
use ballista_core::utils::default_session_builder;
use ballista_executor::executor_process::{ExecutorProcessConfig, start_executor_process};
use ballista_scheduler::cluster::BallistaCluster;
use ballista_scheduler::config::SchedulerConfig;
use ballista_scheduler::scheduler_process::start_server;
use datafusion::error::DataFusionError;
use datafusion::execution::SessionState;
use datafusion::prelude::{SessionConfig, SessionContext};

/// `state` with every ogive function and the `->>` / `->` planner registered.
///
/// # Errors
/// DataFusion's error if it refuses a registration (it does not for a fresh state).
///
/// # Example
/// ```
/// use datafusion::execution::SessionStateBuilder;
/// let state = ogive::ballista::with_ogive(SessionStateBuilder::new().with_default_features().build()).unwrap();
/// assert!(state.aggregate_functions().contains_key("quantile"));
/// ```
pub fn with_ogive(state: SessionState) -> Result<SessionState, DataFusionError> {
    let mut ctx = SessionContext::new_with_state(state);
    crate::datafusion::register(&mut ctx)?;
    Ok(ctx.state())
}

/// Ballista's own session (its optimizer rules and configuration) with ogive's functions.
fn session(config: SessionConfig) -> Result<SessionState, DataFusionError> {
    with_ogive(default_session_builder(config)?)
}

fn datafusion_error(e: BallistaError) -> DataFusionError {
    match e {
        BallistaError::DataFusionError(e) => *e,
        e => DataFusionError::External(Box::new(e)),
    }
}

/// Runs a Ballista scheduler on `bind` whose sessions know ogive's functions. Returns
/// only when the server stops (or fails to start).
///
/// # Errors
/// Ballista's error if the address cannot be bound or the scheduler fails.
///
/// # Example
/// ```no_run
/// # tokio::runtime::Runtime::new().unwrap().block_on(async {
/// ogive::ballista::scheduler("127.0.0.1:50050".parse().unwrap()).await.unwrap();
/// # });
/// ```
pub async fn scheduler(bind: SocketAddr) -> Result<(), DataFusionError> {
    let config = SchedulerConfig {
        bind_host: bind.ip().to_string(),
        external_host: bind.ip().to_string(),
        bind_port: bind.port(),
        override_session_builder: Some(Arc::new(session)),
        ..SchedulerConfig::default()
    };
    let cluster = BallistaCluster::new_from_config(&config)
        .await
        .map_err(datafusion_error)?;
    start_server(cluster, bind, Arc::new(config))
        .await
        .map_err(datafusion_error)
}

/// Runs a Ballista executor serving data on `bind`, taking work from the scheduler at
/// `scheduler` with `vcores` task slots, and decoding plans with ogive's functions.
/// `grpc_port` is the executor's second (control) port. Returns when the executor
/// stops; it waits up to 20 seconds for the scheduler to answer at start.
///
/// # Errors
/// Ballista's error if a port cannot be bound or the scheduler cannot be reached.
///
/// # Example
/// ```no_run
/// # tokio::runtime::Runtime::new().unwrap().block_on(async {
/// let scheduler = "127.0.0.1:50050".parse().unwrap();
/// ogive::ballista::executor(scheduler, "127.0.0.1:50051".parse().unwrap(), 50052, 2)
///     .await
///     .unwrap();
/// # });
/// ```
pub async fn executor(
    scheduler: SocketAddr,
    bind: SocketAddr,
    grpc_port: u16,
    vcores: usize,
) -> Result<(), DataFusionError> {
    let state = session(SessionConfig::new())?;
    let config = ExecutorProcessConfig {
        bind_host: bind.ip().to_string(),
        external_host: Some(bind.ip().to_string()),
        port: bind.port(),
        grpc_port,
        scheduler_host: scheduler.ip().to_string(),
        scheduler_port: scheduler.port(),
        scheduler_connect_timeout_seconds: 20,
        vcores: vcores.max(1),
        override_function_registry: Some(Arc::new(BallistaFunctionRegistry::from(&state))),
        ..ExecutorProcessConfig::default()
    };
    start_executor_process(Arc::new(config))
        .await
        .map_err(datafusion_error)
}

/// A client context whose queries run on the scheduler at `scheduler` (`HOST:PORT`),
/// with ogive's functions for planning. Register tables on it as on any context; their
/// files must be readable at the same paths by every executor.
///
/// # Errors
/// DataFusion's configuration error if `scheduler` is not `HOST:PORT`.
///
/// # Example
/// ```no_run
/// # tokio::runtime::Runtime::new().unwrap().block_on(async {
/// let ctx = ogive::ballista::connect("127.0.0.1:50050").unwrap();
/// let batches = ctx.sql("SELECT median(column1) FROM (VALUES (1.0), (3.0))").await.unwrap()
///     .collect().await.unwrap();
/// # });
/// ```
pub fn connect(scheduler: &str) -> Result<SessionContext, DataFusionError> {
    let (host, port) = scheduler
        .rsplit_once(':')
        .filter(|(h, p)| !h.is_empty() && p.parse::<u16>().is_ok())
        .ok_or_else(|| {
            DataFusionError::Configuration(format!(
                "scheduler address {scheduler:?} is not HOST:PORT (for example 127.0.0.1:50050)"
            ))
        })?;
    // Upgrading replaces the state's functions with Ballista's defaults: register after.
    let mut state = default_session_builder(SessionConfig::new())?
        .upgrade_for_ballista(format!("http://{host}:{port}"))?;
    // Table functions' rows travel in the plan as VALUES (an in-memory table would not).
    state
        .config_mut()
        .set_extension(Arc::new(crate::datafusion::table::TravellingPlans));
    Ok(SessionContext::new_with_state(with_ogive(state)?))
}
