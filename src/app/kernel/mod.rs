//! ordex as a Jupyter kernel: `ordex kernel install` writes the kernel
//! spec; Jupyter then starts `ordex kernel CONNECTION_FILE`.
//!
//! An edge like the prompt: it drives one [`Session`](crate::lang::Session)
//! through its public API. `wire` is the protocol (framing, HMAC-SHA256
//! signatures, headers), `server` the ZeroMQ sockets on a thread of their
//! own, `cell` the session thread (cells, completion, inspection), `spec`
//! the kernel spec. Interrupts (an `interrupt_request` on control, or
//! SIGINT) set the core's interrupt flag, as Ctrl-C does at the prompt: the
//! running statement ends with `interrupted` and the session is kept.

mod cell;
mod server;
pub(crate) mod spec;
pub(crate) mod wire;

use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};

use crate::core::limits;

/// An interrupt arrived while the current cell ran: the cell stops before
/// its next statement even if the running one finishes.
static CELL_INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// Interrupts the running statement and the rest of its cell.
pub(crate) fn interrupt_now() {
    CELL_INTERRUPTED.store(true, Ordering::SeqCst);
    limits::interrupt();
}

/// `ordex kernel install`: registers the kernel; returns the exit status.
pub(crate) fn install() -> u8 {
    match spec::install() {
        Ok(dir) => {
            println!(
                "ordex: Jupyter kernel `{}` installed in {}",
                spec::KERNEL_NAME,
                dir.display()
            );
            println!("start it with: jupyter notebook (or lab), then pick the kernel \"ordex\"");
            0
        }
        Err(e) => {
            eprintln!("ordex: error: {e}");
            2
        }
    }
}

/// `ordex kernel CONNECTION_FILE`: serves the kernel until Jupyter shuts
/// it down; returns the exit status (2 when it cannot start).
pub(crate) fn run(connection_file: &Path) -> u8 {
    let conn = match wire::Connection::read(connection_file) {
        Ok(conn) => conn,
        Err(e) => {
            eprintln!("ordex: error: {e}");
            return 2;
        }
    };
    if ctrlc::try_set_handler(interrupt_now).is_err() {
        server::log("cannot catch SIGINT; interrupts come through the control channel only");
    }
    let origin = wire::Origin::new();
    let links = match server::start(&conn, &origin) {
        Ok(links) => links,
        Err(e) => {
            eprintln!("ordex: error: {e}");
            return 2;
        }
    };
    cell::Kernel::new(origin, links).serve();
    0
}
