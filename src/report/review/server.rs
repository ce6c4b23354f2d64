//! The review web server: one page, a JSON list of candidates, their figures drawn on
//! demand, and a label endpoint writing into a [`LabelStore`]. Bound to 127.0.0.1
//! only; requests naming another host are refused (DNS-rebinding guard), and labels
//! must be posted as JSON (so a plain cross-site form cannot post them).

use std::collections::HashMap;
use std::io::Read;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Duration;

use serde::Deserialize;
use serde_json::json;
use tiny_http::{Header, Method, Request, Response, Server};

use super::store::{LabelStore, ReviewItem, ReviewLabel};
use crate::error::{Error, Result};
use crate::report::candidate_plot::{Detection, candidate_figure_from_file};
use crate::report::html::numbers_table;

/// The page: markup, style and script in one file, nothing fetched from elsewhere.
const PAGE: &str = include_str!("page.html");

/// Detections within this many seconds appear in a candidate's neighbourhood panel.
const NEIGHBOURHOOD_S: f64 = 5.0;

/// A bound but not yet running review server.
pub struct ReviewServer {
    server: Server,
    port: u16,
}

#[derive(Deserialize)]
struct LabelRequest {
    id: i64,
    label: String,
    #[serde(default)]
    comment: String,
}

impl ReviewServer {
    /// Binds 127.0.0.1 on `port`, or on a free port when `None`.
    ///
    /// # Errors
    /// [`Error::Config`] if the port is taken or cannot be bound.
    pub fn bind(port: Option<u16>) -> Result<ReviewServer> {
        let server = Server::http(("127.0.0.1", port.unwrap_or(0))).map_err(|e| {
            Error::Config(format!(
                "cannot listen on 127.0.0.1:{}: {e}",
                port.unwrap_or(0)
            ))
        })?;
        let port = server
            .server_addr()
            .to_ip()
            .map(|a| a.port())
            .ok_or_else(|| Error::Config("review server has no IP address".into()))?;
        Ok(ReviewServer { server, port })
    }

    /// The page's address.
    pub fn url(&self) -> String {
        format!("http://127.0.0.1:{}/", self.port)
    }

    /// Serves until the page sends "quit" (key q) or `stop` becomes true.
    ///
    /// # Errors
    /// The store cannot list its candidates.
    pub fn run(self, store: &mut dyn LabelStore, stop: &AtomicBool) -> Result<()> {
        let mut state = State {
            items: store.items()?,
            store,
            png_cache: HashMap::new(),
            port: self.port,
            quit: false,
        };
        while !stop.load(Ordering::Relaxed) && !state.quit {
            match self.server.recv_timeout(Duration::from_millis(100)) {
                Ok(Some(req)) => state.handle(req),
                Ok(None) => {}
                Err(e) => return Err(Error::Config(format!("review server failed: {e}"))),
            }
        }
        Ok(())
    }
}

struct State<'a> {
    store: &'a mut dyn LabelStore,
    items: Vec<ReviewItem>,
    png_cache: HashMap<i64, std::result::Result<Vec<u8>, String>>,
    port: u16,
    quit: bool,
}

