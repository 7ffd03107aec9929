"""Drives `ordex kernel` with the real Jupyter client (jupyter_client,
nbclient, nbformat) and checks what a notebook user sees.

Usage: python drive.py ORDEX_BINARY WORK_DIR

Run by tests/suite/kernel.rs. Every Jupyter directory points into WORK_DIR, so the
user's own Jupyter set-up is neither read nor changed. Prints one line per
check and `N passed, N failed` at the end; exits 1 when a check failed.
"""

import copy
import json
import os
import shutil
import signal
import subprocess
import sys
import time

ORDEX = os.path.abspath(sys.argv[1])
WORK = os.path.abspath(sys.argv[2])
HERE = os.path.dirname(os.path.abspath(__file__))
for name, sub in [("JUPYTER_DATA_DIR", "data"), ("JUPYTER_RUNTIME_DIR", "runtime"),
                  ("JUPYTER_CONFIG_DIR", "config")]:
    os.environ[name] = os.path.join(WORK, sub)
os.environ["JUPYTER_PATH"] = ""
os.environ["JUPYTER_PLATFORM_DIRS"] = "1"
# The whole run must end; a kernel that hangs fails the test instead.
signal.alarm(900)

import jupyter_client  # noqa: E402
import nbformat  # noqa: E402
from jupyter_client.kernelspec import KernelSpecManager  # noqa: E402
from nbclient import NotebookClient  # noqa: E402

PASSED = 0
FAILED = 0


def check(what, ok, detail=""):
    global PASSED, FAILED
    if ok:
        PASSED += 1
        print(f"ok    {what}")
    else:
        FAILED += 1
        print(f"FAIL  {what}: {str(detail)[:600]}")


# ---------------------------------------------------------------- install
run = subprocess.run([ORDEX, "kernel", "install"], capture_output=True, text=True)
check("`ordex kernel install` succeeds", run.returncode == 0, run.stderr)
spec = KernelSpecManager().get_kernel_spec("ordex")
check("the kernel spec is found in JUPYTER_DATA_DIR",
      spec.resource_dir.startswith(os.environ["JUPYTER_DATA_DIR"]), spec.resource_dir)
check("the spec starts this binary", os.path.samefile(spec.argv[0], ORDEX) and
      spec.argv[1:] == ["kernel", "{connection_file}"], spec.argv)
check("interrupts come as messages", spec.interrupt_mode == "message", spec.interrupt_mode)
check("the language is ordex", spec.language == "ordex", spec.language)


# ---------------------------------------------------------------- notebook
def execute_notebook(folder):
    """Executes our notebook in `folder` as `jupyter nbconvert --execute` would."""
    os.makedirs(folder, exist_ok=True)
    nb = nbformat.read(os.path.join(HERE, "dolly.ipynb"), as_version=4)

    def timeout_for(cell):
        # The long cell is interrupted by the client after 4 seconds.
        return 4 if "interrupt" in cell.metadata.get("tags", []) else 120

    client = NotebookClient(nb, kernel_name="ordex", timeout_func=timeout_for,
                            interrupt_on_timeout=True,
                            resources={"metadata": {"path": folder}})
    started = time.monotonic()
    client.execute()
    return nb, time.monotonic() - started


def cell(nb, cell_id):
    return next(c for c in nb.cells if c.get("id") == cell_id)


def texts(c, name="stdout"):
    return "".join(o.text for o in c.outputs if o.output_type == "stream" and o.name == name)


def of_type(c, output_type):
    return [o for o in c.outputs if o.output_type == output_type]


first_dir = os.path.join(WORK, "first")
nb, seconds = execute_notebook(first_dir)
print(f"the notebook ran in {seconds:.1f} s")

c = cell(nb, "declare")
check("declarations print the kind of S",
      "S: time-varying field on (th, p)" in texts(c), c.outputs)
check("cells count executions", c.execution_count == 1, c.execution_count)

c = cell(nb, "average")
check("average prints its orders", "order 1  [p, -gamma*sin(th) + 1/4*beta^2*sin(2*th)]" in texts(c),
      c.outputs)
