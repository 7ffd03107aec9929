//! The five ZeroMQ sockets of a kernel, served on a thread of their own
//! (a Tokio runtime) so that heartbeats, interrupts and shutdown are
//! answered while a cell computes.
//!
//! - shell (ROUTER): requests go to the session thread in order; replies
//!   come back through [`Links::shell`]. `shutdown_request` is answered here.
//! - control (ROUTER): `interrupt_request`, `shutdown_request` and
//!   `kernel_info_request` are answered here at once.
//! - iopub (PUB): everything sent to [`Links::iopub`].
//! - stdin (ROUTER): bound; the kernel never asks for input.
//! - heartbeat (REP): echoes.

use std::sync::mpsc;
use std::time::Duration;

use serde_json::json;
use tokio::sync::mpsc::{unbounded_channel, UnboundedReceiver, UnboundedSender};
use zeromq::{PubSocket, RepSocket, RouterSocket, Socket, SocketRecv, SocketSend};

use super::wire::{Connection, Message, Origin, Signer};

/// The session thread's ends of the sockets.
pub(crate) struct Links {
    /// Shell requests, in arrival order.
    pub(crate) requests: mpsc::Receiver<Message>,
    /// Replies to send on shell.
    pub(crate) shell: UnboundedSender<Message>,
    /// Messages to publish on iopub.
    pub(crate) iopub: UnboundedSender<Message>,
}

/// Binds the sockets and serves them on a new thread; returns once every
/// socket is bound (or with the first bind error).
pub(crate) fn start(conn: &Connection, origin: &Origin) -> Result<Links, String> {
    let (request_tx, request_rx) = mpsc::channel();
    let (shell_tx, shell_rx) = unbounded_channel();
    let (iopub_tx, iopub_rx) = unbounded_channel();
    let (ready_tx, ready_rx) = mpsc::channel();
    let serving = Serving {
        conn: conn.clone(),
        signer: Signer::new(conn.key.as_bytes()),
        origin: origin.clone(),
        iopub: iopub_tx.clone(),
    };
    std::thread::Builder::new()
        .name("ordex-kernel-sockets".to_string())
        .spawn(move || {
            let runtime = match tokio::runtime::Builder::new_current_thread()
                .enable_all()
                .build()
            {
                Ok(rt) => rt,
                Err(e) => {
                    let _ = ready_tx.send(Err(format!("cannot start the socket runtime: {e}")));
                    return;
                }
            };
            runtime.block_on(serving.serve(request_tx, shell_rx, iopub_rx, ready_tx));
        })
        .map_err(|e| format!("cannot start the socket thread: {e}"))?;
    match ready_rx.recv() {
        Ok(Ok(())) => Ok(Links {
            requests: request_rx,
            shell: shell_tx,
            iopub: iopub_tx,
        }),
        Ok(Err(e)) => Err(e),
        Err(_) => Err("the socket thread ended before binding".to_string()),
    }
}

/// What the socket tasks share.
#[derive(Clone)]
struct Serving {
    conn: Connection,
    signer: Signer,
    origin: Origin,
    iopub: UnboundedSender<Message>,
}

async fn bind<S: Socket>(conn: &Connection, port: u16, what: &str) -> Result<S, String> {
    let mut socket = S::new();
    let endpoint = conn.endpoint(port);
    socket
        .bind(&endpoint)
        .await
        .map_err(|e| format!("cannot bind the {what} socket to {endpoint}: {e}"))?;
    Ok(socket)
}

impl Serving {
    async fn serve(
        self,
        requests: mpsc::Sender<Message>,
        shell_out: UnboundedReceiver<Message>,
        iopub_out: UnboundedReceiver<Message>,
        ready: mpsc::Sender<Result<(), String>>,
    ) {
        let bound = async {
            let shell: RouterSocket = bind(&self.conn, self.conn.shell_port, "shell").await?;
            let control: RouterSocket = bind(&self.conn, self.conn.control_port, "control").await?;
            let iopub: PubSocket = bind(&self.conn, self.conn.iopub_port, "iopub").await?;
            let stdin: RouterSocket = bind(&self.conn, self.conn.stdin_port, "stdin").await?;
            let hb: RepSocket = bind(&self.conn, self.conn.hb_port, "heartbeat").await?;
            Ok::<_, String>((shell, control, iopub, stdin, hb))
        }
        .await;
        let (shell, control, iopub, stdin, hb) = match bound {
            Ok(sockets) => sockets,
            Err(e) => {
                let _ = ready.send(Err(e));
                return;
            }
        };
        let _ = ready.send(Ok(()));
        let (shell_send, shell_recv) = shell.split();
        let (control_send, control_recv) = control.split();
        tokio::join!(
            self.clone()
                .shell_in(shell_recv, shell_send.clone(), requests),
            self.clone().sender(shell_send, shell_out),
            self.clone().control(control_recv, control_send),
            self.clone().sender(iopub, iopub_out),
            ignore_input(stdin),
            heartbeat(hb),
        );
    }