impl State<'_> {
    fn handle(&mut self, mut req: Request) {
        let response = if !self.host_is_local(&req) {
            text(403, "requests must address 127.0.0.1 or localhost")
        } else {
            self.route(&mut req)
        };
        // A client that went away is not our problem.
        let _ = req.respond(response);
    }

    fn host_is_local(&self, req: &Request) -> bool {
        let host = req
            .headers()
            .iter()
            .find(|h| h.field.equiv("Host"))
            .map(|h| h.value.as_str().to_string());
        let p = self.port;
        host.is_some_and(|h| h == format!("127.0.0.1:{p}") || h == format!("localhost:{p}"))
    }

    fn route(&mut self, req: &mut Request) -> Response<std::io::Cursor<Vec<u8>>> {
        let url = req.url().to_string();
        match (req.method(), url.as_str()) {
            (Method::Get, "/") => {
                with_type(Response::from_string(PAGE), "text/html; charset=utf-8")
            }
            (Method::Get, "/api/items") => self.items_json(),
            (Method::Get, p) if p.starts_with("/plot/") && p.ends_with(".png") => {
                match p[6..p.len() - 4].parse::<i64>() {
                    Ok(id) => self.plot(id),
                    Err(_) => text(404, "no such plot"),
                }
            }
            (Method::Post, "/api/label") => self.label(req),
            (Method::Post, "/api/quit") => {
                self.quit = true;
                json_response(200, &json!({ "ok": true }))
            }
            _ => text(404, "not found"),
        }
    }

    fn items_json(&self) -> Response<std::io::Cursor<Vec<u8>>> {
        let items: Vec<_> = self
            .items
            .iter()
            .map(|i| {
                let c = &i.candidate;
                json!({
                    "id": i.id, "t_inf_s": c.t_inf_s, "mjd_inf": c.mjd_inf, "dm": c.dm,
                    "width_ms": c.width_ms, "snr": c.snr, "verdict": c.verdict.as_str(),
                    "file": c.file, "label": i.label, "numbers_html": numbers_table(c),
                })
            })
            .collect();
        json_response(200, &json!(items))
    }

    fn plot(&mut self, id: i64) -> Response<std::io::Cursor<Vec<u8>>> {
        let Some(item) = self.items.iter().find(|i| i.id == id) else {
            return text(404, "no such candidate");
        };
        let neighbours: Vec<Detection> = self
            .items
            .iter()
            .filter(|o| {
                o.id != id
                    && o.candidate.file == item.candidate.file
                    && (o.candidate.t_inf_s - item.candidate.t_inf_s).abs() <= NEIGHBOURHOOD_S
            })
            .map(|o| Detection::from(&o.candidate))
            .collect();
        let png = self.png_cache.entry(id).or_insert_with(|| {
            candidate_figure_from_file(&item.observation(), &item.candidate, &neighbours)
                .map(|f| f.to_png())
                .map_err(|e| e.to_string())
        });
        match png {
            Ok(bytes) => with_type(Response::from_data(bytes.clone()), "image/png"),
            Err(msg) => text(404, &format!("figure unavailable: {msg}")),
        }
    }

    fn label(&mut self, req: &mut Request) -> Response<std::io::Cursor<Vec<u8>>> {
        let is_json = req.headers().iter().any(|h| {
            h.field.equiv("Content-Type") && h.value.as_str().starts_with("application/json")
        });
        if !is_json {
            return text(415, "labels must be posted as application/json");
        }
        let mut body = String::new();
        if req
            .as_reader()
            .take(64 * 1024)
            .read_to_string(&mut body)
            .is_err()
        {
            return text(400, "unreadable request body");
        }
        let parsed: LabelRequest = match serde_json::from_str(&body) {
            Ok(p) => p,
            Err(e) => return text(400, &format!("bad label request: {e}")),
        };
        let Some(label) = ReviewLabel::parse(&parsed.label) else {
            return text(400, &format!("unknown label {:?}", parsed.label));
        };
        match self.store.record(parsed.id, label, parsed.comment.trim()) {
            Ok(()) => {
                if let Some(item) = self.items.iter_mut().find(|i| i.id == parsed.id) {
                    item.label = Some(label.as_str().to_string());
                }
                json_response(
                    200,
                    &json!({ "ok": true, "id": parsed.id, "label": label.as_str() }),
                )
            }
            Err(e) => text(500, &format!("label not recorded: {e}")),
        }
    }
}

fn with_type<R: Read>(r: Response<R>, content_type: &str) -> Response<R> {
    let header = Header::from_bytes("Content-Type", content_type).expect("static header is valid");
    r.with_header(header)
}

fn text(code: u16, msg: &str) -> Response<std::io::Cursor<Vec<u8>>> {
    with_type(Response::from_string(msg), "text/plain; charset=utf-8").with_status_code(code)
}

fn json_response(code: u16, v: &serde_json::Value) -> Response<std::io::Cursor<Vec<u8>>> {
    with_type(Response::from_string(v.to_string()), "application/json").with_status_code(code)
}