check("average raises no error", not of_type(c, "error"), c.outputs)

# The first order is the pendulum in the effective potential
# U + mean(f^2)/(2 m w^2) of a fast force f (Landau & Lifshitz, Mechanics,
# section 30, from memory): here f = beta*cos(th)*cos(t), so
# U_eff = -gamma*cos(th) + beta^2/4*cos(th)^2.
c = cell(nb, "check")
check("the check against the effective potential holds", texts(c).strip() == "holds", c.outputs)

c = cell(nb, "value")
results = of_type(c, "execute_result")
check("a bare expression is the cell's result", len(results) == 1, c.outputs)
if results:
    data = results[0].data
    check("its text/plain is the input syntax",
          data["text/plain"] == "[p, -gamma*sin(th) + 1/4*beta^2*sin(2*th)]", data)
    tex = data.get("text/latex", "")
    check("its text/latex is display math with Greek letters",
          tex.startswith("$\\displaystyle ") and tex.endswith("$") and "\\gamma" in tex
          and "\\beta" in tex and "\\theta" in tex, tex)
    check("the result is numbered like the cell", results[0].execution_count == c.execution_count,
          results[0])

c = cell(nb, "latex")
results = of_type(c, "execute_result")
check("show … as latex gives text/latex", bool(results) and "text/latex" in results[0].data,
      c.outputs)
if results:
    check("its text/plain is the LaTeX source to paste",
          results[0].data["text/plain"].startswith("\\begin{"), results[0].data)

c = cell(nb, "compare")
svgs = [o for o in of_type(c, "display_data") if "image/svg+xml" in o.data]
check("compare … plot shows the SVG inline", len(svgs) == 1, c.outputs)
if svgs:
    svg = svgs[0].data["image/svg+xml"]
    check("the inline SVG is the file written",
          svg == open(os.path.join(first_dir, "dolly_errors.svg")).read(), svg[:80])
check("compare prints its slopes", "slope order 2:" in texts(c), c.outputs)
check("the caution goes to stderr", "validate it before it drives a real machine"
      in texts(c, "stderr"), c.outputs)

c = cell(nb, "failing")
errors = of_type(c, "error")
check("a failing line is an error output", len(errors) == 1, c.outputs)
if errors:
    e = errors[0]
    check("its ename names the kind of error", e.ename == "unknown name", e.ename)
    check("its traceback carries the line and the caret",
          any("B = average Sx to 2 in eps" in line for line in e.traceback)
          and any(line.strip().startswith("^") for line in e.traceback), e.traceback)
    check("its first line locates it in the cell", e.traceback[0].startswith("cell["), e.traceback)

c = cell(nb, "failed-check")
errors = of_type(c, "error")
check("a failed check is an error output", len(errors) == 1 and errors[0].ename == "check failed",
      c.outputs)
if errors:
    check("it shows both sides and the difference",
          any("difference:" in line for line in errors[0].traceback), errors[0].traceback)

c = cell(nb, "long")
errors = of_type(c, "error")
check("the client's interrupt stops the long cell",
      len(errors) == 1 and errors[0].ename == "interrupted", c.outputs)

c = cell(nb, "after")
results = of_type(c, "execute_result")
check("the session is kept after the interrupt",
      bool(results) and results[0].data["text/plain"].startswith("-p^2*beta*cos(th)"), c.outputs)

c = cell(nb, "save")
check("save writes a script", texts(c).startswith("saved ") and
      os.path.exists(os.path.join(first_dir, "dolly.ordex")), c.outputs)

# The saved script replays the notebook: every line the notebook accepted,
# the failed check included (exit status 1), no error (which would be 2).
script = os.path.join(first_dir, "dolly.ordex")
lines = open(script).read().splitlines()
check("the script holds the accepted lines, not the failing or interrupted ones",
      "S = eps*[p, -gamma*sin(th)] + cos(t)*[0, beta*cos(th)]" in lines
      and not any("Sx" in line or "flow" in line for line in lines), lines)
replay = subprocess.run([ORDEX, "--no-timing", "dolly.ordex"], cwd=first_dir,
                        capture_output=True, text=True)