    /// Sends every message from `out` on `socket`.
    async fn sender<S: SocketSend>(self, mut socket: S, mut out: UnboundedReceiver<Message>) {
        while let Some(msg) = out.recv().await {
            if let Err(e) = socket.send(msg.to_zmq(&self.signer)).await {
                log(&format!("cannot send a {}: {e}", msg.msg_type()));
            }
        }
    }

    /// Receives one verified message; `None` when the socket is gone.
    async fn receive<S: SocketRecv>(&self, socket: &mut S) -> Option<Message> {
        loop {
            match socket.recv().await {
                Ok(raw) => match Message::from_zmq(raw, &self.signer) {
                    Ok(msg) => return Some(msg),
                    Err(e) => log(&format!("dropped {e}")),
                },
                Err(zeromq::ZmqError::NoMessage) => return None,
                Err(e) => {
                    log(&format!("receive failed: {e}"));
                    tokio::time::sleep(Duration::from_millis(10)).await;
                }
            }
        }
    }

    /// Shell requests go to the session thread; shutdown is answered here.
    async fn shell_in<S: SocketRecv, T: SocketSend>(
        self,
        mut socket: S,
        mut reply: T,
        requests: mpsc::Sender<Message>,
    ) {
        while let Some(msg) = self.receive(&mut socket).await {
            if msg.msg_type() == "shutdown_request" {
                self.shut_down(&msg, &mut reply).await;
            } else if requests.send(msg).is_err() {
                return;
            }
        }
    }

    /// Control requests are answered at once, even while a cell runs.
    async fn control<S: SocketRecv, T: SocketSend>(self, mut socket: S, mut reply: T) {
        while let Some(msg) = self.receive(&mut socket).await {
            self.status(&msg, "busy");
            let answer = match msg.msg_type() {
                "interrupt_request" => {
                    super::interrupt_now();
                    Some(
                        self.origin
                            .reply(&msg, "interrupt_reply", json!({"status": "ok"})),
                    )
                }
                "kernel_info_request" => Some(self.origin.reply(
                    &msg,
                    "kernel_info_reply",
                    super::cell::kernel_info(),
                )),
                "shutdown_request" => {
                    self.shut_down(&msg, &mut reply).await;
                    None
                }
                other => {
                    log(&format!("ignored a {other} on control"));
                    None
                }
            };
            if let Some(answer) = answer {
                if let Err(e) = reply.send(answer.to_zmq(&self.signer)).await {
                    log(&format!("cannot send a {}: {e}", answer.msg_type()));
                }
            }
            self.status(&msg, "idle");
        }
    }

    /// Publishes the kernel's state for `parent`.
    fn status(&self, parent: &Message, state: &str) {
        let _ = self.iopub.send(self.origin.publish(
            Some(parent),
            "status",
            json!({"execution_state": state}),
        ));
    }

    /// Answers a shutdown request and ends the process (a running cell is
    /// interrupted first). A restart is the client's business: it starts a
    /// new kernel process.
    async fn shut_down<T: SocketSend>(&self, msg: &Message, reply: &mut T) {
        super::interrupt_now();
        let restart = msg.content["restart"].as_bool().unwrap_or(false);
        let answer = self.origin.reply(
            msg,
            "shutdown_reply",
            json!({"status": "ok", "restart": restart}),
        );
        let _ = reply.send(answer.to_zmq(&self.signer)).await;
        self.status(msg, "idle");
        // Let the reply and the status leave before the sockets close.
        tokio::time::sleep(Duration::from_millis(100)).await;
        std::process::exit(0);
    }
}

/// The stdin channel is bound but never used: the kernel asks for no input.
async fn ignore_input(mut socket: RouterSocket) {
    loop {
        match socket.recv().await {
            Ok(_) => {}
            Err(zeromq::ZmqError::NoMessage) => return,
            Err(_) => tokio::time::sleep(Duration::from_millis(10)).await,
        }
    }
}

/// Echoes heartbeats.
async fn heartbeat(mut socket: RepSocket) {
    loop {
        match socket.recv().await {
            Ok(ping) => {
                let _ = socket.send(ping).await;
            }
            Err(zeromq::ZmqError::NoMessage) => return,
            Err(_) => tokio::time::sleep(Duration::from_millis(10)).await,
        }
    }
}

/// A line in the kernel's log (standard error, which Jupyter keeps).
pub(crate) fn log(text: &str) {
    use std::io::Write;
    let _ = writeln!(std::io::stderr(), "ordex kernel: {text}");
}
