//! Developer aid: runs a script file through a session (no prompt).
use ordex::lang::{Event, Session};

fn main() {
    let path = std::env::args().nth(1).unwrap_or_default();
    let text = std::fs::read_to_string(&path).unwrap_or_default();
    let mut s = Session::new();
    s.show_timing = std::env::var("ORDEX_TIMING").is_ok();
    let st = s.run_text(&text, Some(&path), &mut |e| match e {
        Event::Report(r) => {
            for l in r.lines {
                println!("  {}", l.text);
            }
        }
        Event::Error(m) => eprintln!("{m}"),
    });
    std::process::exit(st.exit_code());
}