check("the saved script replays with only the failed check failing", replay.returncode == 1,
      (replay.returncode, replay.stdout[-500:], replay.stderr))
check("the replay re-checks the effective potential", "holds" in replay.stdout, replay.stdout)

# Re-running the notebook top to bottom in a fresh kernel gives the same
# outputs (no timings in a kernel; the interrupted cell's moment varies).
second_dir = os.path.join(WORK, "second")
nb2, _ = execute_notebook(second_dir)
same = all(a.outputs == b.outputs for a, b in zip(nb.cells, nb2.cells)
           if a.cell_type == "code" and a.get("id") != "long")
check("a re-run notebook gives identical outputs", same,
      [(a.get("id"), a.outputs, b.outputs) for a, b in zip(nb.cells, nb2.cells)
       if a.cell_type == "code" and a.outputs != b.outputs][:1])

# ---------------------------------------------------------------- messages
km = jupyter_client.KernelManager(kernel_name="ordex")
km.start_kernel(cwd=WORK)
kc = km.client()
kc.start_channels()
kc.wait_for_ready(timeout=60)


def request(send, *args, **kwargs):
    """Sends a shell request; returns its reply and the iopub messages it caused."""
    msg_id = send(*args, **kwargs)
    reply = kc.get_shell_msg(timeout=60)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=60)
    published = []
    while True:
        m = kc.get_iopub_msg(timeout=60)
        if m["parent_header"].get("msg_id") != msg_id:
            continue
        published.append(m)
        if m["msg_type"] == "status" and m["content"]["execution_state"] == "idle":
            return reply, published


reply, published = request(kc.kernel_info)
info = reply["content"]
check("kernel_info_reply speaks protocol 5.x", info["protocol_version"].startswith("5."), info)
check("kernel_info_reply names the language",
      info["language_info"]["name"] == "ordex" and info["language_info"]["file_extension"] == ".ordex",
      info)
check("heartbeats are answered", kc.hb_channel.is_beating())

code = "state q, p\nparam k\nXslow = [p, -k*q]\nXslow(q^2)"
reply, published = request(kc.execute, code)
types = [m["msg_type"] for m in published]
states = [m["content"]["execution_state"] for m in published if m["msg_type"] == "status"]
check("an execution publishes busy, its input, its outputs, idle",
      types[0] == "status" and states == ["busy", "idle"] and types[1] == "execute_input"
      and types[-2] == "execute_result", types)
check("execute_input echoes the code", published[1]["content"]["code"] == code, published[1])
check("the reply is ok with the count", reply["content"]["status"] == "ok"
      and reply["content"]["execution_count"] == published[1]["content"]["execution_count"],
      reply["content"])
check("the value of the last line is the result",
      published[-2]["content"]["data"]["text/plain"] == "2*q*p", published[-2]["content"])

reply, published = request(kc.execute, "Xslow(p)", silent=True)
check("a silent execution publishes nothing but its status",
      [m["msg_type"] for m in published] == ["status", "status"], published)

reply, _ = request(kc.complete, "X = ma", 6)
check("complete_request completes command words", "magnus" in reply["content"]["matches"]
      and reply["content"]["cursor_start"] == 4 and reply["content"]["cursor_end"] == 6,
      reply["content"])
reply, _ = request(kc.complete, "check Xsl", 9)
check("complete_request completes defined names", reply["content"]["matches"] == ["Xslow"],
      reply["content"])
reply, _ = request(kc.complete, "θ = 1\nXs", 8)
check("complete_request counts code points", reply["content"]["cursor_start"] == 6
      and reply["content"]["matches"] == ["Xslow"], reply["content"])

for text, status in [("X = [p,", "incomplete"), ("X = [p, q]", "complete"),
                     ("y = 1 + \\", "incomplete"), ("X = [p, q]]", "invalid")]:
    reply, _ = request(kc.is_complete, text)
    check(f"is_complete {text!r} is {status}", reply["content"]["status"] == status,
          reply["content"])

reply, _ = request(kc.inspect, "A = average S to 2 in eps", 6)
content = reply["content"]
check("inspect gives the help of a command word with its caution",
      content["found"] and "averaging" in content["data"]["text/plain"]
      and "caution" in content["data"]["text/plain"], content)
reply, _ = request(kc.inspect, "Xslow", 2)
content = reply["content"]
check("inspect gives a defined name's value", content["found"]
      and "[p, -q*k]" in content["data"]["text/plain"], content)


LONG = "set budget 100000000\nF = flow [p, -q - q^3*cos(t) + p^2*sin(t)] to 24"


def interrupted_by(interrupt, label):
    """Starts a long computation, waits for its progress, interrupts it."""
    msg_id = kc.execute(LONG)
    progress = None
    deadline = time.monotonic() + 120
    while progress is None and time.monotonic() < deadline:
        m = kc.get_iopub_msg(timeout=120)
        if (m["parent_header"].get("msg_id") == msg_id and m["msg_type"] == "stream"
                and "chronological exponential" in m["content"]["text"]):
            progress = m["content"]["text"]
    check(f"a long computation shows progress ({label})", progress is not None, progress)
    interrupt()
    started = time.monotonic()
    reply = kc.get_shell_msg(timeout=60)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=60)
    waited = time.monotonic() - started
    print(f"the interrupt ({label}) took {waited:.2f} s")
    content = reply["content"]
    check(f"the interrupted cell replies an error ({label})",
          content["status"] == "error" and content["ename"] == "interrupted", content)
    return msg_id


interrupted_by(km.interrupt_kernel, "interrupt_request")
reply, published = request(kc.execute, "set budget 200000\nXslow")
check("the session is kept after an interrupt_request", reply["content"]["status"] == "ok"
      and published[-2]["content"]["data"]["text/plain"] == "[p, -q*k]", published[-2]["content"])

interrupted_by(lambda: os.kill(km.provisioner.process.pid, signal.SIGINT), "SIGINT")
reply, published = request(kc.execute, "set budget 200000\nXslow")
check("the session is kept after SIGINT", reply["content"]["status"] == "ok", reply["content"])

# After an error, executions already waiting are aborted (stop_on_error).
first = kc.execute(LONG)
queued = kc.execute("Xslow")
time.sleep(1.5)
km.interrupt_kernel()
replies = {}
while len(replies) < 2:
    m = kc.get_shell_msg(timeout=60)
    replies[m["parent_header"].get("msg_id")] = m["content"]
check("an execution queued behind an error is aborted",
      replies[first]["status"] == "error" and replies[queued]["status"] == "aborted", replies)
request(kc.execute, "set budget 200000")

# A message signed with another key is dropped; the kernel goes on.
forged = jupyter_client.session.Session(key=b"not-the-key")
msg = forged.msg("execute_request", content={"code": "Xslow", "silent": False,
                                             "store_history": True, "user_expressions": {},
                                             "allow_stdin": False, "stop_on_error": True})
forged.send(kc.shell_channel.socket, msg)
try:
    answer = kc.get_shell_msg(timeout=2)
except Exception:  # queue.Empty
    answer = None
check("a message with a wrong signature is dropped", answer is None, answer)
reply, _ = request(kc.kernel_info)
check("the kernel answers after a forged message", reply["content"]["status"] == "ok")

# Restart: the client starts a new kernel process with an empty session.
old_pid = km.provisioner.process.pid
km.restart_kernel(now=False)
kc.wait_for_ready(timeout=60)
check("restart starts a new process", km.provisioner.process.pid != old_pid)
reply, published = request(kc.execute, "Xslow")
check("a restarted kernel has a fresh session", reply["content"]["status"] == "error"
      and reply["content"]["ename"] == "unknown name", reply["content"])

# Shutdown: the kernel leaves by itself (exit status 0), nobody kills it.
process = km.provisioner.process
kc.stop_channels()
started = time.monotonic()
km.shutdown_kernel(now=False)
check("shutdown ends the kernel by itself", process.poll() == 0, process.poll())
print(f"shutdown took {time.monotonic() - started:.2f} s")

print(f"kernel: {PASSED} passed, {FAILED} failed")
sys.exit(1 if FAILED else 0)
